/*
 * status.c - the status file and the metrics file; see status.h.
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

#include "fdio.h"
#include "alert.h"
#include "emit.h"
#include "ingest.h"
#include "log.h"
#include "post.h"
#include "ring.h"
#include "status.h"
#include "watch.h"

#define MAX_POSTS CFG_MAX_ITEMS

struct status {
	struct status_ctx ctx;
	const struct clock *clock;
	struct loop_timer tick, soon;
	int64_t last_write_mono;
	int64_t started_s;
	uint64_t proc_start;
	int pid;
	bool stopped;
	bool failing;         /* the last write failed (logged once) */
	struct post **posts;  /* a copy of ctx.posts */
	struct post_stat *ps; /* n_posts, refreshed per write */
	struct buf doc, met;
};

static int64_t real_s(const struct status *st)
{
	return clock_real_ms(st->clock) / 1000;
}

/* ---- writing files -----------------------------------------------------
 */

static int sync_dir(const char *path)
{
	char dir[4096];
	const char *slash = strrchr(path, '/');
	size_t n = slash == NULL ? 1 : (size_t)(slash - path);
	int fd, rc;

	if (n == 0)
		n = 1; /* "/file": the root */
	if (n >= sizeof(dir)) {
		errno = ENAMETOOLONG;
		return -1;
	}
	memcpy(dir, slash == NULL ? "." : path, n);
	dir[n] = '\0';
	fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
	if (fd < 0)
		return -1;
	rc = fsync(fd);
	close(fd);
	return rc;
}

/* temp + (fsync) + rename + (fsync of the folder) */
int status_replace_file(const char *path, const char *data, size_t len,
                        bool durable, char *err, size_t errcap)
{
	char tmp[4200];
	const char *what = "open";
	int fd, e;

	if (snprintf(tmp, sizeof(tmp), "%s.tmp-%ld", path, (long)getpid()) >=
	    (int)sizeof(tmp)) {
		snprintf(err, errcap, "write: %s: path too long", path);
		errno = ENAMETOOLONG;
		return -1;
	}
	(void)unlink(tmp); /* a leftover of a crash of this pid */
	fd = open(tmp, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC | O_NOFOLLOW,
	          0644);
	if (fd < 0)
		goto out_err;
	what = "write";
	if (fdio_write_all(fd, data, len) != 0)
		goto out_close;
	what = "fsync";
	if (durable && fsync(fd) != 0)
		goto out_close;
	what = "close";
	if (close(fd) != 0) {
		fd = -1;
		goto out_unlink;
	}
	what = "rename";
	if (rename(tmp, path) != 0)
		goto out_unlink;
	what = "fsync of the folder";
	if (durable && sync_dir(path) != 0)
		goto out_err;
	return 0;
out_close:
	e = errno;
	close(fd);
	errno = e;
out_unlink:
	e = errno;
	(void)unlink(tmp);
	errno = e;
out_err:
	snprintf(err, errcap, "write: %s: %s: %s", path, what, strerror(errno));
	return -1;
}

uint64_t status_proc_start(int pid)
{
	char path[64], text[1024], *p, *end;
	ssize_t n;
	int fd, field;

	if (pid == 0)
		snprintf(path, sizeof(path), "/proc/self/stat");
	else
		snprintf(path, sizeof(path), "/proc/%d/stat", pid);
	fd = open(path, O_RDONLY | O_CLOEXEC);
	if (fd < 0)
		return 0;
	n = read(fd, text, sizeof(text) - 1);
	close(fd);
	if (n <= 0)
		return 0;
	text[n] = '\0';
	p = strrchr(text, ')'); /* comm may hold spaces and parens */
	if (p == NULL)
		return 0;
	p++;
	/* after ")" come fields 3 (state), 4, ...; starttime is 22 */
	for (field = 3; field < 22 && p != NULL; field++)
		p = strchr(p + 1, ' ');
	if (p == NULL)
		return 0;
	errno = 0;
	unsigned long long v = strtoull(p + 1, &end, 10);
	return errno == 0 && end != p + 1 ? (uint64_t)v : 0;
}

/* ---- the JSON document -------------------------------------------------
 */

