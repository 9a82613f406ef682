/*
 * post.c - see post.h.  The state machine: build a batch from the ring
 * (postbody.c), send it (libcurl multi, driven by the loop's fds and
 * timers), classify the outcome (backoff.c), then ack, retry, split,
 * dead-letter or pause.  libcurl calls back only from inside
 * curl_multi_socket_action; we never start or remove a transfer from
 * inside a libcurl callback.
 */
#include <arpa/inet.h>
#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <unistd.h>

#include <curl/curl.h>

#include "fdio.h"
#include "backoff.h"
#include "curlload.h"
#include "curlmulti.h"
#include "log.h"
#include "post.h"
#include "postbody.h"
#include "token.h"

#define LOG_REPEAT_MS (60 * 1000) /* same failure: log once a minute */
#define GROW_AFTER    16          /* successes before a 413 cap grows */
#define KEY_MAX       (RING_NAME_MAX + 64)

struct post {
	const struct cfg_output *o;
	struct post_ctx ctx;
	struct curlmulti cm;
	char who[RING_NAME_MAX + 8]; /* "post: NAME", for curlmulti's logs */
	CURL *easy;
	struct loop_timer retry_timer; /* backoff and pause */
	struct backoff rng;
	struct postbody pb;
	struct curl_slist *hdrs, *hdr_tail;
	struct curl_slist keynode; /* Idempotency-Key; ours, static */
	char keyhdr[KEY_MAX + 24];
	char *token, *query; /* for scrubbing texts */
	char *dl_path;
	char errbuf[CURL_ERROR_SIZE];
	struct ring_iter it;       /* next record to read */
	struct ring_iter batch_it; /* at the batch's first record */
	uint64_t first, last, acked;
	size_t n;             /* readings in the batch */
	uint32_t limit, grow; /* 413-adapted readings cap */
	bool have_batch, inflight, paused, stopped, at_end, ack_pending;
	bool capped, ra_seen, global_init;
	size_t resp_bytes;
	uint32_t failures;
	int64_t down_since_ms, last_success_ms, retry_due, last_log;
	uint64_t requests, delivered, retries, deadlettered, suppressed;
	char last_error[POST_ERROR_MAX];
	char last_logged[POST_ERROR_MAX];
	char payload[RING_PAYLOAD_MAX + 8];
};

static void start(struct post *p);
static void send_batch(struct post *p);
static void on_retry(void *arg);

static int64_t mono(const struct post *p)
{
	return clock_mono_ms(loop_clock(p->ctx.loop));
}

static int64_t real(const struct post *p)
{
	return clock_real_ms(loop_clock(p->ctx.loop));
}

/* ---- texts: never the token, never the URL query ---- */

static void scrub(char *s, const char *needle)
{
	size_t n = needle != NULL ? strlen(needle) : 0;
	char *at;

	if (n == 0)
		return;
	while ((at = strstr(s, needle)) != NULL) {
		memset(at, '*', n); /* same length: no shifting */
	}
}

static void set_error(struct post *p, const char *text)
{
	snprintf(p->last_error, sizeof(p->last_error), "%s", text);
	scrub(p->last_error, p->token);
	scrub(p->last_error, p->query);
}

static void alert(struct post *p, const char *cond, const char *msg)
{
	if (p->ctx.alert != NULL)
		p->ctx.alert(p->ctx.alert_arg, p->o->name, cond, msg);
}

/* Log a failure once per change, then once a minute with a count. */
static void log_failure(struct post *p, const char *what, int64_t delay)
{
	int64_t now = mono(p);

	if (strcmp(p->last_logged, p->last_error) == 0 &&
	    now - p->last_log < LOG_REPEAT_MS) {
		p->suppressed++;
		return;
	}
	if (p->suppressed > 0)
		log_warn("post: POST: %s: %s (%s in %.1f s; %" PRIu64
		         " more like it before)",
		         p->o->name, p->last_error, what,
		         (double)delay / 1000.0, p->suppressed);
	else
		log_warn("post: POST: %s: %s (%s in %.1f s)", p->o->name,
		         p->last_error, what, (double)delay / 1000.0);
	snprintf(p->last_logged, sizeof(p->last_logged), "%s", p->last_error);
	p->last_log = now;
	p->suppressed = 0;
}

/* ---- the loop side of libcurl ---- */

static void drain_msgs(struct post *p);

