/*
 * watch.h - the watchdog: conditions judged per station, per output and
 * for the ring, and the life of each alert (raised once, repeated every
 * alerts.repeat_s while it lasts, cleared with a recovery notice), kept
 * across restarts in a small state file.
 *
 * Owns the per-station history it needs (last values and flags, the
 * recent battery values, up to TREND_MAX_PTS trend points, clock skew
 * samples, QC streak counters), the table of open alerts (at most
 * WATCH_MAX_ALERTS; more are logged and not raised), one loop timer and
 * the state file.  It only reads: nothing here changes a reading.
 *
 * Time: one injectable clock.  Timers (silence, repeats, quiet periods,
 * output down) run on its monotonic milliseconds; ages, "since" and the
 * times written out use its real time.  The timer is armed for the next
 * deadline only; with nothing due there is no wake-up.  With ctx.loop
 * NULL the caller runs watch_tick at watch_next_ms (tests do).
 *
 * Conditions (settings in the config; defaults in options.c):
 *   silent            no reading for silent_after_s: the station's value,
 *                     else 3 x expect_every_s, else alerts.silent_after_s.
 *                     Counted from the last reading received, or from
 *                     watch_new (after a restart every station gets a
 *                     full period); cleared by the next reading.
 *   battery_low       median of the last battery.median_n battery values
 *                     (flags 1, 2, 3; 4 and 9 are ignored) < warn_v;
 *                     clears at >= warn_v + hysteresis_v.
 *   battery_critical  the same median < critical_v (default cutoff_v +
 *                     min(0.5 V, (warn_v - cutoff_v) / 2): half a volt
 *                     is a margin of our own, no source, halved for small
 *                     cells so it stays below warn_v); clears at >=
 *                     critical_v + hysteresis_v.  Severity critical.
 *   battery_forecast  fit (battery.fit) of the values flagged 1 or 2 of
 *                     the last trend_h hours (reading times; at most
 *                     TREND_MAX_PTS points, thinned to one per trend_h *
 *                     3600 / TREND_MAX_PTS s); needs trend_min_n points
 *                     spanning a quarter of trend_h.  Raised when the line
 *                     reaches cutoff_v within forecast_h of the newest
 *                     reading and the battery is not charging (a fit of
 *                     the newest quarter of the span rises faster than
 *                     flat_v_per_day); cleared when the fall is flatter
 *                     than flat_v_per_day (or rises), or the cutoff moves
 *                     past 1.5 x forecast_h.  Too few points: no change.
 *   qc_streak         a value flagged 3 or 4 qc_streak_n times in a row
 *                     (9 neither counts nor breaks a streak); cleared by
 *                     qc_clear_n values flagged 1 or 2 in a row.
 *   clock             median of the last 3 skews (the newest reading time
 *                     of a packet minus its receive time) beyond
 *                     clock_limit_s either way; clears within half of it.
 *   output_down       an output failing (post_stat down_since) for
 *                     alerts.down_after_s; cleared by its next success.
 *                     Severity critical.
 *   backlog           ring bytes held by unsent readings >= backlog_share
 *                     of the data area; clears under backlog_share - 0.1
 *                     (at least half of backlog_share).
 *   ring_full         the ring refused readings; cleared after
 *                     WATCH_QUIET_S without a refusal.  Severity critical.
 *   ring_failed       the ring failed (I/O error); cleared when healthy.
 * Alert ids: "<condition>-<station or output or ring>[-<field>]-<since>",
 * since in Unix seconds: stable for an alert's whole life, also across a
 * restart.
 *
 * State file (ctx.state_path, JSON; replaced as a whole: temp file, fsync,
 * rename, fsync of the folder) holds the open alerts and each station's
 * last reading times.  Written when an alert opens or closes and by
 * watch_free.  Alerts of a station or output no longer configured are
 * cleared at start.  A bad state file is logged and ignored.
 *
 * Called by run.c (watch_new, watch_accepted after each ring commit,
 * watch_notice from the outputs, watch_free), status.c (watch_outputs,
 * watch_ring, the readers below) and the tests.
 */
#ifndef TIDEPOST_WATCH_H
#define TIDEPOST_WATCH_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "alert.h"
#include "clock.h"
#include "config.h"
#include "loop.h"
#include "ring.h"

#define WATCH_MAX_ALERTS 1024 /* open at once */
#define WATCH_MAX_VALUES 48   /* values remembered per station */
#define WATCH_NAME_MAX   64   /* bytes of a value name */
#define WATCH_QUIET_S    300  /* ring_full clears after this quiet */
#define WATCH_SKEW_N     3    /* clock skew samples in the median */
#define WATCH_MEDIAN_MAX 99   /* battery.median_n, at most */

