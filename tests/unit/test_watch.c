/*
 * test_watch.c - the watchdog on a fake clock moved by days in
 * milliseconds: every condition raises, repeats and clears; values
 * hovering at a threshold do not flap; open alerts survive a restart
 * (state file round trip); the battery forecast on synthetic discharge
 * curves (linear, noisy, with outliers, with a charging period, flat,
 * too few points) against an independent least-squares fit.
 *
 * Stations, readings and voltages are invented test data.
 */
#include <errno.h>
#include <math.h>
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
#include "watch.h"

/* ---- fixture -----------------------------------------------------------
 */

#define T0_S 1796000000LL /* 2026-11-30T..., invented */

static int64_t now_ms; /* monotonic; real = T0 + now */

static int64_t fake_mono(void *arg)
{
	(void)arg;
	return now_ms;
}

static int64_t fake_real(void *arg)
{
	(void)arg;
	return T0_S * 1000 + now_ms;
}

static const struct clock fake = {fake_mono, fake_real, NULL, 0};

struct rec {
	enum alert_kind kind;
	char cond[32], subject[40], field[40], id[160], msg[300];
	double value, rate;
	int64_t forecast_s, since_s;
};

static struct rec evs[512];
static size_t n_evs;

static void sink(void *arg, const struct alert_event *ev)
{
	struct rec *r = &evs[n_evs < 511 ? n_evs++ : 511];

	(void)arg;
	r->kind = ev->kind;
	snprintf(r->cond, sizeof(r->cond), "%s", ev->condition);
	snprintf(r->subject, sizeof(r->subject), "%s",
	         ev->station  ? ev->station
	         : ev->output ? ev->output
	                      : "ring");
	snprintf(r->field, sizeof(r->field), "%s", ev->field ? ev->field : "");
	snprintf(r->id, sizeof(r->id), "%s", ev->id);
	snprintf(r->msg, sizeof(r->msg), "%s", ev->message);
	r->value = ev->value;
	r->rate = ev->rate_per_day;
	r->forecast_s = ev->forecast_s;
	r->since_s = ev->since_s;
}

static char dir[64], state_path[128];

#define LAYOUT                                                                 \
	"{\"layouts\": [{\"name\": \"a\", \"fields\": ["                       \
	"{\"name\": \"ph\", \"type\": \"u8\"},"                                \
	"{\"name\": \"temperature\", \"type\": \"u8\"},"                       \
	"{\"name\": \"battery\", \"type\": \"u16\"}]}],\n"

/* rf2: every condition on, small numbers so tests stay short.  rf3: its
 * own silent_after_s.  rf4: least squares.  rf5: defaults only. */
static const char cfg_text[] =
    LAYOUT "\"stations\": {"
           "\"7\": {\"name\": \"rf2\", \"expect_every_s\": 900,"
           " \"qc_streak_n\": 3, \"qc_clear_n\": 2, \"clock_limit_s\": 600,"
           " \"battery\": {\"field\": \"battery\", \"warn_v\": 10.5,"
           " \"cutoff_v\": 6.0, \"forecast_h\": 72, \"trend_h\": 24,"
           " \"median_n\": 3}},"
           "\"8\": {\"name\": \"rf3\", \"silent_after_s\": 600},"
           "\"9\": {\"name\": \"rf4\", \"battery\": {\"field\": \"battery\","
           " \"warn_v\": 10.5, \"cutoff_v\": 6.0, \"forecast_h\": 72,"
           " \"fit\": \"least_squares\"}},"
           "\"10\": {\"name\": \"rf5\"}},"
           "\"outputs\": [{\"kind\": \"file\", \"name\": \"archive\","
           " \"path\": \"/dev/null\"}],"
           "\"alerts\": {\"repeat_s\": 3600, \"down_after_s\": 900,"
           " \"backlog_share\": 0.8}}";

static struct config *cfg;
static struct watch *w;

static struct config *load(const char *text)
{
	struct cfg_errors errs;
	struct config *c = NULL;
	size_t i;

	memset(&errs, 0, sizeof(errs));
	if (config_load_buffer("test.json", text, strlen(text), dir, &c,
	                       &errs) != 0) {
		for (i = 0; i < errs.n; i++)
			fprintf(stderr, "%s\n", errs.msg[i]);
	}
	cfg_errors_free(&errs);
	return c;
}

