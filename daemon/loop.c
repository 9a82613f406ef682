/*
 * loop.c - one poll loop over fds and timers (see loop.h).
 *
 * Fds live in a fixed array kept parallel to the pollfd array handed to
 * poll().  Timers are caller-owned; the loop keeps pointers to the armed
 * ones.  Dispatch works on a snapshot of the ready fds so callbacks may
 * change watches freely; a watch removed during dispatch is skipped.
 */
#include <errno.h>
#include <poll.h>
#include <stdlib.h>

#include "loop.h"

struct watch {
	int fd;
	short events;
	loop_fd_fn fn;
	void *arg;
};

struct loop {
	const struct clock *clock;
	struct watch w[LOOP_MAX_FDS];
	int n_w;
	struct loop_timer *t[LOOP_MAX_TIMERS];
	int n_t;
	unsigned gen; /* bumped on every watch change */
};

struct loop *loop_new(const struct clock *c)
{
	struct loop *l = calloc(1, sizeof(*l));

	if (l)
		l->clock = c ? c : clock_system();
	return l;
}

void loop_free(struct loop *l)
{
	int i;

	if (!l)
		return;
	for (i = 0; i < l->n_t; i++) {
		l->t[i]->slot = -1;
		l->t[i]->armed = false;
	}
	free(l);
}

const struct clock *loop_clock(const struct loop *l)
{
	return l->clock;
}

static int find_fd(const struct loop *l, int fd)
{
	int i;

	for (i = 0; i < l->n_w; i++)
		if (l->w[i].fd == fd)
			return i;
	return -1;
}

int loop_watch(struct loop *l, int fd, short events, loop_fd_fn fn, void *arg)
{
	int i = find_fd(l, fd);

	if (i < 0) {
		if (l->n_w == LOOP_MAX_FDS) {
			errno = ENOSPC;
			return -1;
		}
		i = l->n_w++;
	}
	l->w[i] = (struct watch){fd, events, fn, arg};
	l->gen++;
	return 0;
}

void loop_unwatch(struct loop *l, int fd)
{
	int i = find_fd(l, fd);

	if (i < 0)
		return;
	l->w[i] = l->w[--l->n_w];
	l->gen++;
}

void loop_timer_init(struct loop_timer *t, loop_timer_fn fn, void *arg)
{
	*t = (struct loop_timer){0, false, fn, arg, -1};
}

int loop_timer_arm(struct loop *l, struct loop_timer *t, int64_t delay_ms)
{
	if (delay_ms < 0)
		delay_ms = 0;
	if (t->slot < 0) {
		if (l->n_t == LOOP_MAX_TIMERS) {
			errno = ENOSPC;
			return -1;
		}
		t->slot = l->n_t;
		l->t[l->n_t++] = t;
	}
	t->due_ms = clock_mono_ms(l->clock) + delay_ms;
	t->armed = true;
	return 0;
}

void loop_timer_disarm(struct loop *l, struct loop_timer *t)
{
	int s = t->slot;

	t->armed = false;
	if (s < 0 || s >= l->n_t || l->t[s] != t)
		return;
	l->t[s] = l->t[--l->n_t];
	l->t[s]->slot = s;
	t->slot = -1;
}

int64_t loop_next_timer_ms(const struct loop *l)
{
	int64_t now = clock_mono_ms(l->clock), best = -1;
	int i;

	for (i = 0; i < l->n_t; i++) {
		int64_t d = l->t[i]->due_ms - now;

		if (d < 0)
			d = 0;
		if (best < 0 || d < best)
			best = d;
	}
	return best;
}

/* The poll timeout in real ms: the wait on the loop's clock, converted
 * for a clock faster than real time (rounded up, so never a 0 ms poll for
 * a timer still ahead), then capped at a day so it fits in an int (the
 * loop just wakes up and waits again). */
static int wait_ms(const struct loop *l, int max_wait_ms)
{
	int64_t t = loop_next_timer_ms(l);

	if (t < 0 || (max_wait_ms >= 0 && t > max_wait_ms))
		t = max_wait_ms;
	t = clock_real_wait_ms(l->clock, t);
	if (t > LOOP_MAX_POLL_MS)
		t = LOOP_MAX_POLL_MS;
	return (int)t;
}

/* Fire every timer due now.  A callback may re-arm itself or others. */
static int run_timers(struct loop *l)
{
	int64_t now = clock_mono_ms(l->clock);
	int i, ran = 0;

	for (i = 0; i < l->n_t;) {
		struct loop_timer *t = l->t[i];

		if (t->due_ms > now) {
			i++;
			continue;
		}
		loop_timer_disarm(l, t);
		t->fn(t->arg);
		ran++;
		i = 0; /* the array may have changed under us */
		now = clock_mono_ms(l->clock);
	}
	return ran;
}

static int run_fds(struct loop *l, const struct pollfd *p, int n)
{
	int i, ran = 0;

	for (i = 0; i < n; i++) {
		int k;

		if (!p[i].revents)
			continue;
		k = find_fd(l, p[i].fd);
		if (k < 0)
			continue; /* unwatched by an earlier callback */
		l->w[k].fn(l->w[k].arg, p[i].fd, p[i].revents);
		ran++;
	}
	return ran;
}

int loop_run_once(struct loop *l, int max_wait_ms)
{
	struct pollfd p[LOOP_MAX_FDS];
	int i, n = l->n_w, r;

	for (i = 0; i < n; i++)
		p[i] = (struct pollfd){l->w[i].fd, l->w[i].events, 0};
	r = poll(p, (nfds_t)n, wait_ms(l, max_wait_ms));
	if (r < 0)
		return errno == EINTR ? 0 : -1;
	return run_fds(l, p, n) + run_timers(l);
}
