/*
 * watch.c - the watchdog's conditions and the life of alerts; see
 * watch.h.  The state file is in watchfile.c.
 */
#include <errno.h>
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "emit.h"
#include "log.h"
#include "trend.h"
#include "watch.h"
#include "watchpriv.h"

enum scope { SC_STATION, SC_OUTPUT, SC_RING };

static const struct {
	const char *name, *severity, *unit;
	enum scope scope;
} conds[WATCH_N_COND] = {
    [WATCH_SILENT] = {"silent", "warning", "s", SC_STATION},
    [WATCH_BATTERY_LOW] = {"battery_low", "warning", "V", SC_STATION},
    [WATCH_BATTERY_CRITICAL] = {"battery_critical", "critical", "V",
                                SC_STATION},
    [WATCH_BATTERY_FORECAST] = {"battery_forecast", "warning", "h", SC_STATION},
    [WATCH_QC_STREAK] = {"qc_streak", "warning", NULL, SC_STATION},
    [WATCH_CLOCK] = {"clock", "warning", "s", SC_STATION},
    [WATCH_OUTPUT_DOWN] = {"output_down", "critical", "s", SC_OUTPUT},
    [WATCH_BACKLOG] = {"backlog", "warning", "1", SC_RING},
    [WATCH_RING_FULL] = {"ring_full", "critical", NULL, SC_RING},
    [WATCH_RING_FAILED] = {"ring_failed", "critical", NULL, SC_RING},
};

const char *watch_cond_name(enum watch_cond c)
{
	return (unsigned)c < WATCH_N_COND ? conds[c].name : "unknown";
}

int watch_cond_find(const char *name)
{
	int i;

	for (i = 0; i < WATCH_N_COND; i++) {
		if (strcmp(conds[i].name, name) == 0)
			return i;
	}
	return -1;
}

static int64_t mono(const struct watch *w)
{
	return clock_mono_ms(w->clock);
}

static int64_t real_s(const struct watch *w)
{
	int64_t ms = clock_real_ms(w->clock);

	return ms >= 0 ? ms / 1000 : -((-ms + 999) / 1000);
}

/* "3h12m", "45s", "2d3h": a duration for messages. */
static void fmt_dur(char *out, size_t cap, int64_t s)
{
	if (s < 0)
		s = 0;
	if (s < 120)
		snprintf(out, cap, "%" PRId64 "s", s);
	else if (s < 7200)
		snprintf(out, cap, "%" PRId64 "m", s / 60);
	else if (s < 172800)
		snprintf(out, cap, "%" PRId64 "h%02" PRId64 "m", s / 3600,
		         s / 60 % 60);
	else
		snprintf(out, cap, "%" PRId64 "d%02" PRId64 "h", s / 86400,
		         s / 3600 % 24);
}

/* ---- the alert table ---------------------------------------------------
 */

struct walert *watch_find(struct watch *w, enum watch_cond c,
                          const char *subject, const char *field)
{
	size_t i;

	for (i = 0; i < w->n_al; i++) {
		struct walert *a = &w->al[i];

		if (a->cond == c && strcmp(a->subject, subject) == 0 &&
		    strcmp(a->field, field != NULL ? field : "") == 0)
			return a;
	}
	return NULL;
}

void watch_make_id(struct walert *a)
{
	if (a->field[0] != '\0')
		snprintf(a->id, sizeof(a->id), "%s-%s-%s-%" PRId64,
		         conds[a->cond].name, a->subject, a->field, a->since_s);
	else
		snprintf(a->id, sizeof(a->id), "%s-%s-%" PRId64,
		         conds[a->cond].name, a->subject, a->since_s);
}

/* A new row (zeroed), or NULL when the table is at its cap. */
struct walert *watch_add(struct watch *w)
{
	struct walert *n;
	size_t cap;

