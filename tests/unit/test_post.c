/*
 * test_post.c - the HTTP output's pure parts: full-jitter backoff
 * (distribution and cap), Retry-After clamping, the status/transport
 * classification table (RELIABILITY.md 3.3, T12, T13), request bodies
 * (batch/ndjson/single, rename, extra, quantities, size cap), the
 * Idempotency-Key format, and the token file/variable rules (T22).
 * The network side is tested against a real server by
 * tests/integration/test_http.py and test_tls.py.
 *
 * Readings below are invented test data in the WIRE.md form.
 */
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cmocka.h>
#include <cjson/cJSON.h>
#include <curl/curl.h>

#include "backoff.h"
#include "post.h"
#include "postbody.h"
#include "token.h"

/* ---- full jitter ---- */

static int cmp_i64(const void *a, const void *b)
{
	int64_t x = *(const int64_t *)a, y = *(const int64_t *)b;

	return (x > y) - (x < y);
}

/* One-sample Kolmogorov-Smirnov statistic of sorted xs against the
 * uniform CDF on [0, lim). */
static double ks_uniform(const int64_t *xs, size_t n, int64_t lim)
{
	double d = 0, f, lo, hi;
	size_t i;

	for (i = 0; i < n; i++) {
		f = (double)xs[i] / (double)lim;
		lo = f - (double)i / (double)n;
		hi = (double)(i + 1) / (double)n - f;
		d = fmax(d, fmax(lo, hi));
	}
	return d;
}

#define KS_N 4000

/* Delays for attempt n are uniform on [0, min(cap, base * 2^n)): the KS
 * statistic stays under the p = 0.01 critical value 1.628 / sqrt(N)
 * (asymptotic Kolmogorov distribution; Massey 1951, JASA 46:68-78,
 * table 1 gives 1.63 for n > 35 [from memory]), and no delay reaches
 * the limit.  Rows: first retry, a few doublings, the first capped
 * attempt (2^10 s > 600 s) and a huge attempt index (no overflow, no
 * attempt limit). */
static void jitter_is_uniform_and_capped(void **state)
{
	static const struct {
		uint32_t base, cap, attempt;
		int64_t lim;
	} rows[] = {
	    {1, 600, 0, 1000}, /* first retry: [0, 1 s) */
	    {1, 600, 1, 2000}, /* doubled */
	    {1, 600, 3, 8000},         {2, 600, 5, 64000}, /* base 2 s */
	    {1, 600, 10, 600000},      /* 1024 s > cap: the cap holds */
	    {1, 600, 4000000, 600000}, /* no overflow, no limit */
	    {5, 30, 2, 20000},         /* small cap, not yet reached */
	    {5, 30, 3, 30000},         /* 40 s > 30 s cap */
	};
	static int64_t xs[KS_N];
	struct backoff b;
	size_t r, i;
	double crit = 1.628 / sqrt((double)KS_N), d;

	(void)state;
	backoff_seed(&b, 0x7469646570u); /* fixed: reproducible */
	for (r = 0; r < sizeof(rows) / sizeof(rows[0]); r++) {
		assert_int_equal(backoff_limit_ms(rows[r].base, rows[r].cap,
		                                  rows[r].attempt),
		                 rows[r].lim);
		for (i = 0; i < KS_N; i++) {
			xs[i] = backoff_jitter_ms(&b, rows[r].base, rows[r].cap,
			                          rows[r].attempt);
			assert_true(xs[i] >= 0 && xs[i] < rows[r].lim);
		}
		qsort(xs, KS_N, sizeof(xs[0]), cmp_i64);
		d = ks_uniform(xs, KS_N, rows[r].lim);
		print_message("KS attempt %u lim %lld ms: D = %.4f (crit %.4f)"
		              ", max %lld ms\n",
		              rows[r].attempt, (long long)rows[r].lim, d, crit,
		              (long long)xs[KS_N - 1]);
		assert_true(d < crit);
	}
}

/* A sampler that is not uniform must fail the same test: the check has
 * teeth (delays squared toward 0). */
