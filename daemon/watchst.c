/*
 * watchst.c - what a station's readings tell the watchdog: silence ends,
 * battery level and trend, QC streaks, clock skew; see watch.h for the
 * rules and watchpriv.h for the state.
 */
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "emit.h"
#include "log.h"
#include "trend.h"
#include "watchpriv.h"

static int64_t mono(const struct watch *w)
{
	return clock_mono_ms(w->clock);
}

static int64_t real_s(const struct watch *w)
{
	int64_t ms = clock_real_ms(w->clock);

	return ms >= 0 ? ms / 1000 : -((-ms + 999) / 1000);
}

static void facts_init(struct facts *f, double value, double threshold)
{
	memset(f, 0, sizeof(*f));
	f->value = value;
	f->threshold = threshold;
	f->rate = NAN;
}

static struct wstation *find_station(struct watch *w, const char *name)
{
	size_t i;

	for (i = 0; i < w->n_st; i++) {
		if (strcmp(w->st[i].cfg->name, name) == 0)
			return &w->st[i];
	}
	return NULL;
}

/* ---- silence ends ------------------------------------------------------
 */

static void note_received(struct watch *w, struct wstation *s,
                          const struct watch_reading *r)
{
	int64_t late_s = real_s(w) - r->received_s, base;
	struct facts f;

	/* a reading received long ago (a replayed file) is no sign of
	 * life now: it moves the base only as far as its receive time */
	base = mono(w) - (late_s > 0 ? late_s * 1000 : 0);
	if (base > s->base_mono)
		s->base_mono = base;
	if (!s->seen || r->time_s > s->last_time_s)
		s->last_time_s = r->time_s;
	if (!s->seen || r->received_s > s->last_recv_s)
		s->last_recv_s = r->received_s;
	s->seen = true;
	if (!s->silent_open || mono(w) - s->base_mono >= s->silent_ms)
		return;
	facts_init(&f, (double)late_s, (double)(s->silent_ms / 1000));
	snprintf(f.msg, sizeof(f.msg), "%s: readings again", s->cfg->name);
	watch_judge(w, WATCH_SILENT, s->cfg->name, NULL, V_GOOD, &f);
	s->silent_open = false;
}

/* ---- values and QC streaks ---------------------------------------------
 */

static struct wval *value_slot(struct wstation *s, const char *name)
{
	size_t i;

	for (i = 0; i < s->n_vals; i++) {
		if (strcmp(s->vals[i].name, name) == 0)
			return &s->vals[i];
	}
	if (strlen(name) > WATCH_NAME_MAX || s->n_vals >= WATCH_MAX_VALUES)
		return NULL;
	if (s->vals == NULL) {
		s->vals = calloc(WATCH_MAX_VALUES, sizeof(*s->vals));
		s->exp = calloc(WATCH_MAX_VALUES, sizeof(*s->exp));
		if (s->vals == NULL || s->exp == NULL) {
			free(s->vals);
			free(s->exp);
			s->vals = NULL;
			s->exp = NULL;
			return NULL;
		}
	}
	memset(&s->vals[s->n_vals], 0, sizeof(s->vals[0]));
	snprintf(s->vals[s->n_vals].name, WATCH_NAME_MAX + 1, "%s", name);
	return &s->vals[s->n_vals++];
}

static void qc_streak(struct watch *w, struct wstation *s, struct wval *v)
{
	uint32_t n = s->cfg->qc_streak_n;
	enum verdict vd = V_HOLD;
	struct facts f;

	if (n == 0)
		return;
	if (v->flag == 3 || v->flag == 4) {
		v->bad_run++;
		v->good_run = 0;
	} else if (v->flag == 1 || v->flag == 2) {
		v->good_run++;
		v->bad_run = 0;
	}
	if (v->bad_run >= n)
		vd = V_BAD;
	else if (v->good_run >= s->cfg->qc_clear_n)
		vd = V_GOOD;
	facts_init(&f, v->v, (double)n);
	if (vd == V_BAD)
		snprintf(f.msg, sizeof(f.msg),
		         "%s: %s flagged %s %" PRIu32
		         " times in a row (last %.6g)",
		         s->cfg->name, v->name,
		         v->flag == 4 ? "fail (4)" : "suspect (3)", v->bad_run,
		         v->v);
	else
		snprintf(f.msg, sizeof(f.msg),
		         "%s: %s passes QC (%" PRIu32 " in a row; last %.6g)",
		         s->cfg->name, v->name, v->good_run, v->v);
	watch_judge(w, WATCH_QC_STREAK, s->cfg->name, v->name, vd, &f);
}

