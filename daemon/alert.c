/*
 * alert.c - alert events: their JSON, the log line, the queues of the
 * targets and the webhook through libcurl's multi interface; see
 * alert.h.  The exec target is in alertexec.c.
 */
#include <arpa/inet.h>
#include <errno.h>
#include <inttypes.h>
#include <math.h>
#include <netinet/in.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "alertpriv.h"
#include "emit.h"
#include "log.h"
#include "token.h"

static const char *const kinds[] = {"raised", "repeated", "cleared", "notice"};

const char *alert_kind_name(enum alert_kind k)
{
	return (unsigned)k < 4 ? kinds[k] : "unknown";
}

/* Bytes of s to keep: at most ALERT_TEXT_MAX, never half a character. */
static size_t cut(const char *s)
{
	size_t n = strnlen(s, ALERT_TEXT_MAX + 1);

	if (n <= ALERT_TEXT_MAX)
		return n;
	n = ALERT_TEXT_MAX;
	while (n > 0 && ((unsigned char)s[n] & 0xC0) == 0x80)
		n--;
	return n;
}

char *alert_text_dup(const char *s)
{
	size_t n = cut(s);
	char *d = malloc(n + 1);

	if (d == NULL)
		return NULL;
	memcpy(d, s, n);
	d[n] = '\0';
	return d;
}

static void jstr(struct buf *b, const char *key, const char *s)
{
	char tmp[ALERT_TEXT_MAX + 1];
	size_t n;

	buf_printf(b, ",\"%s\":", key);
	if (s == NULL) {
		buf_adds(b, "null");
		return;
	}
	n = cut(s);
	memcpy(tmp, s, n);
	tmp[n] = '\0';
	emit_json_string(b, tmp);
}

static void jnum(struct buf *b, const char *key, double v)
{
	buf_printf(b, ",\"%s\":", key);
	if (isfinite(v))
		emit_shortest(b, v);
	else
		buf_adds(b, "null");
}

static void jtime(struct buf *b, const char *key, int64_t t, bool null0)
{
	buf_printf(b, ",\"%s\":", key);
	if (null0 && t == 0) {
		buf_adds(b, "null");
		return;
	}
	buf_addc(b, '"');
	emit_time(b, t);
	buf_addc(b, '"');
}

void alert_json(struct buf *b, const struct alert_event *ev)
{
	buf_adds(b, "{\"event\":");
	emit_json_string(b, alert_kind_name(ev->kind));
	jstr(b, "id", ev->id);
	jstr(b, "condition", ev->condition);
	jstr(b, "severity", ev->severity);
	jstr(b, "station", ev->station);
	jstr(b, "output", ev->output);
	jstr(b, "field", ev->field);
	jtime(b, "since", ev->since_s, false);
	jtime(b, "time", ev->time_s, false);
	jnum(b, "value", ev->value);
	jnum(b, "threshold", ev->threshold);
	jstr(b, "unit", ev->unit);
	jtime(b, "forecast", ev->forecast_s, true);
	jnum(b, "rate_v_per_day", ev->rate_per_day);
	jstr(b, "message", ev->message);
	buf_addc(b, '}');
}

/* ---- queues ------------------------------------------------------------
 */

void alert_amsg_free(struct amsg *m)
{
	size_t i;

	if (m == NULL)
		return;
	free(m->json);
	free(m->key);
	for (i = 0; i < ALERT_ENV_MAX && m->env[i] != NULL; i++)
		free(m->env[i]);
	free(m);
}

struct amsg *alert_head(struct target *t)
{
	return t->q_n > 0 ? t->q[t->q_head] : NULL;
}

void alert_pop(struct target *t)
{
	if (t->q_n == 0)
		return;
	alert_amsg_free(t->q[t->q_head]);
	t->q[t->q_head] = NULL;
	t->q_head = (t->q_head + 1) % ALERT_QUEUE_MAX;
	t->q_n--;
}

