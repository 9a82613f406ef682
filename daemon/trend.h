/*
 * trend.h - straight-line fits of a value over time, for the battery
 * forecast of the watchdog: Theil-Sen (robust) and ordinary least
 * squares, and the time a fitted line reaches a level.
 *
 * Owns nothing; every function is pure and does no I/O.  Theil-Sen needs
 * a work array of trend_work_n(n) doubles from the caller (the watchdog
 * allocates one, once, for TREND_MAX_PTS points), so a fit never
 * allocates.
 *
 * Methods (both fit v(t) = at0 + slope * t, t in the caller's unit):
 * - Theil-Sen: slope = median of the pairwise slopes (v_j - v_i) /
 *   (t_j - t_i) over pairs with t_i != t_j (H. Theil 1950, "A rank-
 *   invariant method of linear and polynomial regression analysis";
 *   P. K. Sen 1968, JASA 63:1379-1389); at0 = median of v_i - slope * t_i
 *   (the "median intercept").  Up to ~29 % of the points may be wild
 *   without moving the slope far (Sen 1968: breakdown point 1 - 1/sqrt 2).
 * - least squares: slope = Sxy / Sxx about the means, at0 = mean(v) -
 *   slope * mean(t) (Gauss-Legendre normal equations).
 * The median of an even count is the mean of the two middle values.
 *
 * Called by watch.c; tested by tests/unit/test_trend.c.
 */
#ifndef TIDEPOST_TREND_H
#define TIDEPOST_TREND_H

#include <stddef.h>

#define TREND_MAX_PTS 256u /* points a fit may use, at most */

struct trend_pt {
	double t; /* time, any origin (the watchdog: s from the newest) */
	double v; /* the value */
};

struct trend_fit {
	double slope; /* value per unit of t */
	double at0;   /* the line's value at t = 0 */
	size_t n;     /* points used */
};

/* Doubles the Theil-Sen work array needs for n points: n (n - 1) / 2. */
size_t trend_work_n(size_t n);

/* The median of v[0..n) (n >= 1); reorders v. */
double trend_median(double *v, size_t n);

/* Theil-Sen fit of n points (2..TREND_MAX_PTS); work holds work_n
 * doubles (>= trend_work_n(n)).  0 and *out, or -1 when there are fewer
 * than two distinct times, n is too large or work too small. */
int trend_theil_sen(const struct trend_pt *p, size_t n, double *work,
                    size_t work_n, struct trend_fit *out)
    __attribute__((warn_unused_result));

/* Least-squares fit of n points.  0 and *out, or -1 when there are
 * fewer than two distinct times. */
int trend_least_squares(const struct trend_pt *p, size_t n,
                        struct trend_fit *out)
    __attribute__((warn_unused_result));

/* When the line f reaches `level`, going down: 0 and *t (f's unit of t),
 * or -1 if it never does (slope >= 0 and at0 above the level).  A line
 * already at or below the level gives t = 0. */
int trend_reach(const struct trend_fit *f, double level, double *t)
    __attribute__((warn_unused_result));

#endif
