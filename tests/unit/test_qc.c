/*
 * test_qc.c - QARTOD real-time tests (decoder/qc.c).
 *
 * Expected flags are worked by hand from the generic test definitions of
 * the IOOS QARTOD manuals as transcribed in SCIENCE.md 7.3 ([CODE]: public
 * markdown copies of the Water Level v2.1 and phytoplankton manuals) and
 * the flag table of the IOOS flag manual v1.2 (SCIENCE.md 7.1, [DOC]).
 * Thresholds: pH spans from SCIENCE.md 8 (sensor 6.5..9.0, user 7.6..8.5,
 * engineering defaults, [from memory] common practice) and CONFIG.md's
 * example (spike 0.1, rate_per_h 0.2); the data series are invented.
 * The one-line comment on each step is the hand-worked reason.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "tidepost/layout.h"
#include "tidepost/qc.h"

#define N_ 9 /* TP_FLAG_MISSING, short for the tables */

/* One reading of a series; prev_spike 0 means "no prev expected". */
struct step {
	int64_t t;
	double v;
	uint8_t in;         /* in_flag */
	uint8_t test;       /* expected flag of the series' test */
	uint8_t flag;       /* expected roll-up */
	uint8_t prev_spike; /* expected spike flag of the previous point */
	uint8_t prev_flag;  /* its expected new roll-up */
	uint8_t prev_ref;   /* 1-based step it refers to */
};

struct series {
	const char *name;
	struct tp_qc_value_cfg cfg;
	enum tp_qc_test test;
	size_t n;
	struct step s[12];
};

#define PH_SENSOR {true, 6.5, 9.0}
#define PH_USER {true, 7.6, 8.5}

