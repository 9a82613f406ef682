/*
 * qc.c - QARTOD real-time tests, their roll-up and the per-value history.
 * The contract (test definitions, choices, the delayed spike update) is
 * in tidepost/qc.h.
 */
#include <math.h>
#include <stddef.h>

#include "tidepost/layout.h"
#include "tidepost/qc.h"

static const char *const test_names[TP_QC_N_TESTS] = {
    "gross_range", "climatology",   "spike", "rate_of_change",
    "flat_line",   "multi_variate", "gap",   "syntax"};

const char *tp_qc_test_name(enum tp_qc_test t)
{
	if ((unsigned)t >= TP_QC_N_TESTS)
		return "unknown";
	return test_names[t];
}

/* Roll-up rank (ioos_qc precedence MISSING < UNKNOWN < GOOD < SUSPECT <
 * FAIL); unknown codes rank as fail so they are never hidden. */
static int rank(uint8_t f)
{
	switch (f) {
	case TP_FLAG_MISSING:
		return 0;
	case TP_FLAG_NOT_EVALUATED:
		return 1;
	case TP_FLAG_PASS:
		return 2;
	case TP_FLAG_SUSPECT:
		return 3;
	default:
		return 4;
	}
}

uint8_t tp_qc_worse(uint8_t a, uint8_t b)
{
	return rank(b) > rank(a) ? b : a;
}

static int64_t floor_div(int64_t a, int64_t b)
{
	int64_t q = a / b;

	return (a % b != 0 && (a < 0) != (b < 0)) ? q - 1 : q;
}

/* Month of the civil date of a day count, H. Hinnant, "chrono-Compatible
 * Low-Level Date Algorithms" (2013), civil_from_days: eras of 400 years
 * (146097 days) starting 0000-03-01. */
int tp_qc_month(int64_t time_s)
{
	int64_t z = floor_div(time_s, 86400) + 719468;
	int64_t era = floor_div(z, 146097);
	int64_t doe = z - era * 146097;
	int64_t yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
	int64_t doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
	int64_t mp = (5 * doy + 2) / 153;

	return (int)(mp < 10 ? mp + 3 : mp - 9);
}

void tp_qc_reset(struct tp_qc_state *st)
{
	if (st == NULL)
		return;
	*st = (struct tp_qc_state){0};
}

/* ---- settings check --------------------------------------------------- */

static bool bad_span(const struct tp_qc_span *s)
{
	return s->set &&
	       (!isfinite(s->min) || !isfinite(s->max) || s->min > s->max);
}

static bool bad_num(double x)
{
	return !isfinite(x) || x < 0;
}

static const char *check_gross_clim(const struct tp_qc_value_cfg *c,
                                    enum tp_qc_test *t)
{
	int m;

	*t = TP_QC_GROSS_RANGE;
	if (bad_span(&c->sensor))
		return "sensor span: min must be <= max, both finite";
	if (bad_span(&c->user))
		return "user span: min must be <= max, both finite";
	*t = TP_QC_CLIMATOLOGY;
	for (m = 0; m < 12; m++)
		if (bad_span(&c->climatology[m]))
			return "a month's span: min must be <= max, both "
			       "finite";
	return NULL;
}

static const char *check_history(const struct tp_qc_value_cfg *c,
                                 enum tp_qc_test *t)
{
	*t = TP_QC_SPIKE;
	if (bad_num(c->spike_low) || bad_num(c->spike_high))
		return "spike thresholds must be finite and not negative";
	if (c->spike_low > 0 && c->spike_high > 0 &&
	    c->spike_low > c->spike_high)
		return "spike: the suspect threshold exceeds the fail one";
	*t = TP_QC_RATE_OF_CHANGE;
	if (bad_num(c->roc_n_dev) || bad_num(c->rate_per_h) ||
	    c->roc_window_s < 0)
		return "rate of change settings must be finite, not negative";
	if (c->roc_n_dev > 0 && c->roc_window_s <= 0)
		return "rate of change: N_DEV needs a window (seconds)";
	*t = TP_QC_FLAT_LINE;
	if (c->flat_suspect_n >= TP_QC_HIST || c->flat_fail_n >= TP_QC_HIST)
		return "flat line: repeat counts must be at most 63";
	if (c->flat_suspect_n > 0 && c->flat_fail_n > 0 &&
	    c->flat_suspect_n > c->flat_fail_n)
		return "flat line: the suspect count exceeds the fail count";
	if (bad_num(c->flat_eps))
		return "flat line: EPS must be finite and not negative";
	return NULL;
}