static void jnum(struct buf *b, double v)
{
	if (isfinite(v))
		emit_shortest(b, v);
	else
		buf_adds(b, "null");
}

static void jtime(struct buf *b, int64_t t)
{
	if (t == 0) {
		buf_adds(b, "null");
		return;
	}
	buf_addc(b, '"');
	emit_time(b, t);
	buf_addc(b, '"');
}

static void jkey(struct buf *b, const char *k)
{
	emit_json_string(b, k);
	buf_addc(b, ':');
}

static void doc_values(struct buf *b, const struct watch_station_info *si)
{
	size_t i;

	buf_adds(b, ",\"values\":{");
	for (i = 0; i < si->n_values; i++) {
		if (i > 0)
			buf_addc(b, ',');
		jkey(b, si->values[i].name);
		jnum(b, si->values[i].v);
	}
	buf_adds(b, "},\"flags\":{");
	for (i = 0; i < si->n_values; i++) {
		if (i > 0)
			buf_addc(b, ',');
		jkey(b, si->values[i].name);
		buf_printf(b, "%d", si->values[i].flag);
	}
	buf_addc(b, '}');
}

static void doc_battery(struct buf *b, const struct watch_station_info *si)
{
	const struct cfg_battery *bat = &si->cfg->battery;

	if (!bat->set) {
		buf_adds(b, ",\"battery\":null");
		return;
	}
	buf_adds(b, ",\"battery\":{\"field\":");
	emit_json_string(b, bat->field);
	buf_adds(b, ",\"now_v\":");
	jnum(b, si->has_battery ? si->battery_v : NAN);
	buf_adds(b, ",\"rate_v_per_day\":");
	jnum(b, si->has_trend ? si->rate_v_per_day : NAN);
	buf_adds(b, ",\"cutoff_v\":");
	jnum(b, bat->cutoff_v > 0 ? bat->cutoff_v : NAN);
	buf_adds(b, ",\"cutoff_at\":");
	jtime(b, si->forecast_s);
	buf_adds(b, ",\"trend\":");
	emit_json_string(b, si->trend_note);
	buf_addc(b, '}');
}

static void doc_station(struct status *st, struct buf *b, size_t i)
{
	struct watch_station_info si;

	watch_station(st->ctx.watch, i, &si);
	buf_adds(b, "{\"name\":");
	emit_json_string(b, si.cfg->name);
	buf_printf(b, ",\"number\":%" PRIu32 ",\"title\":", si.cfg->number);
	if (si.cfg->title != NULL)
		emit_json_string(b, si.cfg->title);
	else
		buf_adds(b, "null");
	buf_adds(b, ",\"last_time\":");
	jtime(b, si.seen ? si.last_time_s : 0);
	buf_adds(b, ",\"last_received\":");
	jtime(b, si.seen ? si.last_received_s : 0);
	buf_adds(b, ",\"last_received_s\":");
	if (si.seen)
		buf_printf(b, "%" PRId64, si.last_received_s);
	else
		buf_adds(b, "null");
	doc_values(b, &si);
	doc_battery(b, &si);
	buf_addc(b, '}');
}

static void doc_stations(struct status *st, struct buf *b)
{
	size_t i, n = st->ctx.watch ? watch_n_stations(st->ctx.watch) : 0;

	buf_adds(b, ",\"stations\":[");
	for (i = 0; i < n; i++) {
		if (i > 0)
			buf_addc(b, ',');
		doc_station(st, b, i);
	}
	buf_addc(b, ']');
}

static const struct post_stat *find_ps(const struct status *st,
                                       const char *name)
{
	size_t i;

	for (i = 0; i < st->ctx.n_posts; i++) {
		if (strcmp(st->ps[i].name, name) == 0)
			return &st->ps[i];
	}
	return NULL;
}

static uint64_t ring_unsent(const struct ring_stat *rs, const char *name)
{
	size_t i;

	for (i = 0; i < rs->n_outputs; i++) {
		if (strcmp(rs->outputs[i].name, name) == 0)
			return rs->outputs[i].unsent;
	}
	return 0;
}