static void values(struct watch *w, struct wstation *s,
                   const struct watch_reading *r)
{
	struct wval *v;
	size_t i;

	for (i = 0; i < r->n_values; i++) {
		v = value_slot(s, r->values[i].name);
		if (v == NULL)
			continue;
		v->v = r->values[i].v;
		v->flag = r->values[i].flag;
		qc_streak(w, s, v);
	}
}

/* ---- battery level -----------------------------------------------------
 */

/* The critical level (see watch.h), 0 when off. */
static double critical_v(const struct cfg_battery *b)
{
	double gap;

	if (b->critical_v > 0)
		return b->critical_v;
	if (b->cutoff_v <= 0)
		return 0;
	gap = b->warn_v > b->cutoff_v ? (b->warn_v - b->cutoff_v) / 2 : 0.5;
	return b->cutoff_v + (gap < 0.5 ? gap : 0.5);
}

static void judge_level(struct watch *w, struct wstation *s, enum watch_cond c,
                        double level)
{
	const struct cfg_battery *b = &s->cfg->battery;
	enum verdict v = V_HOLD;
	struct facts f;

	if (level <= 0)
		return;
	if (s->battery_v < level)
		v = V_BAD;
	else if (s->battery_v >= level + b->hysteresis_v)
		v = V_GOOD;
	facts_init(&f, s->battery_v, level);
	snprintf(f.msg, sizeof(f.msg),
	         "%s: battery %.2f V (median of %zu)"
	         ", %s %.2f V%s",
	         s->cfg->name, s->battery_v, s->n_batt,
	         s->battery_v < level ? "below" : "above", level,
	         c == WATCH_BATTERY_CRITICAL ? " (critical level)" : "");
	watch_judge(w, c, s->cfg->name, NULL, v, &f);
}

static void battery_level(struct watch *w, struct wstation *s, double v)
{
	const struct cfg_battery *b = &s->cfg->battery;
	size_t cap = b->median_n, i;
	double tmp[WATCH_MEDIAN_MAX];

	if (cap < 1 || cap > WATCH_MEDIAN_MAX)
		cap = cap < 1 ? 1 : WATCH_MEDIAN_MAX;
	if (s->n_batt < cap) {
		s->batt[(s->batt_head + s->n_batt) % cap] = v;
		s->n_batt++;
	} else {
		s->batt[s->batt_head] = v;
		s->batt_head = (s->batt_head + 1) % cap;
	}
	if (s->n_batt < cap)
		return; /* a median of fewer would let one spike through */
	for (i = 0; i < s->n_batt; i++)
		tmp[i] = s->batt[i];
	s->battery_v = trend_median(tmp, s->n_batt);
	s->has_battery = true;
	judge_level(w, s, WATCH_BATTERY_LOW, b->warn_v);
	judge_level(w, s, WATCH_BATTERY_CRITICAL, critical_v(b));
}

/* ---- battery trend -----------------------------------------------------
 */

static void push_point(struct wstation *s, int64_t t, double v,
                       int64_t spacing_s)
{
	size_t newest, i;

	if (s->n_pts > 0) {
		newest = (s->pt_head + s->n_pts - 1) % TREND_MAX_PTS;
		if (t < s->pt_t[newest] + spacing_s)
			return; /* older (replayed) or too close: thinned */
	}
	if (s->n_pts < TREND_MAX_PTS) {
		i = (s->pt_head + s->n_pts++) % TREND_MAX_PTS;
	} else {
		i = s->pt_head;
		s->pt_head = (s->pt_head + 1) % TREND_MAX_PTS;
	}
	s->pt_t[i] = t;
	s->pt_v[i] = v;
}

/* Points of the window into w->pts, t in s before the newest; drops the
 * ones that fell out.  Returns the count. */
static size_t window(struct watch *w, struct wstation *s, int64_t *span)
{
	int64_t win = (int64_t)s->cfg->battery.trend_h * 3600, newest;
	size_t i, n = 0, k;

	newest = s->pt_t[(s->pt_head + s->n_pts - 1) % TREND_MAX_PTS];
	while (s->n_pts > 0 && s->pt_t[s->pt_head] < newest - win) {
		s->pt_head = (s->pt_head + 1) % TREND_MAX_PTS;
		s->n_pts--;
	}
	for (i = 0; i < s->n_pts; i++) {
		k = (s->pt_head + i) % TREND_MAX_PTS;
		w->pts[n].t = (double)(s->pt_t[k] - newest);
		w->pts[n++].v = s->pt_v[k];
	}
	*span = n > 0 ? (int64_t)-w->pts[0].t : 0;
	return n;
}

static int fit_with(struct watch *w, int method, const struct trend_pt *p,
                    size_t n, struct trend_fit *f)
{
	if (n < 2)
		return -1;
	if (method == CFG_FIT_LEAST_SQUARES)
		return trend_least_squares(p, n, f);
	return trend_theil_sen(p, n, w->work, trend_work_n(TREND_MAX_PTS), f);
}

