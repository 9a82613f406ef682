/*
 * watchfile.c - the watchdog's state file: the open alerts and each
 * station's last reading times, so a restart (or a reload) neither
 * forgets an alert nor raises it again.  See watch.h.
 *
 *   {"tidepost_alerts": 1, "written": "2026-11-30T07:02:11Z",
 *    "alerts": [{"condition": "battery_low", "subject": "rf2",
 *                "field": null, "since": 1796020500, "sent": 1796020500,
 *                "value": 10.31, "threshold": 10.5, "forecast": 0,
 *                "rate": null, "message": "..."}],
 *    "stations": {"rf2": {"last_time": 1796020500,
 *                         "last_received": 1796023331}}}
 *
 * Replaced as a whole: temp file, fsync, rename, fsync of the folder
 * (status_replace_file).  Times are Unix seconds (integers) so nothing is
 * lost to a time format.
 */
#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "fdio.h"
#include "emit.h"
#include "log.h"
#include "status.h"
#include "watchpriv.h"

#define STATE_MAX (1024 * 1024) /* bytes of the state file, at most */

static int64_t real_s(const struct watch *w)
{
	int64_t ms = clock_real_ms(w->clock);

	return ms >= 0 ? ms / 1000 : -((-ms + 999) / 1000);
}

static void num(struct buf *b, double v)
{
	if (isfinite(v))
		emit_shortest(b, v);
	else
		buf_adds(b, "null");
}

static void save_alert(struct buf *b, const struct walert *a)
{
	buf_adds(b, "{\"condition\":");
	emit_json_string(b, watch_cond_name(a->cond));
	buf_adds(b, ",\"subject\":");
	emit_json_string(b, a->subject);
	buf_adds(b, ",\"field\":");
	if (a->field[0] != '\0')
		emit_json_string(b, a->field);
	else
		buf_adds(b, "null");
	buf_printf(b,
	           ",\"since\":%" PRId64 ",\"sent\":%" PRId64
	           ",\"forecast\":%" PRId64 ",\"value\":",
	           a->since_s, a->sent_s, a->forecast_s);
	num(b, a->value);
	buf_adds(b, ",\"threshold\":");
	num(b, a->threshold);
	buf_adds(b, ",\"rate\":");
	num(b, a->rate);
	buf_adds(b, ",\"message\":");
	emit_json_string(b, a->msg);
	buf_addc(b, '}');
}

static void save_stations(struct buf *b, const struct watch *w)
{
	size_t i, k = 0;

	buf_adds(b, ",\"stations\":{");
	for (i = 0; i < w->n_st; i++) {
		const struct wstation *s = &w->st[i];

		if (!s->seen)
			continue;
		if (k++ > 0)
			buf_addc(b, ',');
		emit_json_string(b, s->cfg->name);
		buf_printf(b,
		           ":{\"last_time\":%" PRId64
		           ",\"last_received\":%" PRId64 "}",
		           s->last_time_s, s->last_recv_s);
	}
	buf_adds(b, "}}\n");
}

void watch_save(struct watch *w)
{
	char err[300];
	struct buf b;
	size_t i;

	if (w->ctx.state_path == NULL)
		return;
	buf_init(&b, STATE_MAX);
	buf_adds(&b, "{\"tidepost_alerts\":1,\"written\":");
	buf_addc(&b, '"');
	emit_time(&b, real_s(w));
	buf_adds(&b, "\",\"alerts\":[");
	for (i = 0; i < w->n_al; i++) {
		if (i > 0)
			buf_addc(&b, ',');
		save_alert(&b, &w->al[i]);
	}
	buf_addc(&b, ']');
	save_stations(&b, w);
	if (buf_failed(&b))
		log_err("watch: write: %s: more than %d bytes",
		        w->ctx.state_path, STATE_MAX);
	else if (status_replace_file(w->ctx.state_path, b.data, b.len, true,
	                             err, sizeof(err)) != 0)
		log_err("watch: %s", err);
	buf_free(&b);
}

/* ---- restore -----------------------------------------------------------
 */

static double jnum(const cJSON *o, const char *key)
{
	const cJSON *n = cJSON_GetObjectItemCaseSensitive(o, key);

	return cJSON_IsNumber(n) ? n->valuedouble : NAN;
}

