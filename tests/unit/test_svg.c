/*
 * test_svg.c - the report's pictures: value ticks (1-2-5 steps), time
 * ticks (calendar steps in UTC) and their labels, and the series
 * decimation they draw (min/max per pixel column, flagged points kept,
 * the line broken at gaps, the median step, trend means).
 *
 * Expected ticks are worked out by hand from the rule in svg.h (the
 * working is in each row's comment); Unix times of calendar dates come
 * from Python's calendar.timegm (CPython 3, an independent calendar
 * implementation).  Series data are invented.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "series.h"
#include "svg.h"

#define N(a) (sizeof(a) / sizeof((a)[0]))

/* cmocka's assert_float_equal compares as float; these are doubles. */
#define assert_near(a, b, eps) assert_true(fabs((a) - (b)) <= (eps))

/* ---- value ticks ----------------------------------------------------- */

struct vt_case {
	double lo, hi;
	size_t target;
	double step, axis_lo, axis_hi;
	size_t n;
	int decimals;
	const char *why;
};

static const struct vt_case vt_cases[] = {
    {7.953, 8.336, 5, 0.1, 7.9, 8.4, 6, 1,
     "pH day: 0.05 gives 7.95..8.35 = 8 intervals > 5, 0.1 gives 5"},
    {0, 100, 5, 20, 0, 100, 6, 0, "a round span: 20s exactly"},
    {-3.2, 4.1, 5, 2, -4, 6, 6, 0,
     "crossing zero: step 1 needs -4..5 = 9, step 2 -4..6 = 5"},
    {12.5, 12.5, 5, 0.5, 11.5, 13.5, 5, 1,
     "one value: widened +-5 % to 11.875..13.125, then 0.5 steps"},
    {0, 0, 5, 0.5, -0.5, 0.5, 3, 1,
     "one value 0: widened +-0.5; 0.2 needs 6 intervals, 0.5 two"},
    {101325, 101800, 5, 100, 101300, 101800, 6, 0,
     "large numbers: 50 gives 10 intervals, 100 gives 5"},
    {0.01, 0.2, 5, 0.05, 0, 0.2, 5, 2, "a 5 step below 1 has two decimals"},
    {6.0, 12.603, 5, 2, 6, 14, 5, 0,
     "battery with its 6 V cutoff: 1 V steps need 7, 2 V steps 4"},
};

static void test_value_ticks(void **state)
{
	struct svg_ticks t;
	size_t i, k;

	(void)state;
	for (i = 0; i < N(vt_cases); i++) {
		const struct vt_case *c = &vt_cases[i];

		assert_int_equal(svg_value_ticks(c->lo, c->hi, c->target, &t),
		                 0);
		print_message("# %s\n", c->why);
		assert_near(t.step, c->step, 1e-12 * c->step);
		assert_near(t.lo, c->axis_lo, 1e-9);
		assert_near(t.hi, c->axis_hi, 1e-9);
		assert_int_equal(t.n, c->n);
		assert_int_equal(t.decimals, c->decimals);
		for (k = 0; k + 1 < t.n; k++) /* evenly spaced, rising */
			assert_near(t.v[k + 1] - t.v[k], c->step,
			            1e-9 * c->step);
		assert_true(t.lo <= c->lo && t.hi >= c->hi);
	}
}

static void test_value_ticks_bad(void **state)
{
	struct svg_ticks t;

	(void)state;
	/* NaN, an inverted range and a silly target are refused */
	assert_int_equal(svg_value_ticks(NAN, 1, 5, &t), -1);
	assert_int_equal(svg_value_ticks(2, 1, 5, &t), -1);
	assert_int_equal(svg_value_ticks(0, 1, 1, &t), -1);
	assert_int_equal(svg_value_ticks(0, INFINITY, 5, &t), -1);
}

/* ---- time ticks ------------------------------------------------------ */

struct tt_case {
	int64_t t0, t1;
	size_t target;
	int64_t step_s;
	int step_months;
	int64_t first;
	size_t n;
	enum svg_tfmt fmt;
	const char *why;
};

