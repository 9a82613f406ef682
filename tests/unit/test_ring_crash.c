/*
 * test_ring_crash.c - the ring under simulated power cuts and injected
 * I/O faults (RELIABILITY.md T4 and T7), on the memdisk of ringio.h.
 *
 * T4: a scripted workload (appends in batches, commits, acks by three
 * outputs, clean restarts, an output removed and added back) runs over
 * several "lives"; each life but the last is ended by a power cut at a
 * random mutating call, keeping a random subset of unsynced writes (some
 * torn, some garbled).  After every recovery an oracle checks: every
 * record reported accepted and not yet freed is there with its payload;
 * every record there is one that was staged (no phantom, no older try);
 * seqs are never reused; each cursor lies between the last durable ack
 * and the last requested one.  Seeds: RING_SEEDS (default 2000) from
 * RING_SEED0 (default 1); each failing seed is printed.  The mutation
 * check runs the same seeds with ring_test_ack_before_sync set and must
 * see failures.
 *
 * T7: the same kind of workload (short, fixed) with the N-th I/O call
 * failing, for every N, in eight modes (EIO/ENOSPC once and persistent,
 * EINTR bursts, short transfers once and persistent).
 *
 * All data is invented by a seeded generator.
 */
#include <errno.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <cmocka.h>

#include "ring.h"
#include "ringio.h"

#define PATH "/st/ring"
#define RSIZE 49152u
#define MAXSEQ 4096
#define NOUT 3
#define PMAX 1200

static const char *const out_names[NOUT] = { "alpha", "bravo", "charlie" };
static int trace;                   /* RING_TRACE=1: print each step */

#define TRACE(...) do { if (trace) printf(__VA_ARGS__); } while (0)

struct rng {
	uint64_t s;
};

static uint64_t next(struct rng *g)
{
	/* splitmix64 (Steele, Lea, Flood, OOPSLA 2014) */
	uint64_t z = (g->s += 0x9e3779b97f4a7c15ull);

	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
	z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
	return z ^ (z >> 31);
}

static uint64_t below(struct rng *g, uint64_t n)
{
	return n ? next(g) % n : 0;
}

/* The payload staged for (seq, tag): invented bytes. */
static void payload(uint64_t seq, uint32_t tag, size_t len,
                    unsigned char *b)
{
	struct rng g = { seq * 1000003u + tag };
	size_t i;

	for (i = 0; i < len; i++)
		b[i] = (unsigned char)next(&g);
}

struct oracle {
	uint32_t tag[MAXSEQ];       /* 0: nothing valid staged */
	uint16_t len[MAXSEQ];
	unsigned char accepted[MAXSEQ];
	uint64_t max_accepted;
	uint64_t ack_req[NOUT], ack_dur[NOUT];
	int has[NOUT];              /* output known to be in the ring */
	uint32_t next_tag;
	uint64_t mismatches;
	int quiet;
};

static void bad(struct oracle *o, uint64_t seed, const char *fmt, ...)
	__attribute__((format(printf, 3, 4)));

static void bad(struct oracle *o, uint64_t seed, const char *fmt, ...)
{
	va_list ap;

	if (o->mismatches++ == 0 && !o->quiet) {
		printf("  seed %llu: ", (unsigned long long)seed);
		va_start(ap, fmt);
		vprintf(fmt, ap);
		va_end(ap);
		printf("\n");
	}
}

/* Every kept record is one that was staged, with its bytes; every
 * accepted record not freed is there. */
static void check_records(struct ring *r, struct oracle *o, uint64_t seed,
                          const struct ring_stat *st)
{
	unsigned char buf[RING_PAYLOAD_MAX], want[RING_PAYLOAD_MAX];
	struct ring_iter it;
	uint64_t seq, expect = st->oldest_seq;
	size_t len;
	int k;

	ring_iter_init(&it, st->oldest_seq - 1);
	while ((k = ring_iter_next(r, &it, buf, sizeof buf, &len, &seq)) > 0) {
		if (seq >= MAXSEQ || o->tag[seq] == 0 || o->len[seq] != len) {
			bad(o, seed, "phantom record seq %llu",
			    (unsigned long long)seq);
			continue;
		}
		payload(seq, o->tag[seq], len, want);
		if (memcmp(buf, want, len) != 0)
			bad(o, seed, "seq %llu has other bytes",
			    (unsigned long long)seq);
		for (; expect < seq; expect++)
			if (o->accepted[expect])
				bad(o, seed, "accepted seq %llu lost",
				    (unsigned long long)expect);
		expect = seq + 1;
		o->accepted[seq] = 1;   /* found and now synced by open */
		if (seq > o->max_accepted)
			o->max_accepted = seq;
	}
	if (k < 0)
		bad(o, seed, "reading failed: %s", strerror(errno));
	for (; expect <= o->max_accepted; expect++)
		if (o->accepted[expect])
			bad(o, seed, "accepted seq %llu missing at the end",
			    (unsigned long long)expect);
}

