/*
 * qc.h - QARTOD real-time quality-control tests for one value of one
 * station (U.S. IOOS QARTOD manuals; flags of the IOOS 2020 "Manual for
 * Real-Time Oceanographic Data Quality Control Flags" v1.2: 1 pass,
 * 2 not evaluated, 3 suspect, 4 fail, 9 missing).
 *
 * Owns: the per-value settings (struct tp_qc_value_cfg, plain data that
 * the config loader fills or firmware initialises statically), the
 * per-value history (struct tp_qc_state, fixed size, caller-owned), the
 * tests, the roll-up of their flags and the delayed spike judgement of
 * the previous point.  Nothing allocates, prints or keeps globals.
 *
 * Callers: the daemon's decode path (one tp_qc_state per station and
 * value, kept across readings and zeroed with tp_qc_reset when the station
 * or layout changes), `tidepost decode`, station firmware, the tests.
 *
 * Settings ("not set" is always distinguishable; a zeroed struct runs
 * only the syntax test):
 *   - spans have `set`; a span is inclusive: min <= v <= max passes;
 *   - thresholds (spike_low/high, roc_n_dev, rate_per_h, mv_n_dev,
 *     mv_peer_n_dev) and durations (*_window_s, gap_s) are set when > 0;
 *   - counts (flat_suspect_n, flat_fail_n) are set when > 0.
 * tp_qc_cfg_check() reports settings that make no sense.
 *
 * The tests (SCIENCE.md 7.3, the manuals' generic codable instructions;
 * V[n] is the newest value, history is this value's accepted values):
 *   gross_range  outside `sensor` -> 4, outside `user` -> 3, else 1.
 *   climatology  outside the span of the reading's UTC month -> 3, else 1
 *                (seasons are spans repeated over their months; southern
 *                hemisphere seasons are just other months).  No fail flag.
 *   spike        judges the MIDDLE of the last three points:
 *                SPK_REF = (V[n-2] + V[n]) / 2, |V[n-1] - SPK_REF| >
 *                spike_high -> 4, > spike_low -> 3, else 1.  The newest
 *                point's own spike flag is 2: it cannot be judged until
 *                the point after it arrives (QARTOD manuals).  See "the
 *                previous reading's update" below.
 *   rate_of_change  |V[n] - V[n-1]| > roc_n_dev * SD -> 3, where SD is
 *                the sample standard deviation of the history values in
 *                (t[n] - roc_window_s, t[n]) (the newest point excluded,
 *                so a jump does not widen its own yardstick; at least 3
 *                values, and SD > 0: with zero spread "N deviations" is
 *                degenerate and the flat-line test is the one that
 *                applies); and |V[n] - V[n-1]| / hours between them >
 *                rate_per_h -> 3.  No fail flag (most manuals have none).
 *   flat_line    |V[n] - V[n-i]| < flat_eps for all i = 1..flat_fail_n
 *                -> 4, for all i = 1..flat_suspect_n -> 3, else 1
 *                (REP_CNT_FAIL / REP_CNT_SUSPECT: the number of EARLIER
 *                values compared; "8 equal values in a row" is a count of
 *                7).  flat_eps 0 means "exactly equal".  Counts up to
 *                TP_QC_HIST - 1.  2 while the history is shorter.
 *   multi_variate  |dV| > mv_n_dev * SD_V while the co-measured peer
 *                (e.g. temperature) has |dT| < mv_peer_n_dev * SD_T -> 3,
 *                SDs over mv_window_s; dV = V[n] - V[n-1]; a step in V
 *                that the peer does not show.  2 without a usable peer.
 *   gap          the time since the previous present value of this
 *                station+value > gap_s -> 9 (choice: the Water Level
 *                manual v2.1 uses 9 "missing"; older manuals used 4).  The
 *                flag is recorded on the FIRST READING AFTER the gap: the
 *                readings that should have arrived do not exist, so the
 *                one after them carries the mark.  It does not make the
 *                reading bad: in the roll-up a per-test 9 ranks lowest.
 *                1 within the limit, 2 for the first reading ever or when
 *                gap_s is unset.  The silent-station alert is the
 *                watchdog's job, not this test's.
 *   syntax       a packet whose check value fails is rejected before
 *                decoding (tp_check_verify), so every value reaching QC
 *                passed it: 1; 2 when the caller says the value was not
 *                decoded from a packet (in_flag 2, e.g. a derived value
 *                with unevaluated inputs).
 *
 * Roll-up (SCIENCE.md 7.1; ioos_qc precedence MISSING < NOT_EVALUATED <
 * PASS < SUSPECT < FAIL): a missing value (in_flag 9 or NaN) is 9 and all
 * tests are 9; otherwise the worst of in_flag and the tests by rank
 * 4 > 3 > 1 > 2 > 9, so 2 only when nothing was evaluated and the gap
 * test's 9 never hides a pass.  in_flag carries what earlier stages found
 * (the decoder's 4 for a value outside the layout's `range`, a derived
 * value's 3 for inputs outside a formula's validity).
 *
 * History (struct tp_qc_state): a ring of the last TP_QC_HIST accepted
 * values with their times.  Accepted = present and not failed by gross
 * range (in_flag 4 or outside `sensor`): a sensor's error code or a value
 * outside its physical span would otherwise poison the spike reference,
 * the SDs and the flat-line count, so such values are still flagged but
 * leave the history as it was (the spike test then judges the middle of
 * the last three ACCEPTED points).  Missing values do not touch the state
 * at all.  Suspect values (3) are accepted: real steps must become the new
 * normal.  A reading whose time is not after the newest one seen (replay
 * of older data, a duplicate) gets only the stateless tests (gross range,
 * climatology, syntax); the rest are 2 and the state is untouched.  After
 * a gap longer than gap_s (or TP_QC_RESET_S when gap_s is unset) the
 * history is dropped before the new value enters, so spike, rate of
 * change, flat line and multi-variate never compare across an outage.
 *
 * The previous reading's update (out->prev): when a value enters the
 * history, the point before it (the newest until now) is judged by the
 * spike test.  out->prev then says: which reading (its time_s and the
 * `ref` the caller passed with it), its spike flag, and its new roll-up =
 * worse(roll-up emitted for it then, spike flag).  The daemon sends this as
 * an update that the receiver applies to the earlier reading by its id;
 * out->prev.changed says whether the flag differs from what was sent.
 * Real-time flags of an earlier reading only ever get worse, never better
 * (by the rank above): the earlier reading's other tests are not re-run,
 * only its missing spike judgement is filled in; that is also why the
 * newest point's spike flag is 2 (not evaluated) rather than a guess.
 * The first point after a reset never gets a spike judgement (it has no
 * V[n-2]) and keeps spike 2.
 */
