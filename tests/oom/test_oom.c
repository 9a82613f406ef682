/*
 * test_oom.c - allocation-failure torture (RELIABILITY.md T8) around
 * config loading, ring open and HTTP batch building.
 *
 * This executable defines malloc, calloc, realloc and free itself and
 * forwards them to glibc's __libc_malloc & co., so every allocation of
 * the code under test - ours, cJSON's and libc's own (strdup, fopen ...)
 * - passes through a countdown.  Inside a "window" (one run of one
 * workload, cleanup included) allocation number N fails: once (only the
 * N-th) or persistently (the N-th and every later one), for N = 1, 2, ...
 * until a run makes fewer than N allocations, i.e. every allocation the
 * workload makes has been failed once in each mode.
 *
 * Each run must end cleanly: an error return the caller can act on (never
 * a crash, never a success with something missing), no allocation made
 * in the window still live after cleanup (tracked by pointer, so frees of
 * older blocks do not disturb the count), no fd left open, no temp file
 * left behind, and the real thing working again once allocation works
 * (the ring still holds every record; a batch built again with the same
 * state gives the same bytes as a run without failures).
 *
 * Not built with SANITIZE (a sanitizer runtime owns malloc) and not part
 * of `make unit` (its own rule in the Makefile's quality gates block:
 * `make oom`).  Prints per row the allocations failed, passes/total and
 * the distinct allocation sites (caller addresses) covered, and at the
 * end the sites covered in all and how many lie in tidepost's own code.
 *
 * All stations, layouts and readings here are invented test data.
 */
#include <dirent.h>
#include <errno.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cmocka.h>
#include <cjson/cJSON.h>

#include "config.h"
#include "postbody.h"
#include "ring.h"

/* ---- the interposed allocator --------------------------------------- */

void *__libc_malloc(size_t n);
void *__libc_calloc(size_t n, size_t size);
void *__libc_realloc(void *p, size_t n);
void __libc_free(void *p);

#define LIVE_SLOTS (1u << 16) /* pointers allocated in one window */
#define SITES_MAX  4096

static struct {
	int on;                  /* window open: count and track */
	unsigned long n;         /* allocations counted in this window */
	unsigned long fail_at;   /* 0: no failure planned */
	int persistent;          /* fail from fail_at on, not only once */
	unsigned long refused;   /* allocations failed in this window */
	void *fail_site;         /* caller of the first refused one */
	unsigned long healed_at; /* allocations counted before the heal */
	unsigned long live;      /* window pointers not yet freed */
	int overflow;            /* live table full: results unusable */
	void *slot[LIVE_SLOTS];  /* open addressing; (void *)1: deleted */
} A;

#define TOMB ((void *)1)

static size_t slot_of(const void *p)
{
	uintptr_t h = (uintptr_t)p;

	h ^= h >> 17;
	h *= 0x9e3779b97f4a7c15u;
	return (size_t)(h >> 7) & (LIVE_SLOTS - 1);
}

static void live_add(void *p)
{
	size_t i = slot_of(p), k;

	for (k = 0; k < LIVE_SLOTS; k++, i = (i + 1) & (LIVE_SLOTS - 1)) {
		if (A.slot[i] == NULL || A.slot[i] == TOMB) {
			A.slot[i] = p;
			A.live++;
			return;
		}
	}
	A.overflow = 1;
}

static void live_del(const void *p)
{
	size_t i = slot_of(p), k;

	if (A.live == 0)
		return;
	for (k = 0; k < LIVE_SLOTS; k++, i = (i + 1) & (LIVE_SLOTS - 1)) {
		if (A.slot[i] == NULL)
			return;
		if (A.slot[i] == p) {
			A.slot[i] = TOMB;
			A.live--;
			return;
		}
	}
}

/* Should this allocation fail?  Counts it; notes the caller. */
static int refuse(void *site)
{
	if (!A.on)
		return 0;
	A.n++;
	if (A.fail_at == 0 || A.n < A.fail_at ||
	    (A.n > A.fail_at && !A.persistent))
		return 0;
	if (A.refused++ == 0)
		A.fail_site = site;
	return 1;
}