static const struct series series[] = {
    /* Gross range: sensor span -> 4, user span -> 3, bounds inclusive. */
    {"gross range",
     {.sensor = PH_SENSOR, .user = PH_USER},
     TP_QC_GROSS_RANGE,
     8,
     {
	 {0, 8.0, 1, 1, 1, 0, 0, 0},      /* inside both spans */
	 {900, 8.5, 1, 1, 1, 0, 0, 0},    /* user max itself passes */
	 {1800, 8.6, 1, 3, 3, 0, 0, 0},   /* above user, inside sensor */
	 {2700, 7.5, 1, 3, 3, 0, 0, 0},   /* below user */
	 {3600, 9.2, 1, 4, 4, 0, 0, 0},   /* above the sensor span */
	 {4500, 6.5, 1, 3, 3, 0, 0, 0},   /* sensor min passes, user not */
	 {5400, 8.0, 4, 1, 4, 0, 0, 0},   /* decoder's range said 4: kept */
	 {6300, NAN, N_, N_, N_, 0, 0, 0}, /* missing: every test 9 */
     }},
    /* Climatology by UTC month; Jan [26, 30], Jul [22, 26], Dec [25, 29]
     * (invented reef-flat temperatures, southern hemisphere). */
    {"climatology",
     {.climatology = {[0] = {true, 26, 30},
                      [6] = {true, 22, 26},
                      [11] = {true, 25, 29}}},
     TP_QC_CLIMATOLOGY,
     7,
     {
	 /* 2025-12-31T23:59:59Z = 1767225599 (Python calendar.timegm) */
	 {1767225599, 29.5, 1, 3, 3, 0, 0, 0}, /* Dec: above 29 */
	 {1767225600, 29.5, 1, 1, 1, 0, 0, 0}, /* Jan 1 00:00: in Jan span */
	 {1768435200, 28.0, 1, 1, 1, 0, 0, 0}, /* 2026-01-15: inside */
	 {1768438800, 25.0, 1, 3, 3, 0, 0, 0}, /* Jan: below 26 */
	 {1772323200, 25.0, 1, 2, 1, 0, 0, 0}, /* 2026-03-01: no span */
	 {1784073600, 25.0, 1, 1, 1, 0, 0, 0}, /* 2026-07-15: fine in Jul */
	 {1784077200, 27.0, 1, 3, 3, 0, 0, 0}, /* Jul: above 26 */
     }},
    /* Spike, low 0.1 -> 3, high 0.3 -> 4; judged on the middle point:
     * SPK_REF = (V[n-2] + V[n]) / 2, dev = |V[n-1] - SPK_REF|. */
    {"spike",
     {.spike_low = 0.1, .spike_high = 0.3},
     TP_QC_SPIKE,
     9,
     {
	 {0, 8.00, 1, 2, 1, 0, 0, 0},    /* newest: 2; roll-up 1 */
	 {900, 8.02, 1, 2, 1, 0, 0, 0},  /* one earlier point: no judgement */
	 {1800, 8.04, 1, 2, 1, 1, 1, 2}, /* s2: ref 8.02, dev 0 */
	 {2700, 8.24, 1, 2, 1, 1, 1, 3}, /* s3: ref 8.13, dev 0.09 */
	 {3600, 8.06, 1, 2, 1, 3, 3, 4}, /* s4: ref 8.05, dev 0.19 -> 3 */
	 {4500, 8.05, 1, 2, 1, 1, 1, 5}, /* s5: ref 8.145, dev 0.085 */
	 {5400, 8.06, 1, 2, 1, 1, 1, 6}, /* s6: ref 8.06, dev 0.01 */
	 {6300, 7.50, 1, 2, 1, 3, 3, 7}, /* s7: ref 7.775, dev 0.285: the
	                                    spike's neighbour is suspect */
	 {7200, 8.06, 1, 2, 1, 4, 4, 8}, /* s8: ref 8.06, dev 0.56 -> 4 */
     }},
    /* A value failed by gross range does not enter the history: the
     * spike test then judges the middle of the last three accepted. */
    {"spike skips failed values",
     {.sensor = PH_SENSOR, .spike_low = 0.1},
     TP_QC_SPIKE,
     5,
     {
	 {0, 8.00, 1, 2, 1, 0, 0, 0},    /* first */
	 {900, 8.02, 1, 2, 1, 0, 0, 0},  /* second */
	 {1800, 8.04, 1, 2, 1, 1, 1, 2}, /* s2 judged: dev 0 */
	 {2700, 0.0, 1, 2, 4, 0, 0, 0},  /* error code 0: 4, not judged,
	                                    judges nothing */
	 {3600, 8.06, 1, 2, 1, 1, 1, 3}, /* s3 judged with 8.02, 8.06 */
     }},
    /* The earlier reading's flag only gets worse: a user-span 3 stays 3
     * when its spike judgement is 1 (changed = false). */
    {"prev never improves",
     {.user = PH_USER, .spike_low = 0.1},
     TP_QC_SPIKE,
     3,
     {
	 {0, 8.40, 1, 2, 1, 0, 0, 0},    /* inside user span */
	 {900, 8.55, 1, 2, 3, 0, 0, 0},  /* above user: 3 */
	 {1800, 8.70, 1, 2, 3, 1, 3, 2}, /* s2: dev 0 -> 1, stays 3 */
     }},
    /* Rate of change, plain limit 0.2 per hour at 15-min steps. */
    {"rate_per_h",
     {.rate_per_h = 0.2},
     TP_QC_RATE_OF_CHANGE,
     4,
     {
	 {0, 8.00, 1, 2, 1, 0, 0, 0},    /* no previous value */
	 {900, 8.04, 1, 1, 1, 0, 0, 0},  /* 0.04 in 0.25 h = 0.16/h */
	 {1800, 8.10, 1, 3, 3, 0, 0, 0}, /* 0.06 in 0.25 h = 0.24/h */
	 {5400, 8.20, 1, 1, 1, 0, 0, 0}, /* 0.10 in 1 h = 0.10/h */
     }},
    /* Rate of change, N_DEV 3 with SD over 25 h (SCIENCE.md 7.3 example
     * values); SD of the history before the newest point. */
    {"rate N_DEV",
     {.roc_n_dev = 3, .roc_window_s = 25 * 3600},
     TP_QC_RATE_OF_CHANGE,
     6,
     {
	 {0, 8.00, 1, 2, 1, 0, 0, 0},    /* no history */
	 {900, 8.02, 1, 2, 1, 0, 0, 0},  /* 1 value: no SD */
	 {1800, 8.00, 1, 2, 1, 0, 0, 0}, /* 2 values: no SD (needs 3) */
	 {2700, 8.02, 1, 1, 1, 0, 0, 0}, /* 3 SD = 0.0346 > 0.02 */
	 {3600, 8.05, 1, 1, 1, 0, 0, 0}, /* 3 SD = 0.0346 > 0.03 */
	 {4500, 8.12, 1, 3, 3, 0, 0, 0}, /* 3 SD = 0.0615 < 0.07 */
     }},
    /* The same data with a 1 h window: never 3 values in it. */
    {"rate N_DEV short window",
     {.roc_n_dev = 3, .roc_window_s = 3600},
     TP_QC_RATE_OF_CHANGE,
     5,
     {
	 {0, 8.00, 1, 2, 1, 0, 0, 0},     /* no history */
	 {1800, 8.02, 1, 2, 1, 0, 0, 0},  /* 1 value */
	 {3600, 8.00, 1, 2, 1, 0, 0, 0},  /* 2 values in the hour */
	 {5400, 8.02, 1, 2, 1, 0, 0, 0},  /* t 1800, 3600 in window: 2 */
	 {7200, 9.00, 1, 2, 1, 0, 0, 0},  /* still 2: not evaluated */
     }},
    /* Zero spread: the N_DEV criterion is degenerate -> 2. */
    {"rate N_DEV zero SD",
     {.roc_n_dev = 3, .roc_window_s = 25 * 3600},
     TP_QC_RATE_OF_CHANGE,
     4,
     {
	 {0, 7.0, 1, 2, 1, 0, 0, 0},     /* no history */
	 {900, 7.0, 1, 2, 1, 0, 0, 0},   /* 1 value */
	 {1800, 7.0, 1, 2, 1, 0, 0, 0},  /* 2 values */
	 {2700, 7.5, 1, 2, 1, 0, 0, 0},  /* SD 0: not evaluated */
     }},
    /* Flat line: EPS 0.005, REP_CNT_SUSPECT 3, REP_CNT_FAIL 5. */
    {"flat line",
     {.flat_suspect_n = 3, .flat_fail_n = 5, .flat_eps = 0.005},
     TP_QC_FLAT_LINE,
     8,
     {
	 {0, 8.000, 1, 2, 1, 0, 0, 0},    /* nothing to compare */
	 {900, 8.001, 1, 2, 1, 0, 0, 0},  /* 1 equal, history ends */
	 {1800, 8.002, 1, 2, 1, 0, 0, 0}, /* 2 equal, history ends */
	 {2700, 8.001, 1, 3, 3, 0, 0, 0}, /* i = 1..3 all < EPS */
	 {3600, 8.002, 1, 3, 3, 0, 0, 0}, /* 4 equal: still 3 */
	 {4500, 8.001, 1, 4, 4, 0, 0, 0}, /* i = 1..5 all < EPS */
	 {5400, 8.000, 1, 4, 4, 0, 0, 0}, /* still flat */
	 {6300, 8.100, 1, 1, 1, 0, 0, 0}, /* differs by 0.1 */
     }},
    /* Each value is compared with V[n], not with its neighbour: a slow
     * drift of 0.003 per step is not flat once it exceeds EPS. */
    {"flat line drift",
     {.flat_suspect_n = 3, .flat_eps = 0.005},
     TP_QC_FLAT_LINE,
     4,
     {
	 {0, 8.000, 1, 2, 1, 0, 0, 0},    /* nothing to compare */
	 {900, 8.003, 1, 2, 1, 0, 0, 0},  /* 1 equal, history ends */
	 {1800, 8.006, 1, 1, 1, 0, 0, 0}, /* |8.006 - 8.000| >= EPS */
	 {2700, 8.009, 1, 1, 1, 0, 0, 0}, /* |8.009 - 8.003| >= EPS */
     }},
    /* EPS 0 means exactly equal (a stuck digitiser). */
    {"flat line exact",
     {.flat_suspect_n = 3},
     TP_QC_FLAT_LINE,
     5,
     {
	 {0, 7.0, 1, 2, 1, 0, 0, 0},      /* nothing to compare */
	 {900, 7.0, 1, 2, 1, 0, 0, 0},    /* 1 equal */
	 {1800, 7.0, 1, 2, 1, 0, 0, 0},   /* 2 equal */
	 {2700, 7.0, 1, 3, 3, 0, 0, 0},   /* 3 equal earlier values */
	 {3600, 7.001, 1, 1, 1, 0, 0, 0}, /* not exactly equal */
     }},
    /* Gap: limit 1 h -> 9 on the reading after the gap; the 9 ranks
     * lowest in the roll-up, so a good value stays 1. */
    {"gap",
     {.gap_s = 3600},
     TP_QC_GAP,
     7,
     {
	 {0, 27.0, 1, 2, 1, 0, 0, 0},     /* first reading ever */
	 {900, 27.1, 1, 1, 1, 0, 0, 0},   /* 900 s */
	 {4500, 27.1, 1, 1, 1, 0, 0, 0},  /* exactly 3600 s: not over */
	 {5400, NAN, N_, N_, N_, 0, 0, 0}, /* missing: no arrival */
	 {6300, 27.2, 1, 1, 1, 0, 0, 0},  /* 1800 s since the last present */
	 {13500, 27.3, 1, 9, 1, 0, 0, 0}, /* 7200 s: gap */
	 {14400, 27.3, 1, 1, 1, 0, 0, 0}, /* back to normal */
     }},
    /* Out-of-order and duplicate times: stateless tests only. */
    {"out of order",
     {.gap_s = 3600, .sensor = {true, 0, 40}},
     TP_QC_GAP,
     4,
     {
	 {1800, 27.0, 1, 2, 1, 0, 0, 0}, /* first */
	 {900, 27.0, 1, 2, 1, 0, 0, 0},  /* older: gap not evaluated */
	 {1800, 45.0, 1, 2, 4, 0, 0, 0}, /* duplicate time; gross still 4 */
	 {2700, 27.0, 1, 1, 1, 0, 0, 0}, /* 900 s after 1800: state kept */
     }},
};

