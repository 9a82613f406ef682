/*
 * alertpriv.h - the inside of alert delivery, shared by alert.c (events,
 * queues, the webhook) and alertexec.c (the exec target) and nothing
 * else.  See alert.h for the contract.
 *
 * Invariants: a target's queue holds q_n messages from q_head (a ring of
 * ALERT_QUEUE_MAX); the message at the head is the one being delivered
 * (in flight, waiting for a retry, or running as a child); at most one
 * request or child per target.
 */
#ifndef TIDEPOST_ALERTPRIV_H
#define TIDEPOST_ALERTPRIV_H

#include <curl/curl.h>
#include <sys/types.h>

#include "alert.h"
#include "backoff.h"
#include "curlmulti.h"

#define ALERT_ENV_MAX  20 /* variables of an exec child */
#define ALERT_NAME_MAX 32

/* One delivery of one event to one target. */
struct amsg {
	char *json;               /* body, or the last argument */
	char *key;                /* Idempotency-Key */
	char *env[ALERT_ENV_MAX]; /* exec: NULL-terminated, owned */
	uint32_t tries;
};

struct target {
	struct alert *a;
	const struct cfg_alert_to *cfg;
	char name[ALERT_NAME_MAX]; /* "to[1]": for logs (no URL) */
	struct amsg *q[ALERT_QUEUE_MAX];
	size_t q_head, q_n;
	uint64_t drops_unlogged; /* dropped since the last log line */
	int64_t drop_logged_ms;  /* when that line was written */
	struct loop_timer timer; /* http: retry; exec: kill or rate */
	/* http */
	CURL *easy;
	struct curl_slist *hdrs; /* this message's headers */
	char *auth;              /* "Authorization: Bearer ..." or NULL */
	bool plain;
	bool in_flight, waiting, capped;
	size_t resp_bytes;
	char errbuf[CURL_ERROR_SIZE];
	/* exec */
	pid_t pid; /* 0: no child */
	int pidfd; /* -1: none (then reap_timer polls) */
	bool killed;
	struct loop_timer reap_timer;
	int64_t *starts; /* exec_per_min start times (ring) */
	size_t n_starts, starts_head, rate_cap; /* rate_cap >= 1 */
};

struct alert {
	const struct cfg_alerts *cfg;
	struct loop *loop;
	struct curlmulti cm;
	bool global_init;
	struct target *t;
	size_t n_t;
	struct alert_stat st;
	struct backoff bo;
};

/* alert.c */
struct amsg *alert_head(struct target *t);
void alert_pop(struct target *t);
void alert_amsg_free(struct amsg *m);

/* alertexec.c */
int alert_exec_env(struct amsg *m, const struct alert_event *ev);
void alert_exec_kick(struct target *t);
void alert_exec_stop(struct target *t);
int alert_exec_init(struct target *t, char *err, size_t errcap);

#endif
