/*
 * test_loop.c - the poll loop: timers on an injected clock, fd dispatch,
 * changes made from inside callbacks, fixed capacities.
 */
#include <errno.h>
#include <poll.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <time.h>
#include <unistd.h>

#include <cmocka.h>

#include "loop.h"

static int64_t fake_now;

static int64_t fake_ms(void *arg)
{
	(void)arg;
	return fake_now;
}

static const struct clock fake = {fake_ms, fake_ms, NULL, 0};

static int fired[4];

static void on_timer(void *arg)
{
	fired[(intptr_t)arg]++;
}

/* Timers fire only once due, in any order of arming, and only once. */
static void timers_fire_when_due(void **state)
{
	struct loop *l = loop_new(&fake);
	struct loop_timer a, b;

	(void)state;
	fake_now = 1000;
	fired[0] = fired[1] = 0;
	loop_timer_init(&a, on_timer, (void *)0);
	loop_timer_init(&b, on_timer, (void *)1);
	assert_int_equal(loop_timer_arm(l, &a, 500), 0);
	assert_int_equal(loop_timer_arm(l, &b, 100), 0);
	assert_int_equal(loop_next_timer_ms(l), 100);
	fake_now = 1100;
	assert_int_equal(loop_run_once(l, 0), 1);
	assert_int_equal(fired[1], 1);
	assert_int_equal(fired[0], 0);
	assert_int_equal(loop_next_timer_ms(l), 400);
	fake_now = 5000;
	assert_int_equal(loop_run_once(l, 0), 1);
	assert_int_equal(fired[0], 1);
	assert_int_equal(loop_next_timer_ms(l), -1);
	assert_int_equal(loop_run_once(l, 0), 0);
	loop_free(l);
}

/* Disarming a timer (also one in the middle of the array) removes it. */
static void disarm_removes(void **state)
{
	struct loop *l = loop_new(&fake);
	struct loop_timer t[3];
	int i;

	(void)state;
	fake_now = 0;
	fired[0] = 0;
	for (i = 0; i < 3; i++) {
		loop_timer_init(&t[i], on_timer, (void *)0);
		assert_int_equal(loop_timer_arm(l, &t[i], 10 * (i + 1)), 0);
	}
	loop_timer_disarm(l, &t[1]);
	loop_timer_disarm(l, &t[1]); /* twice is harmless */
	fake_now = 100;
	assert_int_equal(loop_run_once(l, 0), 2);
	assert_int_equal(fired[0], 2);
	loop_free(l);
}

/* The fixed timer capacity is an error, not a silent drop. */
static void timer_capacity(void **state)
{
	struct loop *l = loop_new(&fake);
	struct loop_timer t[LOOP_MAX_TIMERS + 1];
	int i;

	(void)state;
	for (i = 0; i < LOOP_MAX_TIMERS; i++) {
		loop_timer_init(&t[i], on_timer, (void *)0);
		assert_int_equal(loop_timer_arm(l, &t[i], 1), 0);
	}
	loop_timer_init(&t[i], on_timer, (void *)0);
	assert_int_equal(loop_timer_arm(l, &t[i], 1), -1);
	assert_int_equal(errno, ENOSPC);
	loop_free(l);
}

struct pipes {
	int a[2], b[2];
	struct loop *l;
	int seen;
};

static void on_read(void *arg, int fd, short rev)
{
	struct pipes *p = arg;
	char c;

	assert_true(rev & POLLIN);
	assert_int_equal(read(fd, &c, 1), 1);
	p->seen++;
	/* the other pipe's watch goes away from inside this callback */
	loop_unwatch(p->l, fd == p->a[0] ? p->b[0] : p->a[0]);
}

/* Fds are dispatched; a watch removed by an earlier callback is skipped. */
static void fds_dispatch_and_unwatch(void **state)
{
	struct pipes p;

	(void)state;
	assert_int_equal(pipe(p.a), 0);
	assert_int_equal(pipe(p.b), 0);
	p.l = loop_new(&fake);
	p.seen = 0;
	assert_int_equal(loop_watch(p.l, p.a[0], POLLIN, on_read, &p), 0);
	assert_int_equal(loop_watch(p.l, p.b[0], POLLIN, on_read, &p), 0);
	assert_int_equal(write(p.a[1], "x", 1), 1);
	assert_int_equal(write(p.b[1], "y", 1), 1);
	assert_int_equal(loop_run_once(p.l, 1000), 1);
	assert_int_equal(p.seen, 1);
	/* nothing watched and no timer: returns after the wait limit */
	loop_unwatch(p.l, p.a[0]);
	assert_int_equal(loop_run_once(p.l, 10), 0);
	loop_free(p.l);
	close(p.a[0]);
	close(p.a[1]);
	close(p.b[0]);
	close(p.b[1]);
}