static void ks_rejects_non_uniform(void **state)
{
	static int64_t xs[KS_N];
	struct backoff b;
	double u;
	size_t i;

	(void)state;
	backoff_seed(&b, 42);
	for (i = 0; i < KS_N; i++) {
		u = backoff_uniform(&b);
		xs[i] = (int64_t)(u * u * 1000.0);
	}
	qsort(xs, KS_N, sizeof(xs[0]), cmp_i64);
	assert_true(ks_uniform(xs, KS_N, 1000) > 1.628 / sqrt(KS_N));
}

/* Two seeds give different sequences (processes do not retry in step);
 * the getrandom seeding works here. */
static void seeds_differ(void **state)
{
	struct backoff a, b;

	(void)state;
	assert_int_equal(backoff_seed_random(&a), 0);
	assert_int_equal(backoff_seed_random(&b), 0);
	assert_true(backoff_uniform(&a) != backoff_uniform(&b));
}

/* ---- Retry-After ---- */

static void retry_after_clamped(void **state)
{
	static const struct {
		bool present;
		int64_t s;
		uint32_t cap;
		int64_t ms;
	} rows[] = {
	    {false, 0, 600, 0},       /* no header: backoff alone */
	    {false, 30, 600, 0},      /* value without header ignored */
	    {true, 0, 600, 1000},     /* garbage or "0": at least 1 s */
	    {true, -3600, 600, 1000}, /* date in the past (7.88) */
	    {true, 1, 600, 1000},
	    {true, 42, 600, 42000},          /* honoured as given */
	    {true, 600, 600, 600000},        /* exactly the cap */
	    {true, 1000000000, 600, 600000}, /* 10^9: clamped */
	    {true, 100, 30, 30000},          /* a small cap clamps too */
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(rows) / sizeof(rows[0]); i++)
		assert_int_equal(backoff_retry_after_ms(rows[i].present,
		                                        rows[i].s, rows[i].cap),
		                 rows[i].ms);
}

/* ---- classification ---- */