static void run_series(const struct series *c)
{
	struct tp_qc_state st;
	struct tp_qc_result r;
	struct tp_qc_sample in;
	size_t i;

	tp_qc_reset(&st);
	for (i = 0; i < c->n; i++) {
		const struct step *s = &c->s[i];

		in = (struct tp_qc_sample){s->v, s->in, s->t, i + 1};
		assert_int_equal(tp_qc_apply(&c->cfg, &st, &in, NULL, &r),
		                 TP_OK);
		if (r.test[c->test] != s->test || r.flag != s->flag)
			fail_msg("%s step %zu: %s %u (want %u), roll-up %u "
			         "(want %u)",
			         c->name, i + 1, tp_qc_test_name(c->test),
			         r.test[c->test], s->test, r.flag, s->flag);
		if (s->prev_spike == 0) {
			if (r.prev.set)
				fail_msg("%s step %zu: unexpected prev",
				         c->name, i + 1);
			continue;
		}
		if (!r.prev.set || r.prev.spike != s->prev_spike ||
		    r.prev.flag != s->prev_flag ||
		    r.prev.ref != s->prev_ref ||
		    r.prev.time_s != c->s[s->prev_ref - 1].t)
			fail_msg("%s step %zu: prev set %d spike %u flag %u "
			         "ref %llu",
			         c->name, i + 1, r.prev.set, r.prev.spike,
			         r.prev.flag, (unsigned long long)r.prev.ref);
		assert_int_equal(r.prev.changed,
		                 r.prev.flag != c->s[s->prev_ref - 1].flag);
	}
}