/* clock_real_wait_ms: a wait on the clock -> a real poll timeout. */
static void real_wait_conversion(void **state)
{
	static const struct {
		uint32_t scale;
		int64_t wait_ms, want;
	} rows[] = {
	    /* 0 and 1 are real speed: every wait unchanged */
	    {0, 1234, 1234},
	    {1, 1234, 1234},
	    {1, 1, 1},
	    /* no limit (-1) and "now" (0) stay what they are */
	    {1000, -1, -1},
	    {1000, 0, 0},
	    /* the busy-loop guard: a timer under one real ms away is a
	     * 1 ms poll, never a 0 ms one */
	    {1000, 1, 1},
	    {1000, 999, 1},
	    /* exact multiples are not rounded further */
	    {1000, 1000, 1},
	    {1000, 1001, 2},
	    {500, 3600 * 1000, 7200},
	    /* a scale that does not divide evenly rounds up */
	    {7, 22, 4},
	    {7, 21, 3},
	    /* a far timer does not overflow (the loop caps the result) */
	    {1000, INT64_MAX, INT64_MAX / 1000 + 1},
	    {2, INT64_MAX, INT64_MAX / 2 + 1},
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(rows) / sizeof(rows[0]); i++) {
		struct clock c = {fake_ms, fake_ms, NULL, rows[i].scale};

		assert_int_equal(clock_real_wait_ms(&c, rows[i].wait_ms),
		                 rows[i].want);
	}
}

/* A clock at 10 times real speed, on CLOCK_MONOTONIC. */
static int64_t real_us(void)
{
	struct timespec ts;

	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (int64_t)ts.tv_sec * 1000000 + ts.tv_nsec / 1000;
}

static int64_t fast_ms(void *arg)
{
	(void)arg;
	return real_us() * 10 / 1000;
}

static const struct clock fast = {fast_ms, fast_ms, NULL, 10};

/* On a fast clock a timer 9 clock ms (0.9 real ms) away is reached by one
 * blocking poll of 1 real ms: one call, the timer ran.  A timeout rounded
 * down would poll 0 ms and return with nothing run (a busy loop). */
static void fast_clock_no_zero_poll(void **state)
{
	struct loop *l = loop_new(&fast);
	struct loop_timer t;
	int64_t t0;

	(void)state;
	fired[0] = 0;
	loop_timer_init(&t, on_timer, (void *)0);
	assert_int_equal(loop_timer_arm(l, &t, 9), 0);
	t0 = real_us();
	assert_int_equal(loop_run_once(l, -1), 1);
	assert_int_equal(fired[0], 1);
	assert_true(real_us() - t0 >= 900);
	loop_free(l);
}

/* On a fast clock, waits are shortened: a timer 2000 clock ms away fires
 * after about 200 real ms, and max_wait_ms counts on the clock too. */
static void fast_clock_divides_waits(void **state)
{
	struct loop *l = loop_new(&fast);
	struct loop_timer t;
	int64_t t0, dt;
	int calls = 0;

	(void)state;
	fired[0] = 0;
	loop_timer_init(&t, on_timer, (void *)0);
	assert_int_equal(loop_timer_arm(l, &t, 2000), 0);
	t0 = real_us();
	while (fired[0] == 0 && calls < 100) {
		assert_true(loop_run_once(l, -1) >= 0);
		calls++;
	}
	dt = real_us() - t0;
	assert_int_equal(fired[0], 1);
	assert_true(calls <= 3); /* woken by the timer, not by spinning */
	assert_true(dt >= 199000);
	assert_true(dt < 1500000);
	/* a far timer, but a 50 clock ms limit: back after about 5 real ms */
	assert_int_equal(loop_timer_arm(l, &t, INT64_MAX / 4), 0);
	t0 = real_us();
	assert_int_equal(loop_run_once(l, 50), 0);
	dt = real_us() - t0;
	assert_true(dt >= 4900);
	assert_true(dt < 1000000);
	loop_free(l);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(timers_fire_when_due),
		cmocka_unit_test(disarm_removes),
		cmocka_unit_test(timer_capacity),
		cmocka_unit_test(fds_dispatch_and_unwatch),
		cmocka_unit_test(real_wait_conversion),
		cmocka_unit_test(fast_clock_no_zero_poll),
		cmocka_unit_test(fast_clock_divides_waits),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