static void classification_table(void **state)
{
	static const struct {
		long status;
		int cc;
		bool verify, capped;
		enum backoff_class c;
	} rows[] = {
	    /* T12 statuses (RELIABILITY.md 3.3) */
	    {200, 0, false, false, BACKOFF_DONE},
	    {201, 0, false, false, BACKOFF_DONE},
	    {204, 0, false, false, BACKOFF_DONE},
	    {400, 0, false, false, BACKOFF_DEADLETTER},
	    {401, 0, false, false, BACKOFF_PAUSE},
	    {403, 0, false, false, BACKOFF_PAUSE},
	    {404, 0, false, false, BACKOFF_DEADLETTER},
	    {408, 0, false, false, BACKOFF_RETRY},
	    {409, 0, false, false, BACKOFF_DEADLETTER},
	    {413, 0, false, false, BACKOFF_SPLIT},
	    {415, 0, false, false, BACKOFF_DEADLETTER},
	    {422, 0, false, false, BACKOFF_DEADLETTER},
	    {425, 0, false, false, BACKOFF_RETRY}, /* RFC 8470 */
	    {429, 0, false, false, BACKOFF_RETRY}, /* RFC 6585 */
	    {500, 0, false, false, BACKOFF_RETRY},
	    {502, 0, false, false, BACKOFF_RETRY},
	    {503, 0, false, false, BACKOFF_RETRY},
	    {504, 0, false, false, BACKOFF_RETRY},
	    {522, 0, false, false, BACKOFF_RETRY}, /* CDN */
	    {524, 0, false, false, BACKOFF_RETRY},
	    /* our choices beyond the table */
	    {405, 0, false, false, BACKOFF_DEADLETTER}, /* other 4xx */
	    {301, 0, false, false, BACKOFF_PAUSE},      /* not followed */
	    {307, 0, false, false, BACKOFF_PAUSE},
	    {501, 0, false, false, BACKOFF_RETRY}, /* other 5xx */
	    {0, 0, false, false, BACKOFF_RETRY},   /* no status */
	    /* transport: retry (may have been applied) */
	    {0, CURLE_COULDNT_RESOLVE_HOST, false, false, BACKOFF_RETRY},
	    {0, CURLE_COULDNT_CONNECT, false, false, BACKOFF_RETRY},
	    {0, CURLE_OPERATION_TIMEDOUT, false, false, BACKOFF_RETRY},
	    {0, CURLE_SEND_ERROR, false, false, BACKOFF_RETRY},
	    {0, CURLE_RECV_ERROR, false, false, BACKOFF_RETRY},
	    {0, CURLE_GOT_NOTHING, false, false, BACKOFF_RETRY},
	    {0, CURLE_PARTIAL_FILE, false, false, BACKOFF_RETRY},
	    {0, CURLE_HTTP2, false, false, BACKOFF_RETRY},
	    {0, CURLE_HTTP2_STREAM, false, false, BACKOFF_RETRY},
	    {0, CURLE_SSL_CONNECT_ERROR, false, false, BACKOFF_RETRY},
	    /* a 2xx then a reset mid-body: not sure it was read: retry */
	    {200, CURLE_RECV_ERROR, false, false, BACKOFF_RETRY},
	    /* transport: configuration, pause */
	    {0, CURLE_SSL_CONNECT_ERROR, true, false, BACKOFF_PAUSE},
	    {0, CURLE_PEER_FAILED_VERIFICATION, true, false, BACKOFF_PAUSE},
	    {0, CURLE_SSL_CACERT_BADFILE, false, false, BACKOFF_PAUSE},
	    {0, CURLE_URL_MALFORMAT, false, false, BACKOFF_PAUSE},
	    {0, CURLE_UNSUPPORTED_PROTOCOL, false, false, BACKOFF_PAUSE},
	    /* our response cap hit: the status line decides */
	    {200, CURLE_WRITE_ERROR, false, true, BACKOFF_DONE},
	    {503, CURLE_WRITE_ERROR, false, true, BACKOFF_RETRY},
	    {400, CURLE_WRITE_ERROR, false, true, BACKOFF_DEADLETTER},
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(rows) / sizeof(rows[0]); i++) {
		enum backoff_class c = backoff_classify(
		    rows[i].status, rows[i].cc, rows[i].verify, rows[i].capped);

		if (c != rows[i].c)
			fail_msg("row %zu: status %ld curl %d: got %s, want "
			         "%s",
			         i, rows[i].status, rows[i].cc,
			         backoff_class_name(c),
			         backoff_class_name(rows[i].c));
	}
}

/* ---- bodies ---- */

/* An invented layout: header battery (V, no standard name), records ph,
 * temperature and a raw count with neither unit nor standard name. */
static const struct tp_field hdr[] = {
    {.name = "station", .type = TP_T_U16, .bits = 16, .role = TP_ROLE_STATION},
    {.name = "battery", .type = TP_T_U16, .bits = 16, .unit = "V"},
};
static const struct tp_field rec[] = {
    {.name = "ph",
     .type = TP_T_U16,
     .bits = 16,
     .unit = "1",
     .standard_name = "sea_water_ph_reported_on_total_scale"},
    {.name = "temperature",
     .type = TP_T_I16,
     .bits = 16,
     .unit = "degC",
     .standard_name = "sea_water_temperature"},
    {.name = "raw", .type = TP_T_U16, .bits = 16},
};

static struct tp_layout layout = {
    .name = "t-v1",
    .fields = hdr,
    .n_fields = 2,
    .has_records = true,
    .records = {.fields = rec, .n_fields = 3, .count = 1},
};

static const char R1[] =
    "{\"id\":\"rf2-1796020500-118-0\",\"station\":"
    "\"rf2\",\"seq\":118,\"layout\":\"t-v1\",\"time\":"
    "\"2026-11-30T06:15:00Z\",\"received\":\"2026-11-30T07:02:11Z\","
    "\"values\":{\"ph\":8.012,\"temperature\":27.40,\"salinity\":null},"
    "\"flags\":{\"ph\":1,\"temperature\":1,\"salinity\":9}}";
