/*
 * test_trend.c - the line fits of the battery forecast: a hand-checked
 * worked example for both methods, Theil-Sen against an independent
 * brute-force median of pairwise slopes, least squares against the
 * uncentred normal equations, the median against a sort, robustness to
 * outliers, and the edge cases.
 *
 * All data here is invented test data (synthetic discharge curves from a
 * seeded generator).
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "trend.h"

static double work[TREND_MAX_PTS * (TREND_MAX_PTS - 1) / 2];

/* A small seeded generator (xorshift64*, Vigna 2016) so runs repeat. */
static uint64_t rng = 88172645463325252ull;

static double uniform(void)
{
	rng ^= rng >> 12;
	rng ^= rng << 25;
	rng ^= rng >> 27;
	return (double)((rng * 2685821657736338717ull) >> 11) /
	       9007199254740992.0;
}

static int cmp(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;

	return x < y ? -1 : x > y;
}

/* The reference median: sort a copy, take the middle (mean of two). */
static double ref_median(const double *v, size_t n)
{
	double *c = malloc(n * sizeof(*c)), m;

	memcpy(c, v, n * sizeof(*c));
	qsort(c, n, sizeof(*c), cmp);
	m = n % 2 ? c[n / 2] : (c[n / 2 - 1] + c[n / 2]) / 2;
	free(c);
	return m;
}

/* Brute-force Theil-Sen written from the definition (Sen 1968), not from
 * trend.c: every pair, sorted, the middle. */
static void ref_theil_sen(const struct trend_pt *p, size_t n, double *slope,
                          double *at0)
{
	double *s = malloc(n * n * sizeof(*s)), *r = malloc(n * sizeof(*r));
	size_t i, j, m = 0;

	for (i = 0; i < n; i++)
		for (j = 0; j < n; j++)
			if (i < j && p[i].t != p[j].t)
				s[m++] = (p[j].v - p[i].v) / (p[j].t - p[i].t);
	*slope = ref_median(s, m);
	for (i = 0; i < n; i++)
		r[i] = p[i].v - *slope * p[i].t;
	*at0 = ref_median(r, n);
	free(s);
	free(r);
}

/* Least squares from the uncentred normal equations:
 * slope = (n Stv - St Sv) / (n Stt - St^2), at0 = (Sv - slope St) / n. */
static void ref_lsq(const struct trend_pt *p, size_t n, double *slope,
                    double *at0)
{
	double st = 0, sv = 0, stt = 0, stv = 0;
	size_t i;

	for (i = 0; i < n; i++) {
		st += p[i].t;
		sv += p[i].v;
		stt += p[i].t * p[i].t;
		stv += p[i].t * p[i].v;
	}
	*slope = (n * stv - st * sv) / (n * stt - st * st);
	*at0 = (sv - *slope * st) / n;
}

/*
 * Worked example (hand-checked): t = 0, 1, 2, 3 (days), v = 12.0, 11.9,
 * 11.7, 11.6 V.
 * Least squares: mean t = 1.5, mean v = 11.8; Sxx = 2.25 + 0.25 + 0.25 +
 * 2.25 = 5; Sxy = (-1.5)(0.2) + (-0.5)(0.1) + (0.5)(-0.1) + (1.5)(-0.2) =
 * -0.7; slope = -0.7 / 5 = -0.14 V/day; at0 = 11.8 + 0.14 * 1.5 = 12.01 V.
 * Theil-Sen: pair slopes (0,1) -0.1, (0,2) -0.15, (0,3) -0.1333..,
 * (1,2) -0.2, (1,3) -0.15, (2,3) -0.1; sorted -0.2 -0.15 -0.15 -0.1333
 * -0.1 -0.1; median (-0.15 - 0.13333) / 2 = -0.1416667.  Residual
 * intercepts v + 0.1416667 t: 12.0, 12.0416667, 11.9833333, 12.025;
 * median (12.0 + 12.025) / 2 = 12.0125.
 * Cutoff 11.0 V is reached by the least-squares line at (11.0 - 12.01) /
 * -0.14 = 7.2142857 days.
 */
static void worked_example(void **state)
{
	const struct trend_pt p[] = {
	    {0, 12.0}, {1, 11.9}, {2, 11.7}, {3, 11.6}};
	struct trend_fit f;
	double t;

	(void)state;
	assert_int_equal(trend_least_squares(p, 4, &f), 0);
	assert_float_equal(f.slope, -0.14, 1e-12);
	assert_float_equal(f.at0, 12.01, 1e-12);
	assert_int_equal(trend_reach(&f, 11.0, &t), 0);
	assert_float_equal(t, 7.2142857142857, 1e-9);
	assert_int_equal(trend_theil_sen(p, 4, work, 6, &f), 0);
	assert_float_equal(f.slope, -0.1416666666667, 1e-9);
	assert_float_equal(f.at0, 12.0125, 1e-9);
	assert_int_equal(f.n, 4);
}

/* Synthetic curves: v = v0 + slope t + noise, optional outliers. */
struct curve_row {
	const char *why;
	size_t n;
	double slope, noise, outlier_share, outlier_v;
};

static const struct curve_row curves[] = {
    /* exact line: every method recovers it */
    {"linear", 96, -0.002, 0, 0, 0},
    /* noise: both close to the truth and to their references */
    {"noise", 96, -0.002, 0.05, 0, 0},
    /* 20 % wild readings (a sensor glitch): Theil-Sen holds */
    {"outliers", 96, -0.002, 0.02, 0.2, 5.0},
    /* the largest fit the watchdog makes */
    {"max points", TREND_MAX_PTS, -0.001, 0.03, 0.1, -4.0},
    /* two points: the smallest fit */
    {"two points", 2, -0.01, 0, 0, 0},
};