/* Is the newest quarter of the span rising faster than "flat"? */
static bool charging(struct watch *w, struct wstation *s, size_t n,
                     int64_t span)
{
	const struct cfg_battery *b = &s->cfg->battery;
	struct trend_fit f;
	size_t first = n;

	while (first > 0 && w->pts[first - 1].t >= -(double)span / 4)
		first--;
	if (n - first < 3 ||
	    fit_with(w, b->fit, w->pts + first, n - first, &f) != 0)
		return false;
	return f.slope * 86400 > b->flat_v_per_day;
}

static void forecast_facts(struct wstation *s, double t_cut, double at0,
                           struct facts *f)
{
	const struct cfg_battery *b = &s->cfg->battery;
	struct buf tb;

	f->value = t_cut / 3600;
	f->threshold = b->forecast_h;
	f->rate = s->rate;
	f->forecast_s = s->forecast_s;
	buf_init(&tb, 64);
	emit_time(&tb, s->forecast_s);
	snprintf(f->msg, sizeof(f->msg),
	         "%s: battery %.2f V falling %.3f "
	         "V/day; cutoff %.2f V expected %s (in %.0f h)",
	         s->cfg->name, at0, -s->rate, b->cutoff_v, buf_str(&tb),
	         t_cut / 3600);
	buf_free(&tb);
}

/* The forecast verdict from a fit f of the whole window. */
static enum verdict forecast(struct watch *w, struct wstation *s,
                             const struct trend_fit *f, bool chg,
                             struct facts *fa)
{
	const struct cfg_battery *b = &s->cfg->battery;
	double t_cut, lim = (double)b->forecast_h * 3600;

	s->rate = f->slope * 86400;
	s->has_trend = true;
	s->forecast_s = 0;
	if (s->rate > -b->flat_v_per_day) {
		s->note = s->rate > b->flat_v_per_day ? "charging" : "flat";
		snprintf(fa->msg, sizeof(fa->msg),
		         "%s: battery trend %+.3f "
		         "V/day (%s)",
		         s->cfg->name, s->rate, s->note);
		return V_GOOD;
	}
	s->note = chg ? "charging" : "ok";
	if (trend_reach(f, b->cutoff_v, &t_cut) != 0)
		return V_GOOD;
	s->forecast_s = s->last_time_s + (int64_t)llround(t_cut);
	forecast_facts(s, t_cut, f->at0, fa);
	if (t_cut <= lim)
		return chg ? V_HOLD : V_BAD;
	return t_cut > 1.5 * lim ? V_GOOD : V_HOLD;
}

static void battery_trend(struct watch *w, struct wstation *s)
{
	const struct cfg_battery *b = &s->cfg->battery;
	struct trend_fit f;
	struct facts fa;
	int64_t span;
	size_t n;
	enum verdict v;

	n = window(w, s, &span);
	if (n < b->trend_min_n || span < (int64_t)b->trend_h * 900 ||
	    fit_with(w, b->fit, w->pts, n, &f) != 0) {
		s->note = "too few points";
		s->has_trend = false;
		s->forecast_s = 0;
		return;
	}
	facts_init(&fa, NAN, b->forecast_h);
	v = forecast(w, s, &f, charging(w, s, n, span), &fa);
	watch_judge(w, WATCH_BATTERY_FORECAST, s->cfg->name, NULL, v, &fa);
}

static void battery(struct watch *w, struct wstation *s,
                    const struct watch_reading *r)
{
	const struct cfg_battery *b = &s->cfg->battery;
	const struct watch_value *v = NULL;
	size_t i;
	int64_t spacing;

	if (!b->set || b->field == NULL)
		return;
	for (i = 0; i < r->n_values && v == NULL; i++) {
		if (strcmp(r->values[i].name, b->field) == 0)
			v = &r->values[i];
	}
	if (v == NULL || !isfinite(v->v) || v->flag == 4 || v->flag == 9 ||
	    v->flag == 0)
		return;
	battery_level(w, s, v->v);
	if (s->pt_t == NULL || v->flag == 3)
		return;
	spacing = (int64_t)b->trend_h * 3600 / TREND_MAX_PTS;
	push_point(s, r->time_s, v->v, spacing > 0 ? spacing : 1);
	battery_trend(w, s);
}

/* ---- clock -------------------------------------------------------------
 */

