/*
 * input_serial.c - the `serial` input: a serial port through
 * libserialport, read without blocking from the one poll loop.
 *
 * The port's fd is polled; POLLHUP/POLLERR, a read error, or a 0-byte
 * read after POLLIN mean "device lost" (a USB adapter pulled out:
 * libserialport's blocking read would report a timeout and spin).  The
 * port is then closed and reopened after reconnect_s, doubling up to
 * INPUT_BACKOFF_MAX_S while it stays away; the loss is logged once and the
 * return once.  A device missing at start is not an error: it is waited
 * for the same way.
 */
#include <errno.h>
#include <poll.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <libserialport.h>

#include "input.h"
#include "log.h"

struct serial_in {
	struct input in;
	struct stream st;
	struct sp_port *port; /* NULL while closed */
	int fd;
	bool watching;
	bool lost_logged;
	bool done;               /* --once: finished */
	uint32_t fails;          /* failed opens in a row */
	struct loop_timer retry; /* reopen */
	struct loop_timer pause; /* resume reading after a full ring */
	struct loop_timer quiet; /* --once: no data for a while */
	uint8_t rbuf[INPUT_READ_BYTES];
};

static void serial_readable(void *arg, int fd, short revents);

/* libserialport's last error message, copied into out. */
static void sp_message(char *out, size_t cap)
{
	char *m = sp_last_error_message();

	snprintf(out, cap, "%s", m != NULL ? m : "unknown error");
	sp_free_error_message(m);
}

static enum sp_parity parity_of(enum cfg_parity p)
{
	if (p == CFG_PARITY_ODD)
		return SP_PARITY_ODD;
	return p == CFG_PARITY_EVEN ? SP_PARITY_EVEN : SP_PARITY_NONE;
}

static enum sp_flowcontrol flow_of(enum cfg_flow f)
{
	if (f == CFG_FLOW_RTSCTS)
		return SP_FLOWCONTROL_RTSCTS;
	return f == CFG_FLOW_XONXOFF ? SP_FLOWCONTROL_XONXOFF
	                             : SP_FLOWCONTROL_NONE;
}

static int configure(struct sp_port *port, const struct cfg_input *ci)
{
	if (sp_set_baudrate(port, (int)ci->baud) != SP_OK ||
	    sp_set_bits(port, (int)ci->data_bits) != SP_OK ||
	    sp_set_parity(port, parity_of(ci->parity)) != SP_OK ||
	    sp_set_stopbits(port, (int)ci->stop_bits) != SP_OK ||
	    sp_set_flowcontrol(port, flow_of(ci->flow)) != SP_OK)
		return -1;
	return 0;
}

static void serial_close(struct serial_in *s)
{
	if (s->watching)
		loop_unwatch(s->in.ctx.loop, s->fd);
	s->watching = false;
	if (s->port != NULL) {
		sp_close(s->port);
		sp_free_port(s->port);
	}
	s->port = NULL;
	s->fd = -1;
	loop_timer_disarm(s->in.ctx.loop, &s->pause);
}

static void arm(struct serial_in *s, struct loop_timer *t, int64_t ms)
{
	if (loop_timer_arm(s->in.ctx.loop, t, ms) != 0)
		log_err("input: %s: timer: %s", s->in.name, strerror(errno));
}

/* Open and configure the port; 0, or -1 with why in msg. */
static int serial_try_open(struct serial_in *s, char *msg, size_t cap)
{
	const struct cfg_input *ci = s->in.ci;
	const char *op = "open";

	if (sp_get_port_by_name(ci->device, &s->port) != SP_OK) {
		s->port = NULL;
		goto out_msg;
	}
	if (sp_open(s->port, SP_MODE_READ) != SP_OK)
		goto out_msg;
	op = "configure";
	if (configure(s->port, ci) != SP_OK)
		goto out_msg;
	op = "watch";
	if (sp_get_port_handle(s->port, &s->fd) != SP_OK ||
	    loop_watch(s->in.ctx.loop, s->fd, POLLIN, serial_readable, s) != 0)
		goto out_msg;
	s->watching = true;
	return 0;
out_msg : {
	char m[200];

	sp_message(m, sizeof(m));
	snprintf(msg, cap, "%s: %s", op, m);
}
	serial_close(s);
	return -1;
}