static const char R2[] =
    "{\"id\":\"rf2-1796020500-118-1\",\"station\":"
    "\"rf2\",\"seq\":118,\"layout\":\"t-v1\",\"time\":"
    "\"2026-11-30T06:30:00Z\",\"received\":\"2026-11-30T07:02:11Z\","
    "\"values\":{\"ph\":8.015,\"battery\":12.48,\"raw\":7},"
    "\"flags\":{\"ph\":1,\"battery\":1,\"raw\":1}}";

static struct config cfg_with_layout(void)
{
	struct config c;

	memset(&c, 0, sizeof(c));
	c.layouts = &layout;
	c.n_layouts = 1;
	return c;
}

static void body_of(struct cfg_output *o, size_t max, const char *const *rs,
                    size_t n, struct postbody *pb)
{
	struct config c = cfg_with_layout();
	static struct config keep;
	char err[200];
	size_t i;

	keep = c;
	assert_int_equal(postbody_init(pb, o, &keep, max, err, sizeof(err)), 0);
	postbody_begin(pb);
	for (i = 0; i < n; i++)
		assert_int_equal(postbody_add(pb, rs[i], strlen(rs[i])),
		                 POSTBODY_OK);
	assert_int_equal(postbody_finish(pb), 0);
}

/* Keys of obj in order, space-separated. */
static void keys(const cJSON *obj, char *out, size_t cap)
{
	const cJSON *c;

	out[0] = '\0';
	cJSON_ArrayForEach(c, obj)
	{
		strncat(out, c->string, cap - strlen(out) - 2);
		strncat(out, " ", cap - strlen(out) - 1);
	}
}

/* batch: readings copied byte for byte; quantities for the names a
 * layout describes (ph, temperature from records, battery from the
 * header with only a unit), none for salinity (no layout has it) nor for
 * raw (neither unit nor standard name), in order of first appearance. */
static void body_batch(void **state)
{
	struct cfg_output o = {.name = "t", .format = CFG_FMT_BATCH};
	const char *rs[] = {R1, R2};
	struct postbody pb;
	cJSON *root, *q;
	char k[200];

	(void)state;
	body_of(&o, 0, rs, 2, &pb);
	assert_non_null(strstr(postbody_data(&pb), R1));
	assert_non_null(strstr(postbody_data(&pb), R2));
	assert_int_equal(postbody_count(&pb), 2);
	root = cJSON_Parse(postbody_data(&pb));
	assert_non_null(root);
	assert_int_equal(
	    cJSON_GetArraySize(cJSON_GetObjectItem(root, "readings")), 2);
	q = cJSON_GetObjectItem(root, "quantities");
	keys(q, k, sizeof(k));
	assert_string_equal(k, "ph temperature battery ");
	assert_string_equal(
	    cJSON_GetObjectItem(cJSON_GetObjectItem(q, "ph"), "standard_name")
	        ->valuestring,
	    "sea_water_ph_reported_on_total_scale");
	assert_string_equal(
	    cJSON_GetObjectItem(cJSON_GetObjectItem(q, "battery"), "unit")
	        ->valuestring,
	    "V");
	assert_null(cJSON_GetObjectItem(cJSON_GetObjectItem(q, "battery"),
	                                "standard_name"));
	assert_string_equal(postbody_content_type(o.format),
	                    "application/json");
	cJSON_Delete(root);
	postbody_free(&pb);
}

/* ndjson: exactly one reading per line, each ending in LF. */
static void body_ndjson(void **state)
{
	struct cfg_output o = {.name = "t", .format = CFG_FMT_NDJSON};
	const char *rs[] = {R1, R2};
	struct postbody pb;
	char want[2048];

	(void)state;
	body_of(&o, 0, rs, 2, &pb);
	snprintf(want, sizeof(want), "%s\n%s\n", R1, R2);
	assert_string_equal(postbody_data(&pb), want);
	assert_string_equal(postbody_content_type(o.format),
	                    "application/x-ndjson");
	postbody_free(&pb);
}