static const char *jstr(const cJSON *o, const char *key)
{
	const cJSON *n = cJSON_GetObjectItemCaseSensitive(o, key);

	return cJSON_IsString(n) ? n->valuestring : NULL;
}

static int64_t jint(const cJSON *o, const char *key)
{
	double v = jnum(o, key);

	return isfinite(v) && fabs(v) < 9e15 ? (int64_t)v : 0;
}

static int restore_alert(struct watch *w, const cJSON *o)
{
	const char *cond = jstr(o, "condition"), *subj = jstr(o, "subject");
	const char *field = jstr(o, "field"), *msg = jstr(o, "message");
	struct walert *a;
	int64_t left;
	int c = cond != NULL ? watch_cond_find(cond) : -1;

	if (c < 0 || subj == NULL || strlen(subj) > WATCH_SUBJECT_MAX ||
	    (field != NULL && strlen(field) > WATCH_NAME_MAX) ||
	    watch_find(w, c, subj, field) != NULL)
		return -1;
	a = watch_add(w);
	if (a == NULL)
		return -1;
	a->cond = c;
	snprintf(a->subject, sizeof(a->subject), "%s", subj);
	snprintf(a->field, sizeof(a->field), "%s", field ? field : "");
	snprintf(a->msg, sizeof(a->msg), "%s", msg ? msg : "");
	a->since_s = jint(o, "since");
	a->sent_s = jint(o, "sent");
	a->forecast_s = jint(o, "forecast");
	a->value = jnum(o, "value");
	a->threshold = jnum(o, "threshold");
	a->rate = jnum(o, "rate");
	watch_make_id(a);
	left = a->sent_s + (int64_t)w->cfg->alerts.repeat_s - real_s(w);
	a->repeat_mono = clock_mono_ms(w->clock) + (left > 0 ? left * 1000 : 0);
	return 0;
}

static void restore_stations(struct watch *w, const cJSON *obj)
{
	const cJSON *m;
	size_t i;

	for (i = 0; i < w->n_st; i++) {
		struct wstation *s = &w->st[i];

		m = cJSON_GetObjectItemCaseSensitive(obj, s->cfg->name);
		if (cJSON_IsObject(m)) {
			s->seen = true;
			s->last_time_s = jint(m, "last_time");
			s->last_recv_s = jint(m, "last_received");
		}
		s->silent_open =
		    watch_find(w, WATCH_SILENT, s->cfg->name, NULL) != NULL;
	}
	for (i = 0; i < w->n_out; i++)
		w->out[i].down_open = watch_find(w, WATCH_OUTPUT_DOWN,
		                                 w->out[i].name, NULL) != NULL;
	if (watch_find(w, WATCH_RING_FULL, "ring", NULL) != NULL) {
		w->ring_full_open = true;
		w->quiet_due_mono =
		    clock_mono_ms(w->clock) + WATCH_QUIET_S * 1000;
	}
}

void watch_restore(struct watch *w)
{
	const cJSON *list, *el;
	cJSON *root;
	size_t len = 0, bad = 0;
	char *text;

	if (w->ctx.state_path == NULL)
		return;
	text = fdio_slurp(w->ctx.state_path, O_NOFOLLOW, STATE_MAX, &len);
	if (text == NULL) {
		if (errno != ENOENT)
			log_warn("watch: read: %s: %s; open alerts are not "
			         "restored",
			         w->ctx.state_path, strerror(errno));
		return;
	}
	root = cJSON_ParseWithLength(text, len);
	list = cJSON_GetObjectItemCaseSensitive(root, "alerts");
	if (!cJSON_IsArray(list))
		log_warn("watch: read: %s: not a state file; open alerts are "
		         "not restored",
		         w->ctx.state_path);
	cJSON_ArrayForEach(el, list) bad += restore_alert(w, el) != 0;
	if (bad > 0)
		log_warn("watch: read: %s: %zu alerts not restored (bad or "
		         "unknown)",
		         w->ctx.state_path, bad);
	restore_stations(w, cJSON_GetObjectItemCaseSensitive(root, "stations"));
	cJSON_Delete(root);
	free(text);
}