static void after_curl(void *arg)
{
	drain_msgs(arg);
}

/* The response body is not needed: count it, stop past the cap. */
static size_t write_cb(char *data, size_t size, size_t n, void *arg)
{
	struct post *p = arg;

	p->resp_bytes += size * n;
	if (p->resp_bytes > POST_RESPONSE_MAX) {
		p->capped = true;
		return 0;
	}
	return size * n;
}

/* Was there a Retry-After in the final response?  (libcurl reports 0
 * both for none and for garbage; present garbage means 1 s.) */
static size_t header_cb(char *data, size_t size, size_t n, void *arg)
{
	struct post *p = arg;
	size_t len = size * n;

	if (len >= 5 && strncmp(data, "HTTP/", 5) == 0)
		p->ra_seen = false;
	else if (len >= 12 && strncasecmp(data, "Retry-After:", 12) == 0)
		p->ra_seen = true;
	return len;
}

/* ---- set-up ---- */

static bool loopback(const char *host)
{
	char h[64];
	size_t n = strlen(host);
	unsigned char a[16];

	if (strcasecmp(host, "localhost") == 0)
		return true;
	if (n >= 2 && host[0] == '[' && host[n - 1] == ']') {
		host++;
		n -= 2;
	}
	if (n >= sizeof(h))
		return false;
	memcpy(h, host, n);
	h[n] = '\0';
	if (inet_pton(AF_INET, h, a) == 1)
		return a[0] == 127;
	return inet_pton(AF_INET6, h, a) == 1 &&
	       IN6_IS_ADDR_LOOPBACK((struct in6_addr *)a);
}

/* Scheme and host rules; keeps the query for scrubbing.  *plain: http. */
static int url_check(struct post *p, bool *plain, char *err, size_t cap)
{
	CURLU *u = curl_url();
	char *scheme = NULL, *host = NULL, *q = NULL;
	const char *why = NULL;
	CURLUcode rc;

	rc = u == NULL ? CURLUE_OUT_OF_MEMORY
	               : curl_url_set(u, CURLUPART_URL, p->o->url, 0);
	if (rc == CURLUE_OK)
		rc = curl_url_get(u, CURLUPART_SCHEME, &scheme, 0);
	if (rc == CURLUE_OK)
		rc = curl_url_get(u, CURLUPART_HOST, &host, 0);
	if (rc != CURLUE_OK)
		why = curl_url_strerror(rc);
	else if (strcasecmp(scheme, "https") == 0)
		*plain = false;
	else if (strcasecmp(scheme, "http") != 0)
		why = "not an https:// URL";
	else if (p->o->allow_plain_http || loopback(host))
		*plain = true;
	else
		why = "plain http:// to a host that is not loopback; use "
		      "https:// or set allow_plain_http";
	if (why == NULL &&
	    curl_url_get(u, CURLUPART_QUERY, &q, 0) == CURLUE_OK && q != NULL &&
	    q[0] != '\0')
		p->query = strdup(q);
	if (why != NULL)
		snprintf(err, cap, "post: %s: url: %s", p->o->name, why);
	curl_free(scheme);
	curl_free(host);
	curl_free(q);
	curl_url_cleanup(u);
	return why != NULL ? -1 : 0;
}

static int read_token(struct post *p, char *err, size_t cap)
{
	char msg[300];
	int rc = 0;

	if (p->o->token_file != NULL)
		rc = token_read_file(p->o->token_file, &p->token, msg,
		                     sizeof(msg));
	else if (p->o->token_env != NULL)
		rc = token_read_env(p->o->token_env, &p->token, msg,
		                    sizeof(msg));
	if (rc != 0)
		snprintf(err, cap, "post: %s: %s", p->o->name, msg);
	return rc;
}

static bool add_header(struct post *p, const char *a, const char *b)
{
	size_t n = strlen(a) + strlen(b) + 1;
	char *line = malloc(n);
	struct curl_slist *l = NULL;

	if (line != NULL) {
		snprintf(line, n, "%s%s", a, b);
		l = curl_slist_append(p->hdrs, line);
		explicit_bzero(line, n); /* may hold the token */
		free(line);
	}
	if (l == NULL)
		return false;
	p->hdrs = l;
	for (p->hdr_tail = l; p->hdr_tail->next != NULL;)
		p->hdr_tail = p->hdr_tail->next;
	return true;
}

