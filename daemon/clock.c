/*
 * clock.c - the system clock behind struct clock (see clock.h).
 *
 * Defines nothing but clock_system(): the test build of the daemon
 * (tidepost-fastclock) supplies its own, and any other external symbol
 * here would drag this object in beside it (a duplicate definition).
 */
#include <time.h>

#include "clock.h"

static int64_t read_clock(clockid_t id)
{
	struct timespec ts;

	if (clock_gettime(id, &ts) != 0)
		return 0;
	return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

static int64_t mono_ms(void *arg)
{
	(void)arg;
	return read_clock(CLOCK_MONOTONIC);
}

static int64_t real_ms(void *arg)
{
	(void)arg;
	return read_clock(CLOCK_REALTIME);
}

static const struct clock system_clock = {
    .mono_ms = mono_ms, .real_ms = real_ms, .arg = 0, .scale = 1};

const struct clock *clock_system(void)
{
	return &system_clock;
}