	if (w->n_al == w->cap_al) {
		if (w->cap_al >= WATCH_MAX_ALERTS)
			return NULL;
		cap = w->cap_al ? w->cap_al * 2 : 16;
		if (cap > WATCH_MAX_ALERTS)
			cap = WATCH_MAX_ALERTS;
		n = realloc(w->al, cap * sizeof(*n));
		if (n == NULL)
			return NULL;
		w->al = n;
		w->cap_al = cap;
	}
	n = &w->al[w->n_al++];
	memset(n, 0, sizeof(*n));
	return n;
}

static void fill_event(const struct walert *a, enum alert_kind kind,
                       int64_t now_s, struct alert_event *ev)
{
	memset(ev, 0, sizeof(*ev));
	ev->kind = kind;
	ev->id = a->id;
	ev->condition = conds[a->cond].name;
	ev->severity = conds[a->cond].severity;
	if (conds[a->cond].scope == SC_STATION)
		ev->station = a->subject;
	else if (conds[a->cond].scope == SC_OUTPUT)
		ev->output = a->subject;
	ev->field = a->field[0] != '\0' ? a->field : NULL;
	ev->since_s = a->since_s;
	ev->time_s = now_s;
	ev->value = a->value;
	ev->threshold = a->threshold;
	ev->unit = conds[a->cond].unit;
	ev->forecast_s = a->forecast_s;
	ev->rate_per_day = a->rate;
	ev->message = a->msg;
}

static void emit(struct watch *w, const struct walert *a, enum alert_kind kind)
{
	char msg[WATCH_MSG_MAX + 32];
	struct alert_event ev;

	fill_event(a, kind, real_s(w), &ev);
	if (kind == ALERT_CLEARED) {
		snprintf(msg, sizeof(msg), "back to normal: %s", a->msg);
		ev.message = msg;
	}
	if (w->ctx.sink != NULL)
		w->ctx.sink(w->ctx.sink_arg, &ev);
}

static void changed(struct watch *w)
{
	if (w->ctx.changed != NULL)
		w->ctx.changed(w->ctx.changed_arg);
}

static void copy_facts(struct walert *a, const struct facts *f)
{
	a->value = f->value;
	a->threshold = f->threshold;
	a->forecast_s = f->forecast_s;
	a->rate = f->rate;
	snprintf(a->msg, sizeof(a->msg), "%s", f->msg);
}

static void raise_alert(struct watch *w, enum watch_cond c, const char *subject,
                        const char *field, const struct facts *f)
{
	struct walert *a = watch_add(w);

	if (a == NULL) {
		log_err("watch: raise: %s %s: more than %d open alerts",
		        conds[c].name, subject, WATCH_MAX_ALERTS);
		return;
	}
	a->cond = c;
	snprintf(a->subject, sizeof(a->subject), "%s", subject);
	snprintf(a->field, sizeof(a->field), "%s", field ? field : "");
	a->since_s = f->since_s != 0 ? f->since_s : real_s(w);
	watch_make_id(a);
	copy_facts(a, f);
	a->sent_s = real_s(w);
	a->repeat_mono = mono(w) + (int64_t)w->cfg->alerts.repeat_s * 1000;
	emit(w, a, ALERT_RAISED);
	watch_save(w);
	changed(w);
}

static void clear_alert(struct watch *w, struct walert *a,
                        const struct facts *f)
{
	if (f != NULL)
		copy_facts(a, f);
	emit(w, a, ALERT_CLEARED);
	*a = w->al[--w->n_al];
	watch_save(w);
	changed(w);
}

/* The core of the life cycle: raise once, keep the current value while
 * it lasts (repeats use it), clear once.  V_HOLD is the hysteresis band:
 * nothing opens or closes there. */
void watch_judge(struct watch *w, enum watch_cond c, const char *subject,
                 const char *field, enum verdict v, const struct facts *f)
{
	struct walert *a = watch_find(w, c, subject, field);

	if (a == NULL) {
		if (v == V_BAD)
			raise_alert(w, c, subject, field, f);
		return;
	}
	if (v == V_GOOD)
		clear_alert(w, a, f);
	else
		copy_facts(a, f);
}