/* Each cursor lies in [last durable ack, last requested ack], and no
 * record an output still needed was freed. */
static void check_cursor(struct oracle *o, uint64_t seed, size_t j,
                         uint64_t s, uint64_t oldest)
{
	uint64_t seq;

	if (s < o->ack_dur[j] || s > o->ack_req[j])
		bad(o, seed, "cursor %s at %llu outside [%llu, %llu]",
		    out_names[j], (unsigned long long)s,
		    (unsigned long long)o->ack_dur[j],
		    (unsigned long long)o->ack_req[j]);
	for (seq = s + 1; seq < oldest && seq <= o->max_accepted; seq++)
		if (o->accepted[seq])
			bad(o, seed, "freed seq %llu that %s never acked",
			    (unsigned long long)seq, out_names[j]);
	o->ack_dur[j] = o->ack_req[j] = s;
	o->has[j] = 1;
}

/* After a successful open: compare the ring with what was promised. */
static void check_ring(struct ring *r, struct oracle *o, uint64_t seed)
{
	struct ring_stat st;
	uint64_t s;
	size_t i, j;

	ring_stat(r, &st);
	if (st.next_seq <= o->max_accepted)
		bad(o, seed, "next_seq %llu reuses accepted seq %llu",
		    (unsigned long long)st.next_seq,
		    (unsigned long long)o->max_accepted);
	/* staged tries the ring no longer has can never come back */
	for (s = st.next_seq; s < MAXSEQ; s++)
		o->tag[s] = 0;
	check_records(r, o, seed, &st);
	for (j = 0; j < NOUT; j++)
		o->has[j] = 0;
	for (i = 0; i < st.n_outputs; i++) {
		for (j = 0; j < NOUT; j++)
			if (strcmp(st.outputs[i].name, out_names[j]) == 0)
				break;
		if (j < NOUT)
			check_cursor(o, seed, j, st.outputs[i].acked,
			             st.oldest_seq);
	}
}

/* One batch: stage 1..8 records, commit.  -1 once the ring errs. */
static int do_batch(struct ring *r, struct oracle *o, struct rng *g)
{
	unsigned char buf[PMAX];
	uint64_t first, last, s;
	size_t n = 1 + below(g, 8), i, len;
	struct ring_stat st;
	enum ring_rc rc;

	ring_stat(r, &st);
	first = st.next_seq;
	for (i = 0; i < n && first + i + 1 < MAXSEQ; i++) {
		len = below(g, 8) == 0 ? 1 + below(g, PMAX) : 1 + below(g, 160);
		o->tag[first + i] = ++o->next_tag;
		o->len[first + i] = (uint16_t)len;
		payload(first + i, o->tag[first + i], len, buf);
		rc = ring_append(r, buf, len);
		if (rc == RING_ERR)
			return -1;
		if (rc != RING_OK) {
			o->tag[first + i] = 0;
			break;
		}
	}
	if (ring_commit(r, &last) != 0) {
		TRACE("   commit %llu.. failed\n", (unsigned long long)first);
		return -1;
	}
	TRACE("   commit %llu..%llu ok\n", (unsigned long long)first,
	      (unsigned long long)last);
	for (s = first; s <= last && s < MAXSEQ; s++) {
		o->accepted[s] = 1;
		if (s > o->max_accepted)
			o->max_accepted = s;
	}
	return 0;
}

static int do_ack(struct ring *r, struct oracle *o, struct rng *g)
{
	size_t j = below(g, NOUT);
	uint64_t cur, to;

	if (!o->has[j] || ring_cursor_get(r, out_names[j], &cur) != 0)
		return 0;
	if (o->max_accepted <= cur)
		return 0;
	/* bravo lags far behind now and then, so the ring fills up */
	if (j == 1 && below(g, 4) != 0)
		return 0;
	to = cur + 1 + below(g, o->max_accepted - cur);
	if (to > o->ack_req[j])
		o->ack_req[j] = to;
	if (ring_ack(r, out_names[j], to) != 0) {
		TRACE("   ack %s %llu failed\n", out_names[j],
		      (unsigned long long)to);
		return -1;
	}
	TRACE("   ack %s %llu ok\n", out_names[j], (unsigned long long)to);
	o->ack_dur[j] = to;
	return 0;
}