static const struct tt_case tt_cases[] = {
    /* 2026-11-30T01:10:00Z .. 07:10:00Z; first 02:00:00Z */
    {1796001000, 1796022600, 8, 3600, 0, 1796004000, 6, SVG_TF_MINUTES,
     "6 h / 8 = 45 min: the next step is 1 h, on the hour"},
    /* 2031-03-03T00:00Z .. 03-23T23:45Z; first 2031-03-04T00:00Z */
    {1930262400, 1932075900, 11, 172800, 0, 1930348800, 10, SVG_TF_DAYS,
     "3 weeks / 11: 2-day steps from the epoch, so 03-04, 03-06, .."},
    /* 2026-01-01 (a Thursday) .. 2026-03-02; first Monday 2026-01-05 */
    {1767225600, 1772409600, 10, 604800, 0, 1767571200, 9, SVG_TF_DAYS,
     "60 days / 10 = 6 days: weeks, on Mondays 00:00 UTC"},
    /* 2030-01-01 .. 2030-12-31; first 2030-01-01 */
    {1893456000, 1924905600, 8, 0, 2, 1893456000, 6, SVG_TF_MONTHS,
     "a year / 8 = 46 days: 2 months, Jan Mar May Jul Sep Nov"},
    /* 2020-06-15 .. 2030-06-15; first 2022-01-01 */
    {1592179200, 1907712000, 8, 0, 24, 1640995200, 5, SVG_TF_YEARS,
     "10 years / 8: 2 years, on even years' 1 January"},
    /* 2026-11-30T06:15:10Z .. 06:16:40Z; first 06:15:15Z */
    {1796019310, 1796019400, 8, 15, 0, 1796019315, 6, SVG_TF_SECONDS,
     "90 s / 8 = 11 s: 15 s steps, labels with seconds"},
};

static void test_time_ticks(void **state)
{
	struct svg_tticks t;
	size_t i, k;

	(void)state;
	for (i = 0; i < N(tt_cases); i++) {
		const struct tt_case *c = &tt_cases[i];

		print_message("# %s\n", c->why);
		assert_int_equal(svg_time_ticks(c->t0, c->t1, c->target, &t),
		                 0);
		assert_int_equal(t.step_s, c->step_s);
		assert_int_equal(t.step_months, c->step_months);
		assert_int_equal(t.n, c->n);
		assert_int_equal(t.t[0], c->first);
		assert_int_equal(t.fmt, c->fmt);
		for (k = 0; k < t.n; k++)
			assert_true(t.t[k] >= c->t0 && t.t[k] <= c->t1);
		for (k = 0; c->step_s > 0 && k + 1 < t.n; k++)
			assert_int_equal(t.t[k + 1] - t.t[k], c->step_s);
	}
	/* an empty span is refused */
	assert_int_equal(svg_time_ticks(10, 10, 8, &t), -1);
}

struct tl_case {
	int64_t t;
	enum svg_tfmt fmt;
	const char *want;
};

static void test_time_labels(void **state)
{
	/* 1796019300 = 2026-11-30T06:15:00Z (calendar.timegm) */
	static const struct tl_case cases[] = {
	    {1796019300, SVG_TF_SECONDS, "11-30 06:15:00"},
	    {1796019300, SVG_TF_MINUTES, "11-30 06:15"},
	    {1796019300, SVG_TF_DAYS, "2026-11-30"},
	    {1796019300, SVG_TF_MONTHS, "2026-11"},
	    {1796019300, SVG_TF_YEARS, "2026"},
	};
	char out[32];
	size_t i;

	(void)state;
	for (i = 0; i < N(cases); i++) {
		svg_time_label(out, sizeof(out), cases[i].t, cases[i].fmt);
		assert_string_equal(out, cases[i].want);
	}
}

/* ---- decimation ------------------------------------------------------ */

