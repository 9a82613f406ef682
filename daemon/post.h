/*
 * post.h - the HTTP output: readings from the ring, POSTed in batches
 * through libcurl's multi interface inside the daemon's one poll loop.
 *
 * Owns one libcurl multi handle and one easy handle per output (reused,
 * so the connection is kept alive between batches), the batch body being
 * sent, the backoff timer and the output's counters.  At most one request
 * is in flight per output; readings leave the ring only through the
 * output's durable cursor.
 *
 * Delivery (RELIABILITY.md 3): at least once.  A batch is the readings
 * after the output's ring cursor, at most `batch` readings and
 * `batch_bytes` body bytes.  Outcomes:
 *   2xx            ring_ack (the cursor is durable) then the next batch;
 *   408 425 429 500 502 503 504 522 524, transport errors (refused,
 *                  reset, timeout, DNS, ...): retry the same body after
 *                  max(Retry-After clamped to [1 s, cap], full jitter
 *                  uniform(0, min(cap, base * 2^n))), n = consecutive
 *                  failures - 1; no attempt limit;
 *   413            halve the batch and send again at once; a single
 *                  reading still refused is dead-lettered;
 *   other 4xx      the batch's readings are appended to
 *                  <state_dir>/deadletter-<output>.ndjson (original ring
 *                  payloads, one per line), fdatasync'd, and only then
 *                  acked; alert "deadletter"; later batches flow;
 *   401 403 3xx, TLS verification, bad CA file, bad URL/protocol:
 *                  POST_PAUSED, alert "paused", retry the same batch
 *                  every min(600 s, backoff_cap_s) (so a fixed config
 *                  or token recovers by itself); buffering continues.
 *                  The first success after a pause alerts "resumed".
 * Idempotency-Key: "<output>-<first seq>-<last seq>" of the batch's ring
 * seqs.  Every retry of a batch within a run resends the identical body
 * and key (the body is kept, not rebuilt).  After a restart the batch is
 * rebuilt from the durable cursor: it starts at the same first seq, but
 * may end later if more readings had arrived (a different last seq and
 * key); receivers de-duplicate by reading id (WIRE.md).
 *
 * libcurl settings (7.88): NOSIGNAL 1 (the daemon must ignore SIGPIPE:
 * run.c does signal(SIGPIPE, SIG_IGN)), CONNECTTIMEOUT_MS and TIMEOUT_MS
 * from the config, LOW_SPEED_LIMIT 1 B/s over max(5 s, 2/3 timeout),
 * MAXAGE_CONN 60 s, MAXLIFETIME_CONN 3600 s (TLS is re-verified hourly),
 * TCP keepalive (60 s idle, 30 s interval), PROTOCOLS_STR and
 * REDIR_PROTOCOLS_STR "https" ("http,https" with allow_plain_http or a
 * loopback host), no redirects, peer and host verification always on
 * (no way to turn them off), CAINFO = ca_file and no CA path when
 * ca_file is given (only that file is trusted), an empty "Expect:", the
 * response body discarded and capped at POST_RESPONSE_MAX (past that the
 * transfer is aborted and judged by its status line), never VERBOSE.
 * The token is sent as "Authorization: Bearer <token>", built once; it is
 * never logged and never in an error text (curl's messages are scrubbed
 * of the token and of the URL query too); log lines name the output,
 * not the URL.
 *
 * libcurl's own rule: when a reused connection dies before any response
 * byte, libcurl re-sends the request once on a fresh connection (same
 * body, same key) before reporting anything; that is one more possible
 * duplicate, which at-least-once allows.
 *
 * Logging: one line per change of condition ("post: POST: dashboard:
 * HTTP 503 (retry in 4.2 s)"); the same failure repeating is logged at
 * most once a minute, with the number of repeats.
 *
 * Called by daemon/run.c (post_new per http output, post_kick after each
 * ring commit, post_stop on SIGTERM, post_stat for status) and by
 * tests/tools/post_drive.c.  All timers run on the loop's clock.
 */
#ifndef TIDEPOST_POST_H
#define TIDEPOST_POST_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "config.h"
#include "loop.h"
#include "ring.h"

#define POST_RESPONSE_MAX (64 * 1024)  /* response body bytes read */
#define POST_PAUSE_MS     (600 * 1000) /* slow retry while paused */
#define POST_ERROR_MAX    200

struct post;

/* What post_new needs from the run loop.  Everything pointed to must
 * outlive the post (a reload is post_free + post_new). */
struct post_ctx {
	struct loop *loop;
	struct ring *ring;
	const struct config *cfg; /* layouts, for "quantities" */
	const char *state_dir;    /* dead-letter files go here */
	void (*alert)(void *arg, const char *output, const char *condition,
	              const char *message); /* may be NULL */
	void *alert_arg;
};

enum post_state {
	POST_DRAINED = 0, /* cursor at the newest reading, nothing sent */
	POST_SENDING,     /* a request is in flight */
	POST_BACKOFF,     /* after a failure, waiting to retry */
	POST_PAUSED,      /* credentials/TLS/config problem: slow retry */
	POST_STOPPED      /* post_stop'ed with a backlog, nothing in
	                   * flight (not in the original contract) */
};

struct post_stat {
	char name[RING_NAME_MAX + 1];
	enum post_state state;
	uint64_t acked;          /* the output's durable cursor */
	uint64_t backlog;        /* accepted readings after it */
	uint64_t requests;       /* requests sent (attempts) */
	uint64_t delivered;      /* readings acknowledged by a 2xx */
	uint64_t retries;        /* attempts that will be retried */
	uint64_t deadlettered;   /* readings moved to the dead letters */
	int64_t last_success_ms; /* real time of the last 2xx; 0 never */
	char last_error[POST_ERROR_MAX]; /* "" if none; no token, no query */
	uint32_t failures;               /* consecutive failed attempts */
	int64_t down_since_ms;           /* real time of the first of them; 0 */
	int64_t next_try_ms;             /* ms until the next attempt (BACKOFF,
	                                  * PAUSED), else -1 */
};

/*
 * Set up output o (kind http).  Reads the token now (token.h rules),
 * refuses a URL that is not http(s), and http:// to a host that is not
 * loopback (127.0.0.0/8, ::1, localhost) unless o->allow_plain_http.
 * The output's cursor must already exist in the ring
 * (ring_outputs).  Starts nothing: call post_kick.  0 and *out, or -1
 * with a complete message in err ("post: NAME: cause").
 */
int post_new(const struct cfg_output *o, const struct post_ctx *ctx,
             struct post **out, char *err, size_t errcap)
    __attribute__((warn_unused_result));

/* New records were committed (or at start): start a batch if idle and
 * not waiting (backoff, pause) or stopped. */
void post_kick(struct post *p);

/* SIGTERM: start nothing new; an in-flight request finishes or times
 * out (post_busy tells when). */
void post_stop(struct post *p);

bool post_busy(const struct post *p);
enum post_state post_state(const struct post *p);
const char *post_state_name(enum post_state s);
void post_stat(const struct post *p, struct post_stat *st);

/* The Idempotency-Key value of a batch: "<output>-<first>-<last>" (ring
 * seqs).  Returns the length, or -1 if it does not fit in cap. */
int post_idempotency_key(char *out, size_t cap, const char *output,
                         uint64_t first_seq, uint64_t last_seq);

/* Abort anything in flight, free everything.  NULL is fine.  Call it
 * before loop_free and ring_close. */
void post_free(struct post *p);

#endif
