/*
 * input_tcp.c - the `tcp` input: connect to host:port (a serial-to-
 * network converter, a radio gateway) and read the packets it streams.
 *
 * The connect is non-blocking and watched in the loop (POLLOUT, then
 * SO_ERROR), with a time limit of TCP_CONNECT_MS.  A refused or timed
 * out connect, a reset, or the peer closing are all "connection lost":
 * logged once, retried after reconnect_s doubling up to
 * INPUT_BACKOFF_MAX_S; the return is logged once.  The host is resolved
 * with getaddrinfo each time a connection is made; give an address (or a
 * name in /etc/hosts): a DNS lookup blocks the loop while it runs.
 * TCP keepalive is on so a silently vanished peer is noticed eventually.
 */
#include <errno.h>
#include <netdb.h>
#include <netinet/in.h>
#include <poll.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <unistd.h>

#include "input.h"
#include "log.h"

#define TCP_CONNECT_MS 10000

struct tcp_in {
	struct input in;
	struct stream st;
	int fd;
	bool connected;
	bool watching;
	bool lost_logged;
	bool done; /* --once: finished */
	uint32_t fails;
	struct loop_timer retry; /* reconnect; also the connect limit */
	struct loop_timer pause; /* resume reading after a full ring */
	struct loop_timer quiet; /* --once: no data for a while */
	uint8_t rbuf[INPUT_READ_BYTES];
};

static void tcp_event(void *arg, int fd, short revents);
static void tcp_connect(struct tcp_in *t);

static void arm(struct tcp_in *t, struct loop_timer *tm, int64_t ms)
{
	if (loop_timer_arm(t->in.ctx.loop, tm, ms) != 0)
		log_err("input: %s: timer: %s", t->in.name, strerror(errno));
}

static void tcp_close(struct tcp_in *t)
{
	if (t->watching)
		loop_unwatch(t->in.ctx.loop, t->fd);
	t->watching = false;
	if (t->fd >= 0)
		close(t->fd);
	t->fd = -1;
	t->connected = false;
	loop_timer_disarm(t->in.ctx.loop, &t->pause);
	loop_timer_disarm(t->in.ctx.loop, &t->retry);
}

/* Failed or lost: log once, retry later (--once: finish). */
static void tcp_lost(struct tcp_in *t, const char *what, const char *why)
{
	const struct cfg_input *ci = t->in.ci;
	uint32_t wait_s;

	if (t->connected)
		(void)stream_finish(&t->in, &t->st);
	tcp_close(t);
	t->fails++;
	if (t->in.ctx.once) {
		if (t->fails == 1 || strcmp(why, "no data") != 0)
			log_info("input: %s: %s:%u: %s: %s", t->in.name,
			         ci->host, (unsigned)ci->port, what, why);
		t->done = true;
		return;
	}
	wait_s = input_backoff_s(ci->reconnect_s, t->fails);
	if (!t->lost_logged)
		log_warn("input: %s: %s:%u: %s: %s; reconnecting in %u s, "
		         "backing off to every %u s",
		         t->in.name, ci->host, (unsigned)ci->port, what, why,
		         (unsigned)wait_s,
		         (unsigned)input_backoff_s(ci->reconnect_s, 99));
	t->lost_logged = true;
	arm(t, &t->retry, (int64_t)wait_s * 1000);
}

static void tcp_retry(void *arg)
{
	struct tcp_in *t = arg;

	if (t->fd >= 0 && !t->connected) {
		tcp_lost(t, "connect", strerror(ETIMEDOUT));
		return;
	}
	tcp_connect(t);
}

/* Start a non-blocking connect to the first address that takes one. */
static int tcp_start(struct tcp_in *t, const char **why)
{
	const struct cfg_input *ci = t->in.ci;
	struct addrinfo hints, *res = NULL, *a;
	char port[16];
	int rc, fd = -1;

	memset(&hints, 0, sizeof(hints));
	hints.ai_socktype = SOCK_STREAM;
	hints.ai_flags = AI_NUMERICSERV | AI_ADDRCONFIG;
	snprintf(port, sizeof(port), "%u", (unsigned)ci->port);
	rc = getaddrinfo(ci->host, port, &hints, &res);
	if (rc != 0) {
		*why = gai_strerror(rc);
		return -1;
	}
	*why = "no usable address";
	for (a = res; a != NULL && fd < 0; a = a->ai_next) {
		fd = socket(a->ai_family,
		            a->ai_socktype | SOCK_NONBLOCK | SOCK_CLOEXEC,
		            a->ai_protocol);
		if (fd < 0)
			continue;
		if (connect(fd, a->ai_addr, a->ai_addrlen) != 0 &&
		    errno != EINPROGRESS) {
			*why = strerror(errno);
			close(fd);
			fd = -1;
		}
	}
	freeaddrinfo(res);
	t->fd = fd;
	return fd >= 0 ? 0 : -1;
}

