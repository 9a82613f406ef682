/*
 * test_ring.c - the ring file: format, API, full ring, laps, torn tails,
 * bit flips, header slots, creation (RELIABILITY.md T1, T2, T3, T9 via
 * the I/O layer, T10, T15), on the memdisk of ringio.h and on real files.
 * Every payload is invented by a seeded generator.
 */
#include <errno.h>
#include <fcntl.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <cmocka.h>

#include "ring.h"
#include "ringio.h"
#include "tidepost/check.h"

#define PATH "/st/ring"
#define SMALL 40960u                /* the smallest ring: 32 KiB data */
#define DSTART 8192u

static uint64_t mix64(uint64_t x)
{
	/* splitmix64 finaliser (Steele, Lea, Flood, OOPSLA 2014) */
	x += 0x9e3779b97f4a7c15ull;
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9ull;
	x = (x ^ (x >> 27)) * 0x94d049bb133111ebull;
	return x ^ (x >> 31);
}

/* Invented payload of record seq: length and bytes from the seq. */
static size_t pay(uint64_t seq, unsigned salt, unsigned char *b, size_t cap)
{
	size_t len = 1 + (size_t)(mix64(seq * 31u + salt) % cap), i;

	for (i = 0; i < len; i++)
		b[i] = (unsigned char)mix64(seq * 977u + salt * 7u + i);
	return len;
}

static struct ring *open_ok(struct memdisk *d, uint64_t size)
{
	struct ring *r = NULL;
	char err[256];

	if (ring_open(PATH, size, memdisk_ops(d), &r, err, sizeof err) != 0)
		fail_msg("open: %s", err);
	return r;
}

/* Append n records (seq-derived payloads, up to cap bytes) in batches of
 * `batch`; returns the last accepted seq. */
static uint64_t fill(struct ring *r, uint64_t n, size_t cap, size_t batch,
                     unsigned salt)
{
	unsigned char b[RING_PAYLOAD_MAX];
	struct ring_stat st;
	uint64_t last = 0, i, seq;
	size_t len;

	for (i = 0; i < n; i++) {
		ring_stat(r, &st);
		seq = st.next_seq;
		len = pay(seq, salt, b, cap);
		assert_int_equal(ring_append(r, b, len), RING_OK);
		if ((i + 1) % batch == 0 || i + 1 == n)
			assert_int_equal(ring_commit(r, &last), 0);
	}
	return last;
}

/* Read every kept record and compare with its invented payload. */
static uint64_t check_all(struct ring *r, size_t cap, unsigned salt)
{
	unsigned char b[RING_PAYLOAD_MAX], w[RING_PAYLOAD_MAX];
	struct ring_stat st;
	struct ring_iter it;
	uint64_t seq, n = 0, expect;
	size_t len;
	int k;

	ring_stat(r, &st);
	expect = st.oldest_seq;
	ring_iter_init(&it, st.oldest_seq - 1);
	while ((k = ring_iter_next(r, &it, b, sizeof b, &len, &seq)) > 0) {
		assert_int_equal(seq, expect);
		assert_int_equal(len, pay(seq, salt, w, cap));
		assert_memory_equal(b, w, len);
		expect++;
		n++;
	}
	assert_int_equal(k, 0);
	assert_int_equal(expect, st.newest_seq + 1);
	return n;
}

/* ---- format: a record built here, by the documented layout and an
 * independent bitwise CRC-32C, must be read back by the ring ---- */

static uint32_t crc32c_bitwise(const unsigned char *p, size_t n)
{
	/* reflected form 0x82f63b78 of the CRC-32/ISCSI polynomial
	 * 0x1edc6f41 (CRC RevEng catalogue) */
	uint32_t c = 0xffffffffu;
	size_t i;
	int k;

	for (i = 0; i < n; i++) {
		c ^= p[i];
		for (k = 0; k < 8; k++)
			c = (c >> 1) ^ (0x82f63b78u & (0u - (c & 1u)));
	}
	return ~c;
}

static void le(unsigned char *b, uint64_t v, int n)
{
	int i;

	for (i = 0; i < n; i++)
		b[i] = (unsigned char)(v >> (8 * i));
}

static void test_crc_catalogue(void **state)
{
	const struct tp_crc_params p = { "CRC-32/ISCSI", 32, 0x1edc6f41u,
	                                 0xffffffffu, true, true,
	                                 0xffffffffu, 0xe3069283u };
	struct tp_crc c;

	/* check value of "123456789": CRC RevEng catalogue, CRC-32/ISCSI */
	assert_int_equal(tp_crc_init(&c, &p), TP_OK);
	assert_int_equal(tp_crc_compute(&c, "123456789", 9), 0xe3069283u);
	assert_int_equal(crc32c_bitwise((const unsigned char *)"123456789",
	                                9), 0xe3069283u);
	(void)state;
}

static void test_format_by_hand(void **state)
{
	struct memdisk *d = memdisk_new(0, 1);
	struct ring *r = open_ok(d, SMALL);
	unsigned char rec[40], got[16], slot[404];
	static const unsigned char body[11] = "hand-made!";
	size_t len;

	assert_int_equal(ring_close(r), 0);
	/* the header slot as documented: magic, version 1, next_seq 1 */
	assert_int_equal(memdisk_peek(d, PATH, 0, slot, sizeof slot), 0);
	assert_memory_equal(slot, "TPRH", 4);
	assert_int_equal(slot[4], 1);
	assert_int_equal(crc32c_bitwise(slot, 400),
	                 (uint32_t)slot[400] | (uint32_t)slot[401] << 8 |
	                 (uint32_t)slot[402] << 16 |
	                 (uint32_t)slot[403] << 24);
	/* record seq 1, lap 1, at the data start */
	memset(rec, 0, sizeof rec);
	memcpy(rec, "TPRC", 4);
	rec[4] = 1;
	le(rec + 6, sizeof body, 2);
	le(rec + 8, 1, 4);
	le(rec + 12, 1, 8);
	memcpy(rec + 24, body, sizeof body);
	{
		unsigned char tmp[20 + sizeof body];

		memcpy(tmp, rec, 20);
		memcpy(tmp + 20, body, sizeof body);
		le(rec + 20, crc32c_bitwise(tmp, sizeof tmp), 4);
	}
	assert_int_equal(memdisk_poke(d, PATH, DSTART, rec, sizeof rec), 0);
	r = open_ok(d, SMALL);
	assert_int_equal(ring_read(r, 1, got, sizeof got, &len), 0);
	assert_int_equal(len, sizeof body);
	assert_memory_equal(got, body, len);
	assert_int_equal(ring_close(r), 0);
	memdisk_free(d);
	(void)state;
}