/* Open alerts due for a repeat. */
static void repeats(struct watch *w)
{
	int64_t now = mono(w);
	size_t i;

	for (i = 0; i < w->n_al; i++) {
		struct walert *a = &w->al[i];

		if (a->repeat_mono > now)
			continue;
		a->sent_s = real_s(w);
		a->repeat_mono = now + (int64_t)w->cfg->alerts.repeat_s * 1000;
		emit(w, a, ALERT_REPEATED);
	}
}

/* ---- the timer ---------------------------------------------------------
 */

static void take_min(int64_t *best, int64_t due)
{
	if (*best < 0 || due < *best)
		*best = due;
}

/* Monotonic ms of the next thing to do, -1 none. */
static int64_t next_due(const struct watch *w)
{
	int64_t best = -1;
	size_t i;

	for (i = 0; i < w->n_st; i++) {
		const struct wstation *s = &w->st[i];

		if (s->silent_ms > 0 && !s->silent_open)
			take_min(&best, s->base_mono + s->silent_ms);
	}
	for (i = 0; i < w->n_al; i++)
		take_min(&best, w->al[i].repeat_mono);
	for (i = 0; i < w->n_out; i++) {
		if (w->out[i].failing && !w->out[i].down_open)
			take_min(&best, w->out[i].due_mono);
	}
	if (w->ring_full_open)
		take_min(&best, w->quiet_due_mono);
	return best;
}

int64_t watch_next_ms(const struct watch *w)
{
	int64_t due = next_due(w), now = mono(w);

	if (due < 0)
		return -1;
	return due > now ? due - now : 0;
}

static void on_timer(void *arg)
{
	watch_tick(arg);
}

void watch_rearm(struct watch *w)
{
	int64_t ms;

	if (w->ctx.loop == NULL)
		return;
	ms = watch_next_ms(w);
	if (ms < 0) {
		loop_timer_disarm(w->ctx.loop, &w->timer);
		return;
	}
	if (loop_timer_arm(w->ctx.loop, &w->timer, ms) != 0)
		log_err("watch: timer: too many timers; alerts are late");
}

/* ---- silence -----------------------------------------------------------
 */

static void silent_facts(const struct watch *w, const struct wstation *s,
                         struct facts *f)
{
	char age[32], lim[32];
	int64_t gap_s = (mono(w) - s->base_mono) / 1000;

	memset(f, 0, sizeof(*f));
	f->value = (double)gap_s;
	f->threshold = (double)(s->silent_ms / 1000);
	f->rate = NAN;
	f->since_s = s->seen ? s->last_recv_s : real_s(w) - gap_s;
	fmt_dur(age, sizeof(age), gap_s);
	fmt_dur(lim, sizeof(lim), s->silent_ms / 1000);
	snprintf(f->msg, sizeof(f->msg), "%s: no reading for %s%s (limit %s)",
	         s->cfg->name, age, s->seen ? "" : " since the start", lim);
}

static void check_silence(struct watch *w)
{
	struct facts f;
	size_t i;

	for (i = 0; i < w->n_st; i++) {
		struct wstation *s = &w->st[i];

		if (s->silent_ms <= 0)
			continue;
		if (mono(w) - s->base_mono < s->silent_ms)
			continue;
		silent_facts(w, s, &f);
		watch_judge(w, WATCH_SILENT, s->cfg->name, NULL, V_BAD, &f);
		s->silent_open = true;
	}
}

static void check_outputs_due(struct watch *w);

void watch_tick(struct watch *w)
{
	check_silence(w);
	check_outputs_due(w);
	if (w->ring_full_open && mono(w) >= w->quiet_due_mono) {
		struct facts f;

		memset(&f, 0, sizeof(f));
		f.value = (double)w->refused;
		f.threshold = NAN;
		f.rate = NAN;
		snprintf(f.msg, sizeof(f.msg),
		         "ring: no reading refused for "
		         "%d s (%" PRIu64 " refused in all)",
		         WATCH_QUIET_S, w->refused);
		watch_judge(w, WATCH_RING_FULL, "ring", NULL, V_GOOD, &f);
		w->ring_full_open = false;
	}
	repeats(w);
	watch_rearm(w);
}