static void tcp_connect(struct tcp_in *t)
{
	const char *why = NULL;

	if (tcp_start(t, &why) != 0) {
		tcp_lost(t, "connect", why);
		return;
	}
	if (loop_watch(t->in.ctx.loop, t->fd, POLLOUT, tcp_event, t) != 0) {
		tcp_lost(t, "watch", strerror(errno));
		return;
	}
	t->watching = true;
	arm(t, &t->retry, TCP_CONNECT_MS);
}

/* The connect finished: check it, then read. */
static void tcp_connected(struct tcp_in *t)
{
	const struct cfg_input *ci = t->in.ci;
	socklen_t len = sizeof(int);
	int err = 0, on = 1;

	if (getsockopt(t->fd, SOL_SOCKET, SO_ERROR, &err, &len) != 0)
		err = errno;
	if (err != 0) {
		tcp_lost(t, "connect", strerror(err));
		return;
	}
	loop_timer_disarm(t->in.ctx.loop, &t->retry);
	(void)setsockopt(t->fd, SOL_SOCKET, SO_KEEPALIVE, &on, sizeof(on));
	if (loop_watch(t->in.ctx.loop, t->fd, POLLIN, tcp_event, t) != 0) {
		tcp_lost(t, "watch", strerror(errno));
		return;
	}
	t->connected = true;
	if (t->lost_logged)
		log_info("input: %s: %s:%u: connected again", t->in.name,
		         ci->host, (unsigned)ci->port);
	t->lost_logged = false;
	t->fails = 0;
	if (t->in.ctx.once)
		arm(t, &t->quiet, INPUT_QUIET_MS);
}

static void tcp_read(struct tcp_in *t)
{
	ssize_t n = read(t->fd, t->rbuf, sizeof(t->rbuf));

	if (n < 0 && (errno == EAGAIN || errno == EINTR))
		return;
	if (n <= 0) {
		tcp_lost(t, "read",
		         n == 0 ? "closed by the peer" : strerror(errno));
		return;
	}
	if (t->in.ctx.once)
		arm(t, &t->quiet, INPUT_QUIET_MS);
	if (stream_feed(&t->in, &t->st, t->rbuf, (size_t)n)) {
		loop_unwatch(t->in.ctx.loop, t->fd);
		t->watching = false;
		arm(t, &t->pause, INPUT_PAUSE_MS);
	}
}

static void tcp_event(void *arg, int fd, short revents)
{
	struct tcp_in *t = arg;

	(void)fd;
	if (!t->connected)
		tcp_connected(t);
	else
		tcp_read(t);
}

static void tcp_resume(void *arg)
{
	struct tcp_in *t = arg;

	if (!t->connected || t->watching)
		return;
	if (loop_watch(t->in.ctx.loop, t->fd, POLLIN, tcp_event, t) == 0)
		t->watching = true;
	else
		arm(t, &t->pause, INPUT_PAUSE_MS);
}

static void tcp_quiet(void *arg)
{
	tcp_lost(arg, "read", "no data");
}

static enum input_state tcp_state(const struct input *in)
{
	return ((const struct tcp_in *)in)->done ? INPUT_IDLE : INPUT_BUSY;
}

static void tcp_free(struct input *in)
{
	struct tcp_in *t = (struct tcp_in *)in;

	tcp_close(t);
	loop_timer_disarm(in->ctx.loop, &t->quiet);
	input_base_fini(in);
	free(t);
}

static const struct input_ops tcp_ops = {
    .committed = NULL,
    .state = tcp_state,
    .free = tcp_free,
};

int input_tcp_new(const struct cfg_input *ci, const struct input_ctx *ctx,
                  struct input **out, char *err, size_t errcap)
{
	struct tcp_in *t = calloc(1, sizeof(*t));

	if (t == NULL || input_base_init(&t->in, &tcp_ops, ci, ctx) != 0 ||
	    stream_init(&t->st, ci) != 0) {
		snprintf(err, errcap, "input: %s: start: %s", ci->name,
		         t == NULL ? strerror(ENOMEM) : "bad framing");
		if (t != NULL)
			input_base_fini(&t->in);
		free(t);
		return -1;
	}
	t->fd = -1;
	loop_timer_init(&t->retry, tcp_retry, t);
	loop_timer_init(&t->pause, tcp_resume, t);
	loop_timer_init(&t->quiet, tcp_quiet, t);
	tcp_connect(t);
	*out = &t->in;
	return 0;
}