static struct watch *start(const struct config *c)
{
	struct watch_ctx ctx = {c,    &fake, NULL, state_path,
	                        sink, NULL,  NULL, NULL};
	struct watch *nw = NULL;
	char err[200];

	assert_int_equal(watch_new(&ctx, &nw, err, sizeof(err)), 0);
	return nw;
}

static int setup(void **state)
{
	(void)state;
	snprintf(dir, sizeof(dir), "/tmp/test_watch.XXXXXX");
	if (mkdtemp(dir) == NULL)
		return -1;
	snprintf(state_path, sizeof(state_path), "%s/alerts.json", dir);
	now_ms = 1000;
	n_evs = 0;
	cfg = load(cfg_text);
	if (cfg == NULL)
		return -1;
	w = start(cfg);
	return 0;
}

static int teardown(void **state)
{
	(void)state;
	watch_free(w);
	config_free(cfg);
	unlink(state_path);
	rmdir(dir);
	return 0;
}

/* Move the clock by ms, running watch_tick whenever it is due (what the
 * loop timer does). */
static void advance(int64_t ms)
{
	int64_t end = now_ms + ms, next;

	while (w != NULL) {
		next = watch_next_ms(w);
		if (next < 0 || now_ms + next > end)
			break;
		now_ms += next;
		watch_tick(w);
	}
	now_ms = end;
}

static int64_t real_now(void)
{
	return T0_S + now_ms / 1000;
}

/* One reading of station st, measured and received now (time_off_s:
 * the reading's time minus now). */
static void reading(const char *st, double batt, int bflag, double ph,
                    int pflag, int64_t time_off_s)
{
	struct watch_value v[2] = {{"battery", batt, bflag}, {"ph", ph, pflag}};
	struct watch_reading r = {st, real_now() + time_off_s, real_now(), v,
	                          2};

	watch_reading(w, &r);
}

static size_t count(enum alert_kind k, const char *cond)
{
	size_t i, n = 0;

	for (i = 0; i < n_evs; i++)
		n += evs[i].kind == k && strcmp(evs[i].cond, cond) == 0;
	return n;
}

static const struct rec *last(const char *cond)
{
	size_t i = n_evs;

	while (i > 0) {
		if (strcmp(evs[--i].cond, cond) == 0)
			return &evs[i];
	}
	return NULL;
}

/* ---- silent ------------------------------------------------------------
 */

/* rf2 expects a packet every 900 s: silent after 3 x 900 s; rf3 says
 * 600 s itself; rf5 knows nothing: the alerts section's 3600 s; rf4 sent
 * nothing at all: 3600 s from the start.  Each step moves the clock and
 * says how many silent alerts are open by then. */
static const struct {
	int64_t advance_s;
	size_t raised;
	const char *newest;
} silent_steps[] = {
    {599, 0, NULL},   /* t = 600 s: not yet (rf3 is due at 601 s) */
    {2, 1, "rf3"},    /* t = 602 s */
    {2098, 1, "rf3"}, /* t = 2700 s: rf2 is due at 2701 s */
    {2, 2, "rf2"},    /* t = 2702 s */
    {900, 4, NULL},   /* t = 3602 s: rf4 and rf5 */
};