static int set_outputs(struct ring *r, struct oracle *o, struct rng *g)
{
	int with_c = below(g, 4) != 0, adding = with_c && !o->has[2];
	uint64_t cur;

	if (adding) {
		/* a new output may start anywhere until the add is durable */
		o->ack_dur[2] = 0;
		o->ack_req[2] = UINT64_MAX;
	}
	if (ring_outputs(r, out_names, with_c ? 3 : 2) != 0)
		return -1;
	if (adding && ring_cursor_get(r, out_names[2], &cur) == 0)
		o->ack_dur[2] = o->ack_req[2] = cur;
	o->has[2] = with_c;
	return 0;
}

/* Open, check, work; returns when the disk died, an error stopped the
 * life, or the script ended. */
static void life(struct memdisk *d, struct oracle *o, struct rng *g,
                 uint64_t seed, int steps)
{
	struct ring *r = NULL;
	struct ring_verify_report rep;
	char err[256];
	int i, rc = 0;

	if (ring_open(PATH, RSIZE, memdisk_ops(d), &r, err, sizeof err) != 0) {
		if (!memdisk_dead(d))
			bad(o, seed, "open failed: %s", err);
		return;
	}
	{
		struct ring_stat st;

		ring_stat(r, &st);
		TRACE(" open: newest %llu lost %llu oldest %llu next %llu "
		      "tail %llu head %llu gen %llu\n",
		      (unsigned long long)st.newest_seq,
		      (unsigned long long)st.recovered_lost,
		      (unsigned long long)st.oldest_seq,
		      (unsigned long long)st.next_seq,
		      (unsigned long long)st.tail_off,
		      (unsigned long long)st.head_off,
		      (unsigned long long)st.generation);
	}
	check_ring(r, o, seed);
	if (ring_verify(r, &rep) != 0 && !memdisk_dead(d))
		bad(o, seed, "verify: %s", rep.first);
	if (set_outputs(r, o, g) != 0)
		goto out;
	for (i = 0; i < steps && rc == 0; i++) {
		uint64_t what = below(g, 10);

		if (what < 6)
			rc = do_batch(r, o, g);
		else if (what < 9)
			rc = do_ack(r, o, g);
		else if (ring_close(r) != 0)
			return;
		else if (memdisk_open_fds(d) != 0)
			bad(o, seed, "fd leaked by ring_close");
		else if (ring_open(PATH, RSIZE, memdisk_ops(d), &r, err,
		                   sizeof err) != 0)
			return;
		else
			check_ring(r, o, seed);
	}
out:
	(void)ring_close(r);
}

#define CUT_RANGE 72                /* a life makes about 60-80 writes+syncs */
static unsigned char cut_hit[CUT_RANGE];

/* One seed: three lives, cuts in the first two.  Returns mismatches. */
static uint64_t run_seed(uint64_t seed, int quiet, uint64_t *cuts)
{
	struct memdisk *d = memdisk_new(0, seed * 7919u);
	struct oracle *o = calloc(1, sizeof *o);
	struct rng g = { seed };
	struct memdisk_cutmix mix;
	uint64_t m;
	int l;

	assert_non_null(d);
	assert_non_null(o);
	o->quiet = quiet;
	for (l = 0; l < 3; l++) {
		uint64_t at = 1 + below(&g, CUT_RANGE);

		if (l < 2)
			memdisk_set_cut(d, at, MEMDISK_MUTATING);
		life(d, o, &g, seed, 30);
		if (memdisk_dead(d)) {
			(*cuts)++;
			cut_hit[at - 1] = 1;
		}
		mix.apply_pct = (unsigned)below(&g, 70);
		mix.drop_pct = (unsigned)below(&g, 100 - mix.apply_pct);
		mix.torn_pct = (unsigned)below(&g, 100 - mix.apply_pct -
		                                  mix.drop_pct);
		memdisk_powercut(d, &mix);
	}
	life(d, o, &g, seed, 0);        /* recover once more and check */
	m = o->mismatches;
	free(o);
	memdisk_free(d);
	return m;
}