/* single: the body is the reading; a second one does not fit. */
static void body_single(void **state)
{
	struct cfg_output o = {.name = "t", .format = CFG_FMT_SINGLE};
	const char *rs[] = {R1};
	struct postbody pb;

	(void)state;
	body_of(&o, 0, rs, 1, &pb);
	assert_string_equal(postbody_data(&pb), R1);
	pb.finished = false;
	assert_int_equal(postbody_add(&pb, R2, strlen(R2)), POSTBODY_FULL);
	postbody_free(&pb);
}

/* rename: values and flags members renamed in place (order kept), the
 * quantities member uses the new name with the old name's unit; extra
 * adds members but never replaces the reading's own (the id stays). */
static void body_rename_extra(void **state)
{
	struct cfg_pair ren[] = {{"ph", "pH_total"}};
	struct cfg_pair ext[] = {{"network", "\"reef-net\""},
	                         {"id", "\"not-the-id\""},
	                         {"depth_m", "2.5"}};
	struct cfg_output o = {.name = "t",
	                       .format = CFG_FMT_BATCH,
	                       .rename = ren,
	                       .n_rename = 1,
	                       .extra = ext,
	                       .n_extra = 3};
	const char *rs[] = {R1};
	struct postbody pb;
	cJSON *root, *r0;
	char k[200];

	(void)state;
	body_of(&o, 0, rs, 1, &pb);
	root = cJSON_Parse(postbody_data(&pb));
	assert_non_null(root);
	r0 = cJSON_GetArrayItem(cJSON_GetObjectItem(root, "readings"), 0);
	keys(cJSON_GetObjectItem(r0, "values"), k, sizeof(k));
	assert_string_equal(k, "pH_total temperature salinity ");
	keys(cJSON_GetObjectItem(r0, "flags"), k, sizeof(k));
	assert_string_equal(k, "pH_total temperature salinity ");
	assert_true(
	    cJSON_GetObjectItem(cJSON_GetObjectItem(r0, "values"), "pH_total")
	        ->valuedouble == 8.012);
	assert_string_equal(cJSON_GetObjectItem(r0, "id")->valuestring,
	                    "rf2-1796020500-118-0");
	assert_string_equal(cJSON_GetObjectItem(r0, "network")->valuestring,
	                    "reef-net");
	assert_true(cJSON_GetObjectItem(r0, "depth_m")->valuedouble == 2.5);
	keys(cJSON_GetObjectItem(root, "quantities"), k, sizeof(k));
	assert_string_equal(k, "pH_total temperature ");
	cJSON_Delete(root);
	postbody_free(&pb);
}

/* The byte cap: the first reading is always taken; one that would pass
 * the cap is refused and leaves no trace (its new quantities are rolled
 * back); the finished body is within the cap and valid JSON. */
static void body_byte_cap(void **state)
{
	struct cfg_output o = {.name = "t", .format = CFG_FMT_BATCH};
	struct config c = cfg_with_layout();
	struct postbody pb;
	char err[200];
	cJSON *root;
	char k[200];
	size_t cap = strlen(R1) + 200; /* R1 and its quantities fit */

	(void)state;
	assert_int_equal(postbody_init(&pb, &o, &c, cap, err, sizeof(err)), 0);
	assert_int_equal(postbody_add(&pb, R1, strlen(R1)), POSTBODY_OK);
	assert_int_equal(postbody_add(&pb, R2, strlen(R2)), POSTBODY_FULL);
	assert_int_equal(postbody_finish(&pb), 0);
	assert_true(postbody_len(&pb) <= cap);
	root = cJSON_Parse(postbody_data(&pb));
	assert_non_null(root);
	keys(cJSON_GetObjectItem(root, "quantities"), k, sizeof(k));
	assert_string_equal(k, "ph temperature "); /* no battery */
	cJSON_Delete(root);
	/* a tiny cap still takes one reading */
	pb.max_bytes = 10;
	postbody_begin(&pb);
	assert_int_equal(postbody_add(&pb, R2, strlen(R2)), POSTBODY_OK);
	assert_int_equal(postbody_add(&pb, R1, strlen(R1)), POSTBODY_FULL);
	postbody_free(&pb);
}

