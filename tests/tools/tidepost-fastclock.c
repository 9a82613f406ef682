/*
 * tidepost-fastclock.c - the whole tidepost program on an accelerated
 * clock, for the long tests (tests/long/test_outage.py, RELIABILITY.md
 * T11): a day of daemon time in a few real minutes.  A test program only;
 * it is never installed.
 *
 * How: the Makefile links daemon/main.o, this object, then libdaemon.a
 * and libtidepost.a.  This file defines clock_system(), so the linker
 * never takes daemon/clock.o out of the archive (it defines nothing
 * else; see clock.h).  build/tidepost itself has no switch and no test
 * clock.
 *
 * The clock: both times start at the real ones at the first call and then
 * run TP_FASTCLOCK_SCALE times faster than CLOCK_MONOTONIC (default 1000,
 * 1 to 100000):
 *
 *   mono = mono0 + elapsed * scale,   real = real0 + elapsed * scale
 *
 * with elapsed the real monotonic time since the first call, so timers,
 * received times and reading ages agree with each other.  struct clock's
 * scale tells the poll loop to divide its waits.  Not accelerated:
 * libcurl's own transfer and connect timeouts, and anything the kernel
 * times; they stay real.  A bad TP_FASTCLOCK_SCALE is an error on stderr
 * and exit status 2 (the daemon's start-up error status).
 */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "clock.h"

#define FASTCLOCK_DEFAULT 1000u
#define FASTCLOCK_MAX     100000u

struct fastclock {
	int64_t start_us; /* CLOCK_MONOTONIC at the first call */
	int64_t mono0_ms, real0_ms;
	uint32_t scale;
};

static struct fastclock fc;
static struct clock fast;

static int64_t now_us(clockid_t id)
{
	struct timespec ts;

	if (clock_gettime(id, &ts) != 0)
		return 0;
	return (int64_t)ts.tv_sec * 1000000 + ts.tv_nsec / 1000;
}

/* Clock ms since the first call.  Microseconds times at most 1e5 stays
 * below 2^63 for 2900 years of real time. */
static int64_t elapsed_ms(const struct fastclock *f)
{
	return (now_us(CLOCK_MONOTONIC) - f->start_us) * f->scale / 1000;
}

static int64_t fast_mono_ms(void *arg)
{
	const struct fastclock *f = arg;

	return f->mono0_ms + elapsed_ms(f);
}

static int64_t fast_real_ms(void *arg)
{
	const struct fastclock *f = arg;

	return f->real0_ms + elapsed_ms(f);
}

/* TP_FASTCLOCK_SCALE: digits only, 1..FASTCLOCK_MAX; unset or empty is
 * the default.  Exits with status 2 on anything else. */
static uint32_t scale_from_env(void)
{
	const char *s = getenv("TP_FASTCLOCK_SCALE");
	char *end = NULL;
	unsigned long v;

	if (s == NULL || *s == '\0')
		return FASTCLOCK_DEFAULT;
	errno = 0;
	v = strtoul(s, &end, 10);
	if (*s < '0' || *s > '9' || *end != '\0' || errno != 0 || v < 1 ||
	    v > FASTCLOCK_MAX) {
		fprintf(stderr,
		        "tidepost-fastclock: TP_FASTCLOCK_SCALE: \"%.40s\": "
		        "not a whole number from 1 to %u\n",
		        s, FASTCLOCK_MAX);
		exit(2);
	}
	return (uint32_t)v;
}

const struct clock *clock_system(void)
{
	if (fast.mono_ms != NULL)
		return &fast;
	fc.scale = scale_from_env();
	fc.start_us = now_us(CLOCK_MONOTONIC);
	fc.mono0_ms = fc.start_us / 1000;
	fc.real0_ms = now_us(CLOCK_REALTIME) / 1000;
	fast = (struct clock){.mono_ms = fast_mono_ms,
	                      .real_ms = fast_real_ms,
	                      .arg = &fc,
	                      .scale = fc.scale};
	fprintf(stderr,
	        "tidepost-fastclock: test clock: %u times real time "
	        "(TP_FASTCLOCK_SCALE); not for production\n",
	        fc.scale);
	return &fast;
}
