/*
 * test_ingest.c - packets to accepted readings: ingest over a real ring
 * (on the memdisk simulator, so fdatasync calls can be counted and
 * failed) and a real seen set in a temp folder.  Checks the group commit
 * (one fdatasync per batch, nothing accepted before it), refusals of a
 * full ring (nothing overwritten), the unknown-station name, bad check
 * values and unknown layouts counted, a failed commit (nothing accepted,
 * ids forgotten), duplicates by id (also across a reopen of the set) and
 * batches larger than one commit.
 *
 * The layout ("reef-v2": a header and four records of pH and
 * temperature, CRC-16/IBM-3740) and every reading are invented test data.
 */
#include <errno.h>
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

#include "config.h"
#include "ingest.h"
#include "ring.h"
#include "ringio.h"
#include "seen.h"

#define RING_PATH "/ring"

static const char layout_json[] =
    "{ \"name\": \"reef-v2\", \"byte_order\": \"big\",\n"
    "  \"match\": [ { \"at\": 0, \"type\": \"u8\", \"is\": 2 } ],\n"
    "  \"check\": { \"crc\": \"CRC-16/IBM-3740\", \"at\": -2 },\n"
    "  \"fields\": [\n"
    "    { \"name\": \"kind\", \"type\": \"u8\" },\n"
    "    { \"name\": \"station\", \"type\": \"u16\",\n"
    "      \"role\": \"station\" },\n"
    "    { \"name\": \"seq\", \"type\": \"u16\", \"role\": \"seq\" },\n"
    "    { \"name\": \"time\", \"type\": \"u32\", \"role\": \"time\",\n"
    "      \"epoch\": \"1970-01-01T00:00:00Z\" },\n"
    "    { \"name\": \"battery\", \"type\": \"u16\",\n"
    "      \"scale\": 0.001 } ],\n"
    "  \"records\": { \"count\": 4, \"every_s\": 900, \"fields\": [\n"
    "    { \"name\": \"ph\", \"bits\": 12, \"scale\": 0.001,\n"
    "      \"offset\": 6.5, \"missing\": 4095 },\n"
    "    { \"name\": \"temperature\", \"bits\": 12, \"signed\": true,\n"
    "      \"scale\": 0.01, \"offset\": 20 } ] } }\n";

static const char config_json[] =
    "{ \"layouts\": [ \"reef.json\" ], \"state_dir\": \"state\",\n"
    "  \"stations\": { \"7\": { \"name\": \"rf2\" } } }\n";

struct fx {
	char dir[64];
	struct config *cfg;
	struct memdisk *disk;
	struct ring *ring;
	struct seen *seen;
	struct ingest *ing;
	struct ingest_src src;
	int commits_ok, commits_failed;
	uint64_t committed;
};

static void on_commit(void *arg, bool ok, uint64_t n)
{
	struct fx *f = arg;

	if (ok && n > 0)
		f->commits_ok++;
	if (!ok)
		f->commits_failed++;
	f->committed += n;
}

static void write_file(const char *dir, const char *name, const char *text)
{
	char path[128];
	FILE *fp;

	snprintf(path, sizeof(path), "%s/%s", dir, name);
	fp = fopen(path, "w");
	assert_non_null(fp);
	fputs(text, fp);
	assert_int_equal(fclose(fp), 0);
}

static void open_ring(struct fx *f, uint64_t size)
{
	char err[256];

	assert_int_equal(ring_open(RING_PATH, size, memdisk_ops(f->disk),
	                           &f->ring, err, sizeof(err)),
	                 0);
}

static int setup(void **state)
{
	struct fx *f = calloc(1, sizeof(*f));
	struct cfg_errors errs;
	char path[128], err[256];

	snprintf(f->dir, sizeof(f->dir), "/tmp/tp-ingest-XXXXXX");
	assert_non_null(mkdtemp(f->dir));
	write_file(f->dir, "reef.json", layout_json);
	write_file(f->dir, "config.json", config_json);
	snprintf(path, sizeof(path), "%s/config.json", f->dir);
	memset(&errs, 0, sizeof(errs));
	assert_int_equal(config_load(path, &f->cfg, &errs), 0);
	cfg_errors_free(&errs);
	f->disk = memdisk_new(0, 7);
	open_ring(f, RING_SIZE_MIN);
	assert_int_equal(seen_open(f->dir, 64, &f->seen, err, sizeof(err)), 0);
	f->ing = ingest_new(f->cfg, f->ring, f->seen, NULL);
	assert_non_null(f->ing);
	ingest_set_listener(f->ing, on_commit, f);
	assert_int_equal(ingest_src_init(&f->src, f->cfg, NULL), 0);
	f->src.name = "test";
	*state = f;
	return 0;
}