void *malloc(size_t n)
{
	void *p;

	if (refuse(__builtin_return_address(0))) {
		errno = ENOMEM;
		return NULL;
	}
	p = __libc_malloc(n);
	if (p != NULL && A.on)
		live_add(p);
	return p;
}

void *calloc(size_t n, size_t size)
{
	void *p;

	if (refuse(__builtin_return_address(0))) {
		errno = ENOMEM;
		return NULL;
	}
	p = __libc_calloc(n, size);
	if (p != NULL && A.on)
		live_add(p);
	return p;
}

void *realloc(void *old, size_t n)
{
	void *p;

	if (old != NULL && n == 0) { /* glibc: frees, returns NULL */
		if (A.on)
			live_del(old);
		return __libc_realloc(old, 0);
	}
	if (refuse(__builtin_return_address(0))) {
		errno = ENOMEM;
		return NULL; /* old stays valid and owned by the caller */
	}
	p = __libc_realloc(old, n);
	if (p != NULL && A.on) {
		if (old != NULL)
			live_del(old);
		live_add(p);
	}
	return p;
}

void free(void *p)
{
	if (p != NULL && A.on)
		live_del(p);
	__libc_free(p);
}

/* The live count, read after every call before it: the compiler knows
 * free() as a builtin that touches no other memory and could otherwise
 * read A.live before the frees. */
static unsigned long live_now(void)
{
	__asm__ volatile("" ::: "memory");
	return A.live;
}

static void window_open(unsigned long fail_at, int persistent)
{
	memset(A.slot, 0, sizeof(A.slot));
	A.n = 0;
	A.refused = 0;
	A.fail_site = NULL;
	A.healed_at = 0;
	A.live = 0;
	A.overflow = 0;
	A.fail_at = fail_at;
	A.persistent = persistent;
	A.on = 1;
}

/* Allocation works again, counting and tracking go on. */
static void window_heal(void)
{
	if (A.fail_at != 0 || A.healed_at == 0)
		A.healed_at = A.n;
	A.fail_at = 0;
}

static void window_close(void)
{
	A.on = 0;
}

/* ---- test data (invented) ------------------------------------------- */

/* A complete config with its layout inline: an invented reef-flat station
 * with QC, alkalinity and battery settings, a stdin and a spool input, an
 * http output with rename, extra and headers, a file output, and alert
 * targets.  Paths are relative (resolved against the temp folder). */
#define LAYOUT_TEXT                                                            \
	"{\n"                                                                  \
	"  \"name\": \"oom-v1\", \"byte_order\": \"big\",\n"                   \
	"  \"match\": [ { \"at\": 0, \"type\": \"u8\", \"is\": 2 } ],\n"       \
	"  \"length\": 37,\n"                                                  \
	"  \"check\": { \"crc\": \"CRC-16/IBM-3740\", \"at\": -2 },\n"         \
	"  \"fields\": [\n"                                                    \
	"   { \"name\": \"kind\", \"type\": \"u8\" },\n"                       \
	"   { \"name\": \"station\", \"type\": \"u16\",\n"                     \
	"     \"role\": \"station\" },\n"                                      \
	"   { \"name\": \"seq\", \"type\": \"u16\", \"role\": \"seq\" },\n"    \
	"   { \"name\": \"time\", \"type\": \"u32\", \"role\": \"time\",\n"    \
	"     \"epoch\": \"1970-01-01T00:00:00Z\" },\n"                        \
	"   { \"name\": \"battery\", \"type\": \"u16\", \"scale\": 0.001,\n"   \
	"     \"unit\": \"V\", \"range\": [0, 16] } ],\n"                      \
	"  \"records\": { \"count\": 4, \"every_s\": 900, \"fields\": [\n"     \
	"   { \"name\": \"ph\", \"bits\": 12, \"scale\": 0.001,\n"             \
	"     \"offset\": 6.5,\n"                                              \
	"     \"missing\": 4095, \"unit\": \"1\", \"range\": [6.5, 9.0],\n"    \
	"     \"standard_name\": \"sea_water_ph_reported_on_total_scale\" "    \
	"},\n"                                                                 \
	"   { \"name\": \"temperature\", \"bits\": 12, \"signed\": true,\n"    \
	"     \"scale\": 0.01, \"offset\": 20, \"missing\": -2048,\n"          \
	"     \"unit\": \"degC\", \"range\": [-2, 40],\n"                      \
	"     \"standard_name\": \"sea_water_temperature\" },\n"               \
	"   { \"name\": \"conductivity\", \"bits\": 14, \"scale\": 0.005,\n"   \
	"     \"missing\": 16383, \"unit\": \"mS cm-1\", \"range\": [0, 80] "  \
	"},\n"                                                                 \
	"   { \"name\": \"oxygen\", \"bits\": 10, \"scale\": 0.5,\n"           \
	"     \"missing\": 1023, \"unit\": \"umol/kg\", \"range\": [0, 500] "  \
	"}\n"                                                                  \
	"  ] } }"