enum watch_cond {
	WATCH_SILENT = 0,
	WATCH_BATTERY_LOW,
	WATCH_BATTERY_CRITICAL,
	WATCH_BATTERY_FORECAST,
	WATCH_QC_STREAK,
	WATCH_CLOCK,
	WATCH_OUTPUT_DOWN,
	WATCH_BACKLOG,
	WATCH_RING_FULL,
	WATCH_RING_FAILED,
	WATCH_N_COND
};

struct watch;

typedef void (*watch_sink_fn)(void *arg, const struct alert_event *ev);

struct watch_ctx {
	const struct config *cfg;  /* must outlive the watch */
	const struct clock *clock; /* NULL: clock_system() */
	struct loop *loop;         /* NULL: caller runs watch_tick */
	const char *state_path;    /* NULL: nothing kept across restarts */
	watch_sink_fn sink;        /* every event; NULL: dropped */
	void *sink_arg;
	void (*changed)(void *arg); /* after a reading or an alert change */
	void *changed_arg;
};

/* One value of a reading (the reading's own strings; borrowed). */
struct watch_value {
	const char *name;
	double v; /* NAN when null */
	int flag; /* QARTOD: 1 pass, 2 not evaluated, 3, 4, 9 missing */
};

struct watch_reading {
	const char *station; /* config name */
	int64_t time_s;      /* the reading's time, Unix s */
	int64_t received_s;  /* when its packet came in */
	const struct watch_value *values;
	size_t n_values;
};

/* What an output reports (status.c fills this from post_stat). */
struct watch_output {
	const char *name;
	bool failing;         /* its last attempt failed */
	int64_t down_since_s; /* first failure of the run of failures */
	uint64_t backlog;     /* readings not yet delivered */
};

/* A station as the watchdog sees it, for the status file.  Pointers are
 * valid until the next call into the watch. */
struct watch_station_info {
	const struct cfg_station *cfg;
	bool seen;           /* a reading since start (or restored) */
	int64_t last_time_s; /* newest reading time */
	int64_t last_received_s;
	const struct watch_value *values; /* last value of each name */
	size_t n_values;
	bool has_battery; /* a median exists */
	double battery_v; /* the median */
	bool has_trend;
	double rate_v_per_day;  /* the fit's slope */
	int64_t forecast_s;     /* cutoff reached; 0 none */
	const char *trend_note; /* "ok", "flat", "charging", "too few
	                           points", "off" */
};

/* A new watchdog; restores the state file.  0 and *out, or -1 (out of
 * memory; errno) with a message in err. */
int watch_new(const struct watch_ctx *ctx, struct watch **out, char *err,
              size_t errcap) __attribute__((warn_unused_result));

/* Set (or replace) ctx.changed after the fact: the status writer that
 * listens is made after the watch it reports on. */
void watch_set_changed(struct watch *w, void (*fn)(void *arg), void *arg);

/* Write the state file, free everything.  NULL is fine. */
void watch_free(struct watch *w);

/* One accepted reading.  Readings of unknown stations are ignored. */
void watch_reading(struct watch *w, const struct watch_reading *r);

/* The same from a reading's JSON text (WIRE.md).  0, or -1 when the
 * text is not a reading. */
int watch_reading_json(struct watch *w, const char *json, size_t len)
    __attribute__((warn_unused_result));

/* After a ring commit of n readings ending at last_seq: read them back
 * from the ring and judge each (run.c's commit listener calls this). */
void watch_accepted(struct watch *w, struct ring *ring, uint64_t last_seq,
                    uint64_t n);

/* The outputs' latest figures (all outputs, each call). */
void watch_outputs(struct watch *w, const struct watch_output *o, size_t n);

/* The ring's latest figures. */
void watch_ring(struct watch *w, const struct ring_stat *st);

/* A one-off event from an output (post_ctx.alert has this shape; arg is
 * the watch): sent as ALERT_NOTICE. */
void watch_notice(void *arg, const char *output, const char *condition,
                  const char *message);

/* Judge what is due now (silence, repeats, quiet periods) and re-arm. */
void watch_tick(struct watch *w);

/* Milliseconds until watch_tick has something to do; -1 never. */
int64_t watch_next_ms(const struct watch *w);

const char *watch_cond_name(enum watch_cond c);

/* Open alerts: count, and the i-th as an event (kind ALERT_RAISED;
 * strings valid until the next call into the watch). */
size_t watch_n_alerts(const struct watch *w);
void watch_alert(const struct watch *w, size_t i, struct alert_event *ev);

size_t watch_n_stations(const struct watch *w);
void watch_station(struct watch *w, size_t i, struct watch_station_info *si);

#endif