/* Each validity rule alone: a hand-built record at the head that breaks
 * exactly one rule must not be accepted; the control row must be. */
struct rule_case {
	const char *why;
	uint32_t magic;
	int type, flags;
	int len;                    /* payload length field */
	int lap_delta, seq_delta;
	int crc_delta;
	int accept;
};

static const struct rule_case rule_cases[] = {
	/* control: everything right, so the others prove something */
	{ "valid", 0x43525054u, 1, 0, 16, 0, 0, 0, 1 },
	/* an older lap: a stale record from the previous pass */
	{ "old lap", 0x43525054u, 1, 0, 16, -1, 0, 0, 0 },
	/* a newer lap cannot be at this place either */
	{ "next lap", 0x43525054u, 1, 0, 16, 1, 0, 0, 0 },
	/* seq must be previous + 1: a skipped seq */
	{ "seq skips", 0x43525054u, 1, 0, 16, 0, 1, 0, 0 },
	/* and a repeated one */
	{ "seq repeats", 0x43525054u, 1, 0, 16, 0, -1, 0, 0 },
	{ "bad magic", 0x43525055u, 1, 0, 16, 0, 0, 0, 0 },
	{ "flags set", 0x43525054u, 1, 1, 16, 0, 0, 0, 0 },
	{ "unknown type", 0x43525054u, 9, 0, 16, 0, 0, 0, 0 },
	/* a data record has at least one byte */
	{ "empty data", 0x43525054u, 1, 0, 0, 0, 0, 0, 0 },
	/* longer than any payload the ring writes */
	{ "too long", 0x43525054u, 1, 0, 4073, 0, 0, 0, 0 },
	{ "crc off", 0x43525054u, 1, 0, 16, 0, 0, 1, 0 },
};

static void test_validity_rules(void **state)
{
	size_t i;

	for (i = 0; i < sizeof rule_cases / sizeof rule_cases[0]; i++) {
		const struct rule_case *c = &rule_cases[i];
		struct memdisk *d = memdisk_new(0, 30);
		struct ring *r = open_ok(d, SMALL);
		struct ring_stat st;
		unsigned char rec[24 + 4100], tmp[20 + 4100];
		size_t plen = c->len > 4072 ? 4072 : (size_t)c->len;
		uint64_t at, seq;

		(void)fill(r, 5, 60, 5, 2);
		ring_stat(r, &st);
		at = st.head_off;
		seq = st.next_seq;
		assert_int_equal(ring_close(r), 0);
		memset(rec, 0, sizeof rec);
		le(rec, c->magic, 4);
		rec[4] = (unsigned char)c->type;
		rec[5] = (unsigned char)c->flags;
		le(rec + 6, (uint64_t)c->len, 2);
		le(rec + 8, (uint64_t)(1 + c->lap_delta), 4);
		le(rec + 12, seq + (uint64_t)(int64_t)c->seq_delta, 8);
		memset(rec + 24, 0x33, plen);
		memcpy(tmp, rec, 20);
		memcpy(tmp + 20, rec + 24, plen);
		le(rec + 20, crc32c_bitwise(tmp, 20 + plen) +
		             (uint32_t)c->crc_delta, 4);
		assert_int_equal(memdisk_poke(d, PATH, at, rec, 24 + plen), 0);
		r = open_ok(d, SMALL);
		ring_stat(r, &st);
		if ((st.newest_seq == seq) != c->accept)
			fail_msg("%s: newest %llu, seq %llu", c->why,
			         (unsigned long long)st.newest_seq,
			         (unsigned long long)seq);
		assert_int_equal(ring_close(r), 0);
		memdisk_free(d);
	}
	(void)state;
}

/* ---- open arguments, table-driven ---- */

struct open_case {
	const char *why;
	int exists;                 /* create a SMALL ring first */
	uint64_t size;
	int ok;
	int err;
	const char *text;           /* expected in the message */
};

static const struct open_case open_cases[] = {
	/* a missing ring is created */
	{ "create", 0, SMALL, 1, 0, NULL },
	/* size 0 means "open what is there", never create */
	{ "inspect missing", 0, 0, 0, ENOENT, "No such file" },
	{ "inspect existing", 1, 0, 1, 0, NULL },
	/* sizes not a multiple of 4 KiB are refused */
	{ "odd size", 0, SMALL + 100, 0, EINVAL, "multiple of 4096" },
	/* too small to hold 4 largest batches */
	{ "too small", 0, 8192, 0, EINVAL, "at least" },
	/* an existing ring is never resized or re-initialised */
	{ "other size", 1, SMALL * 2, 0, EINVAL, "never resized" },
	{ "same size", 1, SMALL, 1, 0, NULL },
};

static void test_open_cases(void **state)
{
	size_t i;

	for (i = 0; i < sizeof open_cases / sizeof open_cases[0]; i++) {
		const struct open_case *c = &open_cases[i];
		struct memdisk *d = memdisk_new(0, 1);
		struct ring *r = NULL;
		char err[256];
		int rc;

		if (c->exists)
			assert_int_equal(ring_close(open_ok(d, SMALL)), 0);
		rc = ring_open(PATH, c->size, memdisk_ops(d), &r, err,
		               sizeof err);
		if (c->ok != (rc == 0))
			fail_msg("%s: rc %d (%s)", c->why, rc, err);
		if (!c->ok) {
			assert_null(r);
			assert_int_equal(errno, c->err);
			if (strstr(err, c->text) == NULL)
				fail_msg("%s: message \"%s\"", c->why, err);
		}
		assert_int_equal(ring_close(r), 0);
		assert_int_equal(memdisk_open_fds(d), 0);
		memdisk_free(d);
	}
	(void)state;
}

/* ---- basic use, seqs across restarts (T15) ---- */

