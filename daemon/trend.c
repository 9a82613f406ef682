/*
 * trend.c - Theil-Sen and least-squares line fits; see trend.h.
 */
#include "trend.h"

#include <math.h>

size_t trend_work_n(size_t n)
{
	return n < 2 ? 0 : n * (n - 1) / 2;
}

static void swap(double *a, double *b)
{
	double t = *a;

	*a = *b;
	*b = t;
}

/* Move the k-th smallest of v[0..n) to v[k] (quickselect, Hoare 1961,
 * "Algorithm 65: find"; median-of-three pivot), smaller ones before it. */
static void select_kth(double *v, size_t n, size_t k)
{
	size_t lo = 0, hi = n - 1, i, j, mid;
	double pivot;

	while (hi > lo) {
		mid = lo + (hi - lo) / 2;
		if (v[mid] < v[lo])
			swap(&v[mid], &v[lo]);
		if (v[hi] < v[lo])
			swap(&v[hi], &v[lo]);
		if (v[hi] < v[mid])
			swap(&v[hi], &v[mid]);
		pivot = v[mid];
		i = lo;
		j = hi;
		while (i <= j) {
			while (v[i] < pivot)
				i++;
			while (v[j] > pivot)
				j--;
			if (i <= j) {
				swap(&v[i], &v[j]);
				i++;
				if (j == 0)
					break;
				j--;
			}
		}
		if (k <= j)
			hi = j;
		else if (k >= i)
			lo = i;
		else
			return;
	}
}

double trend_median(double *v, size_t n)
{
	double hi, lo;
	size_t i;

	select_kth(v, n, n / 2);
	hi = v[n / 2];
	if (n % 2 == 1)
		return hi;
	/* the largest of the lower half is the other middle value */
	lo = v[0];
	for (i = 1; i < n / 2; i++) {
		if (v[i] > lo)
			lo = v[i];
	}
	return lo + (hi - lo) / 2;
}

int trend_theil_sen(const struct trend_pt *p, size_t n, double *work,
                    size_t work_n, struct trend_fit *out)
{
	size_t i, j, m = 0;
	double slope;

	if (n < 2 || n > TREND_MAX_PTS || work_n < trend_work_n(n))
		return -1;
	for (i = 0; i < n; i++) {
		for (j = i + 1; j < n; j++) {
			if (p[j].t != p[i].t)
				work[m++] =
				    (p[j].v - p[i].v) / (p[j].t - p[i].t);
		}
	}
	if (m == 0)
		return -1;
	slope = trend_median(work, m);
	for (i = 0; i < n; i++)
		work[i] = p[i].v - slope * p[i].t;
	out->slope = slope;
	out->at0 = trend_median(work, n);
	out->n = n;
	return 0;
}

int trend_least_squares(const struct trend_pt *p, size_t n,
                        struct trend_fit *out)
{
	double mt = 0, mv = 0, sxx = 0, sxy = 0;
	size_t i;

	if (n < 2)
		return -1;
	for (i = 0; i < n; i++) {
		mt += p[i].t;
		mv += p[i].v;
	}
	mt /= (double)n;
	mv /= (double)n;
	for (i = 0; i < n; i++) {
		sxx += (p[i].t - mt) * (p[i].t - mt);
		sxy += (p[i].t - mt) * (p[i].v - mv);
	}
	if (!(sxx > 0))
		return -1;
	out->slope = sxy / sxx;
	out->at0 = mv - out->slope * mt;
	out->n = n;
	return 0;
}

int trend_reach(const struct trend_fit *f, double level, double *t)
{
	if (f->at0 <= level) {
		*t = 0;
		return 0;
	}
	if (!(f->slope < 0))
		return -1;
	*t = (level - f->at0) / f->slope;
	return isfinite(*t) ? 0 : -1;
}