static uint64_t env_u64(const char *name, uint64_t def)
{
	const char *v = getenv(name);
	char *end;
	unsigned long long x;

	if (v == NULL || *v == '\0')
		return def;
	errno = 0;
	x = strtoull(v, &end, 10);
	return errno || *end ? def : (uint64_t)x;
}

/* T4: every seed must pass; the mutant must be caught. */
static void test_powercut_seeds(void **state)
{
	uint64_t seeds = env_u64("RING_SEEDS", 2000);
	uint64_t seed0 = env_u64("RING_SEED0", 1);

	trace = env_u64("RING_TRACE", 0) != 0;
	uint64_t s, bad_seeds = 0, mism = 0, cuts = 0, m, mcuts = 0;
	uint64_t caught = 0;
	clock_t t0 = clock();

	for (s = seed0; s < seed0 + seeds; s++) {
		m = run_seed(s, 0, &cuts);
		mism += m;
		bad_seeds += m != 0;
	}
	for (s = 0, m = 0; s < CUT_RANGE; s++)
		m += cut_hit[s];
	printf("ring T4: seeds %llu..%llu, power cuts %llu at %llu distinct "
	       "call indexes (1..%d), mismatches %llu, failing seeds %llu "
	       "(%.1f s)\n", (unsigned long long)seed0,
	       (unsigned long long)(seed0 + seeds - 1),
	       (unsigned long long)cuts, (unsigned long long)m, CUT_RANGE,
	       (unsigned long long)mism, (unsigned long long)bad_seeds,
	       (double)(clock() - t0) / CLOCKS_PER_SEC);
	assert_int_equal(mism, 0);

	ring_test_ack_before_sync = 1;     /* TEST-ONLY mutant */
	for (s = seed0; s < seed0 + seeds; s++)
		caught += run_seed(s, 1, &mcuts) != 0;
	ring_test_ack_before_sync = 0;
	printf("ring T4 mutant (ack before fdatasync): caught by %llu of "
	       "%llu seeds\n", (unsigned long long)caught,
	       (unsigned long long)seeds);
	assert_true(caught > 0);
	(void)state;
}

/* ---- T7: fault injection at every call ---- */

struct fmode {
	const char *name;
	int err;
	uint32_t count;
	int transparent;            /* the ring must hide it completely */
};

static const struct fmode fmodes[] = {
	/* a single I/O error: the ring fails, recovers, loses nothing */
	{ "EIO once", EIO, 1, 0 },
	/* the medium is gone: every call from N on fails */
	{ "EIO persistent", EIO, MEMDISK_FOREVER, 0 },
	/* no space once (cannot happen after preallocation, but must be
	 * handled like any error) */
	{ "ENOSPC once", ENOSPC, 1, 0 },
	{ "ENOSPC persistent", ENOSPC, MEMDISK_FOREVER, 0 },
	/* signals: three interrupted calls in a row are retried */
	{ "EINTR x3", EINTR, 3, 1 },
	/* a signal storm of 200 interrupted calls is still retried */
	{ "EINTR x200", EINTR, 200, 1 },
	/* one short read or write: continued where it stopped */
	{ "short once", MEMDISK_SHORT, 1, 1 },
	/* every transfer short: still completes, halving each time */
	{ "short persistent", MEMDISK_SHORT, MEMDISK_FOREVER, 1 },
};

#define FT_BATCHES 6

/* The fixed T7 workload: create, 6 batches with acks, close, reopen.
 * Fills accepted[] and returns the number of failed ring calls. */
static int fault_work(struct memdisk *d, unsigned char *accepted,
                      uint64_t *last_out, struct ring **keep)
{
	static const char *const names[2] = { "alpha", "bravo" };
	unsigned char buf[300];
	struct ring *r;
	char err[256];
	uint64_t last = 0, s, first;
	int b, i, fails = 0;

	*keep = NULL;
	if (ring_open(PATH, RSIZE, memdisk_ops(d), &r, err, sizeof err) != 0)
		return 1;
	if (ring_outputs(r, names, 2) != 0)
		fails++;
	for (b = 0; b < FT_BATCHES && !fails; b++) {
		first = last + 1;
		for (i = 0; i < 5; i++) {
			payload(first + (uint64_t)i, 1, 40u + (size_t)b * 50u,
			        buf);
			if (ring_append(r, buf, 40u + (size_t)b * 50u) !=
			    RING_OK)
				fails++;
		}
		if (fails || ring_commit(r, &last) != 0) {
			fails++;
			break;
		}
		for (s = first; s <= last; s++)
			accepted[s] = 1;
		if (b % 2 == 1 && ring_ack(r, "alpha", last - 2) != 0)
			fails++;
	}
	*last_out = last;
	*keep = r;
	return fails;
}