static const char *check_mv_gap(const struct tp_qc_value_cfg *c,
                                enum tp_qc_test *t)
{
	bool any, all;

	*t = TP_QC_MULTI_VARIATE;
	if (bad_num(c->mv_n_dev) || bad_num(c->mv_peer_n_dev) ||
	    c->mv_window_s < 0)
		return "multi-variate settings must be finite, not negative";
	any = c->mv_n_dev > 0 || c->mv_peer_n_dev > 0 || c->mv_window_s > 0;
	all = c->mv_n_dev > 0 && c->mv_peer_n_dev > 0 && c->mv_window_s > 0;
	if (any && !all)
		return "multi-variate needs N_V_DEV, N_T_DEV and a window";
	*t = TP_QC_GAP;
	if (c->gap_s < 0)
		return "gap: the limit must not be negative";
	return NULL;
}

enum tp_status tp_qc_cfg_check(const struct tp_qc_value_cfg *cfg,
                               struct tp_qc_problem *pb)
{
	enum tp_qc_test t = TP_QC_SYNTAX;
	const char *what = "no settings given";

	if (cfg != NULL) {
		what = check_gross_clim(cfg, &t);
		if (what == NULL)
			what = check_history(cfg, &t);
		if (what == NULL)
			what = check_mv_gap(cfg, &t);
	}
	if (what == NULL)
		return TP_OK;
	if (pb != NULL) {
		pb->test = t;
		pb->what = what;
	}
	return TP_ERR_ARG;
}

/* ---- history ---------------------------------------------------------- */

/* Slot of the k-th newest value (k = 0 newest); k < st->n. */
static uint32_t slot(const struct tp_qc_state *st, uint32_t k)
{
	return (st->head + TP_QC_HIST - k) % TP_QC_HIST;
}

static double hv(const struct tp_qc_state *st, uint32_t k)
{
	return st->v[slot(st, k)];
}

static void push(struct tp_qc_state *st, double v, int64_t t)
{
	st->head = st->n == 0 ? 0 : (st->head + 1) % TP_QC_HIST;
	st->v[st->head] = v;
	st->t[st->head] = t;
	if (st->n < TP_QC_HIST)
		st->n++;
}

/*
 * Sample SD of the history values k = first.. whose time is within
 * window_s before now.  False when fewer than TP_QC_SD_MIN_N qualify.
 * Two passes (mean, then squares) for accuracy on offset data like pH.
 */
static bool window_sd(const struct tp_qc_state *st, uint32_t first, int64_t now,
                      int64_t window_s, double *sd)
{
	uint32_t k, n = 0;
	double mean = 0, ss = 0;

	for (k = first; k < st->n && now - st->t[slot(st, k)] <= window_s;
	     k++) {
		mean += hv(st, k);
		n++;
	}
	if (n < TP_QC_SD_MIN_N)
		return false;
	mean /= n;
	for (k = first; k < first + n; k++)
		ss += (hv(st, k) - mean) * (hv(st, k) - mean);
	*sd = sqrt(ss / (n - 1));
	return true;
}

/* ---- the tests -------------------------------------------------------- */

static bool outside(const struct tp_qc_span *s, double v)
{
	return s->set && (v < s->min || v > s->max);
}

static uint8_t gross_range(const struct tp_qc_value_cfg *c, double v)
{
	if (outside(&c->sensor, v))
		return TP_FLAG_FAIL;
	if (outside(&c->user, v))
		return TP_FLAG_SUSPECT;
	if (c->sensor.set || c->user.set)
		return TP_FLAG_PASS;
	return TP_FLAG_NOT_EVALUATED;
}

static uint8_t climatology(const struct tp_qc_value_cfg *c, double v, int64_t t)
{
	const struct tp_qc_span *s;
	int m;

	for (m = 0; m < 12 && !c->climatology[m].set; m++)
		;
	if (m == 12) /* no month configured: skip the calendar */
		return TP_FLAG_NOT_EVALUATED;
	s = &c->climatology[tp_qc_month(t) - 1];

	if (!s->set)
		return TP_FLAG_NOT_EVALUATED;
	return outside(s, v) ? TP_FLAG_SUSPECT : TP_FLAG_PASS;
}