/* Payloads that are not a JSON object are refused, not sent; an extra
 * value that is not JSON is refused at set-up. */
static void body_bad_input(void **state)
{
	static const char *const bad[] = {"not json", "[1,2]", "42", "",
	                                  "{\"id\":"};
	struct cfg_output ob = {.name = "t", .format = CFG_FMT_BATCH};
	struct cfg_output on = {.name = "t", .format = CFG_FMT_NDJSON};
	struct cfg_pair ext[] = {{"x", "{not json"}};
	struct cfg_output oe = {.name = "t", .extra = ext, .n_extra = 1};
	struct postbody pb;
	char err[200];
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(bad) / sizeof(bad[0]); i++) {
		assert_int_equal(
		    postbody_init(&pb, &ob, NULL, 0, err, sizeof(err)), 0);
		assert_int_equal(postbody_add(&pb, bad[i], strlen(bad[i])),
		                 POSTBODY_BAD);
		postbody_free(&pb);
	}
	/* ndjson without transforms only checks the opening brace */
	assert_int_equal(postbody_init(&pb, &on, NULL, 0, err, sizeof(err)), 0);
	assert_int_equal(postbody_add(&pb, "[1]", 3), POSTBODY_BAD);
	postbody_free(&pb);
	assert_int_equal(postbody_init(&pb, &oe, NULL, 0, err, sizeof(err)),
	                 -1);
	assert_non_null(strstr(err, "extra.x"));
}

/* "<output>-<first>-<last>", and a buffer too small is an error. */
static void idempotency_key(void **state)
{
	char k[64];

	(void)state;
	assert_int_equal(
	    post_idempotency_key(k, sizeof(k), "dashboard", 118, 617), 17);
	assert_string_equal(k, "dashboard-118-617");
	assert_int_equal(post_idempotency_key(k, sizeof(k), "a", 1, 1), 5);
	assert_string_equal(k, "a-1-1");
	assert_int_equal(
	    post_idempotency_key(k, sizeof(k), "o", UINT64_MAX, UINT64_MAX),
	    43);
	assert_int_equal(post_idempotency_key(k, 5, "dashboard", 1, 2), -1);
}

/* ---- token ---- */

static char tmpdir[64];

static const char *tpath(const char *name)
{
	static char p[128];

	snprintf(p, sizeof(p), "%s/%s", tmpdir, name);
	return p;
}

static void put(const char *name, const char *text, mode_t mode)
{
	const char *p = tpath(name);
	int fd = open(p, O_WRONLY | O_CREAT | O_TRUNC, 0600);

	assert_true(fd >= 0);
	assert_int_equal(write(fd, text, strlen(text)), (ssize_t)strlen(text));
	assert_int_equal(fchmod(fd, mode), 0);
	close(fd);
}

static void token_file_rules(void **state)
{
	static const struct {
		const char *name, *text;
		mode_t mode;
		const char *want, *why;
	} rows[] = {
	    {"good", "s3cr3t-T0k\n", 0600, "s3cr3t-T0k", NULL},
	    {"crlf", "s3cr3t-T0k\r\n", 0400, "s3cr3t-T0k", NULL},
	    {"bare", "s3cr3t-T0k", 0600, "s3cr3t-T0k", NULL},
	    {"group", "s3cr3t-T0k\n", 0640, NULL, "group or others"},
	    {"world", "s3cr3t-T0k\n", 0604, NULL, "group or others"},
	    {"space", "s3cr3t T0k\n", 0600, NULL, "visible ASCII"},
	    {"inner-lf", "s3cr3t\nT0k\n", 0600, NULL, "visible ASCII"},
	    {"empty", "\n", 0600, NULL, "empty"},
	};
	char err[300], *t;
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(rows) / sizeof(rows[0]); i++) {
		put(rows[i].name, rows[i].text, rows[i].mode);
		if (rows[i].want != NULL) {
			assert_int_equal(token_read_file(tpath(rows[i].name),
			                                 &t, err, sizeof(err)),
			                 0);
			assert_string_equal(t, rows[i].want);
			token_free(t);
			continue;
		}
		assert_int_equal(
		    token_read_file(tpath(rows[i].name), &t, err, sizeof(err)),
		    -1);
		assert_null(t);
		assert_non_null(strstr(err, rows[i].why));
		assert_null(strstr(err, "T0k")); /* never the token */
	}
}