/* Fixed headers, then our static Idempotency-Key node at the end. */
static int build_headers(struct post *p)
{
	char line[600];
	bool ok;
	size_t i;

	ok = add_header(
	         p, "Content-Type: ", postbody_content_type(p->o->format)) &&
	     add_header(p, "Expect:", "") &&
	     (p->token == NULL ||
	      add_header(p, "Authorization: Bearer ", p->token));
	for (i = 0; ok && i < p->o->n_headers; i++) {
		snprintf(line, sizeof(line), "%s: ", p->o->headers[i].key);
		ok = add_header(p, line, p->o->headers[i].value);
	}
	if (!ok)
		return -1;
	p->keynode.data = p->keyhdr;
	p->keynode.next = NULL;
	p->hdr_tail->next = &p->keynode;
	return 0;
}

static uint32_t ms_of(uint32_t s, uint32_t dflt)
{
	return (s > 0 ? s : dflt) * 1000u;
}

static int easy_setup(struct post *p, bool plain)
{
	uint32_t t_s = p->o->timeout_s > 0 ? p->o->timeout_s : 30;
	long low = (long)(t_s * 2 / 3 > 5 ? t_s * 2 / 3 : 5);
	struct curlbase base = {p->o->url,
	                        plain,
	                        p->o->ca_file,
	                        (long)ms_of(p->o->connect_timeout_s, 10),
	                        (long)ms_of(t_s, 30),
	                        write_cb,
	                        p,
	                        p->errbuf};
	CURL *e = p->easy;
	CURLcode rc = CURLE_OK;

	if (curlbase_setup(e, &base) != 0)
		return -1;
	rc |= curl_easy_setopt(e, CURLOPT_LOW_SPEED_LIMIT, 1L);
	rc |= curl_easy_setopt(e, CURLOPT_LOW_SPEED_TIME, low);
	rc |= curl_easy_setopt(e, CURLOPT_MAXAGE_CONN, 60L);
	rc |= curl_easy_setopt(e, CURLOPT_MAXLIFETIME_CONN, 3600L);
	rc |= curl_easy_setopt(e, CURLOPT_TCP_KEEPALIVE, 1L);
	rc |= curl_easy_setopt(e, CURLOPT_TCP_KEEPIDLE, 60L);
	rc |= curl_easy_setopt(e, CURLOPT_TCP_KEEPINTVL, 30L);
	rc |= curl_easy_setopt(e, CURLOPT_HTTPHEADER, p->hdrs);
	rc |= curl_easy_setopt(e, CURLOPT_HEADERFUNCTION, header_cb);
	rc |= curl_easy_setopt(e, CURLOPT_HEADERDATA, p);
	return rc == CURLE_OK ? 0 : -1;
}

static int dl_path(struct post *p)
{
	const char *dir = p->ctx.state_dir != NULL ? p->ctx.state_dir
	                  : p->ctx.cfg != NULL && p->ctx.cfg->state_dir
	                      ? p->ctx.cfg->state_dir
	                      : ".";
	size_t n = strlen(dir) + strlen(p->o->name) + 32;

	p->dl_path = malloc(n);
	if (p->dl_path == NULL)
		return -1;
	snprintf(p->dl_path, n, "%s/deadletter-%s.ndjson", dir, p->o->name);
	return 0;
}

static int setup(struct post *p, char *err, size_t cap)
{
	bool plain = false;

	if (url_check(p, &plain, err, cap) != 0 || read_token(p, err, cap))
		return -1;
	if (postbody_init(&p->pb, p->o, p->ctx.cfg, p->o->batch_bytes, err,
	                  cap) != 0)
		return -1;
	if (ring_cursor_get(p->ctx.ring, p->o->name, &p->acked) != 0) {
		snprintf(err, cap,
		         "post: %s: the ring has no cursor for this"
		         " output",
		         p->o->name);
		return -1;
	}
	p->easy = curl_easy_init();
	if (dl_path(p) != 0 || p->easy == NULL || build_headers(p) != 0 ||
	    easy_setup(p, plain) != 0 ||
	    curlmulti_init(&p->cm, p->ctx.loop, after_curl, p, p->who) != 0) {
		snprintf(err, cap,
		         "post: %s: libcurl set-up failed (out of"
		         " memory, or libcurl older than 7.85)",
		         p->o->name);
		return -1;
	}
	return 0;
}