#ifndef TIDEPOST_QC_H
#define TIDEPOST_QC_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tidepost/status.h"

/* Values kept per station and value; the history reset after a gap this
 * long when gap_s is unset; the values an SD needs. */
#define TP_QC_HIST     64
#define TP_QC_RESET_S  86400
#define TP_QC_SD_MIN_N 3

enum tp_qc_test {
	TP_QC_GROSS_RANGE = 0,
	TP_QC_CLIMATOLOGY,
	TP_QC_SPIKE,
	TP_QC_RATE_OF_CHANGE,
	TP_QC_FLAT_LINE,
	TP_QC_MULTI_VARIATE,
	TP_QC_GAP,
	TP_QC_SYNTAX,
	TP_QC_N_TESTS
};

/* The QARTOD name of a test ("gross_range", "climatology", "spike",
 * "rate_of_change", "flat_line", "multi_variate", "gap", "syntax"), or
 * "unknown"; never NULL. */
const char *tp_qc_test_name(enum tp_qc_test t);

/* A closed interval [min, max]; ignored unless `set`. */
struct tp_qc_span {
	bool set;
	double min, max;
};

/* Settings for one value of one station (units: the value's). */
struct tp_qc_value_cfg {
	struct tp_qc_span sensor;          /* gross range: outside -> 4 */
	struct tp_qc_span user;            /* gross range: outside -> 3 */
	struct tp_qc_span climatology[12]; /* UTC month, [0] = January -> 3 */
	double spike_low;                  /* THRSHLD_LOW -> 3 */
	double spike_high;                 /* THRSHLD_HIGH -> 4 */
	double roc_n_dev;                  /* N_DEV -> 3 */
	int64_t roc_window_s;              /* TIM_DEV for the SD */
	double rate_per_h;                 /* plain rate limit -> 3 */
	uint32_t flat_suspect_n;           /* REP_CNT_SUSPECT -> 3 */
	uint32_t flat_fail_n;              /* REP_CNT_FAIL -> 4 */
	double flat_eps;                   /* EPS; 0: exactly equal */
	double mv_n_dev;                   /* N_V_DEV */
	double mv_peer_n_dev;              /* N_T_DEV */
	int64_t mv_window_s;               /* TIM_DEV for SD_V and SD_T */
	size_t mv_peer;                    /* value slot of the peer (for
	                                      the caller; see tp_qc_peer) */
	int64_t gap_s;                     /* TIM_INC -> 9 on the next one */
};