static void make_curve(const struct curve_row *r, struct trend_pt *p)
{
	size_t i;

	for (i = 0; i < r->n; i++) {
		p[i].t = (double)i * 15 - (double)(r->n - 1) * 15;
		p[i].v =
		    12.5 + r->slope * p[i].t + r->noise * (uniform() * 2 - 1);
		if (uniform() < r->outlier_share)
			p[i].v += r->outlier_v;
	}
}

static void against_references(void **state)
{
	struct trend_pt p[TREND_MAX_PTS];
	struct trend_fit f;
	double rs, ra;
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(curves) / sizeof(curves[0]); i++) {
		const struct curve_row *r = &curves[i];

		make_curve(r, p);
		assert_int_equal(trend_theil_sen(p, r->n, work,
		                                 sizeof(work) / sizeof(work[0]),
		                                 &f),
		                 0);
		ref_theil_sen(p, r->n, &rs, &ra);
		assert_float_equal(f.slope, rs, 1e-12);
		assert_float_equal(f.at0, ra, 1e-9);
		/* and Theil-Sen is near the truth, outliers or not */
		assert_true(fabs(f.slope - r->slope) <
		            fabs(r->slope) * 0.15 + 1e-12);
		assert_int_equal(trend_least_squares(p, r->n, &f), 0);
		ref_lsq(p, r->n, &rs, &ra);
		assert_float_equal(f.slope, rs, 1e-9);
		assert_float_equal(f.at0, ra, 1e-6);
	}
}

/* Outliers pull least squares away while Theil-Sen stays near the truth:
 * the reason the robust fit is the default. */
static void robust_beats_least_squares(void **state)
{
	struct trend_pt p[96];
	struct trend_fit ts, ls;
	size_t i;

	(void)state;
	for (i = 0; i < 96; i++) {
		p[i].t = (double)i;
		p[i].v = 12.0 - 0.01 * p[i].t;
	}
	for (i = 80; i < 96; i += 2)
		p[i].v += 3.0; /* 8 wild readings late in the window */
	assert_int_equal(trend_theil_sen(p, 96, work, 4560, &ts), 0);
	assert_int_equal(trend_least_squares(p, 96, &ls), 0);
	assert_float_equal(ts.slope, -0.01, 1e-9);
	assert_true(fabs(ls.slope - -0.01) > 0.005);
}

static void median_matches_sort(void **state)
{
	double v[64], c[64];
	size_t n, i, rep;

	(void)state;
	for (rep = 0; rep < 200; rep++) {
		n = 1 + rep % 63;
		for (i = 0; i < n; i++) /* few distinct values: many ties */
			v[i] = floor(uniform() * (rep % 3 ? 1000 : 4));
		memcpy(c, v, sizeof(v));
		assert_float_equal(trend_median(c, n), ref_median(v, n), 0);
	}
}

struct edge_row {
	const char *why;
	struct trend_pt p[3];
	size_t n, work_n;
	int ts_rc, ls_rc;
};

static const struct edge_row edges[] = {
    /* one point: no line */
    {"one point", {{0, 1}}, 1, 0, -1, -1},
    /* all at the same time: no slope exists */
    {"same time", {{5, 1}, {5, 2}, {5, 3}}, 3, 3, -1, -1},
    /* a work array too small is refused, not overrun */
    {"small work", {{0, 1}, {1, 2}, {2, 3}}, 3, 2, -1, 0},
    /* two of three at one time: the one usable pair suffices */
    {"one pair", {{0, 1}, {0, 2}, {2, 3}}, 3, 3, 0, 0},
};

static void edge_cases(void **state)
{
	struct trend_fit f;
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(edges) / sizeof(edges[0]); i++) {
		const struct edge_row *r = &edges[i];

		assert_int_equal(
		    trend_theil_sen(r->p, r->n, work, r->work_n, &f), r->ts_rc);
		assert_int_equal(trend_least_squares(r->p, r->n, &f), r->ls_rc);
	}
	assert_int_equal(trend_work_n(TREND_MAX_PTS + 1) >
	                     sizeof(work) / sizeof(work[0]),
	                 1);
	assert_int_equal(trend_theil_sen(edges[2].p, TREND_MAX_PTS + 1, work,
	                                 (size_t)-1, &f),
	                 -1);
}

struct reach_row {
	const char *why;
	double slope, at0, level;
	int rc;
	double t;
};

static const struct reach_row reaches[] = {
    /* falling: (6 - 12) / -0.5 = 12 */
    {"falling", -0.5, 12, 6, 0, 12},
    /* rising: never reaches a lower level */
    {"rising", 0.1, 12, 6, -1, 0},
    /* flat: never */
    {"flat", 0, 12, 6, -1, 0},
    /* already below: now */
    {"below", 0.1, 5, 6, 0, 0},
};

static void reach(void **state)
{
	struct trend_fit f;
	double t;
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(reaches) / sizeof(reaches[0]); i++) {
		f.slope = reaches[i].slope;
		f.at0 = reaches[i].at0;
		assert_int_equal(trend_reach(&f, reaches[i].level, &t),
		                 reaches[i].rc);
		if (reaches[i].rc == 0)
			assert_float_equal(t, reaches[i].t, 1e-12);
	}
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test(worked_example),
	    cmocka_unit_test(against_references),
	    cmocka_unit_test(robust_beats_least_squares),
	    cmocka_unit_test(median_matches_sort),
	    cmocka_unit_test(edge_cases),
	    cmocka_unit_test(reach),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