static int teardown(void **state)
{
	struct fx *f = *state;
	char cmd[128];

	ingest_src_free(&f->src);
	ingest_free(f->ing);
	seen_close(f->seen);
	(void)ring_close(f->ring);
	memdisk_free(f->disk);
	config_free(f->cfg);
	snprintf(cmd, sizeof(cmd), "rm -rf %s", f->dir);
	assert_int_equal(system(cmd), 0);
	free(f);
	return 0;
}

/* A reef packet of station st, seq sq (4 records, invented values). */
static size_t packet(const struct fx *f, uint32_t st, uint32_t sq, uint8_t *out,
                     size_t cap)
{
	const struct tp_layout *l = f->cfg->layout_ptrs[0];
	struct tp_value h[5] = {{2, 1},
	                        {st, 1},
	                        {sq, 1},
	                        {1796020500.0 + 3600.0 * sq, 1},
	                        {12.5, 1}};
	struct tp_value r[8];
	size_t len = 0;
	int k;

	for (k = 0; k < 4; k++) {
		r[2 * k] = (struct tp_value){8.0 + 0.01 * k, 1};
		r[2 * k + 1] = (struct tp_value){27.0 + 0.1 * k, 1};
	}
	assert_int_equal(tp_encode_packet(l, h, r, 4, out, cap, &len), TP_OK);
	return len;
}

static enum ingest_rc feed(struct fx *f, uint32_t st, uint32_t sq,
                           struct ingest_result *res)
{
	uint8_t p[256];
	size_t n = packet(f, st, sq, p, sizeof(p));

	return ingest_packet(f->ing, &f->src, p, n, 1796030000, res);
}

static uint64_t newest(struct fx *f)
{
	struct ring_stat st;

	ring_stat(f->ring, &st);
	return st.newest_seq;
}

/* Three packets in one turn: 12 readings staged, none accepted until the
 * one commit, which costs exactly one fdatasync. */
static void group_commit_one_sync(void **state)
{
	struct fx *f = *state;
	struct ingest_result res;
	uint64_t syncs;
	uint32_t sq;

	for (sq = 1; sq <= 3; sq++) {
		assert_int_equal(feed(f, 7, sq, &res), INGEST_OK);
		assert_int_equal(res.staged, 4);
	}
	assert_int_equal(ingest_staged(f->ing), 12);
	assert_int_equal(newest(f), 0); /* nothing accepted yet */
	assert_int_equal(f->commits_ok, 0);
	syncs = memdisk_calls(f->disk, MEMDISK_FDATASYNC);
	assert_int_equal(ingest_commit(f->ing), 0);
	assert_int_equal(memdisk_calls(f->disk, MEMDISK_FDATASYNC) - syncs, 1);
	assert_int_equal(newest(f), 12);
	assert_int_equal(f->commits_ok, 1);
	assert_int_equal(f->committed, 12);
	assert_int_equal(ingest_stats(f->ing)->accepted, 12);
}

/* The same packet again (a station re-sending it): every reading is a
 * duplicate by id, in the same batch, after the commit, and after the
 * seen set is reopened from its files. */
static void duplicates_by_id(void **state)
{
	struct fx *f = *state;
	struct ingest_result res;
	char err[256];

	assert_int_equal(feed(f, 7, 40, &res), INGEST_OK);
	assert_int_equal(feed(f, 7, 40, &res), INGEST_OK); /* same batch */
	assert_int_equal(res.staged, 0);
	assert_int_equal(res.duplicates, 4);
	assert_int_equal(ingest_commit(f->ing), 0);
	assert_int_equal(newest(f), 4);
	ingest_free(f->ing);
	seen_close(f->seen);
	assert_int_equal(seen_open(f->dir, 64, &f->seen, err, sizeof(err)), 0);
	f->ing = ingest_new(f->cfg, f->ring, f->seen, NULL);
	assert_int_equal(feed(f, 7, 40, &res), INGEST_OK);
	assert_int_equal(res.duplicates, 4);
	assert_int_equal(res.staged, 0);
	assert_int_equal(feed(f, 7, 41, &res), INGEST_OK); /* a new one */
	assert_int_equal(res.staged, 4);
}