static void test_roundtrip_and_restart(void **state)
{
	static const char *const outs[2] = { "dash", "file" };
	struct memdisk *d = memdisk_new(0, 2);
	struct ring *r = open_ok(d, SMALL);
	struct ring_stat st;
	unsigned char b[64];
	uint64_t last, cur;
	size_t len;

	assert_int_equal(ring_outputs(r, outs, 2), 0);
	last = fill(r, 20, 100, 4, 0);
	assert_int_equal(last, 20);
	assert_int_equal(check_all(r, 100, 0), 20);
	/* the buffer too small: size reported, nothing copied */
	assert_int_equal(ring_read(r, 1, b, 0, &len), -1);
	assert_int_equal(errno, EMSGSIZE);
	assert_true(len > 0);
	assert_int_equal(ring_read(r, 21, b, sizeof b, &len), -1);
	assert_int_equal(errno, ENOENT);
	/* drain completely, restart, drain again: seqs continue (T15) */
	assert_int_equal(ring_ack(r, "dash", 20), 0);
	assert_int_equal(ring_ack(r, "file", 20), 0);
	ring_stat(r, &st);
	assert_int_equal(st.records, 0);
	assert_int_equal(st.used_bytes, 0);
	assert_int_equal(ring_close(r), 0);
	memdisk_powercut(d, NULL);
	r = open_ok(d, SMALL);
	ring_stat(r, &st);
	assert_int_equal(st.next_seq, 21);
	assert_int_equal(ring_cursor_get(r, "dash", &cur), 0);
	assert_int_equal(cur, 20);
	assert_int_equal(ring_read(r, 20, b, sizeof b, &len), -1);
	assert_int_equal(errno, ENOENT);    /* freed */
	last = fill(r, 3, 100, 3, 0);
	assert_int_equal(last, 23);
	assert_int_equal(ring_close(r), 0);
	memdisk_free(d);
	(void)state;
}

struct ack_case {
	const char *why;
	const char *out;
	uint64_t seq;
	int rc, err;
};

static const struct ack_case ack_cases[] = {
	/* an output the ring does not know */
	{ "unknown", "nobody", 3, -1, ENOENT },
	/* past the last accepted seq (10): cannot have been delivered */
	{ "ahead", "dash", 11, -1, EINVAL },
	{ "forward", "dash", 5, 0, 0 },
	/* the same ack again is a no-op */
	{ "again", "dash", 5, 0, 0 },
	/* cursors never move back */
	{ "back", "dash", 4, -1, EINVAL },
	{ "to the end", "dash", 10, 0, 0 },
};

static void test_ack_cases(void **state)
{
	static const char *const outs[1] = { "dash" };
	struct memdisk *d = memdisk_new(0, 3);
	struct ring *r = open_ok(d, SMALL);
	size_t i;
	int rc;

	assert_int_equal(ring_outputs(r, outs, 1), 0);
	(void)fill(r, 10, 50, 10, 0);
	for (i = 0; i < sizeof ack_cases / sizeof ack_cases[0]; i++) {
		const struct ack_case *c = &ack_cases[i];

		errno = 0;
		rc = ring_ack(r, c->out, c->seq);
		if (rc != c->rc || (rc != 0 && errno != c->err))
			fail_msg("%s: rc %d errno %d", c->why, rc, errno);
	}
	assert_int_equal(ring_close(r), 0);
	memdisk_free(d);
	(void)state;
}

struct outputs_case {
	const char *why;
	const char *names[3];
	size_t n;
	int rc;
};

static const struct outputs_case outputs_cases[] = {
	/* a name longer than 31 bytes cannot be stored */
	{ "long name", { "abcdefghijklmnopqrstuvwxyz0123456" }, 1, -1 },
	/* the empty name is not a name */
	{ "empty", { "" }, 1, -1 },
	/* two outputs may not share a cursor */
	{ "duplicate", { "a", "a" }, 2, -1 },
	{ "fine", { "a", "b", "c" }, 3, 0 },
};

static void test_outputs(void **state)
{
	struct memdisk *d = memdisk_new(0, 4);
	struct ring *r = open_ok(d, SMALL);
	static const char *const ab[2] = { "a", "b" };
	static const char *const abn[3] = { "a", "b", "new" };
	static const char *const b_only[1] = { "b" };
	struct ring_stat st;
	uint64_t cur;
	size_t i;

	for (i = 0; i < sizeof outputs_cases / sizeof outputs_cases[0]; i++)
		assert_int_equal(ring_outputs(r, outputs_cases[i].names,
		                              outputs_cases[i].n),
		                 outputs_cases[i].rc);
	assert_int_equal(ring_outputs(r, ab, 2), 0);
	(void)fill(r, 10, 50, 5, 0);
	assert_int_equal(ring_ack(r, "a", 8), 0);
	assert_int_equal(ring_ack(r, "b", 4), 0);
	/* a new output starts at the oldest record kept (seq 5) */
	assert_int_equal(ring_outputs(r, abn, 3), 0);
	assert_int_equal(ring_cursor_get(r, "new", &cur), 0);
	assert_int_equal(cur, 4);
	/* removing the laggards frees their records */
	assert_int_equal(ring_outputs(r, b_only, 1), 0);
	ring_stat(r, &st);
	assert_int_equal(st.oldest_seq, 5);
	assert_int_equal(ring_ack(r, "b", 7), 0);
	ring_stat(r, &st);
	assert_int_equal(st.oldest_seq, 8);
	assert_int_equal(ring_cursor_get(r, "a", &cur), -1);
	assert_int_equal(errno, ENOENT);
	/* across a restart the set is kept */
	assert_int_equal(ring_close(r), 0);
	r = open_ok(d, SMALL);
	ring_stat(r, &st);
	assert_int_equal(st.n_outputs, 1);
	assert_string_equal(st.outputs[0].name, "b");
	assert_int_equal(st.outputs[0].unsent, 3);
	assert_int_equal(ring_close(r), 0);
	memdisk_free(d);
	(void)state;
}

/* ---- T10: ring full of unsent data, then laps ---- */