/* ---- outputs and the ring ----------------------------------------------
 */

static struct wout *find_out(struct watch *w, const char *name)
{
	size_t i;

	for (i = 0; i < w->n_out; i++) {
		if (strcmp(w->out[i].name, name) == 0)
			return &w->out[i];
	}
	return NULL;
}

static void judge_output(struct watch *w, struct wout *o)
{
	int64_t lim = w->cfg->alerts.down_after_s, down = 0;
	char d[32];
	struct facts f;
	enum verdict v = V_GOOD;

	memset(&f, 0, sizeof(f));
	f.rate = NAN;
	f.threshold = (double)lim;
	if (o->failing) {
		down = real_s(w) - o->down_since_s;
		v = mono(w) >= o->due_mono ? V_BAD : V_HOLD;
	}
	f.value = (double)down;
	f.since_s = o->down_since_s;
	fmt_dur(d, sizeof(d), down);
	if (o->failing)
		snprintf(f.msg, sizeof(f.msg),
		         "%s: failing for %s, %" PRIu64 " readings waiting",
		         o->name, d, o->backlog);
	else
		snprintf(f.msg, sizeof(f.msg),
		         "%s: delivering again, %" PRIu64 " readings waiting",
		         o->name, o->backlog);
	watch_judge(w, WATCH_OUTPUT_DOWN, o->name, NULL, v, &f);
	o->down_open = watch_find(w, WATCH_OUTPUT_DOWN, o->name, NULL) != NULL;
}

static void check_outputs_due(struct watch *w)
{
	size_t i;

	for (i = 0; i < w->n_out; i++) {
		if (w->out[i].failing || w->out[i].down_open)
			judge_output(w, &w->out[i]);
	}
}

void watch_outputs(struct watch *w, const struct watch_output *o, size_t n)
{
	int64_t left;
	size_t i;
	struct wout *wo;

	for (i = 0; i < n; i++) {
		wo = find_out(w, o[i].name);
		if (wo == NULL)
			continue;
		wo->backlog = o[i].backlog;
		if (o[i].failing && !wo->failing) {
			left = o[i].down_since_s + w->cfg->alerts.down_after_s -
			       real_s(w);
			wo->due_mono = mono(w) + (left > 0 ? left * 1000 : 0);
		}
		wo->failing = o[i].failing;
		wo->down_since_s = o[i].down_since_s;
		judge_output(w, wo);
	}
	watch_rearm(w);
}

static void judge_backlog(struct watch *w, const struct ring_stat *st)
{
	double share = w->cfg->alerts.backlog_share, used, clear;
	struct facts f;
	enum verdict v = V_HOLD;

	if (st->data_bytes == 0 || share <= 0)
		return;
	used = (double)st->used_bytes / (double)st->data_bytes;
	clear = share - 0.1 > share / 2 ? share - 0.1 : share / 2;
	if (used >= share)
		v = V_BAD;
	else if (used < clear)
		v = V_GOOD;
	memset(&f, 0, sizeof(f));
	f.value = used;
	f.threshold = share;
	f.rate = NAN;
	snprintf(f.msg, sizeof(f.msg),
	         "ring: %.0f%% full of unsent "
	         "readings (%" PRIu64 " readings; alert at %.0f%%)",
	         used * 100, st->records, share * 100);
	watch_judge(w, WATCH_BACKLOG, "ring", NULL, v, &f);
}

static void judge_ring_failed(struct watch *w, const struct ring_stat *st)
{
	struct facts f;

	memset(&f, 0, sizeof(f));
	f.value = st->failed;
	f.threshold = NAN;
	f.rate = NAN;
	if (st->failed != 0)
		snprintf(f.msg, sizeof(f.msg),
		         "ring: failed: %s; no reading "
		         "is accepted",
		         strerror(st->failed));
	else
		snprintf(f.msg, sizeof(f.msg), "ring: healthy again");
	watch_judge(w, WATCH_RING_FAILED, "ring", NULL,
	            st->failed != 0 ? V_BAD : V_GOOD, &f);
}