static void test_series(void **state)
{
	size_t i;

	(void)state;
	for (i = 0; i < sizeof series / sizeof series[0]; i++)
		run_series(&series[i]);
}

/* UTC month of Unix times (Python calendar.timegm of the dates). */
static void test_month(void **state)
{
	static const struct {
		int64_t t;
		int month;
	} rows[] = {
	    {0, 1},           /* 1970-01-01T00:00:00Z */
	    {-1, 12},         /* 1969-12-31T23:59:59Z: negative times */
	    {951782400, 2},   /* 2000-02-29: leap day of a century year */
	    {951868800, 3},   /* 2000-03-01 */
	    {1767225599, 12}, /* 2025-12-31T23:59:59Z */
	    {1767225600, 1},  /* 2026-01-01T00:00:00Z */
	    {1796019300, 11}, /* 2026-11-30T06:15:00Z */
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++)
		if (tp_qc_month(rows[i].t) != rows[i].month)
			fail_msg("row %zu: month %d, want %d", i,
			         tp_qc_month(rows[i].t), rows[i].month);
}

/* Multi-variate: pH steps while temperature (the peer) is quiet -> 3;
 * the same pH step with a temperature step -> 1.  N_V_DEV = N_T_DEV = 3,
 * window 25 h.  pH history 8.00 8.02 8.00 8.02: 3 SD_V = 0.0346; T
 * history 27.0 27.2 27.0 27.2: 3 SD_T = 0.346 (Python statistics.stdev). */