static struct amsg *make_msg(const struct target *t,
                             const struct alert_event *ev)
{
	struct amsg *m = calloc(1, sizeof(*m));
	struct buf b;

	if (m == NULL)
		return NULL;
	buf_init(&b, 16 * ALERT_TEXT_MAX);
	alert_json(&b, ev);
	m->json = buf_failed(&b) ? NULL : strdup(buf_str(&b));
	buf_reset(&b);
	buf_adds(&b, "Idempotency-Key: ");
	buf_add(&b, ev->id ? ev->id : "", ev->id ? cut(ev->id) : 0);
	buf_printf(&b, "-%s-%" PRId64, alert_kind_name(ev->kind), ev->time_s);
	m->key = buf_failed(&b) ? NULL : strdup(buf_str(&b));
	buf_free(&b);
	if (m->json == NULL || m->key == NULL ||
	    (t->cfg->kind == CFG_ALERT_EXEC && alert_exec_env(m, ev) != 0)) {
		alert_amsg_free(m);
		return NULL;
	}
	return m;
}

/* The first drop is logged, then at most a line a minute with the count
 * since. */
static void log_dropped(struct target *t)
{
	int64_t now = clock_mono_ms(loop_clock(t->a->loop));

	t->drops_unlogged++;
	if (t->drop_logged_ms != 0 && now - t->drop_logged_ms < 60000)
		return;
	log_warn("alert: %s: queue full (%d): %" PRIu64 " waiting alert%s "
	         "dropped, the oldest first",
	         t->name, ALERT_QUEUE_MAX, t->drops_unlogged,
	         t->drops_unlogged == 1 ? "" : "s");
	t->drops_unlogged = 0;
	t->drop_logged_ms = now != 0 ? now : 1;
}

/* Append m; a full queue drops its oldest waiting message (never the
 * head while it is being delivered). */
static void enqueue(struct target *t, struct amsg *m)
{
	size_t drop;

	if (t->q_n == ALERT_QUEUE_MAX) {
		drop = (t->q_head + 1) % ALERT_QUEUE_MAX;
		alert_amsg_free(t->q[drop]);
		for (; drop != (t->q_head + t->q_n - 1) % ALERT_QUEUE_MAX;
		     drop = (drop + 1) % ALERT_QUEUE_MAX)
			t->q[drop] = t->q[(drop + 1) % ALERT_QUEUE_MAX];
		t->q_n--;
		t->a->st.dropped++;
		log_dropped(t);
	}
	t->q[(t->q_head + t->q_n) % ALERT_QUEUE_MAX] = m;
	t->q_n++;
}

/* ---- the log -----------------------------------------------------------
 */

/* Control bytes become '?': one event, one log line. */
static void log_event(const struct alert_event *ev)
{
	char line[600];
	size_t i;

	snprintf(line, sizeof(line), "alert: %s: %s%s%s: %s",
	         alert_kind_name(ev->kind), ev->condition ? ev->condition : "",
	         ev->field ? " " : "", ev->field ? ev->field : "",
	         ev->message ? ev->message : "");
	for (i = 0; line[i] != '\0'; i++) {
		if ((unsigned char)line[i] < 0x20 || line[i] == 0x7f)
			line[i] = '?';
	}
	if (ev->kind == ALERT_CLEARED)
		log_info("%s", line);
	else
		log_warn("%s", line);
}

/* ---- the webhook -------------------------------------------------------
 */

static void http_kick(struct target *t);
static void drain_msgs(struct alert *a);

static void after_curl(void *arg)
{
	drain_msgs(arg);
}

static size_t write_cb(char *data, size_t size, size_t n, void *arg)
{
	struct target *t = arg;

	(void)data;
	t->resp_bytes += size * n;
	if (t->resp_bytes > ALERT_RESPONSE_MAX) {
		t->capped = true;
		return 0;
	}
	return size * n;
}