int post_new(const struct cfg_output *o, const struct post_ctx *ctx,
             struct post **out, char *err, size_t errcap)
{
	struct post *p = calloc(1, sizeof(*p));

	*out = NULL;
	if (p == NULL) {
		snprintf(err, errcap, "post: %s: out of memory", o->name);
		return -1;
	}
	p->o = o;
	p->ctx = *ctx;
	snprintf(p->who, sizeof(p->who), "post: %s", o->name);
	p->global_init = curl_global_init(CURL_GLOBAL_DEFAULT) == CURLE_OK;
	loop_timer_init(&p->retry_timer, on_retry, p);
	backoff_seed_random(&p->rng);
	p->limit = o->batch > 0 ? o->batch : 500;
	if (!p->global_init || setup(p, err, errcap) != 0) {
		if (!p->global_init)
			snprintf(err, errcap, "post: %s: libcurl: %s", o->name,
			         curlload_error() != NULL
			             ? curlload_error()
			             : "curl_global_init failed");
		post_free(p);
		return -1;
	}
	ring_iter_init(&p->it, p->acked);
	*out = p;
	return 0;
}

/* ---- batches ---- */

static void schedule(struct post *p, int64_t delay_ms)
{
	if (p->stopped) /* a request that ended after post_stop: no retry */
		return;
	if (loop_timer_arm(p->ctx.loop, &p->retry_timer, delay_ms) != 0)
		log_err("post: timer: %s: too many timers; output stalls",
		        p->o->name);
	p->retry_due = mono(p) + delay_ms;
}

/* Count a failed attempt; the caller logs and schedules. */
static void failed(struct post *p, const char *text)
{
	if (p->failures++ == 0)
		p->down_since_ms = real(p);
	set_error(p, text);
}

static void retry_later(struct post *p, const char *text, int64_t ra_ms)
{
	int64_t d;

	failed(p, text);
	d = backoff_jitter_ms(&p->rng, p->o->backoff_base_s,
	                      p->o->backoff_cap_s ? p->o->backoff_cap_s : 600,
	                      p->failures - 1);
	if (ra_ms > d)
		d = ra_ms;
	p->retries++;
	log_failure(p, "retry", d);
	schedule(p, d);
}

static void ring_problem(struct post *p, const char *what)
{
	char msg[POST_ERROR_MAX];

	snprintf(msg, sizeof(msg), "ring: %s: %s", what, strerror(errno));
	/* start again from the durable cursor */
	if (ring_cursor_get(p->ctx.ring, p->o->name, &p->acked) == 0)
		ring_iter_init(&p->it, p->acked);
	p->have_batch = false;
	retry_later(p, msg, 0);
}

static uint32_t batch_limit(const struct post *p)
{
	uint32_t lim = p->o->batch > 0 ? p->o->batch : 500;

	if (p->o->format == CFG_FMT_SINGLE)
		return 1;
	return p->limit < lim ? p->limit : lim;
}

static int deadletter(struct post *p, const char *why);

/* Add records from the ring to pb until a limit.  Returns the last
 * ring_iter_next result; *rc the first refusal; *after the iterator past
 * a refused record, *seq its seq. */
static int gather(struct post *p, enum postbody_rc *rc, struct ring_iter *after,
                  uint64_t *seq)
{
	struct ring_iter save;
	size_t len = 0;
	int r = 1;

	*rc = POSTBODY_OK;
	for (p->n = 0; p->n < batch_limit(p); p->n++) {
		save = p->it;
		r = ring_iter_next(p->ctx.ring, &p->it, p->payload,
		                   sizeof(p->payload), &len, seq);
		if (r <= 0)
			break;
		*rc = postbody_add(&p->pb, p->payload, len);
		if (*rc != POSTBODY_OK) {
			*after = p->it;
			p->it = save;
			break;
		}
		p->first = p->n == 0 ? *seq : p->first;
		p->last = *seq;
	}
	return r;
}

/* Read the next batch into pb.  1: ready; 0: nothing to send; 2: a
 * reading that is not JSON was dead-lettered; -1: failure, retry set. */