static void test_multi_variate(void **state)
{
	static const struct {
		double t_last;  /* temperature at the 5th reading */
		double ph_last; /* pH at the 5th reading */
		bool peer;      /* pass the peer */
		uint8_t want;
	} rows[] = {
	    {27.1, 8.20, true, 3},  /* |dV| 0.18 > 0.035, |dT| 0.1 < 0.35 */
	    {28.5, 8.20, true, 1},  /* |dT| 1.3: the step is explained */
	    {27.1, 8.03, true, 1},  /* |dV| 0.01: no step */
	    {27.1, 8.20, false, 2}, /* no peer: not evaluated */
	};
	static const double ts[4] = {27.0, 27.2, 27.0, 27.2};
	static const double phs[4] = {8.00, 8.02, 8.00, 8.02};
	struct tp_qc_value_cfg tc = {0};
	struct tp_qc_value_cfg pc = {.mv_n_dev = 3,
	                             .mv_peer_n_dev = 3,
	                             .mv_window_s = 25 * 3600,
	                             .mv_peer = 1};
	struct tp_qc_state tst, pst;
	struct tp_qc_result r;
	struct tp_qc_peer peer;
	struct tp_qc_sample in;
	size_t i, k;

	(void)state;
	assert_int_equal(tp_qc_cfg_check(&pc, NULL), TP_OK);
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		tp_qc_reset(&tst);
		tp_qc_reset(&pst);
		for (k = 0; k < 5; k++) {
			int64_t t = (int64_t)k * 900;

			in = (struct tp_qc_sample){
			    k < 4 ? ts[k] : rows[i].t_last, 1, t, k};
			assert_int_equal(
			    tp_qc_apply(&tc, &tst, &in, NULL, &r), TP_OK);
			tp_qc_peer_from_state(&tst, t, pc.mv_window_s, &peer);
			in.v = k < 4 ? phs[k] : rows[i].ph_last;
			assert_int_equal(
			    tp_qc_apply(&pc, &pst, &in,
			                rows[i].peer ? &peer : NULL, &r),
			    TP_OK);
		}
		if (r.test[TP_QC_MULTI_VARIATE] != rows[i].want)
			fail_msg("row %zu: multi_variate %u, want %u", i,
			         r.test[TP_QC_MULTI_VARIATE], rows[i].want);
		assert_int_equal(r.flag, rows[i].want == 3 ? 3 : 1);
	}
	/* A peer state that did not take this reading is not usable. */
	tp_qc_peer_from_state(&tst, 99999, pc.mv_window_s, &peer);
	assert_false(peer.ok);
}

/* Missing input: all tests 9, roll-up 9, and the state is untouched. */
static void test_missing(void **state)
{
	static const struct {
		double v;
		uint8_t in;
	} rows[] = {
	    {NAN, 9},  /* the decoder's missing value */
	    {8.0, 9},  /* flag 9 wins even with a number */
	    {NAN, 1},  /* a NaN is missing whatever the flag says */
	    {INFINITY, 1}, /* not finite */
	};
	struct tp_qc_value_cfg c = {.sensor = PH_SENSOR,
	                            .spike_low = 0.1,
	                            .flat_suspect_n = 2,
	                            .gap_s = 3600};
	struct tp_qc_state st, before;
	struct tp_qc_result r;
	struct tp_qc_sample in = {8.0, 1, 0, 1};
	size_t i;
	int k;

	(void)state;
	tp_qc_reset(&st);
	assert_int_equal(tp_qc_apply(&c, &st, &in, NULL, &r), TP_OK);
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		memcpy(&before, &st, sizeof st);
		in = (struct tp_qc_sample){rows[i].v, rows[i].in,
		                           (int64_t)(i + 1) * 900, i + 2};
		assert_int_equal(tp_qc_apply(&c, &st, &in, NULL, &r), TP_OK);
		assert_int_equal(r.flag, 9);
		for (k = 0; k < TP_QC_N_TESTS; k++)
			assert_int_equal(r.test[k], 9);
		assert_false(r.prev.set);
		assert_memory_equal(&st, &before, sizeof st);
	}
}

/* After a gap the history is dropped: no spike judgement and no flat
 * line across it.  Limit from gap_s, else TP_QC_RESET_S (1 day). */
