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
#include <unistd.h>

#include <cmocka.h>

#include "loop.h"

static int64_t fake_now;

static int64_t fake_ms(void *arg)
{
	(void)arg;
	return fake_now;
}

static const struct clock fake = {fake_ms, fake_ms, NULL};

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

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(timers_fire_when_due),
		cmocka_unit_test(disarm_removes),
		cmocka_unit_test(timer_capacity),
		cmocka_unit_test(fds_dispatch_and_unwatch),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