static int build(struct post *p)
{
	struct ring_iter after;
	uint64_t seq = 0;
	enum postbody_rc rc;
	int r;

	postbody_begin(&p->pb);
	p->batch_it = p->it;
	r = gather(p, &rc, &after, &seq);
	if (r < 0 && p->n == 0) {
		ring_problem(p, "read");
		return -1;
	}
	if (p->n == 0 && rc == POSTBODY_BAD) {
		p->first = p->last = seq;
		p->n = 1;
		p->it = after;
		return deadletter(p, "not a JSON reading") == 0 ? 2 : -1;
	}
	if (p->n == 0 && rc != POSTBODY_OK)
		errno = ENOMEM;
	if ((p->n == 0 && rc != POSTBODY_OK) ||
	    (p->n > 0 && postbody_finish(&p->pb) != 0)) {
		ring_problem(p, "batch body");
		return -1;
	}
	p->at_end = p->n == 0;
	p->have_batch = p->n > 0;
	return p->n > 0;
}

static void start(struct post *p)
{
	int i, rc;

	if (p->stopped || p->inflight || p->retry_timer.armed || p->paused ||
	    p->ack_pending)
		return;
	if (p->have_batch) {
		send_batch(p);
		return;
	}
	for (i = 0; i < 64; i++) {
		rc = build(p);
		if (rc == 1)
			send_batch(p);
		if (rc != 2)
			return;
	}
	schedule(p, 0); /* many bad records: go on from the loop */
}

static void send_batch(struct post *p)
{
	CURLMcode mc;

	static const char h[] = "Idempotency-Key: ";

	memcpy(p->keyhdr, h, sizeof(h));
	if (post_idempotency_key(p->keyhdr + sizeof(h) - 1,
	                         sizeof(p->keyhdr) - sizeof(h) + 1, p->o->name,
	                         p->first, p->last) < 0)
		p->keyhdr[0] = '\0'; /* cannot happen: names <= 31 bytes */
	curl_easy_setopt(p->easy, CURLOPT_POSTFIELDS, postbody_data(&p->pb));
	curl_easy_setopt(p->easy, CURLOPT_POSTFIELDSIZE_LARGE,
	                 (curl_off_t)postbody_len(&p->pb));
	p->resp_bytes = 0;
	p->capped = p->ra_seen = false;
	p->errbuf[0] = '\0';
	mc = curl_multi_add_handle(p->cm.multi, p->easy);
	if (mc != CURLM_OK) {
		retry_later(p, curl_multi_strerror(mc), 0);
		return;
	}
	p->inflight = true;
	p->requests++;
}

/* ---- outcomes ---- */

static int ack(struct post *p)
{
	if (ring_ack(p->ctx.ring, p->o->name, p->last) != 0) {
		p->ack_pending = true;
		ring_problem(p, "ack");
		return -1;
	}
	p->ack_pending = false;
	p->acked = p->last;
	p->have_batch = false;
	return 0;
}

static void delivered(struct post *p)
{
	if (ack(p) != 0)
		return;
	p->delivered += p->n;
	p->last_success_ms = real(p);
	if (p->failures > 0)
		log_info("post: POST: %s: delivering again after %" PRIu32
		         " failed attempts",
		         p->o->name, p->failures);
	if (p->paused)
		alert(p, "resumed", "posting works again");
	p->paused = false;
	p->failures = 0;
	p->down_since_ms = 0;
	p->last_logged[0] = '\0';
	p->suppressed = 0;
	if (p->limit < (p->o->batch ? p->o->batch : 500) &&
	    ++p->grow >= GROW_AFTER) {
		p->limit *= 2;
		p->grow = 0;
	}
	start(p);
}

/* Append the batch's ring payloads to fd, one per line. */
static int dl_write(struct post *p, int fd)
{
	struct ring_iter it = p->batch_it;
	uint64_t seq;
	size_t i, len;

	for (i = 0; i < p->n; i++) {
		if (ring_iter_next(p->ctx.ring, &it, p->payload,
		                   sizeof(p->payload), &len, &seq) != 1) {
			errno = errno ? errno : EIO;
			return -1;
		}
		if (fdio_write_all(fd, p->payload, len) != 0 ||
		    fdio_write_all(fd, "\n", 1) != 0)
			return -1;
	}
	return fdatasync(fd);
}