static void test_reset_after_gap(void **state)
{
	static const struct {
		int64_t gap_s;  /* cfg */
		int64_t after;  /* seconds between 3rd and 4th reading */
		bool reset;
	} rows[] = {
	    {3600, 7200, true},        /* longer than gap_s */
	    {3600, 3600, false},       /* exactly the limit */
	    {0, 86400, false},         /* default limit: one day, not over */
	    {0, 86401, true},          /* over one day */
	};
	struct tp_qc_state st;
	struct tp_qc_result r;
	struct tp_qc_sample in;
	size_t i;
	int k;

	(void)state;
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		struct tp_qc_value_cfg c = {.spike_low = 0.1,
		                            .flat_suspect_n = 3,
		                            .gap_s = rows[i].gap_s};
		int64_t t = 0;

		tp_qc_reset(&st);
		for (k = 0; k < 6; k++) {
			t += k == 3 ? rows[i].after : 900;
			in = (struct tp_qc_sample){7.0, 1, t, (uint64_t)k};
			assert_int_equal(tp_qc_apply(&c, &st, &in, NULL, &r),
			                 TP_OK);
			if (k == 3)
				assert_int_equal(r.reset, rows[i].reset);
			/* 4th reading: judges the 3rd only without a reset */
			if (k == 3)
				assert_int_equal(r.prev.set, !rows[i].reset);
		}
		/* 6th reading: 3 equal earlier values only if no reset */
		assert_int_equal(r.test[TP_QC_FLAT_LINE],
		                 rows[i].reset ? 2 : 3);
	}
}

/* Roll-up precedence 4 > 3 > 1 > 2 > 9 (SCIENCE.md 7.1, ioos_qc). */
static void test_worse(void **state)
{
	static const uint8_t rows[][3] = {
	    {1, 2, 1}, /* a pass outranks not evaluated */
	    {2, 1, 1}, /* symmetric */
	    {2, 9, 2}, /* the gap test's 9 ranks lowest */
	    {9, 1, 1}, /* ... also below a pass */
	    {3, 1, 3}, /* suspect over pass */
	    {1, 4, 4}, /* fail over pass */
	    {4, 3, 4}, /* fail over suspect */
	    {9, 9, 9}, /* missing stays missing */
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++)
		if (tp_qc_worse(rows[i][0], rows[i][1]) != rows[i][2])
			fail_msg("row %zu: worse(%u, %u) = %u", i, rows[i][0],
			         rows[i][1],
			         tp_qc_worse(rows[i][0], rows[i][1]));
}

/* Syntax and "nothing evaluated". */
static void test_syntax_rollup(void **state)
{
	static const struct {
		uint8_t in;
		uint8_t syntax, flag;
	} rows[] = {
	    {1, 1, 1}, /* decoded from a checked packet: syntax 1 -> 1 */
	    {2, 2, 2}, /* not from a packet, nothing set: 2 */
	    {3, 1, 3}, /* a derived value's validity 3 is carried */
	    {4, 1, 4}, /* the decoder's range 4 is carried */
	};
	struct tp_qc_value_cfg c = {0};
	struct tp_qc_state st;
	struct tp_qc_result r;
	struct tp_qc_sample in;
	size_t i;

	(void)state;
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		tp_qc_reset(&st);
		in = (struct tp_qc_sample){12.5, rows[i].in, 0, 0};
		assert_int_equal(tp_qc_apply(&c, &st, &in, NULL, &r), TP_OK);
		assert_int_equal(r.test[TP_QC_SYNTAX], rows[i].syntax);
		assert_int_equal(r.flag, rows[i].flag);
	}
	/* An unknown in_flag is the caller's error, reported, not flagged. */
	in = (struct tp_qc_sample){12.5, 0, 0, 0};
	assert_int_equal(tp_qc_apply(&c, &st, &in, NULL, &r), TP_ERR_ARG);
	assert_int_equal(r.flag, 9);
	assert_int_equal(tp_qc_apply(NULL, &st, &in, NULL, &r), TP_ERR_ARG);
	assert_int_equal(tp_qc_apply(&c, &st, &in, NULL, NULL), TP_ERR_ARG);
}