static void silent_raise_repeat_clear(void **state)
{
	size_t i;

	(void)state;
	reading("rf2", 12.5, 1, 8.0, 1, 0);
	reading("rf3", 12.5, 1, 8.0, 1, 0);
	reading("rf5", 12.5, 1, 8.0, 1, 0);
	/* the next wake-up is the nearest deadline, not a tick */
	assert_int_equal(watch_next_ms(w), 600 * 1000);
	for (i = 0; i < sizeof(silent_steps) / sizeof(silent_steps[0]); i++) {
		advance(silent_steps[i].advance_s * 1000);
		assert_int_equal(count(ALERT_RAISED, "silent"),
		                 silent_steps[i].raised);
		if (silent_steps[i].newest != NULL)
			assert_string_equal(last("silent")->subject,
			                    silent_steps[i].newest);
	}
	assert_float_equal(evs[0].value, 600, 1.5);
	assert_int_equal(count(ALERT_REPEATED, "silent"), 0);
	advance(3600 * 1000); /* each repeated once, with a larger age */
	assert_int_equal(count(ALERT_REPEATED, "silent"), 4);
	assert_true(last("silent")->value > 3600);
	advance(3 * 86400 * 1000LL); /* 3 days: 72 more repeats each */
	assert_int_equal(count(ALERT_REPEATED, "silent"), 4 + 4 * 72);
	assert_int_equal(count(ALERT_RAISED, "silent"), 4);
	reading("rf3", 12.5, 1, 8.0, 1, 0);
	assert_int_equal(count(ALERT_CLEARED, "silent"), 1);
	assert_string_equal(last("silent")->subject, "rf3");
	assert_int_equal(watch_n_alerts(w), 3);
}

/* A reading received long ago (a replayed archive) is no sign of life. */
static void silent_not_cleared_by_old_reading(void **state)
{
	struct watch_value v[1] = {{"ph", 8.0, 1}};
	struct watch_reading r = {"rf3", 0, 0, v, 1};

	(void)state;
	advance(700 * 1000);
	assert_int_equal(count(ALERT_RAISED, "silent"), 1);
	r.time_s = real_now() - 86400;
	r.received_s = real_now() - 86400;
	watch_reading(w, &r);
	assert_int_equal(count(ALERT_CLEARED, "silent"), 0);
	r.received_s = real_now();
	watch_reading(w, &r);
	assert_int_equal(count(ALERT_CLEARED, "silent"), 1);
}

/* ---- battery level -----------------------------------------------------
 */

struct level_row {
	const char *why;
	double v[16];
	int flag[16]; /* 0 means 1 */
	size_t n;
	size_t low_raised, low_cleared, crit_raised;
};

static const struct level_row level_rows[] = {
    {"one noisy reading does not alert (median of 3)",
     {12, 12, 3.0, 12, 12},
     {0},
     5,
     0,
     0,
     0},
    {"a real fall alerts once",
     {11, 10.8, 10.4, 10.3, 10.2, 10.1},
     {0},
     6,
     1,
     0,
     0},
    {"hovering at the threshold does not flap (hysteresis 0.2 V)",
     {10.4, 10.4, 10.4, 10.6, 10.55, 10.6, 10.45, 10.6, 10.65, 10.4, 10.6,
      10.62},
     {0},
     12,
     1,
     0,
     0},
    {"recovery past warn_v + hysteresis clears",
     {10.4, 10.4, 10.4, 10.8, 10.8, 10.8},
     {0},
     6,
     1,
     1,
     0},
    {"critical below cutoff + min(0.5, (10.5 - 6) / 2) = 6.5 V",
     {6.4, 6.4, 6.4},
     {0},
     3,
     1,
     0,
     1},
    {"fail-flagged (4) and missing (9) values are ignored",
     {12, 12, 12, 2, 2, 2, 2},
     {1, 1, 1, 4, 4, 9, 4},
     7,
     0,
     0,
     0},
};

static void battery_levels(void **state)
{
	size_t i, k;

	(void)state;
	for (i = 0; i < sizeof(level_rows) / sizeof(level_rows[0]); i++) {
		const struct level_row *r = &level_rows[i];

		teardown(NULL);
		setup(NULL);
		for (k = 0; k < r->n; k++) {
			advance(900 * 1000);
			reading("rf2", r->v[k], r->flag[k] ? r->flag[k] : 1,
			        8.0, 1, 0);
		}
		print_message("row: %s\n", r->why);
		assert_int_equal(count(ALERT_RAISED, "battery_low"),
		                 r->low_raised);
		assert_int_equal(count(ALERT_CLEARED, "battery_low"),
		                 r->low_cleared);
		assert_int_equal(count(ALERT_RAISED, "battery_critical"),
		                 r->crit_raised);
	}
}

/* ---- battery forecast --------------------------------------------------
 */

struct curve_row {
	const char *why;
	const char *station;
	double rate_per_day; /* of the discharge */
	double noise;        /* +- uniform, V */
	double outlier_share, outlier_v;
	int outlier_flag;                /* flag of the outliers */
	double charge_h, charge_per_day; /* a charging end of the series */
	size_t n;                        /* readings, one per 15 min */
	size_t raised;
	const char *note;
};