static int dl_open(struct post *p)
{
	int flags = O_WRONLY | O_APPEND | O_CLOEXEC | O_NOFOLLOW;
	int fd = open(p->dl_path, flags | O_CREAT | O_EXCL, 0600), dir;
	char *slash;

	if (fd >= 0) { /* new file: make its name durable */
		slash = strrchr(p->dl_path, '/');
		*slash = '\0';
		dir = open(p->dl_path, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
		*slash = '/';
		if (dir >= 0) {
			fsync(dir);
			close(dir);
		}
		return fd;
	}
	return errno == EEXIST ? open(p->dl_path, flags) : -1;
}

/* Quarantine the batch: store durably, then ack (never drop). */
static int deadletter(struct post *p, const char *why)
{
	char msg[POST_ERROR_MAX + 160];
	int fd = dl_open(p), rc = fd >= 0 ? dl_write(p, fd) : -1, e = errno;

	if (fd >= 0)
		close(fd);
	if (rc != 0) {
		snprintf(msg, sizeof(msg), "deadletter: %s: %s", p->dl_path,
		         strerror(e));
		log_err("post: %s", msg);
		p->it = p->batch_it;
		p->have_batch = false;
		retry_later(p, msg, 0);
		return -1;
	}
	snprintf(msg, sizeof(msg),
	         "%s; %zu readings (seq %" PRIu64 "-%" PRIu64 ") moved to %s",
	         why, p->n, p->first, p->last, p->dl_path);
	scrub(msg, p->token);
	log_err("post: POST: %s: %s", p->o->name, msg);
	alert(p, "deadletter", msg);
	if (ack(p) != 0)
		return -1;
	p->deadlettered += p->n;
	p->failures = 0; /* the server answered: the output is up */
	p->down_since_ms = 0;
	return 0;
}

static void pause_output(struct post *p, const char *text)
{
	int64_t cap =
	    (int64_t)(p->o->backoff_cap_s ? p->o->backoff_cap_s : 600) * 1000;
	int64_t d = cap < POST_PAUSE_MS ? cap : POST_PAUSE_MS;
	char msg[POST_ERROR_MAX + 120];

	failed(p, text);
	if (!p->paused) {
		snprintf(msg, sizeof(msg),
		         "%s; posting paused, readings are "
		         "kept; retry every %.0f s",
		         p->last_error, (double)d / 1000.0);
		log_err("post: POST: %s: %s", p->o->name, msg);
		alert(p, "paused", msg);
		snprintf(p->last_logged, sizeof(p->last_logged), "%s",
		         p->last_error);
		p->last_log = mono(p);
	} else {
		log_failure(p, "still paused; retry", d);
	}
	p->paused = true;
	schedule(p, d);
}

static void split(struct post *p, const char *text)
{
	if (p->n <= 1) {
		if (deadletter(p, "HTTP 413 for a single reading") == 0)
			start(p);
		return;
	}
	p->limit = (uint32_t)(p->n / 2);
	p->grow = 0;
	log_info("post: POST: %s: %s; sending %zu readings as smaller "
	         "batches of at most %" PRIu32,
	         p->o->name, text, p->n, p->limit);
	p->it = p->batch_it;
	p->have_batch = false;
	start(p);
}

static void describe(struct post *p, CURLcode cc, long status, char *out,
                     size_t cap)
{
	if (cc == CURLE_OK || (p->capped && status > 0))
		snprintf(out, cap, "HTTP %ld%s", status,
		         p->capped ? " (response cut at 64 KiB)" : "");
	else if (p->errbuf[0] != '\0' &&
	         snprintf(out, cap, "curl %d: %s", (int)cc, p->errbuf) < 0)
		out[0] = '\0';
	else if (p->errbuf[0] == '\0')
		snprintf(out, cap, "curl %d: %s", (int)cc,
		         curl_easy_strerror(cc));
	scrub(out, p->token);
	scrub(out, p->query);
}

static void on_done(struct post *p, CURLcode cc)
{
	long status = 0, verify = 0;
	curl_off_t ra = 0;
	char text[POST_ERROR_MAX];
	enum backoff_class c;

	curl_easy_getinfo(p->easy, CURLINFO_RESPONSE_CODE, &status);
	curl_easy_getinfo(p->easy, CURLINFO_SSL_VERIFYRESULT, &verify);
	curl_easy_getinfo(p->easy, CURLINFO_RETRY_AFTER, &ra);
	describe(p, cc, status, text, sizeof(text));
	c = backoff_classify(status, (int)cc, verify != 0, p->capped);
	switch (c) {
	case BACKOFF_DONE:
		delivered(p);
		break;
	case BACKOFF_RETRY:
		retry_later(p, text,
		            backoff_retry_after_ms(p->ra_seen, (int64_t)ra,
		                                   p->o->backoff_cap_s
		                                       ? p->o->backoff_cap_s
		                                       : 600));
		break;
	case BACKOFF_SPLIT:
		split(p, text);
		break;
	case BACKOFF_DEADLETTER:
		set_error(p, text);
		if (deadletter(p, text) == 0)
			start(p);
		break;
	case BACKOFF_PAUSE:
		pause_output(p, text);
		break;
	}
}

static void drain_msgs(struct post *p)
{
	CURLMsg *m;
	int left;
	CURLcode cc;

	while ((m = curl_multi_info_read(p->cm.multi, &left)) != NULL) {
		if (m->msg != CURLMSG_DONE || m->easy_handle != p->easy)
			continue;
		cc = m->data.result;
		curl_multi_remove_handle(p->cm.multi, p->easy);
		p->inflight = false;
		on_done(p, cc);
		return; /* one transfer at a time */
	}
}

static void on_retry(void *arg)
{
	struct post *p = arg;

	if (p->stopped)
		return;
	if (p->ack_pending) {
		delivered(p);
		return;
	}
	if (p->have_batch)
		send_batch(p);
	else
		start(p);
}

/* ---- public ---- */

int post_idempotency_key(char *out, size_t cap, const char *output,
                         uint64_t first_seq, uint64_t last_seq)
{
	int n = snprintf(out, cap, "%s-%" PRIu64 "-%" PRIu64, output, first_seq,
	                 last_seq);

	return n < 0 || (size_t)n >= cap ? -1 : n;
}

void post_kick(struct post *p)
{
	p->at_end = false;
	start(p);
}

void post_stop(struct post *p)
{
	p->stopped = true;
	loop_timer_disarm(p->ctx.loop, &p->retry_timer);
}

bool post_busy(const struct post *p)
{
	return p->inflight;
}

static uint64_t backlog(const struct post *p)
{
	struct ring_stat st;
	size_t i;

	ring_stat(p->ctx.ring, &st);
	for (i = 0; i < st.n_outputs; i++)
		if (strcmp(st.outputs[i].name, p->o->name) == 0)
			return st.outputs[i].unsent;
	return 0;
}

enum post_state post_state(const struct post *p)
{
	if (p->inflight)
		return POST_SENDING;
	if (p->paused)
		return POST_PAUSED;
	if (p->retry_timer.armed || p->ack_pending)
		return POST_BACKOFF;
	if (p->at_end || backlog(p) == 0)
		return POST_DRAINED;
	return p->stopped ? POST_STOPPED : POST_BACKOFF;
}

const char *post_state_name(enum post_state s)
{
	static const char *const names[] = {"drained", "sending", "backoff",
	                                    "paused", "stopped"};

	return (unsigned)s < 5 ? names[s] : "?";
}

void post_stat(const struct post *p, struct post_stat *st)
{
	memset(st, 0, sizeof(*st));
	snprintf(st->name, sizeof(st->name), "%s", p->o->name);
	st->state = post_state(p);
	st->acked = p->acked;
	st->backlog = backlog(p);
	st->requests = p->requests;
	st->delivered = p->delivered;
	st->retries = p->retries;
	st->deadlettered = p->deadlettered;
	st->last_success_ms = p->last_success_ms;
	memcpy(st->last_error, p->last_error, sizeof(st->last_error));
	st->failures = p->failures;
	st->down_since_ms = p->down_since_ms;
	st->next_try_ms = -1;
	if (p->retry_timer.armed)
		st->next_try_ms =
		    p->retry_due > mono(p) ? p->retry_due - mono(p) : 0;
}

void post_free(struct post *p)
{
	if (p == NULL)
		return;
	if (p->inflight)
		curl_multi_remove_handle(p->cm.multi, p->easy);
	curl_easy_cleanup(p->easy);
	curlmulti_free(&p->cm);
	loop_timer_disarm(p->ctx.loop, &p->retry_timer);
	if (p->hdr_tail != NULL)
		p->hdr_tail->next = NULL; /* keynode is ours */
	for (struct curl_slist *l = p->hdrs; l != NULL; l = l->next)
		explicit_bzero(l->data, strlen(l->data));
	curl_slist_free_all(p->hdrs);
	postbody_free(&p->pb);
	token_free(p->token);
	free(p->query);
	free(p->dl_path);
	if (p->global_init)
		curl_global_cleanup();
	free(p);
}