/* After the fault: I/O works again; recover and compare. */
static void fault_check(struct memdisk *d, struct ring *r,
                        const unsigned char *accepted, uint64_t last,
                        const char *mode, uint64_t n)
{
	struct ring_stat st;
	unsigned char buf[RING_PAYLOAD_MAX], want[RING_PAYLOAD_MAX];
	char err[256];
	uint64_t s;
	size_t len;

	memdisk_set_fault(d, NULL);
	if (r != NULL && ring_recover(r, err, sizeof err) != 0)
		fail_msg("%s at call %llu: recover: %s", mode,
		         (unsigned long long)n, err);
	if (r == NULL &&
	    ring_open(PATH, RSIZE, memdisk_ops(d), &r, err, sizeof err) != 0)
		fail_msg("%s at call %llu: reopen: %s", mode,
		         (unsigned long long)n, err);
	ring_stat(r, &st);
	assert_int_equal(st.failed, 0);
	for (s = 1; s <= last; s++) {
		if (!accepted[s])
			continue;
		if (ring_read(r, s, buf, sizeof buf, &len) != 0)
			fail_msg("%s at call %llu: accepted seq %llu lost",
			         mode, (unsigned long long)n,
			         (unsigned long long)s);
		payload(s, 1, len, want);
		assert_memory_equal(buf, want, len);
	}
	/* nothing after the last good commit is there */
	assert_true(st.newest_seq == last || st.newest_seq == 0);
	assert_int_equal(ring_close(r), 0);
	assert_int_equal(memdisk_open_fds(d), 0);
	/* and it all survives a power cut now */
	memdisk_powercut(d, NULL);
	assert_int_equal(ring_open(PATH, RSIZE, memdisk_ops(d), &r, err,
	                           sizeof err), 0);
	for (s = 1; s <= last; s++)
		if (accepted[s])
			assert_int_equal(ring_read(r, s, buf, sizeof buf,
			                           &len), 0);
	assert_int_equal(ring_close(r), 0);
}

static void test_fault_every_call(void **state)
{
	struct memdisk *d;
	struct ring *r;
	unsigned char acc[64];
	uint64_t calls, n, last, runs = 0, failed_runs = 0;
	struct memdisk_fault f;
	size_t m;
	int fails;

	d = memdisk_new(0, 1);
	memset(acc, 0, sizeof acc);
	assert_int_equal(fault_work(d, acc, &last, &r), 0);
	assert_int_equal(ring_close(r), 0);
	calls = memdisk_calls(d, MEMDISK_ALL_OPS);
	memdisk_free(d);
	for (m = 0; m < sizeof fmodes / sizeof fmodes[0]; m++) {
		for (n = 1; n <= calls + 1; n++) {
			d = memdisk_new(0, n);
			f = (struct memdisk_fault){ n, fmodes[m].count,
			                            MEMDISK_ALL_OPS,
			                            fmodes[m].err };
			memdisk_set_fault(d, &f);
			memset(acc, 0, sizeof acc);
			fails = fault_work(d, acc, &last, &r);
			runs++;
			failed_runs += fails != 0;
			if (fmodes[m].transparent && fails != 0)
				fail_msg("%s at call %llu: not retried",
				         fmodes[m].name,
				         (unsigned long long)n);
			fault_check(d, r, acc, last, fmodes[m].name, n);
			memdisk_free(d);
		}
	}
	printf("ring T7: %llu calls x %zu modes = %llu runs, %llu saw an "
	       "error, 0 lost, 0 leaked fds\n", (unsigned long long)calls,
	       sizeof fmodes / sizeof fmodes[0], (unsigned long long)runs,
	       (unsigned long long)failed_runs);
	(void)state;
}

/* After an fdatasync failure nothing of that batch is accepted, the
 * ring refuses work until recovered, and a power cut afterwards loses
 * nothing that was accepted (the failed sync is never retried). */