/* A symlink to a good file and a FIFO are refused (no blocking). */
static void token_file_kinds(void **state)
{
	char err[300], *t, target[128];

	(void)state;
	put("target", "s3cr3t-T0k\n", 0600);
	snprintf(target, sizeof(target), "%s", tpath("target"));
	assert_int_equal(symlink(target, tpath("link")), 0);
	assert_int_equal(token_read_file(tpath("link"), &t, err, sizeof(err)),
	                 -1);
	assert_non_null(strstr(err, "symbolic link"));
	assert_int_equal(mkfifo(tpath("fifo"), 0600), 0);
	assert_int_equal(token_read_file(tpath("fifo"), &t, err, sizeof(err)),
	                 -1);
	assert_non_null(strstr(err, "not a regular file"));
	assert_int_equal(
	    token_read_file(tpath("missing"), &t, err, sizeof(err)), -1);
}

/* The variable is read and then removed from the environment, also when
 * its value is refused. */
static void token_env_unset(void **state)
{
	char err[300], *t;

	(void)state;
	assert_int_equal(setenv("TP_TEST_TOKEN", "env-T0k", 1), 0);
	assert_int_equal(token_read_env("TP_TEST_TOKEN", &t, err, sizeof(err)),
	                 0);
	assert_string_equal(t, "env-T0k");
	assert_null(getenv("TP_TEST_TOKEN"));
	token_free(t);
	assert_int_equal(setenv("TP_TEST_TOKEN", "bad\r\nX-Evil: 1", 1), 0);
	assert_int_equal(token_read_env("TP_TEST_TOKEN", &t, err, sizeof(err)),
	                 -1);
	assert_null(getenv("TP_TEST_TOKEN"));
	assert_null(strstr(err, "Evil"));
	assert_int_equal(token_read_env("TP_TEST_TOKEN", &t, err, sizeof(err)),
	                 -1);
	assert_non_null(strstr(err, "not set"));
}

static int setup_tmp(void **state)
{
	(void)state;
	snprintf(tmpdir, sizeof(tmpdir), "/tmp/test_post-XXXXXX");
	return mkdtemp(tmpdir) != NULL ? 0 : -1;
}

static int teardown_tmp(void **state)
{
	static const char *const names[] = {
	    "good",     "crlf",  "bare",   "group", "world", "space",
	    "inner-lf", "empty", "target", "link",  "fifo",  NULL};
	size_t i;

	(void)state;
	for (i = 0; names[i] != NULL; i++)
		unlink(tpath(names[i]));
	return rmdir(tmpdir);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test(jitter_is_uniform_and_capped),
	    cmocka_unit_test(ks_rejects_non_uniform),
	    cmocka_unit_test(seeds_differ),
	    cmocka_unit_test(retry_after_clamped),
	    cmocka_unit_test(classification_table),
	    cmocka_unit_test(body_batch),
	    cmocka_unit_test(body_ndjson),
	    cmocka_unit_test(body_single),
	    cmocka_unit_test(body_rename_extra),
	    cmocka_unit_test(body_byte_cap),
	    cmocka_unit_test(body_bad_input),
	    cmocka_unit_test(idempotency_key),
	    cmocka_unit_test(token_file_rules),
	    cmocka_unit_test(token_file_kinds),
	    cmocka_unit_test(token_env_unset),
	};

	return cmocka_run_group_tests(tests, setup_tmp, teardown_tmp);
}