void watch_ring(struct watch *w, const struct ring_stat *st)
{
	struct facts f;

	judge_backlog(w, st);
	judge_ring_failed(w, st);
	if (w->ring_known && st->refused > w->refused) {
		memset(&f, 0, sizeof(f));
		f.value = (double)(st->refused - w->refused);
		f.threshold = NAN;
		f.rate = NAN;
		snprintf(f.msg, sizeof(f.msg),
		         "ring: full: %" PRIu64 " readings refused (%" PRIu64
		         " in all)",
		         st->refused - w->refused, st->refused);
		watch_judge(w, WATCH_RING_FULL, "ring", NULL, V_BAD, &f);
		w->ring_full_open = true;
		w->quiet_due_mono = mono(w) + WATCH_QUIET_S * 1000;
	}
	w->refused = st->refused;
	w->ring_known = true;
	watch_rearm(w);
}

void watch_notice(void *arg, const char *output, const char *condition,
                  const char *message)
{
	struct watch *w = arg;
	struct alert_event ev;
	char id[160];

	memset(&ev, 0, sizeof(ev));
	ev.kind = ALERT_NOTICE;
	ev.time_s = real_s(w);
	ev.since_s = ev.time_s;
	snprintf(id, sizeof(id), "%s-%s-%" PRId64, condition, output,
	         ev.time_s);
	ev.id = id;
	ev.condition = condition;
	ev.severity = "warning";
	ev.output = output;
	ev.value = NAN;
	ev.threshold = NAN;
	ev.rate_per_day = NAN;
	ev.message = message;
	if (w->ctx.sink != NULL)
		w->ctx.sink(w->ctx.sink_arg, &ev);
}

/* ---- readers for the status file ---------------------------------------
 */

size_t watch_n_alerts(const struct watch *w)
{
	return w->n_al;
}

void watch_alert(const struct watch *w, size_t i, struct alert_event *ev)
{
	fill_event(&w->al[i], ALERT_RAISED, w->al[i].sent_s, ev);
}

size_t watch_n_stations(const struct watch *w)
{
	return w->n_st;
}

void watch_station(struct watch *w, size_t i, struct watch_station_info *si)
{
	struct wstation *s = &w->st[i];
	size_t k;

	memset(si, 0, sizeof(*si));
	si->cfg = s->cfg;
	si->seen = s->seen;
	si->last_time_s = s->last_time_s;
	si->last_received_s = s->last_recv_s;
	for (k = 0; k < s->n_vals; k++) {
		s->exp[k].name = s->vals[k].name;
		s->exp[k].v = s->vals[k].v;
		s->exp[k].flag = s->vals[k].flag;
	}
	si->values = s->exp;
	si->n_values = s->n_vals;
	si->has_battery = s->has_battery;
	si->battery_v = s->battery_v;
	si->has_trend = s->has_trend;
	si->rate_v_per_day = s->rate;
	si->forecast_s = s->forecast_s;
	si->trend_note = s->note != NULL ? s->note : "off";
}

/* ---- life --------------------------------------------------------------
 */

/* silent_after: the station's, else 3 x expect_every_s, else the
 * alerts section's. */
static int64_t silent_ms(const struct config *c, const struct cfg_station *s)
{
	if (s->silent_after_s > 0)
		return (int64_t)s->silent_after_s * 1000;
	if (s->expect_every_s > 0)
		return (int64_t)s->expect_every_s * 3000;
	return (int64_t)c->alerts.silent_after_s * 1000;
}