static void on_retry(void *arg)
{
	struct target *t = arg;

	t->waiting = false;
	http_kick(t);
}

static void give_up(struct target *t, const char *why)
{
	t->a->st.failed++;
	log_err("alert: %s: not delivered after %" PRIu32 " attempts: %s",
	        t->name, alert_head(t)->tries, why);
	alert_pop(t);
}

static void retry(struct target *t, const char *why)
{
	struct amsg *m = alert_head(t);
	int64_t ms;

	if (m->tries >= ALERT_HTTP_TRIES) {
		give_up(t, why);
		return;
	}
	ms = backoff_jitter_ms(&t->a->bo, ALERT_HTTP_BASE_S, ALERT_HTTP_CAP_S,
	                       m->tries - 1);
	if (ms < 100)
		ms = 100;
	log_warn("alert: %s: %s (retry in %.1f s)", t->name, why,
	         (double)ms / 1000);
	t->waiting = loop_timer_arm(t->a->loop, &t->timer, ms) == 0;
	if (!t->waiting)
		give_up(t, "too many timers");
}

static void finished(struct target *t, CURLcode code)
{
	long status = 0, verify = 0;
	char why[CURL_ERROR_SIZE + 64];
	enum backoff_class c;

	curl_easy_getinfo(t->easy, CURLINFO_RESPONSE_CODE, &status);
	curl_easy_getinfo(t->easy, CURLINFO_SSL_VERIFYRESULT, &verify);
	curl_multi_remove_handle(t->a->cm.multi, t->easy);
	t->in_flight = false;
	c = backoff_classify(status, (int)code, verify != 0, t->capped);
	if (code != CURLE_OK && !(t->capped && status > 0))
		snprintf(why, sizeof(why), "%s",
		         t->errbuf[0] ? t->errbuf : curl_easy_strerror(code));
	else
		snprintf(why, sizeof(why), "HTTP %ld", status);
	if (c == BACKOFF_DONE) {
		t->a->st.sent++;
		alert_pop(t);
	} else if (c == BACKOFF_RETRY) {
		retry(t, why);
	} else {
		give_up(t, why);
	}
	http_kick(t);
}

static void drain_msgs(struct alert *a)
{
	struct target *t;
	CURLMsg *msg;
	int left;

	while ((msg = curl_multi_info_read(a->cm.multi, &left)) != NULL) {
		if (msg->msg != CURLMSG_DONE)
			continue;
		t = NULL;
		curl_easy_getinfo(msg->easy_handle, CURLINFO_PRIVATE, &t);
		if (t != NULL)
			finished(t, msg->data.result);
	}
}

static bool add_hdr(struct curl_slist **l, const char *h)
{
	struct curl_slist *n = curl_slist_append(*l, h);

	if (n == NULL)
		return false;
	*l = n;
	return true;
}

static int headers(struct target *t, const struct amsg *m)
{
	struct curl_slist *l = NULL;
	bool ok;

	ok = add_hdr(&l, "Content-Type: application/json") &&
	     add_hdr(&l, "Expect:") && add_hdr(&l, m->key) &&
	     (t->auth == NULL || add_hdr(&l, t->auth));
	curl_slist_free_all(t->hdrs);
	t->hdrs = ok ? l : NULL;
	if (!ok)
		curl_slist_free_all(l);
	return ok ? 0 : -1;
}

static void http_kick(struct target *t)
{
	struct amsg *m = alert_head(t);
	CURLMcode mc;

	if (m == NULL || t->in_flight || t->waiting || t->easy == NULL)
		return;
	if (headers(t, m) != 0) {
		give_up(t, "out of memory");
		return;
	}
	m->tries++;
	t->resp_bytes = 0;
	t->capped = false;
	t->errbuf[0] = '\0';
	curl_easy_setopt(t->easy, CURLOPT_HTTPHEADER, t->hdrs);
	curl_easy_setopt(t->easy, CURLOPT_POSTFIELDS, m->json);
	curl_easy_setopt(t->easy, CURLOPT_POSTFIELDSIZE_LARGE,
	                 (curl_off_t)strlen(m->json));
	mc = curl_multi_add_handle(t->a->cm.multi, t->easy);
	if (mc != CURLM_OK) {
		retry(t, curl_multi_strerror(mc));
		return;
	}
	t->in_flight = true;
}