/* Spike flag of the newest history value (the middle point) given the
 * new value v; needs two history values. */
static uint8_t spike(const struct tp_qc_value_cfg *c,
                     const struct tp_qc_state *st, double v)
{
	double dev = fabs(hv(st, 0) - (hv(st, 1) + v) / 2.0);

	if (c->spike_high > 0 && dev > c->spike_high)
		return TP_FLAG_FAIL;
	if (c->spike_low > 0 && dev > c->spike_low)
		return TP_FLAG_SUSPECT;
	return TP_FLAG_PASS;
}

static uint8_t rate_of_change(const struct tp_qc_value_cfg *c,
                              const struct tp_qc_state *st, double v, int64_t t)
{
	uint8_t f = TP_FLAG_NOT_EVALUATED;
	double d, sd, hours;

	if (st->n == 0)
		return f;
	d = fabs(v - hv(st, 0));
	if (c->roc_n_dev > 0 && c->roc_window_s > 0 &&
	    window_sd(st, 0, t, c->roc_window_s, &sd) && sd > 0)
		f = d > c->roc_n_dev * sd ? TP_FLAG_SUSPECT : TP_FLAG_PASS;
	hours = (double)(t - st->t[st->head]) / 3600.0;
	if (c->rate_per_h > 0 && hours > 0)
		f = tp_qc_worse(f, d / hours > c->rate_per_h ? TP_FLAG_SUSPECT
		                                             : TP_FLAG_PASS);
	return f;
}

static bool same(double a, double b, double eps)
{
	return eps > 0 ? fabs(a - b) < eps : a == b;
}

static uint8_t flat_line(const struct tp_qc_value_cfg *c,
                         const struct tp_qc_state *st, double v)
{
	uint32_t run = 0;
	uint32_t most = c->flat_fail_n > c->flat_suspect_n ? c->flat_fail_n
	                                                   : c->flat_suspect_n;

	if (most == 0)
		return TP_FLAG_NOT_EVALUATED;
	while (run < st->n && run < most && same(v, hv(st, run), c->flat_eps))
		run++;
	if (c->flat_fail_n > 0 && run >= c->flat_fail_n)
		return TP_FLAG_FAIL;
	if (c->flat_suspect_n > 0 && run >= c->flat_suspect_n)
		return TP_FLAG_SUSPECT;
	if (run < st->n)
		return TP_FLAG_PASS;  /* an unequal value ends the run */
	return TP_FLAG_NOT_EVALUATED; /* history too short to decide */
}

static uint8_t multi_variate(const struct tp_qc_value_cfg *c,
                             const struct tp_qc_state *st, double v, int64_t t,
                             const struct tp_qc_peer *p)
{
	double sd;
	bool step, quiet;

	if (c->mv_n_dev <= 0 || c->mv_peer_n_dev <= 0 || c->mv_window_s <= 0 ||
	    p == NULL || !p->ok || st->n == 0 ||
	    !window_sd(st, 0, t, c->mv_window_s, &sd) || !(sd > 0))
		return TP_FLAG_NOT_EVALUATED;
	step = fabs(v - hv(st, 0)) > c->mv_n_dev * sd;
	quiet = fabs(p->dv) < c->mv_peer_n_dev * p->sd;
	return step && quiet ? TP_FLAG_SUSPECT : TP_FLAG_PASS;
}

/* ---- driver ----------------------------------------------------------- */

static void fill(struct tp_qc_result *out, uint8_t f)
{
	int i;

	for (i = 0; i < TP_QC_N_TESTS; i++)
		out->test[i] = f;
	out->flag = f;
	out->gap_s = -1;
	out->reset = false;
	out->prev = (struct tp_qc_prev){0};
}

static bool flag_ok(uint8_t f)
{
	return f == TP_FLAG_PASS || f == TP_FLAG_NOT_EVALUATED ||
	       f == TP_FLAG_SUSPECT || f == TP_FLAG_FAIL ||
	       f == TP_FLAG_MISSING;
}

static int64_t reset_limit(const struct tp_qc_value_cfg *c)
{
	return c->gap_s > 0 ? c->gap_s : TP_QC_RESET_S;
}

