/*
 * clock.h - the one injectable clock of the daemon.
 *
 * Timers use the monotonic clock; reading ages and times written out use
 * real (wall) time.  Tests replace both functions to move time by days in
 * milliseconds.  clock_system() is the real clock; it is stateless.
 */
#ifndef TIDEPOST_CLOCK_H
#define TIDEPOST_CLOCK_H

#include <stdint.h>

struct clock {
	int64_t (*mono_ms)(void *arg); /* CLOCK_MONOTONIC, milliseconds */
	int64_t (*real_ms)(void *arg); /* CLOCK_REALTIME, ms since 1970 */
	void *arg;
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

#endif