#define CONFIG_TAIL                                                            \
	" \"state_dir\": \"state\",\n"                                         \
	" \"stations\": { \"7\": {\n"                                          \
	"  \"name\": \"rf2\", \"title\": \"Reef flat (invented)\",\n"          \
	"  \"depth_m\": 2.5, \"expect_every_s\": 3600,\n"                      \
	"  \"alkalinity\": { \"per_salinity\": 65.4, \"at_zero\": 0 },\n"      \
	"  \"qc\": {\n"                                                        \
	"   \"ph\": { \"suspect\": [7.6, 8.5], \"fail\": [6.5, 9.0],\n"        \
	"     \"spike\": 0.1, \"rate_per_h\": 0.2, \"flat_n\": 8 },\n"         \
	"   \"temperature\": { \"suspect\": [24, 32], \"climatology\": [\n"    \
	"     { \"months\": [12, 1, 2], \"range\": [27, 31.5] } ] } },\n"      \
	"  \"battery\": { \"field\": \"battery\", \"warn_v\": 11.5,\n"         \
	"    \"cutoff_v\": 10.5, \"forecast_h\": 72 } } },\n"                  \
	" \"inputs\": [ { \"kind\": \"stdin\", \"framing\": \"hex\" },\n"      \
	"   { \"kind\": \"spool\", \"dir\": \"spool\", \"done\": \"done\",\n"  \
	"     \"pattern\": \"*.sbd\" } ],\n"                                   \
	" \"ring\": { \"size_mb\": 1 },\n"                                     \
	" \"outputs\": [\n"                                                    \
	"  { \"kind\": \"http\", \"name\": \"dash\",\n"                        \
	"    \"url\": \"https://example.org/ingest\",\n"                       \
	"    \"token_env\": \"OOM_TEST_TOKEN\", \"batch\": 50,\n"              \
	"    \"rename\": { \"ph\": \"pH\", \"temperature\": \"t\" },\n"        \
	"    \"extra\": { \"network\": \"invented-net\", \"rev\": 2 },\n"      \
	"    \"headers\": { \"X-Project\": \"oom\" } },\n"                     \
	"  { \"kind\": \"file\", \"name\": \"archive\",\n"                     \
	"    \"path\": \"state/readings.ndjson\" } ],\n"                       \
	" \"alerts\": { \"to\": [\n"                                           \
	"   { \"kind\": \"exec\", \"argv\": [ \"/bin/true\", \"x\" ] } ],\n"   \
	"   \"silent_after_s\": 7200 }\n"                                      \
	"}\n"

static const char CONFIG[] =
    "// invented test config\n"
    "{ \"layouts\": [ " LAYOUT_TEXT " ],\n" CONFIG_TAIL;
/* The same as a file naming its layout file (config_load, as at start
 * and on reload). */
static const char CONFIG_FILE[] =
    "{ \"layouts\": [ \"oom-v1.json\" ],\n" CONFIG_TAIL;