static int setup_stations(struct watch *w)
{
	const struct config *c = w->cfg;
	size_t i;

	w->st = calloc(c->n_stations + 1, sizeof(*w->st));
	if (w->st == NULL)
		return -1;
	for (i = 0; i < c->n_stations; i++) {
		struct wstation *s = &w->st[i];

		s->cfg = &c->stations[i];
		s->silent_ms = silent_ms(c, s->cfg);
		s->base_mono = mono(w);
		if (s->cfg->battery.set && s->cfg->battery.cutoff_v > 0) {
			s->pt_t = calloc(TREND_MAX_PTS, sizeof(*s->pt_t));
			s->pt_v = calloc(TREND_MAX_PTS, sizeof(*s->pt_v));
			if (s->pt_t == NULL || s->pt_v == NULL)
				return -1;
		}
	}
	w->n_st = c->n_stations;
	return 0;
}

static int setup_outputs(struct watch *w)
{
	const struct config *c = w->cfg;
	size_t i;

	w->out = calloc(c->n_outputs + 1, sizeof(*w->out));
	if (w->out == NULL)
		return -1;
	for (i = 0; i < c->n_outputs; i++)
		snprintf(w->out[i].name, sizeof(w->out[i].name), "%s",
		         c->outputs[i].name);
	w->n_out = c->n_outputs;
	return 0;
}

static bool configured(struct watch *w, const struct walert *a)
{
	size_t i;

	if (conds[a->cond].scope == SC_RING)
		return true;
	if (conds[a->cond].scope == SC_OUTPUT)
		return find_out(w, a->subject) != NULL;
	for (i = 0; i < w->n_st; i++) {
		if (strcmp(w->st[i].cfg->name, a->subject) == 0)
			return true;
	}
	return false;
}

/* Restored alerts of stations or outputs no longer in the config end. */
static void prune(struct watch *w)
{
	struct facts f;
	size_t i = 0;

	while (i < w->n_al) {
		struct walert *a = &w->al[i];

		if (configured(w, a)) {
			i++;
			continue;
		}
		memset(&f, 0, sizeof(f));
		f.value = f.threshold = f.rate = NAN;
		snprintf(f.msg, sizeof(f.msg), "%s: no longer in the config",
		         a->subject);
		clear_alert(w, a, &f);
	}
}

int watch_new(const struct watch_ctx *ctx, struct watch **out, char *err,
              size_t errcap)
{
	struct watch *w = calloc(1, sizeof(*w));

	*out = NULL;
	if (w == NULL)
		goto out_nomem;
	w->ctx = *ctx;
	w->cfg = ctx->cfg;
	w->clock = ctx->clock != NULL ? ctx->clock : clock_system();
	if (ctx->loop != NULL)
		loop_timer_init(&w->timer, on_timer, w);
	w->work = calloc(trend_work_n(TREND_MAX_PTS), sizeof(*w->work));
	w->pts = calloc(TREND_MAX_PTS, sizeof(*w->pts));
	if (w->work == NULL || w->pts == NULL || setup_stations(w) != 0 ||
	    setup_outputs(w) != 0)
		goto out_free;
	watch_restore(w);
	prune(w);
	watch_rearm(w);
	*out = w;
	return 0;
out_free:
	watch_free(w);
out_nomem:
	snprintf(err, errcap, "watch: start: %s", strerror(ENOMEM));
	errno = ENOMEM;
	return -1;
}

void watch_set_changed(struct watch *w, void (*fn)(void *arg), void *arg)
{
	w->ctx.changed = fn;
	w->ctx.changed_arg = arg;
}

void watch_free(struct watch *w)
{
	size_t i;

	if (w == NULL)
		return;
	if (w->st != NULL && w->out != NULL)
		watch_save(w);
	if (w->ctx.loop != NULL)
		loop_timer_disarm(w->ctx.loop, &w->timer);
	for (i = 0; w->st != NULL && i < w->cfg->n_stations; i++) {
		free(w->st[i].pt_t);
		free(w->st[i].pt_v);
		free(w->st[i].vals);
		free(w->st[i].exp);
	}
	free(w->st);
	free(w->out);
	free(w->al);
	free(w->work);
	free(w->pts);
	free(w);
}