static const struct curve_row curve_rows[] = {
    {"slow linear fall: cutoff in 6 days, beyond 72 h", "rf2", -1.0, 0, 0, 0, 1,
     0, 0, 120, 0, "ok"},
    {"fast linear fall: cutoff in 58 h", "rf2", -2.5, 0, 0, 0, 1, 0, 0, 120, 1,
     "ok"},
    {"fast fall with noise", "rf2", -2.5, 0.05, 0, 0, 1, 0, 0, 120, 1, "ok"},
    {"fast fall, 15 % unflagged outliers (Theil-Sen holds)", "rf2", -2.5, 0.02,
     0.15, 3.0, 1, 0, 0, 120, 1, "ok"},
    {"fast fall, flagged outliers are ignored", "rf2", -2.5, 0, 0.3, -5.0, 4, 0,
     0, 120, 1, "ok"},
    {"rising all along (charged): no alert", "rf2", 1.0, 0, 0, 0, 1, 0, 0, 120,
     0, "charging"},
    {"a fall that would alert, but charging began: no alert", "rf2", -2.5, 0, 0,
     0, 1, 4.5, 6.0, 36, 0, "charging"},
    {"flat: no alert", "rf2", 0, 0.01, 0, 0, 1, 0, 0, 120, 0, "flat"},
    {"too few points: no alert", "rf2", -2.5, 0, 0, 0, 1, 0, 0, 4, 0,
     "too few points"},
    {"least squares station", "rf4", -2.5, 0, 0, 0, 1, 0, 0, 120, 1, "ok"},
};

static uint64_t rng = 0x9E3779B97F4A7C15ull;

static double uniform(void)
{
	rng ^= rng >> 12;
	rng ^= rng << 25;
	rng ^= rng >> 27;
	return (double)((rng * 2685821657736338717ull) >> 11) /
	       9007199254740992.0;
}

/* The curve's value at step k (of n), and its flag. */
static double curve_v(const struct curve_row *r, size_t k, int *flag)
{
	double h = (double)k / 4, v, ch_start = (double)r->n / 4 - r->charge_h;

	v = 12.5 + r->rate_per_day * h / 24;
	if (r->charge_h > 0 && h > ch_start)
		v = 12.5 + r->rate_per_day * ch_start / 24 +
		    r->charge_per_day * (h - ch_start) / 24;
	v += r->noise * (uniform() * 2 - 1);
	*flag = 1;
	if (uniform() < r->outlier_share) {
		v += r->outlier_v;
		*flag = r->outlier_flag;
	}
	return v;
}

/* Independent least squares over (t, v) (uncentred normal equations):
 * slope = (n Stv - St Sv) / (n Stt - St^2). */
static double lsq_slope(const double *t, const double *v, size_t n)
{
	double st = 0, sv = 0, stt = 0, stv = 0;
	size_t i;

	for (i = 0; i < n; i++) {
		st += t[i];
		sv += v[i];
		stt += t[i] * t[i];
		stv += t[i] * v[i];
	}
	return (n * stv - st * sv) / (n * stt - st * st);
}

static void check_curve(const struct curve_row *r, const double *t,
                        const double *v, size_t m)
{
	struct watch_station_info si;
	struct alert_event ev;
	double truth_h, v_end;
	size_t i;

	for (i = 0; i < watch_n_stations(w); i++) {
		watch_station(w, i, &si);
		if (strcmp(si.cfg->name, r->station) == 0)
			break;
	}
	assert_string_equal(si.trend_note, r->note);
	if (count(ALERT_RAISED, "battery_forecast") != r->raised)
		print_message("unexpected: %s\n",
		              last("battery_forecast")->msg);
	assert_int_equal(count(ALERT_RAISED, "battery_forecast"), r->raised);
	if (r->raised == 0)
		return;
	/* the rate when raised, in V/day: close to the truth */
	assert_float_equal(last("battery_forecast")->rate, r->rate_per_day,
	                   0.1);
	/* the open alert's forecast now: the true line reaches 6 V then */
	for (i = 0; i < watch_n_alerts(w); i++) {
		watch_alert(w, i, &ev);
		if (strcmp(ev.condition, "battery_forecast") == 0)
			break;
	}
	assert_true(i < watch_n_alerts(w));
	v_end = 12.5 + r->rate_per_day * ((double)(r->n - 1) / 4) / 24;
	truth_h = (6.0 - v_end) / (r->rate_per_day / 24);
	assert_float_equal((double)(ev.forecast_s - si.last_time_s) / 3600,
	                   truth_h, 2.0);
	if (strcmp(r->station, "rf4") != 0)
		return;
	/* the least-squares station equals an independent fit of the same
	 * window (t in days, so the slope is in V/day) */
	assert_float_equal(si.rate_v_per_day, lsq_slope(t, v, m), 1e-6);
}

