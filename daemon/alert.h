/*
 * alert.h - delivering alert events to the targets of alerts.to: an HTTP
 * webhook (libcurl multi, inside the daemon's one poll loop) and an exec
 * target (posix_spawn, no shell), and always the log.
 *
 * Owns one libcurl multi handle with one easy handle per http target,
 * the bounded queue of each target (ALERT_QUEUE_MAX messages; when full
 * the oldest is dropped and counted), the running child of each exec
 * target, and their timers.  An event is copied when sent: the caller's
 * strings need not outlive alert_send.  Nothing here ever blocks: the
 * webhook is driven by the loop, a child is watched through a pidfd.
 *
 * Webhook: POST of the event as one JSON object (alert_json), header
 * Content-Type: application/json and Idempotency-Key: "<id>-<event>-<time
 * s>" (the same on every retry), Authorization: Bearer from token_file /
 * token_env (token.h rules).  URL rules as for outputs: https://, or
 * http:// to a loopback host or with allow_plain_http; no redirects; TLS
 * verification always on; ca_file trusts only that file.  Outcomes are
 * judged by backoff_classify: done; retry (full jitter, base
 * ALERT_HTTP_BASE_S, cap ALERT_HTTP_CAP_S, at most ALERT_HTTP_TRIES
 * attempts, then dropped and logged); anything else is dropped and
 * logged at once (a 4xx will not get better by resending).  One request
 * in flight per target; timeout_s bounds each attempt.
 *
 * Exec (RELIABILITY.md 4, test T21): posix_spawn of argv[0] (an absolute
 * path; no PATH search, no shell) with the configured argv unchanged and
 * one more argument, the event's JSON; the fields also in the
 * environment, which holds nothing else: PATH=/usr/bin:/bin and
 * TIDEPOST_EVENT, _ID, _CONDITION, _SEVERITY, _STATION, _OUTPUT, _FIELD,
 * _SINCE, _TIME (RFC 3339), _VALUE, _THRESHOLD, _UNIT, _FORECAST,
 * _RATE_PER_DAY, _MESSAGE (absent when the event has no such field).
 * stdin is /dev/null, stdout and stderr are the daemon's; every other fd
 * is closed in the child (posix_spawn_file_actions_addclosefrom_np(3),
 * and the daemon opens its own fds O_CLOEXEC).  Signal mask empty and
 * dispositions default; the child leads a new process group, which is
 * sent SIGKILL once timeout_s has passed.  At most one child per target
 * runs at a time, and at most alerts.exec_per_min start in any 60 s;
 * further events wait in the queue.  Text fields are cut to
 * ALERT_TEXT_MAX bytes (at a UTF-8 boundary) so no argument or variable
 * can reach the kernel's per-string limit.
 *
 * Log: every event is logged once, "alert: raised: battery_low rf2:
 * MESSAGE" (warn for raised/repeated/notice, info for cleared); a failed
 * delivery is logged with the target ("alert: http1: HTTP 503 (retry in
 * 4.1 s)"), never with a token or URL query.
 *
 * Called by daemon/run.c (alert_new, alert_free), by watch.c through its
 * sink (alert_send) and by tests/tools/alert_drive.c and
 * tests/unit/test_alert.c.
 */
#ifndef TIDEPOST_ALERT_H
#define TIDEPOST_ALERT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "buf.h"
#include "config.h"
#include "loop.h"

#define ALERT_QUEUE_MAX    64   /* messages waiting per target */
#define ALERT_TEXT_MAX     4096 /* bytes of any one text field */
#define ALERT_HTTP_TRIES   8    /* attempts per webhook message */
#define ALERT_HTTP_BASE_S  2
#define ALERT_HTTP_CAP_S   300
#define ALERT_RESPONSE_MAX (16 * 1024)

enum alert_kind {
	ALERT_RAISED = 0, /* a condition began */
	ALERT_REPEATED,   /* still true (every alerts.repeat_s) */
	ALERT_CLEARED,    /* it ended (recovery notice) */
	ALERT_NOTICE      /* a one-off event (dead letters, pause...) */
};

/* One event.  Strings are borrowed for the duration of the call; NULL
 * means "not about this" (no station, no output, ...). */
struct alert_event {
	enum alert_kind kind;
	const char *id;        /* stable for the alert's whole life */
	const char *condition; /* "battery_low", "silent", ... */
	const char *severity;  /* "warning", "critical" */
	const char *station;
	const char *output;
	const char *field;   /* the value concerned (qc_streak) */
	int64_t since_s;     /* when the condition began, Unix s */
	int64_t time_s;      /* when this event was made, Unix s */
	double value;        /* current value; NAN when none */
	double threshold;    /* the limit it is judged by; NAN */
	const char *unit;    /* of value and threshold, or NULL */
	int64_t forecast_s;  /* battery_forecast: cutoff time; 0 none */
	double rate_per_day; /* battery_forecast: V/day; NAN none */
	const char *message; /* one line for people */
};

struct alert;

struct alert_stat {
	uint64_t events;  /* alert_send calls */
	uint64_t sent;    /* deliveries done (2xx, or exit status 0) */
	uint64_t failed;  /* deliveries that failed (after retries) */
	uint64_t dropped; /* dropped from a full queue */
	uint64_t spawned; /* children started */
	uint64_t killed;  /* children killed at the timeout */
};

/* "raised", "repeated", "cleared", "notice". */
const char *alert_kind_name(enum alert_kind k);

/* The event as one JSON object (no newline): event, id, condition,
 * severity, station, output, field, since, time, value, threshold, unit,
 * forecast, rate_v_per_day, message; absent fields are null. */
void alert_json(struct buf *b, const struct alert_event *ev);

/* Set up delivery to every target of cfg (kept by pointer: must outlive
 * the alert).  Reads tokens now.  0 and *out, or -1 with a complete
 * message in err ("alert: to[1]: cause"). */
int alert_new(const struct cfg_alerts *cfg, struct loop *loop,
              struct alert **out, char *err, size_t errcap)
    __attribute__((warn_unused_result));

/* Log ev and queue it for every target.  Never blocks. */
void alert_send(struct alert *a, const struct alert_event *ev);

/* Is a request or child still running, or a message waiting? */
bool alert_busy(const struct alert *a);

void alert_stat(const struct alert *a, struct alert_stat *st);

/* Abort requests, SIGKILL and reap children, free everything.  NULL is
 * fine.  Call it before loop_free. */
void alert_free(struct alert *a);

/* Copy at most ALERT_TEXT_MAX bytes of s, cut at a UTF-8 boundary.
 * malloc'd (free it), or NULL when out of memory. */
char *alert_text_dup(const char *s);

#endif