static void test_full_and_laps(void **state)
{
	static const char *const outs[1] = { "dash" };
	struct memdisk *d = memdisk_new(0, 5);
	struct ring *r = open_ok(d, SMALL);
	unsigned char b[RING_PAYLOAD_MAX];
	struct ring_stat st;
	uint64_t last = 0, accepted = 0, refused = 0, round, seq;
	size_t len;
	enum ring_rc rc;

	assert_int_equal(ring_outputs(r, outs, 1), 0);
	for (round = 0; round < 8; round++) {
		/* offer 3 ring sizes of data while nothing is acked */
		for (;;) {
			ring_stat(r, &st);
			seq = st.next_seq;
			len = pay(seq, 9, b, 700);
			rc = ring_append(r, b, len);
			if (rc == RING_BATCH_FULL) {
				assert_int_equal(ring_commit(r, &last), 0);
				continue;
			}
			if (rc == RING_FULL) {
				refused++;
				if (refused % 200 == 0)
					break;
				continue;
			}
			assert_int_equal(rc, RING_OK);
			accepted++;
		}
		assert_int_equal(ring_commit(r, &last), 0);
		ring_stat(r, &st);
		assert_int_equal(st.refused, refused);
		/* nothing overwritten: every record since the cursor is
		 * intact, in order */
		assert_int_equal(check_all(r, 700, 9), st.records);
		assert_true(st.used_bytes > st.data_bytes - 2 * 4096);
		/* deliver half; the space is then reused */
		assert_int_equal(ring_ack(r, "dash",
		                          st.oldest_seq + st.records / 2), 0);
	}
	ring_stat(r, &st);
	assert_true(st.newest_seq > 3 * 32768 / 700);  /* several laps */
	/* restart: stale records from earlier laps are never accepted */
	assert_int_equal(ring_close(r), 0);
	memdisk_powercut(d, NULL);
	r = open_ok(d, SMALL);
	ring_stat(r, &st);
	assert_int_equal(st.newest_seq, last);
	assert_int_equal(check_all(r, 700, 9), st.records);
	printf("ring T10: accepted %llu, refused %llu, overwritten 0, "
	       "stale-lap records returned 0\n", (unsigned long long)accepted,
	       (unsigned long long)refused);
	assert_int_equal(ring_close(r), 0);
	memdisk_free(d);
	(void)state;
}

/* With no output at all nothing is freed: the ring fills and refuses;
 * the first output added then gets everything. */
static void test_no_outputs_keeps_all(void **state)
{
	static const char *const outs[1] = { "late" };
	struct memdisk *d = memdisk_new(0, 6);
	struct ring *r = open_ok(d, SMALL);
	unsigned char b[400];
	struct ring_stat st;
	uint64_t cur, last;
	enum ring_rc rc;

	memset(b, 1, sizeof b);
	do {
		rc = ring_append(r, b, sizeof b);
		if (rc == RING_BATCH_FULL)
			assert_int_equal(ring_commit(r, &last), 0);
	} while (rc != RING_FULL);
	assert_int_equal(ring_commit(r, &last), 0);
	assert_int_equal(ring_outputs(r, outs, 1), 0);
	assert_int_equal(ring_cursor_get(r, "late", &cur), 0);
	assert_int_equal(cur, 0);
	ring_stat(r, &st);
	assert_int_equal(st.outputs[0].unsent, last);
	assert_int_equal(ring_close(r), 0);
	memdisk_free(d);
	(void)state;
}

/* ---- T1: torn last write at every byte offset ---- */

/* A golden image: a ring that wrapped at least twice, then one more
 * batch written but not synced (power cut pending). */
static struct memdisk *golden(int wrap_batch, uint64_t *durable_last,
                              uint64_t *batch_first, uint64_t *batch_n)
{
	static const char *const outs[1] = { "dash" };
	struct memdisk *d = memdisk_new(0, 7);
	struct ring *r = open_ok(d, SMALL);
	unsigned char b[RING_PAYLOAD_MAX];
	struct ring_stat st;
	uint64_t last = 0, i;
	size_t len;

	assert_int_equal(ring_outputs(r, outs, 1), 0);
	for (i = 0; i < 200; i++) {
		last = fill(r, 1, 300, 1, 3);
		if (last > 20)
			assert_int_equal(ring_ack(r, "dash", last - 20), 0);
	}
	/* place the head so that the batch crosses the end (or not) */
	for (;;) {
		uint64_t sum = 0;

		ring_stat(r, &st);
		for (i = 0; i < 8; i++)
			sum += (24 + pay(st.next_seq + i, 3, b, 300) + 7) & ~7u;
		if ((st.head_off + sum > SMALL) == (wrap_batch != 0))
			break;
		last = fill(r, 1, 300, 1, 3);
		assert_int_equal(ring_ack(r, "dash", last - 20), 0);
	}
	*durable_last = last;
	ring_stat(r, &st);
	*batch_first = st.next_seq;
	*batch_n = 8;
	for (i = 0; i < *batch_n; i++) {
		len = pay(*batch_first + i, 3, b, 300);
		assert_int_equal(ring_append(r, b, len), RING_OK);
	}
	/* write without the sync: cut right at the fdatasync */
	memdisk_set_cut(d, 1 + (wrap_batch ? 2u : 1u), MEMDISK_MUTATING);
	assert_int_equal(ring_commit(r, &last), -1);
	assert_true(memdisk_dead(d));
	(void)ring_close(r);
	return d;
}

static void test_torn_tail_sweep(void **state)
{
	static const int fills[3] = { -1, 0x00, -2 };
	uint64_t offsets = 0, mism = 0, worst_us = 0, dl, bf, bn, w, np, k;
	size_t len;
	int f, wb;

	for (wb = 0; wb < 2; wb++) {
		struct memdisk *g = golden(wb, &dl, &bf, &bn);

		np = memdisk_pending(g, PATH);
		assert_true(np >= 1);
		for (w = 0; w < np; w++) {
			uint64_t off;

			assert_int_equal(memdisk_pending_write(g, PATH, w,
			                                       &off, &len), 0);
			for (k = 0; k <= len; k++) {
				for (f = 0; f < 3; f++) {
					struct memdisk *d = memdisk_clone(g);
					struct ring *r;
					struct ring_stat st;
					uint64_t n;

					assert_int_equal(memdisk_cut_torn(d,
					    PATH, (long)w, (size_t)k, fills[f]),
					    0);
					r = open_ok(d, SMALL);
					ring_stat(r, &st);
					if (st.recovery_us > worst_us)
						worst_us = st.recovery_us;
					/* a prefix in seq order, all intact */
					n = check_all(r, 300, 3);
					if (st.newest_seq < dl ||
					    st.newest_seq > bf + bn - 1 ||
					    n != st.records)
						mism++;
					/* and the next append works */
					(void)fill(r, 1, 300, 1, 3);
					assert_int_equal(ring_close(r), 0);
					memdisk_free(d);
					offsets++;
				}
			}
		}
		memdisk_free(g);
	}
	printf("ring T1: %llu offsets x fills tested, mismatches %llu, worst "
	       "recovery %llu us\n", (unsigned long long)offsets,
	       (unsigned long long)mism, (unsigned long long)worst_us);
	assert_int_equal(mism, 0);
	(void)state;
}