/* Readings as the ring holds them (invented values). */
static const char *const READINGS[] = {
    "{\"id\":\"rf2-1796020500-118-0\",\"station\":\"rf2\",\"seq\":118,"
    "\"layout\":\"oom-v1\",\"time\":\"2026-11-30T06:15:00Z\","
    "\"values\":{\"ph\":8.012,\"temperature\":27.4,\"battery\":12.5},"
    "\"flags\":{\"ph\":1,\"temperature\":1,\"battery\":1}}",
    "{\"id\":\"rf2-1796020500-118-1\",\"station\":\"rf2\",\"seq\":118,"
    "\"layout\":\"oom-v1\",\"time\":\"2026-11-30T06:30:00Z\","
    "\"values\":{\"ph\":8.015,\"conductivity\":52.1,\"oxygen\":null},"
    "\"flags\":{\"ph\":1,\"conductivity\":3,\"oxygen\":9}}",
    "{\"id\":\"rf2-1796020500-118-2\",\"station\":\"rf2\",\"seq\":118,"
    "\"layout\":\"oom-v1\",\"time\":\"2026-11-30T06:45:00Z\","
    "\"values\":{\"ph\":8.02,\"salinity\":35.1,\"network\":\"own\"},"
    "\"flags\":{\"ph\":1,\"salinity\":1}}",
};
#define N_READINGS (sizeof(READINGS) / sizeof(READINGS[0]))

/* ---- one run of a workload ------------------------------------------ */

struct run {
	int ok;        /* the work completed */
	char why[200]; /* first broken rule, "" if none */
};