/* With no output acknowledging, the ring fills up: ingest refuses with
 * INGEST_FULL and counts the refused readings; nothing accepted is ever
 * overwritten (the ring keeps every accepted record). */
static void full_ring_refuses(void **state)
{
	struct fx *f = *state;
	struct ingest_result res;
	enum ingest_rc rc = INGEST_OK;
	struct ring_stat st;
	uint32_t sq;

	for (sq = 1; sq < 2000 && rc == INGEST_OK; sq++) {
		rc = feed(f, 7, sq, &res);
		assert_int_equal(ingest_commit(f->ing), 0);
	}
	assert_int_equal(rc, INGEST_FULL);
	assert_true(res.refused > 0);
	assert_int_equal(ingest_stats(f->ing)->refused, res.refused);
	rc = feed(f, 7, sq + 1, &res); /* still full */
	assert_int_equal(rc, INGEST_FULL);
	assert_int_equal(res.refused, 4);
	ring_stat(f->ring, &st);
	assert_int_equal(st.records, ingest_stats(f->ing)->accepted);
	assert_int_equal(st.oldest_seq, 1);
	assert_int_equal(st.newest_seq, ingest_stats(f->ing)->accepted);
}

/* Rejections: each row is one kind of bad packet and the counter that
 * must move. */
static void bad_packets_counted(void **state)
{
	struct fx *f = *state;
	static const struct {
		const char *why;
		size_t at; /* byte changed */
		uint8_t xor ;
		int counter; /* 0 bad_check, 1 unknown */
		const char *reason;
	} rows[] = {
	    /* a flipped payload bit: the CRC catches it */
	    {"payload bit", 9, 0x01, 0, "bad check"},
	    /* a flipped CRC byte itself */
	    {"crc byte", 24, 0x80, 0, "bad check"},
	    /* the layout's match byte is not 2: no layout accepts it */
	    {"match byte", 0, 0x07, 1, "unknown layout"},
	};
	struct ingest_result res;
	const struct ingest_stats *s = ingest_stats(f->ing);
	uint8_t p[256];
	size_t i, n;

	for (i = 0; i < sizeof(rows) / sizeof(rows[0]); i++) {
		uint64_t before = rows[i].counter ? s->unknown : s->bad_check;

		n = packet(f, 7, 5, p, sizeof(p));
		assert_true(rows[i].at < n);
		p[rows[i].at] ^= rows[i].xor ;
		assert_int_equal(ingest_packet(f->ing, &f->src, p, n, 0, &res),
		                 INGEST_REJECTED);
		assert_non_null(strstr(res.reason, rows[i].reason));
		assert_int_equal(
		    (rows[i].counter ? s->unknown : s->bad_check) - before, 1);
		assert_int_equal(res.staged, 0);
	}
	assert_int_equal(ingest_staged(f->ing), 0);
}

/* A station number not in the config: its readings carry the number as
 * text (WIRE.md), and it is accepted like any other. */
static void unknown_station_named_by_number(void **state)
{
	struct fx *f = *state;
	struct ingest_result res;
	char buf[RING_PAYLOAD_MAX];
	size_t len = 0;

	assert_int_equal(feed(f, 12, 3, &res), INGEST_OK);
	assert_int_equal(res.staged, 4);
	assert_int_equal(ingest_commit(f->ing), 0);
	assert_int_equal(ring_read(f->ring, 1, buf, sizeof(buf) - 1, &len), 0);
	buf[len] = '\0';
	assert_non_null(strstr(buf, "\"station\":\"12\""));
	assert_non_null(strstr(buf, "\"id\":\"12-"));
	assert_int_not_equal(buf[len - 1], '\n'); /* no line end stored */
	assert_int_equal(feed(f, 7, 3, &res), INGEST_OK);
	assert_int_equal(ingest_commit(f->ing), 0);
	assert_int_equal(ring_read(f->ring, 5, buf, sizeof(buf) - 1, &len), 0);
	buf[len] = '\0';
	assert_non_null(strstr(buf, "\"station\":\"rf2\""));
}