/* The exact expectation for torn writes: record i of the batch survives
 * iff all its header and payload bytes reached the medium. */
static void test_torn_exact(void **state)
{
	static const int fills[3] = { -1, 0x00, -2 };
	uint64_t dl, bf, bn, off, k, i, want, pos = 0, cases = 0;
	struct memdisk *g = golden(0, &dl, &bf, &bn);
	unsigned char b[RING_PAYLOAD_MAX], intended[4096], image[4096];
	uint64_t start[8], ends[8];
	size_t len, rl;
	int f;

	assert_int_equal(memdisk_pending(g, PATH), 1);
	assert_int_equal(memdisk_pending_write(g, PATH, 0, &off, &len), 0);
	assert_true(len <= sizeof intended);
	assert_int_equal(memdisk_peek(g, PATH, off, intended, len), 0);
	for (i = 0; i < bn; i++) {
		rl = pay(bf + i, 3, b, 300);
		start[i] = pos;
		ends[i] = pos + 24 + rl;        /* bytes covered by the CRC */
		pos += (24 + rl + 7) & ~(uint64_t)7;
	}
	assert_int_equal(pos, len);
	for (k = 0; k <= len; k++) {
		for (f = 0; f < 3; f++) {
			struct memdisk *d = memdisk_clone(g);
			struct ring *r;
			struct ring_stat st;

			assert_int_equal(memdisk_cut_torn(d, PATH, 0, (size_t)k,
			                                  fills[f]), 0);
			assert_int_equal(memdisk_peek(d, PATH, off, image, len),
			                 0);
			/* record i must survive iff every byte it has under
			 * the CRC is the intended one */
			for (want = 0; want < bn; want++)
				if (memcmp(image + start[want],
				           intended + start[want],
				           ends[want] - start[want]) != 0)
					break;
			r = open_ok(d, SMALL);
			ring_stat(r, &st);
			assert_int_equal(st.newest_seq, dl + want);
			assert_int_equal(ring_close(r), 0);
			memdisk_free(d);
			cases++;
		}
	}
	printf("ring T1: exact survivors checked at %llu (offset, fill) "
	       "pairs\n", (unsigned long long)cases);
	memdisk_free(g);
	(void)state;
}

/* A torn batch whose first record is garbage but whose second record
 * reached the medium whole: after recovery a new record of the same size
 * lands where the first one was, and the old second record would chain
 * onto it (same lap, next seq, good CRC) as a phantom.  Recovery must
 * have zeroed it first. */
static void test_no_phantom_after_torn_batch(void **state)
{
	static const char *const outs[1] = { "dash" };
	uint64_t n, len_a, cut, last;
	struct memdisk *d;
	struct ring *r;
	struct ring_stat st;
	unsigned char a[100], bb[100], junk[8] = "garbage";

	for (cut = 1; cut <= 2; cut++) {
		d = memdisk_new(0, 20 + cut);
		r = open_ok(d, SMALL);
		assert_int_equal(ring_outputs(r, outs, 1), 0);
		(void)fill(r, 10, 100, 5, 1);
		ring_stat(r, &st);
		n = st.next_seq;
		memset(a, 'A', sizeof a);
		memset(bb, 'B', sizeof bb);
		len_a = sizeof a;
		assert_int_equal(ring_append(r, a, (size_t)len_a), RING_OK);
		assert_int_equal(ring_append(r, bb, sizeof bb), RING_OK);
		/* cut at the sync (1) or after it failed to start (2) */
		memdisk_set_cut(d, cut == 1 ? 2 : 1, MEMDISK_MUTATING);
		assert_int_equal(ring_commit(r, &last), -1);
		(void)ring_close(r);
		/* whole batch reached the medium, then A's header garbled */
		assert_int_equal(memdisk_cut_torn(d, PATH, -1,
		                                  cut == 1 ? 256 : 0, -1), 0);
		if (cut == 1)
			assert_int_equal(memdisk_poke(d, PATH, st.head_off,
			                              junk, sizeof junk), 0);
		r = open_ok(d, SMALL);
		ring_stat(r, &st);
		assert_int_equal(st.next_seq, n);
		memset(a, 'C', sizeof a);
		assert_int_equal(ring_append(r, a, (size_t)len_a), RING_OK);
		assert_int_equal(ring_commit(r, &last), 0);
		assert_int_equal(last, n);
		assert_int_equal(ring_close(r), 0);
		memdisk_powercut(d, NULL);
		r = open_ok(d, SMALL);
		ring_stat(r, &st);
		/* only the new record: the old 'B' never comes back */
		assert_int_equal(st.newest_seq, n);
		assert_int_equal(ring_close(r), 0);
		memdisk_free(d);
	}
	(void)state;
}

/* Durable records damaged in place (the medium, not a crash): recovery
 * stops there and reports the loss, and the seqs the header vouched for
 * are never handed out again (a GAP record says where seqs resume). */
static void test_damage_never_reuses_seqs(void **state)
{
	struct memdisk *d = memdisk_new(0, 31);
	struct ring *r = open_ok(d, SMALL);
	struct ring_stat st;
	struct ring_verify_report rep;
	unsigned char b[RING_PAYLOAD_MAX], junk[4] = { 1, 2, 3, 4 };
	uint64_t off5 = 0, last, s;
	size_t len;

	for (s = 1; s <= 10; s++) {
		if (s == 5) {
			ring_stat(r, &st);
			off5 = st.head_off;
		}
		(void)fill(r, 1, 100, 1, 8);
	}
	assert_int_equal(ring_close(r), 0);   /* header: next_seq 11 */
	assert_int_equal(memdisk_poke(d, PATH, off5 + 30, junk, 4), 0);
	r = open_ok(d, SMALL);
	ring_stat(r, &st);
	assert_int_equal(st.newest_seq, 4);
	assert_int_equal(st.recovered_lost, 6);
	assert_int_equal(st.next_seq, 11);
	len = pay(11, 8, b, 100);
	assert_int_equal(ring_append(r, b, len), RING_OK);
	assert_int_equal(ring_commit(r, &last), 0);
	assert_int_equal(last, 11);
	assert_int_equal(ring_close(r), 0);
	r = open_ok(d, SMALL);
	ring_stat(r, &st);
	assert_int_equal(st.newest_seq, 11);
	assert_int_equal(st.recovered_lost, 0);
	for (s = 1; s <= 11; s++)
		assert_int_equal(ring_read(r, s, b, sizeof b, &len) == 0,
		                 s <= 4 || s == 11);
	assert_int_equal(ring_verify(r, &rep), 0);
	assert_int_equal(rep.records, 5);
	assert_int_equal(ring_close(r), 0);
	memdisk_free(d);
	(void)state;
}