static void battery_forecast(void **state)
{
	double t[200], v[200];
	size_t i, k, m;
	int flag;

	(void)state;
	for (i = 0; i < sizeof(curve_rows) / sizeof(curve_rows[0]); i++) {
		const struct curve_row *r = &curve_rows[i];

		teardown(NULL);
		setup(NULL);
		print_message("row: %s\n", r->why);
		for (k = 0, m = 0; k < r->n; k++) {
			advance(900 * 1000);
			v[m] = curve_v(r, k, &flag);
			reading(r->station, v[m], flag, 8.0, 1, 0);
			t[m] = (double)(real_now() - T0_S) / 86400;
			/* the fit's window: the last 24 h (97 steps of 15
			 * min, both ends in), flags 1 and 2 */
			if (flag == 1 && k + 97 >= r->n)
				m++;
		}
		check_curve(r, t, v, m);
	}
}

/* Once raised, a forecast drifting just past forecast_h (but within 1.5
 * x) holds; a fall that stops clears it. */
static void forecast_hysteresis(void **state)
{
	double bv = 12.5;
	size_t k;

	(void)state;
	for (k = 0; k < 100; k++) {
		advance(900 * 1000);
		bv -= 2.5 / 96; /* 2.5 V/day */
		reading("rf2", bv, 1, 8.0, 1, 0);
	}
	assert_int_equal(count(ALERT_RAISED, "battery_forecast"), 1);
	for (k = 0; k < 200; k++) { /* then flat for two days */
		advance(900 * 1000);
		reading("rf2", bv, 1, 8.0, 1, 0);
	}
	assert_int_equal(count(ALERT_CLEARED, "battery_forecast"), 1);
	assert_int_equal(count(ALERT_RAISED, "battery_forecast"), 1);
}

/* ---- QC streaks --------------------------------------------------------
 */

struct qc_row {
	const char *why;
	int flags[12];
	size_t n, raised, cleared;
};

static const struct qc_row qc_rows[] = {
    {"3 in a row alerts (3 and 4 both count)", {1, 3, 3, 4}, 4, 1, 0},
    {"a pass breaks the streak", {3, 3, 1, 3, 3}, 5, 0, 0},
    {"missing (9) neither counts nor breaks", {3, 3, 9, 3}, 4, 1, 0},
    {"2 good in a row clear", {4, 4, 4, 1, 1}, 5, 1, 1},
    {"alternating good and bad does not flap",
     {3, 3, 3, 1, 3, 1, 3, 2, 4, 1, 3},
     11,
     1,
     0},
};

static void qc_streaks(void **state)
{
	size_t i, k;

	(void)state;
	for (i = 0; i < sizeof(qc_rows) / sizeof(qc_rows[0]); i++) {
		const struct qc_row *r = &qc_rows[i];

		teardown(NULL);
		setup(NULL);
		for (k = 0; k < r->n; k++) {
			advance(900 * 1000);
			reading("rf2", 12.5, 1, 9.9, r->flags[k], 0);
		}
		print_message("row: %s\n", r->why);
		assert_int_equal(count(ALERT_RAISED, "qc_streak"), r->raised);
		assert_int_equal(count(ALERT_CLEARED, "qc_streak"), r->cleared);
		if (r->raised > 0)
			assert_string_equal(last("qc_streak")->field, "ph");
	}
}

/* ---- clock -------------------------------------------------------------
 */