/* Gap test against the newest present value; records this arrival. */
static void gap_test(const struct tp_qc_value_cfg *c, struct tp_qc_state *st,
                     int64_t t, struct tp_qc_result *out)
{
	if (st->seen) {
		out->gap_s = t - st->last_s;
		if (c->gap_s > 0)
			out->test[TP_QC_GAP] = out->gap_s > c->gap_s
			                           ? TP_FLAG_MISSING
			                           : TP_FLAG_PASS;
	}
	st->seen = true;
	st->last_s = t;
}

/* The tests that need history, the spike judgement of the previous
 * point, and the new value entering the history. */
static void history_tests(const struct tp_qc_value_cfg *c,
                          struct tp_qc_state *st, const struct tp_qc_sample *in,
                          const struct tp_qc_peer *peer,
                          struct tp_qc_result *out)
{
	struct tp_qc_prev *pv = &out->prev;

	if (st->n > 0 && in->time_s - st->t[st->head] > reset_limit(c)) {
		st->n = 0;
		out->reset = true;
	}
	out->test[TP_QC_RATE_OF_CHANGE] =
	    rate_of_change(c, st, in->v, in->time_s);
	out->test[TP_QC_FLAT_LINE] = flat_line(c, st, in->v);
	out->test[TP_QC_MULTI_VARIATE] =
	    multi_variate(c, st, in->v, in->time_s, peer);
	if (st->n >= 2 && (c->spike_low > 0 || c->spike_high > 0)) {
		pv->set = true;
		pv->time_s = st->t[st->head];
		pv->ref = st->head_ref;
		pv->spike = spike(c, st, in->v);
		pv->flag = tp_qc_worse(st->head_flag, pv->spike);
		pv->changed = pv->flag != st->head_flag;
	}
	push(st, in->v, in->time_s);
	st->head_ref = in->ref;
}

enum tp_status tp_qc_apply(const struct tp_qc_value_cfg *cfg,
                           struct tp_qc_state *st,
                           const struct tp_qc_sample *in,
                           const struct tp_qc_peer *peer,
                           struct tp_qc_result *out)
{
	bool accepted, ordered;
	int i;

	if (out == NULL)
		return TP_ERR_ARG;
	fill(out, TP_FLAG_MISSING);
	if (cfg == NULL || st == NULL || in == NULL || !flag_ok(in->in_flag) ||
	    st->n > TP_QC_HIST || st->head >= TP_QC_HIST)
		return TP_ERR_ARG;
	if (in->in_flag == TP_FLAG_MISSING || !isfinite(in->v))
		return TP_OK;
	fill(out, TP_FLAG_NOT_EVALUATED);
	out->test[TP_QC_SYNTAX] = in->in_flag == TP_FLAG_NOT_EVALUATED
	                              ? TP_FLAG_NOT_EVALUATED
	                              : TP_FLAG_PASS;
	out->test[TP_QC_GROSS_RANGE] = gross_range(cfg, in->v);
	out->test[TP_QC_CLIMATOLOGY] = climatology(cfg, in->v, in->time_s);
	accepted = in->in_flag != TP_FLAG_FAIL &&
	           out->test[TP_QC_GROSS_RANGE] != TP_FLAG_FAIL;
	ordered = !st->seen || in->time_s > st->last_s;
	if (ordered)
		gap_test(cfg, st, in->time_s, out);
	if (ordered && accepted)
		history_tests(cfg, st, in, peer, out);
	out->flag = in->in_flag;
	for (i = 0; i < TP_QC_N_TESTS; i++)
		out->flag = tp_qc_worse(out->flag, out->test[i]);
	if (ordered && accepted)
		st->head_flag = out->flag;
	return TP_OK;
}

void tp_qc_peer_from_state(const struct tp_qc_state *st, int64_t time_s,
                           int64_t window_s, struct tp_qc_peer *out)
{
	double sd = 0;

	if (out == NULL)
		return;
	*out = (struct tp_qc_peer){0};
	if (st == NULL || st->n < 2 || st->n > TP_QC_HIST ||
	    st->head >= TP_QC_HIST || st->t[st->head] != time_s ||
	    window_s <= 0 || !window_sd(st, 1, time_s, window_s, &sd))
		return;
	out->ok = true;
	out->dv = hv(st, 0) - hv(st, 1);
	out->sd = sd;
}