/* ---- T2: bit flips and trashed sectors ---- */

/* Every 5th kept record, walking the documented layout from the tail:
 * offsets and covered sizes (header + payload) of five of them. */
static void samples(struct memdisk *d, uint64_t *off, size_t *nrec)
{
	struct ring *r = open_ok(d, SMALL);
	struct ring_stat st;
	unsigned char h[24];
	uint64_t p, s, i, len;

	ring_stat(r, &st);
	assert_int_equal(ring_close(r), 0);
	p = st.tail_off;
	for (s = 0, i = 0; i < 5; s++) {
		assert_int_equal(memdisk_peek(d, PATH, p, h, 24), 0);
		assert_memory_equal(h, "TPRC", 4);
		if (h[4] == 2) {
			p = DSTART;
			continue;
		}
		len = (uint64_t)(h[6] | h[7] << 8);
		if (s % 5 == 0) {
			off[i] = p;
			nrec[i++] = 24u + (size_t)len;
		}
		p += (24u + len + 7) & ~7u;
		if (SMALL - p < 24)
			p = DSTART;
	}
}

static void test_bit_flips_records(void **state)
{
	uint64_t dl, bf, bn, flips = 0, accepted = 0, s, i;
	struct memdisk *g = golden(0, &dl, &bf, &bn);
	struct memdisk *base;
	struct ring *r;
	struct ring_stat st;
	unsigned char byte;
	uint64_t off[6];
	size_t nrec[6];
	int bit;

	/* settle the golden batch, then find 5 sample records */
	memdisk_powercut(g, &(struct memdisk_cutmix){ 100, 0, 0 });
	r = open_ok(g, SMALL);
	assert_int_equal(ring_close(r), 0);
	base = g;
	samples(base, off, nrec);
	for (i = 0; i < 5; i++) {
		for (s = 0; s < nrec[i] * 8; s++) {
			struct memdisk *d = memdisk_clone(base);
			unsigned char rec[RING_PAYLOAD_MAX + 24];
			unsigned char got[RING_PAYLOAD_MAX];
			struct ring_iter it;
			uint64_t seq;
			size_t len;
			int k;

			bit = (int)(s % 8);
			assert_int_equal(memdisk_peek(d, PATH, off[i] + s / 8,
			                              &byte, 1), 0);
			byte ^= (unsigned char)(1u << bit);
			assert_int_equal(memdisk_poke(d, PATH, off[i] + s / 8,
			                              &byte, 1), 0);
			assert_int_equal(memdisk_peek(d, PATH, off[i], rec,
			                              nrec[i]), 0);
			r = open_ok(d, SMALL);
			ring_stat(r, &st);
			ring_iter_init(&it, st.oldest_seq - 1);
			/* no record returned may carry the damaged bytes */
			while ((k = ring_iter_next(r, &it, got, sizeof got,
			                           &len, &seq)) > 0) {
				unsigned char w[RING_PAYLOAD_MAX];

				if (len != pay(seq, 3, w, 300) ||
				    memcmp(got, w, len) != 0)
					accepted++;
			}
			assert_int_equal(ring_close(r), 0);
			memdisk_free(d);
			flips++;
		}
	}
	printf("ring T2: %llu bit flips in 5 records, flips accepted %llu\n",
	       (unsigned long long)flips, (unsigned long long)accepted);
	assert_int_equal(accepted, 0);
	memdisk_free(base);
	(void)state;
}

static void test_trashed_sectors(void **state)
{
	static const int fills[3] = { 0x00, 0xff, -2 };
	uint64_t dl, bf, bn, sec, trials = 0, bad = 0, maxlost = 0;
	struct memdisk *g = golden(0, &dl, &bf, &bn);
	unsigned char junk[512];
	struct ring *r;
	struct ring_stat st0, st;
	int f;
	size_t i;

	memdisk_powercut(g, &(struct memdisk_cutmix){ 100, 0, 0 });
	r = open_ok(g, SMALL);
	ring_stat(r, &st0);
	assert_int_equal(ring_close(r), 0);
	for (sec = DSTART / 512; sec < SMALL / 512; sec++) {
		for (f = 0; f < 3; f++) {
			struct memdisk *d = memdisk_clone(g);

			for (i = 0; i < sizeof junk; i++)
				junk[i] = f == 2 ? (unsigned char)mix64(sec * 512
				                                        + i)
				                 : (unsigned char)fills[f];
			assert_int_equal(memdisk_poke(d, PATH, sec * 512, junk,
			                              sizeof junk), 0);
			r = open_ok(d, SMALL);
			ring_stat(r, &st);
			/* whatever is returned is intact and in order */
			if (check_all(r, 300, 3) != st.records)
				bad++;
			if (st0.newest_seq - st.newest_seq > maxlost)
				maxlost = st0.newest_seq - st.newest_seq;
			assert_int_equal(ring_close(r), 0);
			memdisk_free(d);
			trials++;
		}
	}
	printf("ring T2: %llu trashed sectors, damaged accepted %llu, "
	       "records lost at most %llu (recovery stops at the damage)\n",
	       (unsigned long long)trials, (unsigned long long)bad,
	       (unsigned long long)maxlost);
	assert_int_equal(bad, 0);
	memdisk_free(g);
	(void)state;
}

/* ---- T3: the two header slots ---- */