static void clock_sample(struct wstation *s, const struct watch_reading *r)
{
	size_t last;

	if (s->n_skew > 0 && r->received_s == s->skew_recv) {
		/* the same packet (or the same second): its newest time */
		if (r->time_s <= s->skew_time)
			return;
		last = (s->skew_head + s->n_skew - 1) % WATCH_SKEW_N;
		s->skew[last] = r->time_s - r->received_s;
		s->skew_time = r->time_s;
		return;
	}
	if (s->n_skew < WATCH_SKEW_N) {
		last = (s->skew_head + s->n_skew++) % WATCH_SKEW_N;
	} else {
		last = s->skew_head;
		s->skew_head = (s->skew_head + 1) % WATCH_SKEW_N;
	}
	s->skew[last] = r->time_s - r->received_s;
	s->skew_recv = r->received_s;
	s->skew_time = r->time_s;
}

static void clock_check(struct watch *w, struct wstation *s,
                        const struct watch_reading *r)
{
	double lim = s->cfg->clock_limit_s, m, tmp[WATCH_SKEW_N];
	enum verdict v = V_HOLD;
	struct facts f;
	size_t i;

	if (lim <= 0)
		return;
	clock_sample(s, r);
	if (s->n_skew < WATCH_SKEW_N)
		return;
	for (i = 0; i < s->n_skew; i++)
		tmp[i] = (double)s->skew[i];
	m = trend_median(tmp, s->n_skew);
	if (fabs(m) > lim)
		v = V_BAD;
	else if (fabs(m) < lim / 2)
		v = V_GOOD;
	facts_init(&f, m, lim);
	snprintf(f.msg, sizeof(f.msg),
	         "%s: packet times run %.0f s %s the "
	         "receive time (limit %.0f s)",
	         s->cfg->name, fabs(m), m >= 0 ? "ahead of" : "behind", lim);
	watch_judge(w, WATCH_CLOCK, s->cfg->name, NULL, v, &f);
}

/* ---- entry points ------------------------------------------------------
 */

void watch_reading(struct watch *w, const struct watch_reading *r)
{
	struct wstation *s = find_station(w, r->station);

	if (s == NULL)
		return;
	note_received(w, s, r);
	values(w, s, r);
	battery(w, s, r);
	clock_check(w, s, r);
	watch_rearm(w);
	if (w->ctx.changed != NULL)
		w->ctx.changed(w->ctx.changed_arg);
}

static int json_time(const cJSON *o, const char *key, int64_t *t)
{
	const cJSON *n = cJSON_GetObjectItemCaseSensitive(o, key);

	if (!cJSON_IsString(n) || emit_parse_time(n->valuestring, t) != 0)
		return -1;
	return 0;
}

static size_t json_values(const cJSON *root, struct watch_value *out)
{
	const cJSON *vals, *flags, *m, *fl;
	size_t n = 0;

	vals = cJSON_GetObjectItemCaseSensitive(root, "values");
	flags = cJSON_GetObjectItemCaseSensitive(root, "flags");
	if (!cJSON_IsObject(vals))
		return 0;
	for (m = vals->child; m != NULL && n < WATCH_MAX_VALUES; m = m->next) {
		if (m->string == NULL)
			continue;
		out[n].name = m->string;
		out[n].v = cJSON_IsNumber(m) ? m->valuedouble : NAN;
		fl = cJSON_GetObjectItemCaseSensitive(flags, m->string);
		out[n].flag = cJSON_IsNumber(fl) ? fl->valueint : 2;
		if (!isfinite(out[n].v))
			out[n].flag = 9;
		n++;
	}
	return n;
}

int watch_reading_json(struct watch *w, const char *json, size_t len)
{
	struct watch_value vals[WATCH_MAX_VALUES];
	struct watch_reading r;
	const cJSON *st;
	cJSON *root = cJSON_ParseWithLength(json, len);
	int rc = -1;

	st = cJSON_GetObjectItemCaseSensitive(root, "station");
	if (!cJSON_IsString(st) || json_time(root, "time", &r.time_s) != 0 ||
	    json_time(root, "received", &r.received_s) != 0)
		goto out;
	r.station = st->valuestring;
	r.values = vals;
	r.n_values = json_values(root, vals);
	watch_reading(w, &r);
	rc = 0;
out:
	cJSON_Delete(root);
	return rc;
}

void watch_accepted(struct watch *w, struct ring *ring, uint64_t last_seq,
                    uint64_t n)
{
	uint64_t seq;
	size_t len;

	if (n > last_seq)
		n = last_seq;
	for (seq = last_seq - n + 1; n > 0 && seq <= last_seq; seq++) {
		if (ring_read(ring, seq, w->rbuf, sizeof(w->rbuf) - 1, &len) !=
		    0)
			continue; /* freed already: nothing to judge */
		if (watch_reading_json(w, w->rbuf, len) != 0)
			log_warn("watch: read: ring seq %" PRIu64 ": not a "
			         "reading",
			         seq);
	}
}