struct clock_row {
	const char *why;
	int64_t skew[8];
	size_t n, raised, cleared;
};

static const struct clock_row clock_rows[] = {
    {"ahead by 700 s three times", {700, 700, 700}, 3, 1, 0},
    {"behind by 700 s", {-700, -700, -700}, 3, 1, 0},
    {"one stale packet is outvoted", {0, -5000, 0, 0}, 4, 0, 0},
    {"inside half the limit clears", {700, 700, 700, 100, 100}, 5, 1, 1},
    {"between half and the full limit holds",
     {700, 700, 700, 400, 400, 400},
     6,
     1,
     0},
};

static void clock_skew(void **state)
{
	size_t i, k;

	(void)state;
	for (i = 0; i < sizeof(clock_rows) / sizeof(clock_rows[0]); i++) {
		const struct clock_row *r = &clock_rows[i];

		teardown(NULL);
		setup(NULL);
		for (k = 0; k < r->n; k++) {
			advance(900 * 1000);
			reading("rf2", 12.5, 1, 8.0, 1, r->skew[k]);
		}
		print_message("row: %s\n", r->why);
		assert_int_equal(count(ALERT_RAISED, "clock"), r->raised);
		assert_int_equal(count(ALERT_CLEARED, "clock"), r->cleared);
	}
}

/* The records of one packet (one receive time) count as one sample: its
 * newest reading time. */
static void clock_multi_record_packet(void **state)
{
	size_t k;
	int j;

	(void)state;
	for (k = 0; k < 4; k++) {
		advance(3600 * 1000);
		for (j = 3; j >= 0; j--)
			reading("rf2", 12.5, 1, 8.0, 1, -900 * j);
	}
	assert_int_equal(count(ALERT_RAISED, "clock"), 0);
}

/* ---- outputs and ring --------------------------------------------------
 */

static void output_down(void **state)
{
	struct watch_output o = {"archive", true, 0, 42};

	(void)state;
	o.down_since_s = real_now();
	watch_outputs(w, &o, 1);
	advance(899 * 1000);
	assert_int_equal(count(ALERT_RAISED, "output_down"), 0);
	advance(2 * 1000);
	assert_int_equal(count(ALERT_RAISED, "output_down"), 1);
	assert_string_equal(last("output_down")->subject, "archive");
	advance(3600 * 1000);
	assert_int_equal(count(ALERT_REPEATED, "output_down"), 1);
	assert_true(last("output_down")->value >= 4500);
	o.failing = false;
	watch_outputs(w, &o, 1);
	assert_int_equal(count(ALERT_CLEARED, "output_down"), 1);
	/* an output failing briefly never alerts */
	o.failing = true;
	o.down_since_s = real_now();
	watch_outputs(w, &o, 1);
	advance(600 * 1000);
	o.failing = false;
	watch_outputs(w, &o, 1);
	advance(3600 * 1000);
	assert_int_equal(count(ALERT_RAISED, "output_down"), 1);
}

struct ring_row {
	const char *why;
	double used; /* share */
	uint64_t refused;
	int failed;
	size_t backlog_raised, backlog_cleared, full_raised, failed_raised;
};

/* Applied in order on one watch: the counts are cumulative. */
static const struct ring_row ring_rows[] = {
    {"half full: nothing", 0.5, 0, 0, 0, 0, 0, 0},
    {"85 %: backlog", 0.85, 0, 0, 1, 0, 0, 0},
    {"75 %: within the band, holds", 0.75, 0, 0, 1, 0, 0, 0},
    {"82 %: still the same alert", 0.82, 0, 0, 1, 0, 0, 0},
    {"65 %: under 0.8 - 0.1, clears", 0.65, 0, 0, 1, 1, 0, 0},
    {"refusals: ring_full", 0.99, 10, 0, 2, 1, 1, 0},
    {"more refusals: the same alert", 0.99, 25, 0, 2, 1, 1, 0},
    {"I/O error: ring_failed", 0.99, 25, EIO, 2, 1, 1, 1},
};