static void serial_open(struct serial_in *s)
{
	const struct cfg_input *ci = s->in.ci;
	char msg[256];
	uint32_t wait_s;

	if (serial_try_open(s, msg, sizeof(msg)) == 0) {
		if (s->lost_logged || s->fails > 0)
			log_info("input: %s: %s: open again", s->in.name,
			         ci->device);
		s->fails = 0;
		s->lost_logged = false;
		if (s->in.ctx.once)
			arm(s, &s->quiet, INPUT_QUIET_MS);
		return;
	}
	s->fails++;
	if (s->in.ctx.once) {
		log_warn("input: %s: %s: %s", s->in.name, ci->device, msg);
		s->done = true;
		return;
	}
	wait_s = input_backoff_s(ci->reconnect_s, s->fails);
	if (!s->lost_logged)
		log_warn("input: %s: %s: %s; trying again in %u s, backing "
		         "off to every %u s",
		         s->in.name, ci->device, msg, (unsigned)wait_s,
		         (unsigned)input_backoff_s(ci->reconnect_s, 99));
	s->lost_logged = true;
	arm(s, &s->retry, (int64_t)wait_s * 1000);
}

static void serial_lost(struct serial_in *s, const char *why)
{
	const struct cfg_input *ci = s->in.ci;

	(void)stream_finish(&s->in, &s->st);
	serial_close(s);
	if (s->in.ctx.once) {
		s->done = true;
		return;
	}
	log_warn("input: %s: %s: device lost (%s); reopening in %u s, "
	         "backing off to every %u s",
	         s->in.name, ci->device, why, (unsigned)ci->reconnect_s,
	         (unsigned)input_backoff_s(ci->reconnect_s, 99));
	s->lost_logged = true;
	s->fails = 1;
	arm(s, &s->retry, (int64_t)ci->reconnect_s * 1000);
}

static void serial_retry(void *arg)
{
	serial_open(arg);
}

static void serial_resume(void *arg)
{
	struct serial_in *s = arg;

	if (s->port == NULL || s->watching)
		return;
	if (loop_watch(s->in.ctx.loop, s->fd, POLLIN, serial_readable, s) == 0)
		s->watching = true;
	else
		arm(s, &s->pause, INPUT_PAUSE_MS);
}

static void serial_quiet(void *arg)
{
	struct serial_in *s = arg;

	serial_lost(s, "no data");
}

/* The ring refused: stop reading for a while (flow control). */
static void serial_pause(struct serial_in *s)
{
	loop_unwatch(s->in.ctx.loop, s->fd);
	s->watching = false;
	arm(s, &s->pause, INPUT_PAUSE_MS);
}

static void serial_readable(void *arg, int fd, short revents)
{
	struct serial_in *s = arg;
	enum sp_return n;

	(void)fd;
	if (!(revents & POLLIN)) {
		serial_lost(s, "hang-up");
		return;
	}
	n = sp_nonblocking_read(s->port, s->rbuf, sizeof(s->rbuf));
	if (n <= 0) {
		serial_lost(s, n == 0 ? "end of file" : "read error");
		return;
	}
	if (s->in.ctx.once)
		arm(s, &s->quiet, INPUT_QUIET_MS);
	if (stream_feed(&s->in, &s->st, s->rbuf, (size_t)n))
		serial_pause(s);
}

static enum input_state serial_state(const struct input *in)
{
	const struct serial_in *s = (const struct serial_in *)in;

	return s->done ? INPUT_IDLE : INPUT_BUSY;
}

static void serial_free(struct input *in)
{
	struct serial_in *s = (struct serial_in *)in;

	serial_close(s);
	loop_timer_disarm(in->ctx.loop, &s->retry);
	loop_timer_disarm(in->ctx.loop, &s->quiet);
	input_base_fini(in);
	free(s);
}

static const struct input_ops serial_ops = {
    .committed = NULL,
    .state = serial_state,
    .free = serial_free,
};

int input_serial_new(const struct cfg_input *ci, const struct input_ctx *ctx,
                     struct input **out, char *err, size_t errcap)
{
	struct serial_in *s = calloc(1, sizeof(*s));

	if (s == NULL || input_base_init(&s->in, &serial_ops, ci, ctx) != 0 ||
	    stream_init(&s->st, ci) != 0) {
		snprintf(err, errcap, "input: %s: start: %s", ci->name,
		         s == NULL ? strerror(ENOMEM) : "bad framing");
		if (s != NULL)
			input_base_fini(&s->in);
		free(s);
		return -1;
	}
	s->fd = -1;
	loop_timer_init(&s->retry, serial_retry, s);
	loop_timer_init(&s->pause, serial_resume, s);
	loop_timer_init(&s->quiet, serial_quiet, s);
	serial_open(s);
	*out = &s->in;
	return 0;
}
