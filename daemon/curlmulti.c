/*
 * curlmulti.c - libcurl's multi interface on the poll loop; see
 * curlmulti.h.
 */
#include <poll.h>

#include "curlmulti.h"
#include "log.h"

static void on_fd(void *arg, int fd, short revents)
{
	struct curlmulti *cm = arg;
	int ev = 0, running;

	if (revents & (POLLIN | POLLHUP))
		ev |= CURL_CSELECT_IN;
	if (revents & POLLOUT)
		ev |= CURL_CSELECT_OUT;
	if (revents & (POLLERR | POLLNVAL))
		ev |= CURL_CSELECT_ERR;
	curl_multi_socket_action(cm->multi, fd, ev, &running);
	cm->after(cm->arg);
}

static void on_timer(void *arg)
{
	struct curlmulti *cm = arg;
	int running;

	curl_multi_socket_action(cm->multi, CURL_SOCKET_TIMEOUT, 0, &running);
	cm->after(cm->arg);
}

static int sock_cb(CURL *e, curl_socket_t s, int what, void *arg, void *sp)
{
	struct curlmulti *cm = arg;
	short ev = 0;

	(void)e;
	(void)sp;
	if (what == CURL_POLL_REMOVE) {
		loop_unwatch(cm->loop, s);
		return 0;
	}
	if (what == CURL_POLL_IN || what == CURL_POLL_INOUT)
		ev |= POLLIN;
	if (what == CURL_POLL_OUT || what == CURL_POLL_INOUT)
		ev |= POLLOUT;
	if (loop_watch(cm->loop, s, ev, on_fd, cm) != 0) {
		log_err("%s: poll: too many open sockets", cm->who);
		return -1;
	}
	return 0;
}

static int timer_cb(CURLM *m, long timeout_ms, void *arg)
{
	struct curlmulti *cm = arg;

	(void)m;
	if (timeout_ms < 0) {
		loop_timer_disarm(cm->loop, &cm->timer);
		return 0;
	}
	if (loop_timer_arm(cm->loop, &cm->timer, timeout_ms) != 0) {
		log_err("%s: timer: too many timers", cm->who);
		return -1;
	}
	return 0;
}

int curlmulti_init(struct curlmulti *cm, struct loop *loop,
                   void (*after)(void *arg), void *arg, const char *who)
{
	CURLMcode rc = CURLM_OK;

	cm->loop = loop;
	cm->after = after;
	cm->arg = arg;
	cm->who = who;
	loop_timer_init(&cm->timer, on_timer, cm);
	cm->multi = curl_multi_init();
	if (cm->multi == NULL)
		return -1;
	rc |= curl_multi_setopt(cm->multi, CURLMOPT_SOCKETFUNCTION, sock_cb);
	rc |= curl_multi_setopt(cm->multi, CURLMOPT_SOCKETDATA, cm);
	rc |= curl_multi_setopt(cm->multi, CURLMOPT_TIMERFUNCTION, timer_cb);
	rc |= curl_multi_setopt(cm->multi, CURLMOPT_TIMERDATA, cm);
	return rc == CURLM_OK ? 0 : -1;
}

void curlmulti_free(struct curlmulti *cm)
{
	if (cm->multi == NULL)
		return;
	curl_multi_cleanup(cm->multi); /* closes sockets: unwatches */
	cm->multi = NULL;
	loop_timer_disarm(cm->loop, &cm->timer);
}

int curlbase_setup(CURL *e, const struct curlbase *b)
{
	CURLcode rc = CURLE_OK;

	rc |= curl_easy_setopt(e, CURLOPT_URL, b->url);
	rc |= curl_easy_setopt(e, CURLOPT_NOSIGNAL, 1L);
	rc |= curl_easy_setopt(e, CURLOPT_VERBOSE, 0L);
	rc |= curl_easy_setopt(e, CURLOPT_PROTOCOLS_STR,
	                       b->plain ? "http,https" : "https");
	rc |= curl_easy_setopt(e, CURLOPT_REDIR_PROTOCOLS_STR, "https");
	rc |= curl_easy_setopt(e, CURLOPT_FOLLOWLOCATION, 0L);
	rc |= curl_easy_setopt(e, CURLOPT_SSL_VERIFYPEER, 1L);
	rc |= curl_easy_setopt(e, CURLOPT_SSL_VERIFYHOST, 2L);
	if (b->ca_file != NULL) {
		rc |= curl_easy_setopt(e, CURLOPT_CAINFO, b->ca_file);
		rc |= curl_easy_setopt(e, CURLOPT_CAPATH, (char *)NULL);
	}
	rc |= curl_easy_setopt(e, CURLOPT_CONNECTTIMEOUT_MS, b->connect_ms);
	rc |= curl_easy_setopt(e, CURLOPT_TIMEOUT_MS, b->total_ms);
	rc |= curl_easy_setopt(e, CURLOPT_USERAGENT, "tidepost/" TP_VERSION);
	rc |= curl_easy_setopt(e, CURLOPT_WRITEFUNCTION, b->write_cb);
	rc |= curl_easy_setopt(e, CURLOPT_WRITEDATA, b->write_arg);
	rc |= curl_easy_setopt(e, CURLOPT_ERRORBUFFER, b->errbuf);
	rc |= curl_easy_setopt(e, CURLOPT_POST, 1L);
	return rc == CURLE_OK ? 0 : -1;
}