static void test_min_max_kept(void **state)
{
	struct series s;
	struct series_pt pt[40];
	size_t n, t;

	(void)state;
	/* 10 columns of 100 s; 100 values in column 0 with one trough and
	 * one peak that must both survive */
	assert_int_equal(series_init(&s, 0, 999, 10), 0);
	for (t = 0; t < 100; t++) {
		double v = 1.0 + 0.01 * (double)(t % 7);

		if (t == 37)
			v = -5;
		if (t == 71)
			v = 9;
		assert_true(series_add(&s, (int64_t)t, v, 1));
	}
	n = series_line(&s, 0, pt, N(pt));
	assert_int_equal(n, 2);
	assert_int_equal(pt[0].t, 37);
	assert_near(pt[0].v, -5, 0);
	assert_int_equal(pt[1].t, 71);
	assert_near(pt[1].v, 9, 0);
	assert_int_equal(s.st.n, 100);
	assert_near(s.st.min, -5, 0);
	assert_near(s.st.max, 9, 0);
	/* a peak before the trough is drawn first */
	assert_true(series_add(&s, 150, 4, 1));
	assert_true(series_add(&s, 160, 2, 1));
	n = series_line(&s, 0, pt, N(pt));
	assert_int_equal(n, 4);
	assert_int_equal(pt[2].t, 150);
	assert_int_equal(pt[3].t, 160);
	/* outside the range: refused, not counted */
	assert_false(series_add(&s, 1000, 1, 1));
	assert_false(series_add(&s, -1, 1, 1));
	assert_int_equal(s.st.n, 102);
	series_free(&s);
}

static void test_flagged_kept(void **state)
{
	struct series s;
	struct series_pt pt[40];
	size_t n, t;

	(void)state;
	assert_int_equal(series_init(&s, 0, 999, 10), 0);
	for (t = 0; t < 1000; t += 10)
		assert_true(series_add(&s, (int64_t)t, 8.0, 1));
	/* a suspect point among ordinary ones, a failed one far off */
	assert_true(series_add(&s, 155, 8.3, 3));
	assert_true(series_add(&s, 255, 100, 4));
	assert_true(series_add(&s, 355, NAN, 1)); /* NaN: missing */
	assert_true(series_add(&s, 365, 8.0, 9)); /* flag 9: missing */
	n = series_marks(&s, 3, pt, N(pt));
	assert_int_equal(n, 1);
	assert_int_equal(pt[0].t, 155);
	assert_near(pt[0].v, 8.3, 0);
	n = series_marks(&s, 4, pt, N(pt));
	assert_int_equal(n, 1);
	assert_int_equal(pt[0].t, 255);
	/* the failed value is in no statistic but the count, nor the line */
	assert_near(s.st.max, 8.3, 0);
	assert_int_equal(s.st.n, 102);
	assert_int_equal(s.st.n_line, 101);
	assert_int_equal(s.st.n3, 1);
	assert_int_equal(s.st.n4, 1);
	assert_int_equal(s.st.n9, 2);
	n = series_line(&s, 0, pt, N(pt));
	for (t = 0; t < n; t++)
		assert_true(pt[t].v < 10);
	/* three suspect points in one column: its lowest and highest stay
	 * (the documented limit of two per column and flag) */
	assert_true(series_add(&s, 610, 7.1, 3));
	assert_true(series_add(&s, 620, 7.5, 3));
	assert_true(series_add(&s, 630, 7.3, 3));
	n = series_marks(&s, 3, pt, N(pt));
	assert_int_equal(n, 3);
	assert_near(pt[1].v, 7.1, 0);
	assert_near(pt[2].v, 7.5, 0);
	series_free(&s);
}

static void test_gap_breaks(void **state)
{
	struct series s;
	struct series_pt pt[400];
	size_t n, i, moves = 0;
	int64_t t;

	(void)state;
	/* 10 s steps with a silence from 400 to 700 s: one break */
	assert_int_equal(series_init(&s, 0, 999, 100), 0);
	for (t = 0; t < 1000; t += 10) {
		if (t > 400 && t < 700)
			continue;
		assert_true(series_add(&s, t, (double)(t % 30), 1));
	}
	assert_near(series_median_step(&s), 10, 10 * 0.022);
	assert_near(series_gap_s(&s), 25, 25 * 0.022);
	n = series_line(&s, series_gap_s(&s), pt, N(pt));
	for (i = 0; i < n; i++) {
		if (pt[i].move) {
			moves++;
			assert_true(i == 0 || pt[i].t == 700);
		}
	}
	assert_int_equal(moves, 2);
	/* no gap given: one piece */
	n = series_line(&s, 0, pt, N(pt));
	for (i = 1; i < n; i++)
		assert_false(pt[i].move);
	series_free(&s);
}