static bool loopback(const char *host)
{
	unsigned char addr[16];
	char h[64];
	size_t n = strlen(host);

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
	if (inet_pton(AF_INET, h, addr) == 1)
		return addr[0] == 127;
	return inet_pton(AF_INET6, h, addr) == 1 &&
	       IN6_IS_ADDR_LOOPBACK((struct in6_addr *)addr);
}

/* https://, or http:// to loopback or with allow_plain_http. */
static const char *url_rule(struct target *t)
{
	CURLU *u = curl_url();
	char *scheme = NULL, *host = NULL;
	const char *why = NULL;
	CURLUcode rc;

	rc = u == NULL ? CURLUE_OUT_OF_MEMORY
	               : curl_url_set(u, CURLUPART_URL, t->cfg->url, 0);
	if (rc == CURLUE_OK)
		rc = curl_url_get(u, CURLUPART_SCHEME, &scheme, 0);
	if (rc == CURLUE_OK)
		rc = curl_url_get(u, CURLUPART_HOST, &host, 0);
	if (rc != CURLUE_OK)
		why = curl_url_strerror(rc);
	else if (strcasecmp(scheme, "https") == 0)
		t->plain = false;
	else if (strcasecmp(scheme, "http") != 0)
		why = "not an https:// URL";
	else if (t->cfg->allow_plain_http || loopback(host))
		t->plain = true;
	else
		why = "plain http:// to a host that is not loopback; use "
		      "https:// or set allow_plain_http";
	curl_free(scheme);
	curl_free(host);
	curl_url_cleanup(u);
	return why;
}

static int read_auth(struct target *t, char *err, size_t cap)
{
	char msg[300], *tok = NULL;
	size_t n;
	int rc = 0;

	if (t->cfg->token_file != NULL)
		rc =
		    token_read_file(t->cfg->token_file, &tok, msg, sizeof(msg));
	else if (t->cfg->token_env != NULL)
		rc = token_read_env(t->cfg->token_env, &tok, msg, sizeof(msg));
	if (rc != 0) {
		snprintf(err, cap, "alert: %s: %s", t->name, msg);
		return -1;
	}
	if (tok == NULL)
		return 0;
	n = strlen(tok) + sizeof("Authorization: Bearer ");
	t->auth = malloc(n);
	if (t->auth != NULL)
		snprintf(t->auth, n, "Authorization: Bearer %s", tok);
	token_free(tok);
	return t->auth != NULL ? 0 : -1;
}

static int easy_setup(struct target *t)
{
	long ms = (long)(t->cfg->timeout_s > 0 ? t->cfg->timeout_s : 10) * 1000;
	struct curlbase base = {t->cfg->url,
	                        t->plain,
	                        t->cfg->ca_file,
	                        ms < 10000 ? ms : 10000L,
	                        ms,
	                        write_cb,
	                        t,
	                        t->errbuf};

	if (curlbase_setup(t->easy, &base) != 0 ||
	    curl_easy_setopt(t->easy, CURLOPT_PRIVATE, t) != CURLE_OK)
		return -1;
	return 0;
}

static int http_init(struct target *t, char *err, size_t cap)
{
	const char *why = url_rule(t);

	if (why != NULL) {
		snprintf(err, cap, "alert: %s: url: %s", t->name, why);
		return -1;
	}
	if (read_auth(t, err, cap) != 0)
		return -1;
	t->easy = curl_easy_init();
	if (t->easy == NULL || easy_setup(t) != 0) {
		snprintf(err, cap, "alert: %s: libcurl setup failed", t->name);
		return -1;
	}
	loop_timer_init(&t->timer, on_retry, t);
	return 0;
}

