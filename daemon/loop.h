/*
 * loop.h - the daemon's single poll loop: file descriptors and timers.
 *
 * One thread, one poll().  Inputs, the libcurl multi handle (through its
 * socket and timer callbacks), signal self-pipe, inotify and alert
 * children all register here.  Capacities are fixed at compile time
 * (LOOP_MAX_FDS, LOOP_MAX_TIMERS); exceeding them is an error, not a
 * realloc.  Timers are caller-owned structs (no allocation) on the
 * monotonic clock of struct clock.  Idle, the loop sleeps in poll until
 * the nearest timer: there are no periodic wake-ups unless a caller arms
 * a timer.  Every time and delay here is on that clock; only the poll
 * timeout is real time, converted with clock_real_wait_ms() when the
 * clock runs faster than real time (clock.h).
 *
 * Called by daemon/run.c; callbacks may (un)watch fds and arm/disarm
 * timers, including their own, while the loop dispatches.
 */
#ifndef TIDEPOST_LOOP_H
#define TIDEPOST_LOOP_H

#include <stdbool.h>
#include <stdint.h>

#include "clock.h"

#define LOOP_MAX_FDS     64
#define LOOP_MAX_TIMERS  64
#define LOOP_MAX_POLL_MS (24 * 3600 * 1000) /* longest single poll, real ms */

struct loop;

typedef void (*loop_fd_fn)(void *arg, int fd, short revents);
typedef void (*loop_timer_fn)(void *arg);

struct loop_timer {
	int64_t due_ms; /* monotonic ms; valid when armed */
	bool armed;
	loop_timer_fn fn;
	void *arg;
	int slot; /* private: index in the loop, or -1 */
};

/* A new loop on clock c (kept by pointer; must outlive the loop).
 * Returns NULL when out of memory.  Free with loop_free (NULL ok). */
struct loop *loop_new(const struct clock *c);
void loop_free(struct loop *l);

const struct clock *loop_clock(const struct loop *l);

/* Watch fd for events (POLLIN/POLLOUT); replaces an earlier watch of the
 * same fd.  -1 with errno ENOSPC when LOOP_MAX_FDS are in use. */
int loop_watch(struct loop *l, int fd, short events, loop_fd_fn fn, void *arg)
    __attribute__((warn_unused_result));
void loop_unwatch(struct loop *l, int fd);

/* Set up a timer (not armed). */
void loop_timer_init(struct loop_timer *t, loop_timer_fn fn, void *arg);

/* Arm t to fire once, delay_ms from now (re-arming moves it).  -1 with
 * errno ENOSPC when LOOP_MAX_TIMERS are armed. */
int loop_timer_arm(struct loop *l, struct loop_timer *t, int64_t delay_ms)
    __attribute__((warn_unused_result));
void loop_timer_disarm(struct loop *l, struct loop_timer *t);

/* Poll once: wait until an fd is ready, the nearest timer is due, or
 * max_wait_ms of the loop's clock passed (-1: no limit), then dispatch.
 * Returns the number of callbacks run, or -1 on a poll error other than
 * EINTR (EINTR returns 0, so signal flags can be checked by the caller). */
int loop_run_once(struct loop *l, int max_wait_ms);

/* Milliseconds until the nearest armed timer (-1 if none). */
int64_t loop_next_timer_ms(const struct loop *l);

#endif