static void test_gap_inside_column(void **state)
{
	struct series s;
	struct series_pt pt[8];
	size_t n;
	int64_t t;

	(void)state;
	/* two columns of 500 s; column 0 holds 0..100 and 400..490 s every
	 * 10 s, rising, so its low end (t 0) and high end (t 490) lie on
	 * both sides of a 300 s hole */
	assert_int_equal(series_init(&s, 0, 999, 2), 0);
	for (t = 0; t <= 100; t += 10)
		assert_true(series_add(&s, t, (double)t, 1));
	for (t = 400; t < 500; t += 10)
		assert_true(series_add(&s, t, (double)t, 1));
	n = series_line(&s, series_gap_s(&s), pt, N(pt));
	assert_int_equal(n, 2);
	assert_true(pt[0].move);
	assert_true(pt[1].move);
	series_free(&s);
}

static void test_median_step(void **state)
{
	struct series s;
	int64_t t;

	(void)state;
	/* ten-minute data with every fifth reading missing: the median
	 * step stays 600 s (within a 1/16-octave bin, 2.2 %) */
	assert_int_equal(series_init(&s, 0, 864000, 500), 0);
	assert_near(series_median_step(&s), 0, 0);
	assert_near(series_gap_s(&s), 0, 0);
	for (t = 0; t <= 864000; t += 600) {
		if ((t / 600) % 5 != 4)
			assert_true(series_add(&s, t, 1.0, 1));
	}
	assert_near(series_median_step(&s), 600, 600 * 0.022);
	series_free(&s);
}

static void test_means(void **state)
{
	struct series s;
	struct series_mean m[8];
	size_t n;
	int64_t c;

	(void)state;
	/* one value per column, v = column index; merged in pairs when
	 * only 5 may come out */
	assert_int_equal(series_init(&s, 0, 999, 10), 0);
	for (c = 0; c < 10; c++)
		assert_true(series_add(&s, c * 100 + 50, (double)c, 1));
	n = series_means(&s, 0, m, 5);
	assert_int_equal(n, 5);
	assert_near(m[0].v, 0.5, 1e-12);
	assert_near(m[0].t, 100, 1e-9);
	assert_near(m[4].v, 8.5, 1e-12);
	/* from t 500 on: columns 5..9, one each */
	n = series_means(&s, 500, m, 8);
	assert_int_equal(n, 5);
	assert_near(m[0].v, 5, 1e-12);
	series_free(&s);
}

static void test_bad_init(void **state)
{
	struct series s;

	(void)state;
	/* inverted range, no columns, too many columns, too long a span */
	assert_int_equal(series_init(&s, 10, 0, 10), -1);
	assert_int_equal(series_init(&s, 0, 10, 0), -1);
	assert_int_equal(series_init(&s, 0, 10, SERIES_COLS_MAX + 1), -1);
	assert_int_equal(series_init(&s, 0, SERIES_SPAN_MAX + 1, 10), -1);
	series_free(NULL);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test(test_value_ticks),
	    cmocka_unit_test(test_value_ticks_bad),
	    cmocka_unit_test(test_time_ticks),
	    cmocka_unit_test(test_time_labels),
	    cmocka_unit_test(test_min_max_kept),
	    cmocka_unit_test(test_flagged_kept),
	    cmocka_unit_test(test_gap_breaks),
	    cmocka_unit_test(test_gap_inside_column),
	    cmocka_unit_test(test_median_step),
	    cmocka_unit_test(test_means),
	    cmocka_unit_test(test_bad_init),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