static void doc_post(struct buf *b, const struct post_stat *p)
{
	buf_adds(b, ",\"state\":");
	emit_json_string(b, post_state_name(p->state));
	buf_printf(b,
	           ",\"backlog\":%" PRIu64 ",\"acked\":%" PRIu64
	           ",\"delivered\":%" PRIu64 ",\"requests\":%" PRIu64
	           ",\"retries\":%" PRIu64 ",\"deadlettered\":%" PRIu64
	           ",\"failures\":%" PRIu32 ",\"last_success\":",
	           p->backlog, p->acked, p->delivered, p->requests, p->retries,
	           p->deadlettered, p->failures);
	jtime(b, p->last_success_ms / 1000);
	buf_adds(b, ",\"down_since\":");
	jtime(b, p->down_since_ms / 1000);
	buf_adds(b, ",\"last_error\":");
	if (p->last_error[0] != '\0')
		emit_json_string(b, p->last_error);
	else
		buf_adds(b, "null");
}

static void doc_outputs(struct status *st, struct buf *b,
                        const struct ring_stat *rs)
{
	const struct cfg_output *o;
	const struct post_stat *p;
	size_t i;

	buf_adds(b, ",\"outputs\":[");
	for (i = 0; i < st->ctx.cfg->n_outputs; i++) {
		o = &st->ctx.cfg->outputs[i];
		p = find_ps(st, o->name);
		buf_adds(b, i > 0 ? ",{\"name\":" : "{\"name\":");
		emit_json_string(b, o->name);
		buf_adds(b, ",\"kind\":");
		emit_json_string(b, o->kind == CFG_OUT_HTTP ? "http" : "file");
		if (p != NULL)
			doc_post(b, p);
		else
			buf_printf(b,
			           ",\"state\":null,\"backlog\":%" PRIu64
			           ",\"last_success\":null,\"last_error\":null",
			           rs != NULL ? ring_unsent(rs, o->name) : 0);
		buf_addc(b, '}');
	}
	buf_addc(b, ']');
}

static void doc_ring(struct status *st, struct buf *b,
                     const struct ring_stat *rs)
{
	buf_adds(b, ",\"ring\":");
	if (rs == NULL) {
		buf_adds(b, "null");
		return;
	}
	buf_adds(b, "{\"path\":");
	emit_json_string(b,
	                 st->ctx.cfg->ring.path ? st->ctx.cfg->ring.path : "");
	buf_printf(b,
	           ",\"size_bytes\":%" PRIu64 ",\"data_bytes\":%" PRIu64
	           ",\"used_bytes\":%" PRIu64 ",\"records\":%" PRIu64
	           ",\"oldest_seq\":%" PRIu64 ",\"newest_seq\":%" PRIu64
	           ",\"refused\":%" PRIu64 ",\"failed\":%s,\"used_share\":",
	           rs->size_bytes, rs->data_bytes, rs->used_bytes, rs->records,
	           rs->oldest_seq, rs->newest_seq, rs->refused,
	           rs->failed ? "true" : "false");
	jnum(b, rs->data_bytes ? (double)rs->used_bytes / (double)rs->data_bytes
	                       : NAN);
	buf_addc(b, '}');
}

static void doc_ingest(struct status *st, struct buf *b)
{
	const struct ingest_stats *is;

	buf_adds(b, ",\"ingest\":");
	if (st->ctx.ingest == NULL) {
		buf_adds(b, "null");
		return;
	}
	is = ingest_stats(st->ctx.ingest);
	buf_printf(b,
	           "{\"packets\":%" PRIu64 ",\"accepted\":%" PRIu64
	           ",\"duplicates\":%" PRIu64 ",\"refused\":%" PRIu64
	           ",\"unknown\":%" PRIu64 ",\"bad_check\":%" PRIu64
	           ",\"undecodable\":%" PRIu64 ",\"last_seq\":%" PRIu64 "}",
	           is->packets, is->accepted, is->duplicates, is->refused,
	           is->unknown, is->bad_check, is->undecodable, is->last_seq);
}

