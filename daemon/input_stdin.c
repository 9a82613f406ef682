/*
 * input_stdin.c - the `stdin` input: packets from standard input, for
 * pipelines and tests.  Read once per POLLIN (so it never blocks: a pipe
 * or file gives what it has), to end of file; at the end the framer is
 * finished (a last hex line without newline still counts) and the input
 * is idle for the rest of the run.  --once ends when stdin does.
 */
#include <errno.h>
#include <poll.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "input.h"
#include "log.h"

struct stdin_in {
	struct input in;
	struct stream st;
	bool watching;
	bool eof;
	struct loop_timer pause;
	uint8_t rbuf[INPUT_READ_BYTES];
};

static void stdin_readable(void *arg, int fd, short revents);

static int stdin_watch(struct stdin_in *s)
{
	if (loop_watch(s->in.ctx.loop, STDIN_FILENO, POLLIN, stdin_readable,
	               s) != 0)
		return -1;
	s->watching = true;
	return 0;
}

static void stdin_end(struct stdin_in *s, const char *why)
{
	if (s->watching)
		loop_unwatch(s->in.ctx.loop, STDIN_FILENO);
	s->watching = false;
	s->eof = true;
	(void)stream_finish(&s->in, &s->st);
	if (why != NULL)
		log_err("input: %s: read: stdin: %s", s->in.name, why);
}

static void stdin_pause(struct stdin_in *s)
{
	loop_unwatch(s->in.ctx.loop, STDIN_FILENO);
	s->watching = false;
	if (loop_timer_arm(s->in.ctx.loop, &s->pause, INPUT_PAUSE_MS) != 0)
		log_err("input: %s: timer: %s", s->in.name, strerror(errno));
}

static void stdin_readable(void *arg, int fd, short revents)
{
	struct stdin_in *s = arg;
	ssize_t n;

	(void)revents;
	n = read(fd, s->rbuf, sizeof(s->rbuf));
	if (n < 0 && (errno == EINTR || errno == EAGAIN))
		return;
	if (n <= 0) {
		stdin_end(s, n < 0 ? strerror(errno) : NULL);
		return;
	}
	if (stream_feed(&s->in, &s->st, s->rbuf, (size_t)n))
		stdin_pause(s);
}

static void stdin_resume(void *arg)
{
	struct stdin_in *s = arg;

	if (!s->eof && !s->watching && stdin_watch(s) != 0)
		stdin_pause(s);
}

static enum input_state stdin_state(const struct input *in)
{
	const struct stdin_in *s = (const struct stdin_in *)in;

	return s->eof ? INPUT_IDLE : INPUT_BUSY;
}

static void stdin_free(struct input *in)
{
	struct stdin_in *s = (struct stdin_in *)in;

	if (s->watching)
		loop_unwatch(in->ctx.loop, STDIN_FILENO);
	loop_timer_disarm(in->ctx.loop, &s->pause);
	input_base_fini(in);
	free(s);
}

static const struct input_ops stdin_ops = {
    .committed = NULL,
    .state = stdin_state,
    .free = stdin_free,
};

int input_stdin_new(const struct cfg_input *ci, const struct input_ctx *ctx,
                    struct input **out, char *err, size_t errcap)
{
	struct stdin_in *s = calloc(1, sizeof(*s));

	if (s == NULL || input_base_init(&s->in, &stdin_ops, ci, ctx) != 0 ||
	    stream_init(&s->st, ci) != 0 || stdin_watch(s) != 0) {
		snprintf(err, errcap, "input: %s: start: %s", ci->name,
		         s == NULL ? strerror(ENOMEM) : "cannot watch stdin");
		if (s != NULL)
			input_base_fini(&s->in);
		free(s);
		return -1;
	}
	loop_timer_init(&s->pause, stdin_resume, s);
	*out = &s->in;
	return 0;
}