/* History of one value of one station.  Zero it (tp_qc_reset or = {0})
 * before first use; never share one between stations or values. */
struct tp_qc_state {
	uint32_t n;    /* values held, <= TP_QC_HIST */
	uint32_t head; /* slot of the newest value */
	double v[TP_QC_HIST];
	int64_t t[TP_QC_HIST];
	uint8_t head_flag; /* roll-up emitted for the newest value */
	uint64_t head_ref; /* caller's ref of the newest value */
	bool seen;         /* a present value was ever seen */
	int64_t last_s;    /* time of the newest present value */
};

/* What the co-measured value did at this reading (multi-variate test). */
struct tp_qc_peer {
	bool ok;   /* dv and sd are usable */
	double dv; /* its newest change */
	double sd; /* its SD over the window */
};

/* One value of one reading. */
struct tp_qc_sample {
	double v;        /* NaN when missing */
	uint8_t in_flag; /* flag from earlier stages (1,2,3,4,9) */
	int64_t time_s;  /* reading time, Unix seconds (UTC) */
	uint64_t ref;    /* caller's handle for this reading,
	                    echoed in a later prev.ref */
};

/* The spike judgement of the previous accepted point. */
struct tp_qc_prev {
	bool set;       /* a previous point was judged now */
	int64_t time_s; /* its reading time */
	uint64_t ref;   /* the ref passed with it */
	uint8_t spike;  /* its spike flag: 1, 3 or 4 */
	uint8_t flag;   /* its new roll-up (never better) */
	bool changed;   /* flag differs from the one sent */
};

struct tp_qc_result {
	uint8_t test[TP_QC_N_TESTS]; /* per test, by enum tp_qc_test */
	uint8_t flag;                /* roll-up */
	int64_t gap_s;               /* seconds since the previous present
	                                value, -1 if none or out of order */
	bool reset;                  /* the history was dropped (gap) */
	struct tp_qc_prev prev;
};

/* Where a settings problem is, for the loader's message. */
struct tp_qc_problem {
	enum tp_qc_test test;
	const char *what; /* static English text */
};

/* Check settings: spans min <= max and finite, thresholds finite and not
 * negative, spike_low <= spike_high when both are set, flat counts <=
 * TP_QC_HIST - 1 and suspect <= fail when both are set, multi-variate
 * needs both N and a window, roc_n_dev needs a window.  TP_ERR_ARG with
 * *pb filled (pb may be NULL). */
enum tp_status tp_qc_cfg_check(const struct tp_qc_value_cfg *cfg,
                               struct tp_qc_problem *pb);

/* Forget the history (start of a station's stream, layout change). */
void tp_qc_reset(struct tp_qc_state *st);

/*
 * Run every test on one value and update its history.  cfg, st, in and
 * out must not be NULL (TP_ERR_ARG, out then says 9 everywhere); peer may
 * be NULL (multi-variate 2).  Readings of one station+value must come in
 * time order for the history tests to run (see above).
 */
enum tp_status tp_qc_apply(const struct tp_qc_value_cfg *cfg,
                           struct tp_qc_state *st,
                           const struct tp_qc_sample *in,
                           const struct tp_qc_peer *peer,
                           struct tp_qc_result *out);

/*
 * The peer input of the multi-variate test: the newest change and the SD
 * over window_s of a value whose tp_qc_apply for the SAME reading (time_s)
 * already ran.  ok is false when that value was not accepted at time_s,
 * has no earlier value, or has fewer than TP_QC_SD_MIN_N values in the
 * window.  So: run QC on the peer (e.g. temperature) first.
 */
void tp_qc_peer_from_state(const struct tp_qc_state *st, int64_t time_s,
                           int64_t window_s, struct tp_qc_peer *out);

/* The worse of two flags by roll-up rank 4 > 3 > 1 > 2 > 9. */
uint8_t tp_qc_worse(uint8_t a, uint8_t b);

/* UTC month 1..12 of a Unix time (proleptic Gregorian). */
int tp_qc_month(int64_t time_s);

#endif