static void doc_alerts(struct status *st, struct buf *b)
{
	struct alert_event ev;
	struct alert_stat as;
	size_t i, n = st->ctx.watch ? watch_n_alerts(st->ctx.watch) : 0;

	buf_adds(b, ",\"alerts\":[");
	for (i = 0; i < n; i++) {
		if (i > 0)
			buf_addc(b, ',');
		watch_alert(st->ctx.watch, i, &ev);
		alert_json(b, &ev);
	}
	buf_adds(b, "],\"delivery\":");
	if (st->ctx.alert == NULL) {
		buf_adds(b, "null");
		return;
	}
	alert_stat(st->ctx.alert, &as);
	buf_printf(b,
	           "{\"events\":%" PRIu64 ",\"sent\":%" PRIu64
	           ",\"failed\":%" PRIu64 ",\"dropped\":%" PRIu64
	           ",\"spawned\":%" PRIu64 ",\"killed\":%" PRIu64 "}",
	           as.events, as.sent, as.failed, as.dropped, as.spawned,
	           as.killed);
}

static void refresh_posts(struct status *st)
{
	size_t i;

	for (i = 0; i < st->ctx.n_posts; i++)
		post_stat(st->ctx.posts[i], &st->ps[i]);
}

void status_json(struct status *st, struct buf *b)
{
	struct ring_stat rs;

	if (st->ctx.ring != NULL)
		ring_stat(st->ctx.ring, &rs);
	refresh_posts(st);
	buf_printf(b, "{\"tidepost_status\":%d,\"version\":", STATUS_FORMAT);
	emit_json_string(b, TP_VERSION);
	buf_printf(b, ",\"pid\":%d,\"proc_start\":%" PRIu64 ",\"started\":",
	           st->pid, st->proc_start);
	jtime(b, st->started_s);
	buf_adds(b, ",\"written\":");
	jtime(b, real_s(st));
	buf_printf(b,
	           ",\"written_s\":%" PRId64 ",\"every_s\":%" PRIu32
	           ",\"state\":\"%s\",\"config\":",
	           real_s(st), st->ctx.cfg->status.every_s,
	           st->stopped ? "stopped" : "running");
	emit_json_string(b, st->ctx.cfg->path ? st->ctx.cfg->path : "");
	doc_stations(st, b);
	doc_outputs(st, b, st->ctx.ring ? &rs : NULL);
	doc_ring(st, b, st->ctx.ring ? &rs : NULL);
	doc_ingest(st, b);
	doc_alerts(st, b);
	buf_adds(b, "}\n");
}

/* ---- the metrics file --------------------------------------------------
 */

static void family(struct buf *b, const char *name, const char *type,
                   const char *help)
{
	buf_printf(b, "# HELP %s %s\n# TYPE %s %s\n", name, help, name, type);
}

/* A label value: backslash, double quote and newline escaped. */
static void label(struct buf *b, const char *key, const char *v)
{
	buf_printf(b, "%s=\"", key);
	for (; v != NULL && *v != '\0'; v++) {
		if (*v == '\\' || *v == '"')
			buf_addc(b, '\\');
		if (*v == '\n')
			buf_adds(b, "\\n");
		else
			buf_addc(b, *v);
	}
	buf_addc(b, '"');
}

static void sample(struct buf *b, const char *name, const char *k1,
                   const char *v1, const char *k2, const char *v2, double v)
{
	if (!isfinite(v))
		return;
	buf_adds(b, name);
	if (k1 != NULL) {
		buf_addc(b, '{');
		label(b, k1, v1);
		if (k2 != NULL) {
			buf_addc(b, ',');
			label(b, k2, v2);
		}
		buf_addc(b, '}');
	}
	buf_addc(b, ' ');
	emit_shortest(b, v);
	buf_addc(b, '\n');
}

/* Which per-station figure a family shows. */
enum st_fig { F_TIME, F_AGE, F_BATT, F_RATE, F_CUTOFF };

static double st_fig(const struct status *st,
                     const struct watch_station_info *si, enum st_fig f)
{
	switch (f) {
	case F_TIME:
		return si->seen ? (double)si->last_time_s : NAN;
	case F_AGE:
		return si->seen ? (double)(real_s(st) - si->last_received_s)
		                : NAN;
	case F_BATT:
		return si->has_battery ? si->battery_v : NAN;
	case F_RATE:
		return si->has_trend ? si->rate_v_per_day : NAN;
	case F_CUTOFF:
		return si->forecast_s ? (double)si->forecast_s : NAN;
	}
	return NAN;
}