static void ring_conditions(void **state)
{
	struct ring_stat st;
	size_t i;

	(void)state;
	memset(&st, 0, sizeof(st));
	st.data_bytes = 1000000;
	watch_ring(w, &st); /* the first figures: a baseline */
	for (i = 0; i < sizeof(ring_rows) / sizeof(ring_rows[0]); i++) {
		const struct ring_row *r = &ring_rows[i];

		st.used_bytes = (uint64_t)(r->used * 1e6);
		st.refused = r->refused;
		st.failed = r->failed;
		advance(10 * 1000);
		watch_ring(w, &st);
		print_message("row: %s\n", r->why);
		assert_int_equal(count(ALERT_RAISED, "backlog"),
		                 r->backlog_raised);
		assert_int_equal(count(ALERT_CLEARED, "backlog"),
		                 r->backlog_cleared);
		assert_int_equal(count(ALERT_RAISED, "ring_full"),
		                 r->full_raised);
		assert_int_equal(count(ALERT_RAISED, "ring_failed"),
		                 r->failed_raised);
	}
	/* quiet for WATCH_QUIET_S: ring_full clears; healthy: failed too */
	advance(WATCH_QUIET_S * 1000);
	assert_int_equal(count(ALERT_CLEARED, "ring_full"), 1);
	st.failed = 0;
	watch_ring(w, &st);
	assert_int_equal(count(ALERT_CLEARED, "ring_failed"), 1);
}

/* ---- restart -----------------------------------------------------------
 */

static void restart_keeps_open_alerts(void **state)
{
	struct watch_output o = {"archive", true, 0, 7};
	struct alert_event ev;
	char ids[3][160];
	size_t i, before, open_n;

	(void)state;
	for (i = 0; i < 3; i++) {
		advance(900 * 1000);
		reading("rf2", 10.0, 1, 8.0, 1, 0);
	}
	o.down_since_s = real_now();
	watch_outputs(w, &o, 1);
	advance(1000 * 1000); /* output_down, silent rf3 and rf5 */
	assert_int_equal(count(ALERT_RAISED, "battery_low"), 1);
	open_n = watch_n_alerts(w);
	assert_true(open_n >= 4); /* and silent rf3, rf4, rf5 */
	for (i = 0; i < 3; i++) {
		watch_alert(w, i, &ev);
		snprintf(ids[i], sizeof(ids[i]), "%s", ev.id);
	}
	watch_free(w); /* writes the state file */
	w = NULL;
	before = n_evs;
	advance(1800 * 1000); /* down for half an hour */
	w = start(cfg);
	/* nothing raised again; the same ids */
	assert_int_equal(n_evs, before);
	assert_int_equal(watch_n_alerts(w), open_n);
	for (i = 0; i < 3; i++) {
		watch_alert(w, i, &ev);
		assert_string_equal(ev.id, ids[i]);
	}
	/* repeats keep their schedule: battery_low was raised at t = 2701
	 * s, now t = 5501 s: due at 6301 s */
	advance(798 * 1000);
	assert_int_equal(count(ALERT_REPEATED, "battery_low"), 0);
	advance(3 * 1000);
	assert_int_equal(count(ALERT_REPEATED, "battery_low"), 1);
	/* and clear as usual */
	for (i = 0; i < 3; i++)
		reading("rf2", 12.0, 1, 8.0, 1, 0);
	assert_int_equal(count(ALERT_CLEARED, "battery_low"), 1);
	assert_int_equal(count(ALERT_RAISED, "battery_low"), 1);
}

static void state_file_content(void **state)
{
	char text[8192], tmpname[200];
	FILE *f;
	size_t n;
	cJSON *root, *a;

	(void)state;
	advance(700 * 1000); /* silent rf3 */
	watch_free(w);
	w = NULL;
	f = fopen(state_path, "r");
	assert_non_null(f);
	n = fread(text, 1, sizeof(text) - 1, f);
	fclose(f);
	text[n] = '\0';
	root = cJSON_Parse(text);
	assert_non_null(root);
	a = cJSON_GetObjectItem(root, "alerts");
	assert_int_equal(cJSON_GetArraySize(a), 1);
	assert_string_equal(
	    cJSON_GetObjectItem(cJSON_GetArrayItem(a, 0), "condition")
	        ->valuestring,
	    "silent");
	cJSON_Delete(root);
	/* no temp file is left next to it */
	snprintf(tmpname, sizeof(tmpname), "%s.tmp-%ld", state_path,
	         (long)getpid());
	assert_int_equal(access(tmpname, F_OK), -1);
	w = start(cfg);
}