static void test_fsync_failure(void **state)
{
	static const char *const names[1] = { "alpha" };
	struct memdisk *d = memdisk_new(0, 5);
	struct ring *r;
	char err[256];
	unsigned char buf[64] = { 1 };
	uint64_t last = 0, got;
	struct memdisk_fault f = { 1, 1, MEMDISK_FDATASYNC, EIO };
	struct ring_stat st;
	size_t len;
	int i;

	assert_int_equal(ring_open(PATH, RSIZE, memdisk_ops(d), &r, err,
	                           sizeof err), 0);
	assert_int_equal(ring_outputs(r, names, 1), 0);
	for (i = 0; i < 3; i++)
		assert_int_equal(ring_append(r, buf, sizeof buf), RING_OK);
	assert_int_equal(ring_commit(r, &last), 0);
	assert_int_equal(last, 3);
	memdisk_set_fault(d, &f);
	for (i = 0; i < 4; i++)
		assert_int_equal(ring_append(r, buf, sizeof buf), RING_OK);
	got = 99;
	assert_int_equal(ring_commit(r, &got), -1);
	assert_int_equal(errno, EIO);
	assert_int_equal(got, 99);          /* nothing reported */
	ring_stat(r, &st);
	assert_int_equal(st.failed, EIO);
	assert_int_equal(st.newest_seq, 3);
	/* refused until recovered, with the original errno */
	assert_int_equal(ring_append(r, buf, sizeof buf), RING_ERR);
	assert_int_equal(errno, EIO);
	assert_int_equal(ring_ack(r, "alpha", 1), -1);
	assert_int_equal(ring_recover(r, err, sizeof err), 0);
	assert_int_equal(ring_read(r, 4, buf, sizeof buf, &len), -1);
	assert_int_equal(errno, ENOENT);
	assert_int_equal(ring_append(r, buf, sizeof buf), RING_OK);
	assert_int_equal(ring_commit(r, &last), 0);
	assert_int_equal(last, 4);          /* seq 4 was never accepted */
	assert_int_equal(ring_close(r), 0);
	memdisk_powercut(d, NULL);
	assert_int_equal(ring_open(PATH, RSIZE, memdisk_ops(d), &r, err,
	                           sizeof err), 0);
	ring_stat(r, &st);
	assert_int_equal(st.newest_seq, 4);
	for (i = 1; i <= 4; i++)
		assert_int_equal(ring_read(r, (uint64_t)i, buf, sizeof buf,
		                           &len), 0);
	assert_int_equal(ring_close(r), 0);
	memdisk_free(d);
	(void)state;
}

/* A process that saw fdatasync fail and exited leaves clean-but-unwritten
 * pages; the next open in the same boot must rewrite what its header did
 * not vouch for, or a later power cut opens a hole that hides newer,
 * accepted records. */
static void test_fsync_failure_then_restart(void **state)
{
	static const char *const names[1] = { "alpha" };
	struct memdisk *d;
	struct ring *r;
	char err[256];
	unsigned char buf[100];
	uint64_t last, seed, s;
	struct memdisk_fault f = { 1, 1, MEMDISK_FDATASYNC, EIO };
	size_t len;
	int i;

	for (seed = 1; seed <= 64; seed++) {
		d = memdisk_new(0, seed);
		assert_int_equal(ring_open(PATH, RSIZE, memdisk_ops(d), &r,
		                           err, sizeof err), 0);
		assert_int_equal(ring_outputs(r, names, 1), 0);
		memset(buf, 7, sizeof buf);
		for (i = 0; i < 6; i++)
			assert_int_equal(ring_append(r, buf, sizeof buf),
			                 RING_OK);
		memdisk_set_fault(d, &f);
		assert_int_equal(ring_commit(r, &last), -1);
		(void)ring_close(r);        /* exits; no power cut */
		assert_int_equal(ring_open(PATH, RSIZE, memdisk_ops(d), &r,
		                           err, sizeof err), 0);
		for (i = 0; i < 3; i++)
			assert_int_equal(ring_append(r, buf, sizeof buf),
			                 RING_OK);
		assert_int_equal(ring_commit(r, &last), 0);
		assert_int_equal(ring_close(r), 0);
		memdisk_powercut(d, NULL);
		assert_int_equal(ring_open(PATH, RSIZE, memdisk_ops(d), &r,
		                           err, sizeof err), 0);
		for (s = last - 2; s <= last; s++)
			assert_int_equal(ring_read(r, s, buf, sizeof buf,
			                           &len), 0);
		assert_int_equal(ring_close(r), 0);
		memdisk_free(d);
	}
	(void)state;
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_fsync_failure),
		cmocka_unit_test(test_fsync_failure_then_restart),
		cmocka_unit_test(test_fault_every_call),
		cmocka_unit_test(test_powercut_seeds),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