static const struct {
	const char *name, *help;
	enum st_fig fig;
} st_fams[] = {
    {"tidepost_station_last_reading_timestamp_seconds",
     "time of the newest reading (Unix s)", F_TIME},
    {"tidepost_station_last_reading_age_seconds",
     "seconds since the newest reading was received", F_AGE},
    {"tidepost_station_battery_volts", "battery voltage (short median)",
     F_BATT},
    {"tidepost_station_battery_trend_volts_per_day", "fitted battery trend",
     F_RATE},
    {"tidepost_station_battery_cutoff_timestamp_seconds",
     "when the trend reaches the cutoff voltage (Unix s)", F_CUTOFF},
};

static void met_stations(struct status *st, struct buf *b)
{
	struct watch_station_info si;
	size_t f, i, k, n = st->ctx.watch ? watch_n_stations(st->ctx.watch) : 0;

	for (f = 0; f < sizeof(st_fams) / sizeof(st_fams[0]); f++) {
		family(b, st_fams[f].name, "gauge", st_fams[f].help);
		for (i = 0; i < n; i++) {
			watch_station(st->ctx.watch, i, &si);
			sample(b, st_fams[f].name, "station", si.cfg->name,
			       NULL, NULL, st_fig(st, &si, st_fams[f].fig));
		}
	}
	family(b, "tidepost_station_value", "gauge", "newest value");
	for (i = 0; i < n; i++) {
		watch_station(st->ctx.watch, i, &si);
		for (k = 0; k < si.n_values; k++)
			sample(b, "tidepost_station_value", "station",
			       si.cfg->name, "value", si.values[k].name,
			       si.values[k].v);
	}
	family(b, "tidepost_station_value_flag", "gauge",
	       "QARTOD flag of the newest value");
	for (i = 0; i < n; i++) {
		watch_station(st->ctx.watch, i, &si);
		for (k = 0; k < si.n_values; k++)
			sample(b, "tidepost_station_value_flag", "station",
			       si.cfg->name, "value", si.values[k].name,
			       si.values[k].flag);
	}
}

static const struct {
	const char *name, *type, *help;
	size_t off;
	int is_ms; /* 1: ms timestamp, 2: uint32 */
} out_fams[] = {
    {"tidepost_output_backlog_readings", "gauge",
     "accepted readings not yet delivered", offsetof(struct post_stat, backlog),
     0},
    {"tidepost_output_delivered_readings_total", "counter",
     "readings delivered (2xx) since start",
     offsetof(struct post_stat, delivered), 0},
    {"tidepost_output_requests_total", "counter", "requests sent since start",
     offsetof(struct post_stat, requests), 0},
    {"tidepost_output_deadlettered_readings_total", "counter",
     "readings moved to the dead letters",
     offsetof(struct post_stat, deadlettered), 0},
    {"tidepost_output_consecutive_failures", "gauge",
     "failed attempts in a row", offsetof(struct post_stat, failures), 2},
    {"tidepost_output_last_success_timestamp_seconds", "gauge",
     "time of the last 2xx (Unix s)",
     offsetof(struct post_stat, last_success_ms), 1},
};

static double out_fig(const struct post_stat *p, size_t f)
{
	const char *base = (const char *)p + out_fams[f].off;
	uint64_t u;
	uint32_t u32;
	int64_t ms;

	if (out_fams[f].is_ms == 1) {
		memcpy(&ms, base, sizeof(ms));
		return ms > 0 ? (double)ms / 1000 : NAN;
	}
	if (out_fams[f].is_ms == 2) {
		memcpy(&u32, base, sizeof(u32));
		return u32;
	}
	memcpy(&u, base, sizeof(u));
	return (double)u;
}

static void met_outputs(struct status *st, struct buf *b)
{
	size_t f, i;

	for (f = 0; f < sizeof(out_fams) / sizeof(out_fams[0]); f++) {
		family(b, out_fams[f].name, out_fams[f].type, out_fams[f].help);
		for (i = 0; i < st->ctx.n_posts; i++)
			sample(b, out_fams[f].name, "output", st->ps[i].name,
			       NULL, NULL, out_fig(&st->ps[i], f));
	}
}