/* A ring whose slots hold gen g (cursor 12) and g-1 (cursor 8). */
static struct memdisk *two_slots(uint64_t *gen)
{
	static const char *const outs[1] = { "dash" };
	struct memdisk *d = memdisk_new(0, 8);
	struct ring *r = open_ok(d, SMALL);
	struct ring_stat st;

	assert_int_equal(ring_outputs(r, outs, 1), 0);
	(void)fill(r, 20, 100, 5, 4);
	assert_int_equal(ring_ack(r, "dash", 8), 0);
	assert_int_equal(ring_ack(r, "dash", 12), 0);
	ring_stat(r, &st);
	*gen = st.generation;
	/* leave without the closing header: slots stay g and g-1 */
	memdisk_set_cut(d, 1, MEMDISK_MUTATING);
	(void)ring_close(r);
	memdisk_powercut(d, &(struct memdisk_cutmix){ 0, 100, 0 });
	return d;
}

static void test_header_slot_flips(void **state)
{
	uint64_t gen, bitn, ok = 0, total = 0, cur;
	struct memdisk *g = two_slots(&gen);
	unsigned char b, s0[16], s1[16];
	uint64_t g0 = 0, g1 = 0;
	int slot, newest, i;

	/* which slot holds the newest generation (little-endian at 8) */
	assert_int_equal(memdisk_peek(g, PATH, 0, s0, 16), 0);
	assert_int_equal(memdisk_peek(g, PATH, 4096, s1, 16), 0);
	for (i = 7; i >= 0; i--) {
		g0 = g0 << 8 | s0[8 + i];
		g1 = g1 << 8 | s1[8 + i];
	}
	newest = g1 > g0;
	assert_int_equal(g1 > g0 ? g1 : g0, gen);
	for (slot = 0; slot < 2; slot++) {
		for (bitn = 0; bitn < 404 * 8; bitn++) {
			struct memdisk *d = memdisk_clone(g);
			struct ring *r;
			uint64_t at = (uint64_t)slot * 4096 + bitn / 8;

			assert_int_equal(memdisk_peek(d, PATH, at, &b, 1), 0);
			b ^= (unsigned char)(1u << (bitn % 8));
			assert_int_equal(memdisk_poke(d, PATH, at, &b, 1), 0);
			r = open_ok(d, SMALL);
			assert_int_equal(ring_cursor_get(r, "dash", &cur), 0);
			/* damage to the newest falls back to the older one */
			ok += cur == (slot == newest ? 8u : 12u);
			assert_int_equal(check_all(r, 100, 4), 20 - cur);
			assert_int_equal(ring_close(r), 0);
			memdisk_free(d);
			total++;
		}
	}
	printf("ring T3: %llu header-slot bit flips, right slot chosen %llu\n",
	       (unsigned long long)total, (unsigned long long)ok);
	assert_int_equal(ok, total);
	memdisk_free(g);
	(void)state;
}

static void test_both_slots_bad(void **state)
{
	uint64_t gen;
	struct memdisk *d = two_slots(&gen);
	struct ring *r = NULL;
	unsigned char z[404], before[512], after[512];
	char err[256];

	memset(z, 0, sizeof z);
	assert_int_equal(memdisk_poke(d, PATH, 0, z, sizeof z), 0);
	z[0] = 'X';
	assert_int_equal(memdisk_poke(d, PATH, 4096, z, sizeof z), 0);
	assert_int_equal(memdisk_peek(d, PATH, DSTART, before, 512), 0);
	assert_int_equal(ring_open(PATH, SMALL, memdisk_ops(d), &r, err,
	                           sizeof err), -1);
	assert_null(r);
	assert_int_equal(errno, EBADMSG);
	assert_non_null(strstr(err, "both header slots are invalid"));
	assert_non_null(strstr(err, "refusing to start over"));
	/* and nothing was re-initialised */
	assert_int_equal(memdisk_peek(d, PATH, DSTART, after, 512), 0);
	assert_memory_equal(before, after, 512);
	assert_int_equal(memdisk_open_fds(d), 0);
	memdisk_free(d);
	(void)state;
}

/* Power cut at every write and sync of an ack's header update. */
static void test_header_update_cuts(void **state)
{
	static const char *const outs[1] = { "dash" };
	uint64_t k, v, cur, cases = 0, backwards = 0;

	for (k = 1; k <= 2; k++) {
		for (v = 0; v < 40; v++) {
			struct memdisk *d = memdisk_new(0, 100 + v);
			struct ring *r = open_ok(d, SMALL);

			assert_int_equal(ring_outputs(r, outs, 1), 0);
			(void)fill(r, 10, 80, 10, 5);
			assert_int_equal(ring_ack(r, "dash", 4), 0);
			memdisk_set_cut(d, k, MEMDISK_MUTATING);
			assert_int_equal(ring_ack(r, "dash", 9), -1);
			(void)ring_close(r);
			memdisk_powercut(d, NULL);
			r = open_ok(d, SMALL);
			assert_int_equal(ring_cursor_get(r, "dash", &cur), 0);
			/* durable 4, requested 9: either, nothing else */
			backwards += cur != 4 && cur != 9;
			assert_int_equal(check_all(r, 80, 5), 10 - cur);
			assert_int_equal(ring_close(r), 0);
			memdisk_free(d);
			cases++;
		}
	}
	printf("ring T3: %llu cuts in header updates, wrong cursor %llu\n",
	       (unsigned long long)cases, (unsigned long long)backwards);
	assert_int_equal(backwards, 0);
	(void)state;
}

/* ---- creation ---- */

static void test_create_no_space(void **state)
{
	struct memdisk *d = memdisk_new(SMALL - 4096, 9);
	struct ring *r = NULL;
	char err[256];

	assert_int_equal(ring_open(PATH, SMALL, memdisk_ops(d), &r, err,
	                           sizeof err), -1);
	assert_int_equal(errno, ENOSPC);
	assert_non_null(strstr(err, "needs 40960 bytes"));
	assert_false(memdisk_exists(d, PATH));
	assert_false(memdisk_exists(d, PATH ".tmp"));
	memdisk_free(d);
	(void)state;
}

/* Power cut at every mutating call of the creation: the next open
 * makes a sound ring, never half of one. */