/* A station removed from the config: its restored alert is cleared. */
static void restart_with_station_removed(void **state)
{
	static const char small[] =
	    LAYOUT "\"stations\": {\"7\": {\"name\": \"rf2\"}},"
	           "\"alerts\": {\"repeat_s\": 3600}}";
	struct config *c2;

	(void)state;
	advance(700 * 1000); /* silent rf3 */
	assert_int_equal(watch_n_alerts(w), 1);
	watch_free(w);
	c2 = load(small);
	assert_non_null(c2);
	w = start(c2);
	assert_int_equal(count(ALERT_CLEARED, "silent"), 1);
	assert_int_equal(watch_n_alerts(w), 0);
	watch_free(w);
	config_free(c2);
	w = start(cfg);
}

/* A garbled state file is ignored (and logged), not fatal. */
static void bad_state_file(void **state)
{
	FILE *f;

	(void)state;
	watch_free(w);
	f = fopen(state_path, "w");
	assert_non_null(f);
	fputs("{\"alerts\": [{\"condition\": \"nonsense\"}, 42", f);
	fclose(f);
	w = start(cfg);
	assert_int_equal(watch_n_alerts(w), 0);
}

/* ---- the rest ----------------------------------------------------------
 */

static void json_readings(void **state)
{
	static const char good[] =
	    "{\"id\": \"rf2-1796020500-118-0\", \"station\": \"rf2\","
	    " \"seq\": 118, \"layout\": \"a\","
	    " \"time\": \"2026-11-30T06:15:00Z\","
	    " \"received\": \"2026-11-30T07:02:11Z\","
	    " \"values\": {\"ph\": 8.012, \"battery\": 12.48,"
	    " \"temperature\": null},"
	    " \"flags\": {\"ph\": 1, \"battery\": 1, \"temperature\": 9}}";
	struct watch_station_info si;

	(void)state;
	assert_int_equal(watch_reading_json(w, good, strlen(good)), 0);
	watch_station(w, 0, &si);
	assert_true(si.seen);
	assert_int_equal(si.n_values, 3);
	assert_string_equal(si.values[0].name, "ph");
	assert_float_equal(si.values[0].v, 8.012, 1e-12);
	assert_int_equal(si.values[2].flag, 9);
	/* 2026-11-30T06:15:00Z = 1796019300 s (GNU date -u -d) */
	assert_int_equal(si.last_time_s, 1796019300);
	assert_int_equal(watch_reading_json(w, "{\"station\": 1}", 14), -1);
	assert_int_equal(watch_reading_json(w, "not json", 8), -1);
}

static void notices(void **state)
{
	(void)state;
	watch_notice(w, "dashboard", "deadletter", "12 readings refused");
	assert_int_equal(n_evs, 1);
	assert_int_equal(evs[0].kind, ALERT_NOTICE);
	assert_string_equal(evs[0].subject, "dashboard");
	assert_int_equal(watch_n_alerts(w), 0);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test_setup_teardown(silent_raise_repeat_clear, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(silent_not_cleared_by_old_reading,
	                                    setup, teardown),
	    cmocka_unit_test_setup_teardown(battery_levels, setup, teardown),
	    cmocka_unit_test_setup_teardown(battery_forecast, setup, teardown),
	    cmocka_unit_test_setup_teardown(forecast_hysteresis, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(qc_streaks, setup, teardown),
	    cmocka_unit_test_setup_teardown(clock_skew, setup, teardown),
	    cmocka_unit_test_setup_teardown(clock_multi_record_packet, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(output_down, setup, teardown),
	    cmocka_unit_test_setup_teardown(ring_conditions, setup, teardown),
	    cmocka_unit_test_setup_teardown(restart_keeps_open_alerts, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(state_file_content, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(restart_with_station_removed, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(bad_state_file, setup, teardown),
	    cmocka_unit_test_setup_teardown(json_readings, setup, teardown),
	    cmocka_unit_test_setup_teardown(notices, setup, teardown),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