/* ---- life --------------------------------------------------------------
 */

void alert_send(struct alert *a, const struct alert_event *ev)
{
	struct amsg *m;
	size_t i;

	a->st.events++;
	log_event(ev);
	for (i = 0; i < a->n_t; i++) {
		struct target *t = &a->t[i];

		m = make_msg(t, ev);
		if (m == NULL) {
			a->st.failed++;
			log_err("alert: %s: %s", t->name, strerror(ENOMEM));
			continue;
		}
		enqueue(t, m);
		if (t->cfg->kind == CFG_ALERT_HTTP)
			http_kick(t);
		else
			alert_exec_kick(t);
	}
}

bool alert_busy(const struct alert *a)
{
	size_t i;

	for (i = 0; i < a->n_t; i++) {
		if (a->t[i].q_n > 0 || a->t[i].pid > 0)
			return true;
	}
	return false;
}

void alert_stat(const struct alert *a, struct alert_stat *st)
{
	*st = a->st;
}

static int multi_setup(struct alert *a)
{
	a->global_init = curl_global_init(CURL_GLOBAL_DEFAULT) == CURLE_OK;
	if (!a->global_init)
		return -1;
	return curlmulti_init(&a->cm, a->loop, after_curl, a, "alert");
}

static int targets(struct alert *a, char *err, size_t cap)
{
	size_t i;
	int rc;

	for (i = 0; i < a->n_t; i++) {
		struct target *t = &a->t[i];

		t->a = a;
		t->cfg = &a->cfg->to[i];
		t->pidfd = -1;
		snprintf(t->name, sizeof(t->name), "to[%zu]", i);
		if (t->cfg->kind == CFG_ALERT_HTTP)
			rc = http_init(t, err, cap);
		else
			rc = alert_exec_init(t, err, cap);
		if (rc != 0)
			return -1;
	}
	return 0;
}

int alert_new(const struct cfg_alerts *cfg, struct loop *loop,
              struct alert **out, char *err, size_t errcap)
{
	struct alert *a = calloc(1, sizeof(*a));

	*out = NULL;
	if (a == NULL)
		goto out_nomem;
	a->cfg = cfg;
	a->loop = loop;
	a->n_t = cfg->n_to;
	a->t = calloc(cfg->n_to + 1, sizeof(*a->t));
	if (a->t == NULL)
		goto out_nomem;
	(void)backoff_seed_random(&a->bo);
	if (multi_setup(a) != 0) {
		snprintf(err, errcap, "alert: libcurl setup failed");
		goto out_free;
	}
	if (targets(a, err, errcap) != 0)
		goto out_free;
	*out = a;
	return 0;
out_nomem:
	snprintf(err, errcap, "alert: start: %s", strerror(ENOMEM));
out_free:
	alert_free(a);
	return -1;
}

static void target_free(struct target *t)
{
	if (t->a == NULL)
		return;
	if (t->cfg->kind == CFG_ALERT_EXEC)
		alert_exec_stop(t);
	loop_timer_disarm(t->a->loop, &t->timer);
	if (t->easy != NULL) {
		if (t->in_flight)
			curl_multi_remove_handle(t->a->cm.multi, t->easy);
		curl_easy_cleanup(t->easy);
	}
	curl_slist_free_all(t->hdrs);
	if (t->auth != NULL) {
		explicit_bzero(t->auth, strlen(t->auth));
		free(t->auth);
	}
	while (t->q_n > 0)
		alert_pop(t);
	free(t->starts);
}

void alert_free(struct alert *a)
{
	size_t i;

	if (a == NULL)
		return;
	for (i = 0; a->t != NULL && i < a->n_t; i++)
		target_free(&a->t[i]);
	curlmulti_free(&a->cm);
	if (a->global_init)
		curl_global_cleanup();
	free(a->t);
	free(a);
}