/* Settings the loader must refuse. */
static void test_cfg_check(void **state)
{
	static const struct {
		struct tp_qc_value_cfg c;
		enum tp_status want;
		enum tp_qc_test where;
	} rows[] = {
	    {{.sensor = PH_SENSOR, .spike_low = 0.1}, TP_OK, 0}, /* fine */
	    {{.sensor = {true, 9, 6}}, TP_ERR_ARG, TP_QC_GROSS_RANGE},
	    /* min > max */
	    {{.climatology[3] = {true, NAN, 1}}, TP_ERR_ARG,
	     TP_QC_CLIMATOLOGY}, /* NaN bound */
	    {{.spike_low = 0.5, .spike_high = 0.2}, TP_ERR_ARG, TP_QC_SPIKE},
	    /* suspect above fail */
	    {{.roc_n_dev = 3}, TP_ERR_ARG, TP_QC_RATE_OF_CHANGE},
	    /* N_DEV without a window */
	    {{.flat_suspect_n = 64}, TP_ERR_ARG, TP_QC_FLAT_LINE},
	    /* more than the history holds */
	    {{.flat_suspect_n = 5, .flat_fail_n = 3}, TP_ERR_ARG,
	     TP_QC_FLAT_LINE}, /* suspect after fail */
	    {{.mv_n_dev = 3}, TP_ERR_ARG, TP_QC_MULTI_VARIATE},
	    /* half a multi-variate setting */
	    {{.gap_s = -1}, TP_ERR_ARG, TP_QC_GAP}, /* negative limit */
	    {{.rate_per_h = -0.2}, TP_ERR_ARG, TP_QC_RATE_OF_CHANGE},
	    /* negative rate */
	};
	struct tp_qc_problem pb;
	size_t i;

	(void)state;
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		pb.what = NULL;
		assert_int_equal(tp_qc_cfg_check(&rows[i].c, &pb),
		                 rows[i].want);
		if (rows[i].want == TP_OK)
			continue;
		assert_non_null(pb.what);
		if (pb.test != rows[i].where)
			fail_msg("row %zu: problem in %s (%s)", i,
			         tp_qc_test_name(pb.test), pb.what);
	}
	assert_int_equal(tp_qc_cfg_check(NULL, NULL), TP_ERR_ARG);
}

/* The QARTOD names of the tests. */
static void test_names(void **state)
{
	static const char *const want[TP_QC_N_TESTS] = {
	    "gross_range", "climatology",   "spike", "rate_of_change",
	    "flat_line",   "multi_variate", "gap",   "syntax"};
	int i;

	(void)state;
	for (i = 0; i < TP_QC_N_TESTS; i++)
		assert_string_equal(tp_qc_test_name((enum tp_qc_test)i),
		                    want[i]);
	assert_string_equal(tp_qc_test_name(TP_QC_N_TESTS), "unknown");
}

/* A long series wraps the ring; the flat-line count and spike
 * judgement still use the newest values. */
static void test_ring_wrap(void **state)
{
	struct tp_qc_value_cfg c = {.spike_low = 0.1, .flat_suspect_n = 3,
	                            .flat_eps = 0.001};
	struct tp_qc_state st;
	struct tp_qc_result r;
	struct tp_qc_sample in;
	int k;

	(void)state;
	tp_qc_reset(&st);
	for (k = 0; k < 3 * TP_QC_HIST; k++) {
		/* a saw-tooth 0, 0.05, 0.10, ... 0.95: never flat, no spike */
		in = (struct tp_qc_sample){(k % 20) * 0.05 + 7.0, 1,
		                           (int64_t)k * 60, (uint64_t)k};
		assert_int_equal(tp_qc_apply(&c, &st, &in, NULL, &r), TP_OK);
		assert_true(st.n <= TP_QC_HIST);
		if (k >= 2 && k % 20 > 1)
			assert_true(r.prev.set && r.prev.spike == 1);
	}
	assert_int_equal(st.n, TP_QC_HIST);
	for (k = 0; k < 4; k++) {
		int64_t t = (int64_t)(3 * TP_QC_HIST + k) * 60;

		in = (struct tp_qc_sample){7.5, 1, t, 0};
		assert_int_equal(tp_qc_apply(&c, &st, &in, NULL, &r), TP_OK);
	}
	assert_int_equal(r.test[TP_QC_FLAT_LINE], 3); /* 3 equal before */
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test(test_series),
	    cmocka_unit_test(test_month),
	    cmocka_unit_test(test_multi_variate),
	    cmocka_unit_test(test_missing),
	    cmocka_unit_test(test_reset_after_gap),
	    cmocka_unit_test(test_worse),
	    cmocka_unit_test(test_syntax_rollup),
	    cmocka_unit_test(test_cfg_check),
	    cmocka_unit_test(test_names),
	    cmocka_unit_test(test_ring_wrap),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