static void met_one(struct buf *b, const char *name, const char *type,
                    const char *help, double v)
{
	family(b, name, type, help);
	sample(b, name, NULL, NULL, NULL, NULL, v);
}

static void met_ring(struct status *st, struct buf *b)
{
	struct ring_stat rs;

	if (st->ctx.ring == NULL)
		return;
	ring_stat(st->ctx.ring, &rs);
	met_one(b, "tidepost_ring_used_ratio", "gauge",
	        "share of the ring's data area held by unsent readings",
	        rs.data_bytes ? (double)rs.used_bytes / (double)rs.data_bytes
	                      : NAN);
	met_one(b, "tidepost_ring_records", "gauge", "readings in the ring",
	        (double)rs.records);
	met_one(b, "tidepost_ring_refused_total", "counter",
	        "readings refused because the ring was full",
	        (double)rs.refused);
	met_one(b, "tidepost_ring_failed", "gauge",
	        "1 while the ring is failed (I/O error)", rs.failed ? 1 : 0);
}

static void met_ingest(struct status *st, struct buf *b)
{
	const struct ingest_stats *is;

	if (st->ctx.ingest == NULL)
		return;
	is = ingest_stats(st->ctx.ingest);
	met_one(b, "tidepost_ingest_packets_total", "counter", "valid packets",
	        (double)is->packets);
	met_one(b, "tidepost_ingest_accepted_readings_total", "counter",
	        "readings committed to the ring", (double)is->accepted);
	met_one(b, "tidepost_ingest_refused_readings_total", "counter",
	        "readings refused (ring full or failed)", (double)is->refused);
	met_one(b, "tidepost_ingest_rejected_packets_total", "counter",
	        "packets of no layout, with a bad check or undecodable",
	        (double)(is->unknown + is->bad_check + is->undecodable));
}

static void met_alerts(struct status *st, struct buf *b)
{
	struct alert_event ev;
	size_t c, i, n = st->ctx.watch ? watch_n_alerts(st->ctx.watch) : 0;
	double k;

	family(b, "tidepost_alerts_open", "gauge", "open alerts by condition");
	for (c = 0; c < WATCH_N_COND; c++) {
		for (i = 0, k = 0; i < n; i++) {
			watch_alert(st->ctx.watch, i, &ev);
			k += strcmp(ev.condition, watch_cond_name(c)) == 0;
		}
		sample(b, "tidepost_alerts_open", "condition",
		       watch_cond_name(c), NULL, NULL, k);
	}
	family(b, "tidepost_alert_since_timestamp_seconds", "gauge",
	       "when each open alert began (Unix s)");
	for (i = 0; i < n; i++) {
		watch_alert(st->ctx.watch, i, &ev);
		sample(b, "tidepost_alert_since_timestamp_seconds", "condition",
		       ev.condition, "id", ev.id, (double)ev.since_s);
	}
}

void status_metrics(struct status *st, struct buf *b)
{
	refresh_posts(st);
	met_one(b, "tidepost_up", "gauge",
	        "1 while the daemon runs, 0 in the file written at its stop",
	        st->stopped ? 0 : 1);
	met_one(b, "tidepost_start_time_seconds", "gauge",
	        "when the daemon started (Unix s)", (double)st->started_s);
	met_stations(st, b);
	met_outputs(st, b);
	met_ring(st, b);
	met_ingest(st, b);
	met_alerts(st, b);
}

/* ---- timers and life ---------------------------------------------------
 */

static int write_one(struct status *st, const char *path, struct buf *b,
                     void (*fill)(struct status *, struct buf *))
{
	char err[4400];
	int rc = -1;

	buf_reset(b);
	fill(st, b);
	if (buf_failed(b))
		snprintf(err, sizeof(err), "write: %s: more than %d bytes",
		         path, STATUS_MAX);
	else
		rc = status_replace_file(path, b->data, b->len, false, err,
		                         sizeof(err));
	if (rc != 0 && !st->failing)
		log_err("status: %s", err);
	return rc;
}