static void test_create_cuts(void **state)
{
	uint64_t k, calls;
	int rc, dead;
	struct memdisk *d = memdisk_new(0, 10);
	struct ring *r = open_ok(d, SMALL);

	assert_int_equal(ring_close(r), 0);
	calls = memdisk_calls(d, MEMDISK_MUTATING);
	memdisk_free(d);
	for (k = 1; k <= calls; k++) {
		struct ring_verify_report rep;

		d = memdisk_new(0, k);
		memdisk_set_cut(d, k, MEMDISK_MUTATING);
		rc = ring_open(PATH, SMALL, memdisk_ops(d), &r, NULL, 0);
		dead = memdisk_dead(d);
		/* it fails only when the power did */
		assert_int_equal(rc == 0 || dead, 1);
		(void)ring_close(r);
		memdisk_powercut(d, NULL);
		r = open_ok(d, SMALL);
		assert_int_equal(ring_verify(r, &rep), 0);
		(void)fill(r, 3, 50, 3, 0);
		assert_int_equal(ring_close(r), 0);
		memdisk_free(d);
	}
	(void)state;
}

static void test_lock(void **state)
{
	struct memdisk *d = memdisk_new(0, 11);
	struct ring *a = open_ok(d, SMALL), *b = NULL;
	char err[256];

	assert_int_equal(ring_open(PATH, SMALL, memdisk_ops(d), &b, err,
	                           sizeof err), -1);
	assert_non_null(strstr(err, "in use by another process"));
	assert_int_equal(ring_close(a), 0);
	memdisk_free(d);
	(void)state;
}

/* ---- real files ---- */

static void test_posix_file(void **state)
{
	char dir[] = "/tmp/tp-ring-XXXXXX", path[64], tmp[80];
	struct ring *r = NULL;
	struct ring_verify_report rep;
	char err[256];
	uint64_t last;

	assert_non_null(mkdtemp(dir));
	snprintf(path, sizeof path, "%s/ring", dir);
	snprintf(tmp, sizeof tmp, "%s.tmp", path);
	/* far more than any disk here: refused at once, nothing left */
	assert_int_equal(ring_open(path, 1ull << 40, NULL, &r, err,
	                           sizeof err), -1);
	assert_int_equal(errno, ENOSPC);
	assert_int_equal(access(path, F_OK), -1);
	assert_int_equal(access(tmp, F_OK), -1);
	assert_int_equal(ring_open(path, 65536, NULL, &r, err, sizeof err),
	                 0);
	last = fill(r, 50, 500, 10, 6);
	assert_int_equal(last, 50);
	assert_int_equal(ring_close(r), 0);
	assert_int_equal(access(tmp, F_OK), -1);
	assert_int_equal(ring_open(path, 0, NULL, &r, err, sizeof err), 0);
	assert_int_equal(check_all(r, 500, 6), 50);
	assert_int_equal(ring_verify(r, &rep), 0);
	assert_int_equal(rep.records, 50);
	assert_int_equal(ring_close(r), 0);
	assert_int_equal(unlink(path), 0);
	assert_int_equal(rmdir(dir), 0);
	(void)state;
}

/* Recovery time of a full 16 MiB ring (memdisk; RING_POSIX_DIR=dir
 * measures a real file there instead). */
static void test_recovery_16mib(void **state)
{
	static const char *const outs[1] = { "dash" };
	const char *dir = getenv("RING_POSIX_DIR");
	struct memdisk *d = NULL;
	const struct ringio_ops *ops = NULL;
	char path[256], err[256];
	struct ring *r;
	struct ring_stat st;
	unsigned char b[200];
	uint64_t last;
	enum ring_rc rc;

	if (dir != NULL)
		snprintf(path, sizeof path, "%s/ring16", dir);
	else
		snprintf(path, sizeof path, "%s", PATH);
	if (dir == NULL) {
		d = memdisk_new(0, 12);
		ops = memdisk_ops(d);
	}
	assert_int_equal(ring_open(path, 16u << 20, ops, &r, err, sizeof err),
	                 0);
	assert_int_equal(ring_outputs(r, outs, 1), 0);
	memset(b, 0x5a, sizeof b);
	do {
		rc = ring_append(r, b, sizeof b);
		if (rc == RING_BATCH_FULL)
			assert_int_equal(ring_commit(r, &last), 0);
	} while (rc != RING_FULL);
	assert_int_equal(ring_commit(r, &last), 0);
	/* leave without a closing header: the worst case re-check */
	if (d != NULL) {
		memdisk_set_cut(d, 1, MEMDISK_MUTATING);
		(void)ring_close(r);
		memdisk_powercut(d, &(struct memdisk_cutmix){ 0, 100, 0 });
	} else {
		assert_int_equal(ring_close(r), 0);
	}
	assert_int_equal(ring_open(path, 16u << 20, ops, &r, err, sizeof err),
	                 0);
	ring_stat(r, &st);
	assert_int_equal(st.newest_seq, last);
	printf("ring: recovery of a full 16 MiB ring (%llu records, %s): "
	       "%.1f ms\n", (unsigned long long)st.records,
	       dir ? "real file" : "memdisk", st.recovery_us / 1000.0);
	assert_int_equal(ring_close(r), 0);
	if (dir != NULL)
		assert_int_equal(unlink(path), 0);
	memdisk_free(d);
	(void)state;
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_crc_catalogue),
		cmocka_unit_test(test_format_by_hand),
		cmocka_unit_test(test_validity_rules),
		cmocka_unit_test(test_open_cases),
		cmocka_unit_test(test_roundtrip_and_restart),
		cmocka_unit_test(test_ack_cases),
		cmocka_unit_test(test_outputs),
		cmocka_unit_test(test_full_and_laps),
		cmocka_unit_test(test_no_outputs_keeps_all),
		cmocka_unit_test(test_torn_tail_sweep),
		cmocka_unit_test(test_torn_exact),
		cmocka_unit_test(test_no_phantom_after_torn_batch),
		cmocka_unit_test(test_damage_never_reuses_seqs),
		cmocka_unit_test(test_bit_flips_records),
		cmocka_unit_test(test_trashed_sectors),
		cmocka_unit_test(test_header_slot_flips),
		cmocka_unit_test(test_both_slots_bad),
		cmocka_unit_test(test_header_update_cuts),
		cmocka_unit_test(test_create_no_space),
		cmocka_unit_test(test_create_cuts),
		cmocka_unit_test(test_lock),
		cmocka_unit_test(test_posix_file),
		cmocka_unit_test(test_recovery_16mib),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