static void broke(struct run *r, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

static void broke(struct run *r, const char *fmt, ...)
{
	va_list ap;

	if (r->why[0] != '\0')
		return;
	va_start(ap, fmt);
	vsnprintf(r->why, sizeof(r->why), fmt, ap);
	va_end(ap);
}

static char tmpdir[64];
static char ring_path[128];
static struct config *shared_cfg; /* loaded once, for the batch rows */

/* Fields of a config compared with the one loaded without failures. */
struct shape {
	size_t layouts, fields, stations, qc, inputs, outputs, alerts;
	size_t rename, extra;
};

static struct shape shape_of(const struct config *c)
{
	struct shape s = {.layouts = c->n_layouts,
	                  .stations = c->n_stations,
	                  .inputs = c->n_inputs,
	                  .outputs = c->n_outputs,
	                  .alerts = c->alerts.n_to};

	if (c->n_layouts > 0)
		s.fields =
		    c->layouts[0].n_fields + c->layouts[0].records.n_fields;
	if (c->n_stations > 0)
		s.qc = c->stations[0].n_qc;
	if (c->n_outputs > 0) {
		s.rename = c->outputs[0].n_rename;
		s.extra = c->outputs[0].n_extra;
	}
	return s;
}

static struct shape good_shape;

static char config_path[128];

/* Window opened by the caller; ends with the window closed.  from_file:
 * config_load of the file naming its layout file, else the inline text
 * through config_load_buffer. */
static void work_config(struct run *r, int from_file)
{
	struct config *c = (struct config *)1;
	struct cfg_errors e;
	struct shape s;
	int rc;

	if (from_file)
		rc = config_load(config_path, &c, &e);
	else
		rc = config_load_buffer("oom.json", CONFIG, sizeof(CONFIG) - 1,
		                        tmpdir, &c, &e);
	window_heal();
	if (rc == 0 && c != NULL) {
		s = shape_of(c);
		if (memcmp(&s, &good_shape, sizeof(s)) != 0)
			broke(r, "loaded, but not the whole config");
		r->ok = 1;
	} else if (rc == 0) {
		broke(r, "returned 0 with no config");
	} else {
		if (c != NULL)
			broke(r, "failed but left *out non-NULL");
		if (e.n == 0 && !A.persistent)
			broke(r, "failed with no message");
	}
	config_free(rc == 0 ? c : NULL);
	cfg_errors_free(&e);
	window_close();
}

static int file_exists(const char *path)
{
	return access(path, F_OK) == 0;
}

static const char *const OUTS[] = {"dash", "archive"};

/* Create a ring, declare outputs, commit records, close. */
static void work_ring_create(struct run *r)
{
	struct ring *g = NULL;
	char err[256] = "", tmp[160];
	uint64_t last = 0;
	size_t i;

	if (ring_open(ring_path, RING_SIZE_MIN, NULL, &g, err, sizeof(err))) {
		window_heal();
		if (g != NULL)
			broke(r, "ring_open failed but set *out");
		if (err[0] == '\0')
			broke(r, "ring_open failed with no message");
		snprintf(tmp, sizeof(tmp), "%s.tmp", ring_path);
		if (file_exists(tmp))
			broke(r, "ring_open failed and left %s", tmp);
		window_close();
		return;
	}
	if (ring_outputs(g, OUTS, 2) != 0)
		broke(r, "ring_outputs failed: %d", errno);
	for (i = 0; i < N_READINGS; i++)
		if (ring_append(g, READINGS[i], strlen(READINGS[i])) != RING_OK)
			broke(r, "ring_append failed");
	if (ring_commit(g, &last) != 0 || last != N_READINGS)
		broke(r, "ring_commit failed or wrong seq %llu",
		      (unsigned long long)last);
	if (ring_close(g) != 0)
		broke(r, "ring_close failed");
	window_heal();
	r->ok = 1;
	window_close();
}

/* Records the existing ring must still hold. */
static int ring_holds_all(struct run *r)
{
	struct ring *g = NULL;
	struct ring_stat st;
	char err[256];

	if (ring_open(ring_path, 0, NULL, &g, err, sizeof(err)) != 0) {
		broke(r, "re-open with memory: %s", err);
		return 0;
	}
	ring_stat(g, &st);
	if (st.records != N_READINGS || st.newest_seq != N_READINGS)
		broke(r, "ring now holds %llu records, not %zu",
		      (unsigned long long)st.records, N_READINGS);
	if (ring_close(g) != 0)
		broke(r, "ring_close failed");
	return 1;
}

/* Re-open the existing ring (recovery scan), read a record, close. */
static void work_ring_reopen(struct run *r)
{
	struct ring *g = NULL;
	char err[256] = "", buf[512];
	size_t len = 0;

	if (ring_open(ring_path, RING_SIZE_MIN, NULL, &g, err, sizeof(err))) {
		window_heal();
		if (g != NULL)
			broke(r, "ring_open failed but set *out");
		if (err[0] == '\0')
			broke(r, "ring_open failed with no message");
	} else {
		if (ring_read(g, 2, buf, sizeof(buf), &len) != 0 ||
		    len != strlen(READINGS[1]) ||
		    memcmp(buf, READINGS[1], len) != 0)
			broke(r, "record 2 unreadable after open");
		if (ring_close(g) != 0)
			broke(r, "ring_close failed");
		window_heal();
		r->ok = 1;
	}
	ring_holds_all(r);
	window_close();
}

/* Output variants for the batch rows (built from the loaded config). */
enum out_kind { OUT_TRANSFORM, OUT_PLAIN, OUT_NDJSON };

static struct cfg_output out_for(enum out_kind k)
{
	struct cfg_output o = shared_cfg->outputs[0];

	o.format = k == OUT_NDJSON ? CFG_FMT_NDJSON : CFG_FMT_BATCH;
	if (k == OUT_PLAIN) {
		o.n_rename = 0;
		o.n_extra = 0;
	}
	return o;
}

static char good_body[3][4096];

/* Build one body with pb; 0, or -1 with the step that failed. */
static int build(struct postbody *pb, struct run *r, int must)
{
	enum postbody_rc rc;
	size_t i;

	postbody_begin(pb);
	for (i = 0; i < N_READINGS; i++) {
		rc = postbody_add(pb, READINGS[i], strlen(READINGS[i]));
		if (rc == POSTBODY_NOMEM && !must)
			return -1;
		if (rc != POSTBODY_OK) {
			broke(r, "reading %zu: postbody_add gave %s", i,
			      rc == POSTBODY_BAD    ? "BAD (a good reading "
			                              "called bad)"
			      : rc == POSTBODY_FULL ? "FULL"
			                            : "NOMEM");
			return -1;
		}
	}
	if (postbody_finish(pb) != 0) {
		if (!must)
			return -1;
		broke(r, "postbody_finish failed with memory");
		return -1;
	}
	return 0;
}

static void body_is(struct run *r, const struct postbody *pb, enum out_kind k,
                    const char *when)
{
	if (postbody_len(pb) != strlen(good_body[k]) ||
	    memcmp(postbody_data(pb), good_body[k], postbody_len(pb)) != 0)
		broke(r, "%s: body differs from a run without failures", when);
}

static void work_batch(struct run *r, enum out_kind k)
{
	struct cfg_output o = out_for(k);
	struct postbody pb;
	char err[256] = "";

	if (postbody_init(&pb, &o, shared_cfg, 0, err, sizeof(err)) != 0) {
		window_heal();
		if (err[0] == '\0')
			broke(r, "postbody_init failed with no message");
		window_close();
		return;
	}
	if (build(&pb, r, 0) == 0) {
		r->ok = 1;
		body_is(r, &pb, k, "built under failures");
	}
	window_heal();
	/* allocation works again: the same state must build the same body */
	if (build(&pb, r, 1) == 0)
		body_is(r, &pb, k, "rebuilt after failures");
	postbody_free(&pb);
	window_close();
}

/* ---- the torture loop ------------------------------------------------ */

enum work {
	W_CONFIG,
	W_CONFIG_FILE,
	W_RING_CREATE,
	W_RING_REOPEN,
	W_BATCH_TRANSFORM,
	W_BATCH_PLAIN,
	W_NDJSON
};

struct row {
	const char *name;
	enum work work;
	int persistent;
};

static const struct row ROWS[] = {
    /* config load: every allocation of the loader, cJSON's tree and the
     * arena fails once; a lone failure must give -1 with a message */
    {"config, once", W_CONFIG, 0},
    /* the same with memory gone for good: the error paths themselves
     * must not allocate their way into a crash or a leak */
    {"config, persistent", W_CONFIG, 1},
    /* the config and its layout read from files (start and reload):
     * the reading code's buffers and paths join the sites */
    {"config file, once", W_CONFIG_FILE, 0},
    {"config file, persistent", W_CONFIG_FILE, 1},
    /* ring creation: temp file name, ring struct and buffers; a failed
     * create must leave no ring.tmp behind */
    {"ring create, once", W_RING_CREATE, 0},
    {"ring create, persistent", W_RING_CREATE, 1},
    /* re-open with recovery scan: the records on disk must survive any
     * failed open and be there at the next open */
    {"ring re-open, once", W_RING_REOPEN, 0},
    {"ring re-open, persistent", W_RING_REOPEN, 1},
    /* batch body with rename and extra: cJSON parse, duplicate, print */
    {"batch rename+extra, once", W_BATCH_TRANSFORM, 0},
    {"batch rename+extra, persistent", W_BATCH_TRANSFORM, 1},
    /* batch body copied byte for byte (still parsed for quantities) */
    {"batch plain, once", W_BATCH_PLAIN, 0},
    {"batch plain, persistent", W_BATCH_PLAIN, 1},
    /* NDJSON body with extra members */
    {"ndjson extra, once", W_NDJSON, 0},
    {"ndjson extra, persistent", W_NDJSON, 1},
};
#define N_ROWS (sizeof(ROWS) / sizeof(ROWS[0]))

static int count_fds(void)
{
	DIR *d = opendir("/proc/self/fd");
	int n = 0;

	if (d == NULL)
		return -1;
	while (readdir(d) != NULL)
		n++;
	closedir(d);
	return n;
}

static void run_work(enum work w, struct run *r)
{
	switch (w) {
	case W_CONFIG:
		work_config(r, 0);
		break;
	case W_CONFIG_FILE:
		work_config(r, 1);
		break;
	case W_RING_CREATE:
		work_ring_create(r);
		break;
	case W_RING_REOPEN:
		work_ring_reopen(r);
		break;
	case W_BATCH_TRANSFORM:
		work_batch(r, OUT_TRANSFORM);
		break;
	case W_BATCH_PLAIN:
		work_batch(r, OUT_PLAIN);
		break;
	case W_NDJSON:
		work_batch(r, OUT_NDJSON);
		break;
	}
}

/* Before each run: the state the workload starts from. */
static void prepare(enum work w)
{
	char tmp[160];

	if (w == W_RING_CREATE) {
		unlink(ring_path);
		snprintf(tmp, sizeof(tmp), "%s.tmp", ring_path);
		unlink(tmp);
	}
}

/* Sites covered over all rows; `own`: inside this executable (tidepost
 * code linked in), the rest lie in cJSON, libc or libcurl. */
static void *all_sites[SITES_MAX];
static size_t n_all_sites;
static unsigned long total_runs, total_pass;

extern const char __executable_start[];
extern const char etext[];

static int add_site(void **set, size_t *n, void *site)
{
	size_t i;

	for (i = 0; i < *n; i++)
		if (set[i] == site)
			return 0;
	if (*n < SITES_MAX)
		set[(*n)++] = site;
	return 1;
}

/* One planned failure: run, then check what every run must hold. */
static int one_run(const struct row *row, unsigned long n, struct run *r,
                   int *hit)
{
	int fds;

	prepare(row->work);
	fds = count_fds();
	memset(r, 0, sizeof(*r));
	window_open(n, row->persistent);
	run_work(row->work, r);
	*hit = A.refused > 0;
	if (A.overflow)
		broke(r, "live table overflow (test limit)");
	if (live_now() != 0)
		broke(r, "%lu allocation(s) leaked", A.live);
	if (count_fds() != fds)
		broke(r, "fd count %d -> %d", fds, count_fds());
	return r->why[0] == '\0';
}

static void torture(void **state)
{
	const struct row *row = *state;
	void *sites[SITES_MAX];
	size_t n_sites = 0, shown = 0;
	size_t show_max = getenv("OOM_VERBOSE") != NULL ? SIZE_MAX : 5;
	unsigned long n, pass = 0, runs = 0, total;
	struct run r;
	int hit;

	/* a run without failures: counts the allocations */
	assert_true(one_run(row, 0, &r, &hit));
	assert_true(r.ok);
	total = A.healed_at;
	assert_true(total > 0); /* the interposer saw the workload */
	for (n = 1, hit = 1; hit; n++) {
		int good = one_run(row, n, &r, &hit);

		if (!hit) {
			if (!good || !r.ok)
				fail_msg("%s: run without failure broke: %s",
				         row->name, r.why);
			break;
		}
		runs++;
		pass += good;
		add_site(sites, &n_sites, A.fail_site);
		add_site(all_sites, &n_all_sites, A.fail_site);
		if (!good && shown++ < show_max)
			print_message("  %s: N=%lu (site %p): %s\n", row->name,
			              n, A.fail_site, r.why);
	}
	total_runs += runs;
	total_pass += pass;
	print_message("oom: %-31s %4lu allocations, %zu sites, %lu/%lu "
	              "passed\n",
	              row->name, total, n_sites, pass, runs);
	assert_int_equal(runs, total);
	assert_int_equal(pass, runs);
}

/* The interposer itself, so that a row passing is not a vacuous pass: a
 * planned failure reaches malloc, realloc (the old block stays valid),
 * libc's strdup and cJSON; the calls are counted; a block still allocated
 * in the window is seen as live and freeing it brings the count back. */
static void detector_self_check(void **state)
{
	char *p, *q, *d, *g, *h;
	unsigned long n, live, after;
	cJSON *j;
	unsigned long j_refused;

	(void)state;
	window_open(2, 0);
	p = malloc(16);     /* 1: given */
	q = malloc(16);     /* 2: refused */
	d = strdup("reef"); /* 3: given (once mode) */
	n = A.n;
	live = A.live;
	free(p);
	free(d);
	after = live_now();
	window_close();
	assert_non_null(p);
	assert_null(q);
	assert_non_null(d);
	assert_int_equal(n, 3);
	assert_int_equal(live, 2);
	assert_int_equal(after, 0);

	window_open(2, 1);
	g = malloc(8);
	h = realloc(g, 4096); /* refused: g must stay usable */
	if (h == NULL) {
		memset(g, 'x', 8);
		free(g);
	}
	j = cJSON_CreateObject(); /* refused too (persistent) */
	j_refused = A.refused;
	after = live_now();
	window_close();
	assert_null(h);
	assert_null(j);
	assert_int_equal(j_refused, 2);
	assert_int_equal(after, 0);
}

/* ---- setup ----------------------------------------------------------- */

static void load_shared(void)
{
	struct cfg_errors e;
	size_t i;

	if (config_load_buffer("oom.json", CONFIG, sizeof(CONFIG) - 1, tmpdir,
	                       &shared_cfg, &e) != 0) {
		for (i = 0; i < e.n; i++)
			fprintf(stderr, "%s\n", e.msg[i]);
		cfg_errors_free(&e);
		fail_msg("the test config does not load");
	}
	cfg_errors_free(&e);
	good_shape = shape_of(shared_cfg);
	assert_int_equal(good_shape.rename, 2);
	assert_int_equal(good_shape.extra, 2);
}

/* The bodies of runs without failures, to compare against. */
static void good_bodies(void)
{
	enum out_kind k;
	struct run r;

	for (k = OUT_TRANSFORM; k <= OUT_NDJSON; k++) {
		struct cfg_output o = out_for(k);
		struct postbody pb;
		char err[256];

		memset(&r, 0, sizeof(r));
		assert_int_equal(
		    postbody_init(&pb, &o, shared_cfg, 0, err, sizeof(err)), 0);
		assert_int_equal(build(&pb, &r, 1), 0);
		assert_true(postbody_len(&pb) < sizeof(good_body[k]));
		memcpy(good_body[k], postbody_data(&pb), postbody_len(&pb));
		postbody_free(&pb);
	}
}

static int write_file(const char *dir, const char *name, const char *text)
{
	char path[160];
	FILE *f;
	int bad;

	snprintf(path, sizeof(path), "%s/%s", dir, name);
	f = fopen(path, "w");
	if (f == NULL)
		return -1;
	bad = fputs(text, f) < 0;
	return fclose(f) != 0 || bad ? -1 : 0;
}

static int group_setup(void **state)
{
	struct run r;

	(void)state;
	snprintf(tmpdir, sizeof(tmpdir), "/tmp/tp-oom-XXXXXX");
	if (mkdtemp(tmpdir) == NULL)
		return -1;
	snprintf(ring_path, sizeof(ring_path), "%s/ring", tmpdir);
	snprintf(config_path, sizeof(config_path), "%s/oom.json", tmpdir);
	if (write_file(tmpdir, "oom.json", CONFIG_FILE) != 0 ||
	    write_file(tmpdir, "oom-v1.json", LAYOUT_TEXT "\n") != 0)
		return -1;
	load_shared();
	good_bodies();
	/* the ring the re-open rows start from; also warms up libc's lazy
	 * allocations (stdio, locale) outside any window */
	memset(&r, 0, sizeof(r));
	prepare(W_RING_CREATE);
	window_open(0, 0);
	work_ring_create(&r);
	return r.ok && r.why[0] == '\0' ? 0 : -1;
}

static int group_teardown(void **state)
{
	char tmp[160];

	(void)state;
	config_free(shared_cfg);
	unlink(config_path);
	snprintf(tmp, sizeof(tmp), "%s/oom-v1.json", tmpdir);
	unlink(tmp);
	unlink(ring_path);
	snprintf(tmp, sizeof(tmp), "%s.tmp", ring_path);
	unlink(tmp);
	rmdir(tmpdir);
	return 0;
}

int main(void)
{
	struct CMUnitTest tests[N_ROWS + 1] = {
	    cmocka_unit_test(detector_self_check),
	};
	size_t i, own = 0;
	int rc;

	for (i = 0; i < N_ROWS; i++) {
		tests[i + 1] = (struct CMUnitTest)cmocka_unit_test(torture);
		tests[i + 1].name = ROWS[i].name;
		tests[i + 1].initial_state = (void *)&ROWS[i];
	}
	rc = _cmocka_run_group_tests("oom", tests, N_ROWS + 1, group_setup,
	                             group_teardown);
	for (i = 0; i < n_all_sites; i++)
		own += (const char *)all_sites[i] >= __executable_start &&
		       (const char *)all_sites[i] < etext;
	printf("oom: %zu allocation sites covered (%zu in tidepost code, "
	       "%zu in cJSON/libc); %lu/%lu failure runs passed\n",
	       n_all_sites, own, n_all_sites - own, total_pass, total_runs);
	return rc;
}