static int write_files(struct status *st)
{
	const struct cfg_status *cs = &st->ctx.cfg->status;
	int rc = 0;

	if (cs->path != NULL)
		rc |= write_one(st, cs->path, &st->doc, status_json);
	if (cs->metrics_path != NULL)
		rc |= write_one(st, cs->metrics_path, &st->met, status_metrics);
	if (rc == 0 && st->failing)
		log_info("status: files written again");
	st->failing = rc != 0;
	st->last_write_mono = clock_mono_ms(st->clock);
	if (st->ctx.loop != NULL)
		loop_timer_disarm(st->ctx.loop, &st->soon);
	return rc != 0 ? -1 : 0;
}

/* The outputs' and the ring's figures, for the watchdog's judgement. */
static void feed_watch(struct status *st)
{
	struct watch_output wo[MAX_POSTS];
	struct ring_stat rs;
	size_t i, n = st->ctx.n_posts < MAX_POSTS ? st->ctx.n_posts : MAX_POSTS;

	if (st->ctx.watch == NULL)
		return;
	refresh_posts(st);
	for (i = 0; i < n; i++) {
		wo[i].name = st->ps[i].name;
		wo[i].failing = st->ps[i].failures > 0;
		wo[i].down_since_s = st->ps[i].down_since_ms / 1000;
		wo[i].backlog = st->ps[i].backlog;
	}
	watch_outputs(st->ctx.watch, wo, n);
	if (st->ctx.ring != NULL) {
		ring_stat(st->ctx.ring, &rs);
		watch_ring(st->ctx.watch, &rs);
	}
}

int status_tick(struct status *st)
{
	feed_watch(st);
	return write_files(st);
}

static void on_tick(void *arg)
{
	struct status *st = arg;

	(void)status_tick(st);
	if (loop_timer_arm(st->ctx.loop, &st->tick,
	                   (int64_t)st->ctx.cfg->status.every_s * 1000) != 0)
		log_err("status: timer: too many timers; status not updated");
}

static void on_soon(void *arg)
{
	(void)write_files(arg);
}

void status_changed(void *arg)
{
	struct status *st = arg;
	int64_t wait;

	if (st->ctx.loop == NULL || st->soon.armed)
		return;
	wait = st->last_write_mono + STATUS_SOON_MS - clock_mono_ms(st->clock);
	if (loop_timer_arm(st->ctx.loop, &st->soon, wait > 0 ? wait : 0) != 0)
		log_err("status: timer: too many timers");
}

int status_new(const struct status_ctx *ctx, struct status **out, char *err,
               size_t errcap)
{
	struct status *st = calloc(1, sizeof(*st));

	*out = NULL;
	if (st != NULL)
		st->ps = calloc(ctx->n_posts + 1, sizeof(*st->ps));
	if (st == NULL || st->ps == NULL) {
		free(st);
		snprintf(err, errcap, "status: start: %s", strerror(ENOMEM));
		return -1;
	}
	st->ctx = *ctx;
	st->posts = calloc(ctx->n_posts + 1, sizeof(*st->posts));
	if (st->posts == NULL) {
		free(st->ps);
		free(st);
		snprintf(err, errcap, "status: start: %s", strerror(ENOMEM));
		return -1;
	}
	if (ctx->n_posts > 0)
		memcpy(st->posts, ctx->posts,
		       ctx->n_posts * sizeof(*st->posts));
	st->ctx.posts = st->posts; /* the caller's array may go away */
	st->clock = ctx->clock != NULL ? ctx->clock : clock_system();
	st->pid = (int)getpid();
	st->proc_start = status_proc_start(0);
	st->started_s = real_s(st);
	buf_init(&st->doc, STATUS_MAX);
	buf_init(&st->met, STATUS_MAX);
	if (ctx->loop != NULL) {
		loop_timer_init(&st->tick, on_tick, st);
		loop_timer_init(&st->soon, on_soon, st);
		on_tick(st);
	} else {
		(void)write_files(st);
	}
	*out = st;
	return 0;
}

void status_free(struct status *st, bool stopping)
{
	if (st == NULL)
		return;
	st->stopped = stopping;
	if (stopping)
		(void)write_files(st);
	if (st->ctx.loop != NULL) {
		loop_timer_disarm(st->ctx.loop, &st->tick);
		loop_timer_disarm(st->ctx.loop, &st->soon);
	}
	buf_free(&st->doc);
	buf_free(&st->met);
	free(st->ps);
	free(st->posts);
	free(st);
}
