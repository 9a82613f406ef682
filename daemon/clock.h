/*
 * clock.h - the one injectable clock of the daemon.
 *
 * Timers use the monotonic clock; reading ages and times written out use
 * real (wall) time.  Tests replace both functions to move time by days in
 * milliseconds.  clock_system() is the real clock; it is stateless.
 *
 * A clock may also run faster than real time (scale > 1: the accelerated
 * clock of the long tests, tests/tools/tidepost-fastclock.c).  Only the
 * poll loop needs to know: it turns a wait on the clock into a real poll
 * timeout with clock_real_wait_ms().  Everything else just reads times.
 *
 * clock_system() is the only function clock.c exports, on purpose: the
 * test program links its own clock_system() before libdaemon.a, and the
 * archive's clock.o is then never pulled in.  Helpers go here, inline.
 */
#ifndef TIDEPOST_CLOCK_H
#define TIDEPOST_CLOCK_H

#include <stdint.h>

struct clock {
	int64_t (*mono_ms)(void *arg); /* CLOCK_MONOTONIC, milliseconds */
	int64_t (*real_ms)(void *arg); /* CLOCK_REALTIME, ms since 1970 */
	void *arg;
	/* clock milliseconds per real millisecond; 0 or 1: real speed (also
	 * for a test clock that is stepped by hand) */
	uint32_t scale;
};

/* The system clock (never NULL; points at a const object). */
const struct clock *clock_system(void);

static inline int64_t clock_mono_ms(const struct clock *c)
{
	return c->mono_ms(c->arg);
}

static inline int64_t clock_real_ms(const struct clock *c)
{
	return c->real_ms(c->arg);
}

/* Real milliseconds to wait for wait_ms of clock c to pass.  Rounded up:
 * a positive wait never becomes 0, so a loop waiting for a timer less
 * than one real millisecond away sleeps 1 ms instead of spinning (the
 * timer is then at most scale clock ms late).  0 stays 0 and a negative
 * wait (no limit) is returned as it is. */
static inline int64_t clock_real_wait_ms(const struct clock *c, int64_t wait_ms)
{
	if (wait_ms <= 0 || c->scale <= 1)
		return wait_ms;
	return wait_ms / c->scale + (wait_ms % c->scale != 0);
}

#endif