/* fdatasync fails at the commit: nothing is accepted, the listener hears
 * !ok, the ids are forgotten (the same packet is not a duplicate after
 * recovery) and ingest refuses while the ring is failed. */
static void failed_commit_accepts_nothing(void **state)
{
	struct fx *f = *state;
	struct memdisk_fault fault = {0, 1, MEMDISK_FDATASYNC, EIO};
	struct ingest_result res;
	char err[256];

	assert_int_equal(feed(f, 7, 9, &res), INGEST_OK);
	fault.at = 1; /* counted from memdisk_set_fault */
	memdisk_set_fault(f->disk, &fault);
	assert_int_equal(ingest_commit(f->ing), -1);
	assert_int_equal(f->commits_failed, 1);
	assert_int_equal(newest(f), 0);
	assert_int_equal(ingest_stats(f->ing)->lost_commit, 4);
	assert_int_equal(feed(f, 7, 10, &res), INGEST_DOWN);
	assert_int_equal(res.refused, 4);
	if (ring_recover(f->ring, err, sizeof(err)) != 0)
		fail_msg("%s", err);
	assert_int_equal(feed(f, 7, 9, &res), INGEST_OK);
	assert_int_equal(res.staged, 4); /* not a duplicate */
	assert_int_equal(ingest_commit(f->ing), 0);
	assert_int_equal(newest(f), 4);
}

/* More than one commit's worth staged in one turn: ingest commits by
 * itself when the ring's batch is full (RING_BATCH_FULL never reaches
 * the caller) and every reading is accepted. */
static void big_turn_commits_in_batches(void **state)
{
	struct fx *f = *state;
	struct ingest_result res;
	uint32_t sq;

	(void)ring_close(f->ring);
	memdisk_free(f->disk);
	f->disk = memdisk_new(0, 8);
	open_ring(f, 4u * 1024 * 1024);
	ingest_free(f->ing);
	f->ing = ingest_new(f->cfg, f->ring, f->seen, NULL);
	ingest_set_listener(f->ing, on_commit, f);
	for (sq = 1; sq <= 150; sq++)
		assert_int_equal(feed(f, 7, 1000 + sq, &res), INGEST_OK);
	assert_true(f->commits_ok >= 2); /* committed on its own */
	assert_int_equal(ingest_commit(f->ing), 0);
	assert_int_equal(newest(f), 600);
	assert_int_equal(ingest_stats(f->ing)->accepted, 600);
}

/* The seen set forgets the oldest generation, never the newest ids: with
 * 64 ids per generation, after 200 new ids the first ones are gone and
 * the last 64 are all still known. */
static void seen_forgets_oldest(void **state)
{
	struct fx *f = *state;
	struct seen *s = NULL;
	char err[256], dir[96];
	uint64_t h;
	int i;

	snprintf(dir, sizeof(dir), "%s", f->dir);
	seen_close(f->seen);
	f->seen = NULL;
	assert_int_equal(seen_open(NULL, 64, &s, err, sizeof(err)), 0);
	for (h = 100; h < 300; h++) {
		assert_int_equal(seen_stage(s, h), 0);
		assert_int_equal(seen_commit(s), 0);
	}
	assert_false(seen_has(s, 100));
	for (i = 0; i < 64; i++)
		assert_true(seen_has(s, 299 - (uint64_t)i));
	assert_true(seen_count(s) <= 128);
	seen_close(s);
	(void)dir;
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test_setup_teardown(group_commit_one_sync, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(duplicates_by_id, setup, teardown),
	    cmocka_unit_test_setup_teardown(full_ring_refuses, setup, teardown),
	    cmocka_unit_test_setup_teardown(bad_packets_counted, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(unknown_station_named_by_number,
	                                    setup, teardown),
	    cmocka_unit_test_setup_teardown(failed_commit_accepts_nothing,
	                                    setup, teardown),
	    cmocka_unit_test_setup_teardown(big_turn_commits_in_batches, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(seen_forgets_oldest, setup,
	                                    teardown),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
