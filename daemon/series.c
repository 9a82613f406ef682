/*
 * series.c - per-value statistics and pixel-column decimation; see
 * series.h.
 */
#include "series.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

static const double pow10_tab[SERIES_DECIMALS_MAX + 1] = {
    1, 10, 100, 1000, 10000, 100000, 1000000};

int series_init(struct series *s, int64_t t0, int64_t t1, size_t ncols)
{
	memset(s, 0, sizeof(*s));
	if (t1 < t0 || t1 - t0 > SERIES_SPAN_MAX || ncols == 0 ||
	    ncols > SERIES_COLS_MAX) {
		errno = EINVAL;
		return -1;
	}
	s->col = calloc(ncols, sizeof(*s->col));
	if (s->col == NULL)
		return -1;
	s->t0 = t0;
	s->t1 = t1;
	s->ncols = ncols;
	s->st.min = HUGE_VAL;
	s->st.max = -HUGE_VAL;
	return 0;
}

void series_free(struct series *s)
{
	if (s == NULL)
		return;
	free(s->col);
	s->col = NULL;
	s->ncols = 0;
}

size_t series_col_of(const struct series *s, int64_t t)
{
	int64_t span = s->t1 - s->t0 + 1;
	size_t c = (size_t)((t - s->t0) * (int64_t)s->ncols / span);

	return c < s->ncols ? c : s->ncols - 1;
}

/* Decimals v needs (0..SERIES_DECIMALS_MAX), at least `have`. */
static int need_decimals(double v, int have)
{
	double x;
	int d;

	for (d = have; d < SERIES_DECIMALS_MAX; d++) {
		x = v * pow10_tab[d];
		if (fabs(x - nearbyint(x)) <= 1e-6 * fmax(1.0, fabs(x)))
			return d;
	}
	return SERIES_DECIMALS_MAX;
}

static void add_step(struct series *s, int64_t step)
{
	int bin;

	if (step <= 0)
		return;
	bin = (int)floor(16.0 * log2((double)step));
	if (bin >= SERIES_STEP_BINS)
		bin = SERIES_STEP_BINS - 1;
	s->hist[bin]++;
	s->n_steps++;
}

static void add_mark(struct series_col *c, int which, double v, int32_t dt)
{
	struct series_mark *m = c->mark[which];

	if (c->n_mark[which]++ == 0) {
		m[0] = (struct series_mark){v, dt};
		m[1] = m[0];
	} else if (v < m[0].v) {
		m[0] = (struct series_mark){v, dt};
	} else if (v >= m[1].v) {
		m[1] = (struct series_mark){v, dt};
	}
}

/* A line value (flag 1, 2 or 3) into its column. */
static void add_line(struct series *s, size_t ci, int64_t t, double v)
{
	struct series_col *c = &s->col[ci];
	int32_t dt = (int32_t)(t - s->t0);

	if (c->n == 0 || v < c->lo) {
		c->lo = v;
		c->dt_lo = dt;
	}
	if (c->n == 0 || v > c->hi) {
		c->hi = v;
		c->dt_hi = dt;
	}
	if (c->n == 0 || dt < c->dt_first)
		c->dt_first = dt;
	if (c->n == 0 || dt > c->dt_last)
		c->dt_last = dt;
	if (s->has_prev && s->prev_col == ci && t > s->prev_t &&
	    (uint64_t)(t - s->prev_t) > c->max_step)
		c->max_step = (uint32_t)(t - s->prev_t);
	c->n++;
	c->sum += v;
	c->t_sum += dt;
	if (s->has_prev)
		add_step(s, t - s->prev_t);
	s->has_prev = true;
	s->prev_t = t;
	s->prev_col = ci;
}

static void add_stats(struct series_stats *st, int64_t t, double v, int flag)
{
	if (st->n == 0 || t < st->first)
		st->first = t;
	if (st->n == 0 || t > st->last)
		st->last = t;
	st->n++;
	st->decimals = need_decimals(v, st->decimals);
	if (flag == 3)
		st->n3++;
	if (flag == 4) {
		st->n4++;
		return;
	}
	st->n_line++;
	st->sum += v;
	if (v < st->min)
		st->min = v;
	if (v > st->max)
		st->max = v;
}

bool series_add(struct series *s, int64_t t, double v, int flag)
{
	size_t ci;

	if (t < s->t0 || t > s->t1)
		return false;
	if (flag == 9 || !isfinite(v)) {
		s->st.n9++;
		return true;
	}
	add_stats(&s->st, t, v, flag);
	ci = series_col_of(s, t);
	if (flag == 3 || flag == 4)
		add_mark(&s->col[ci], flag - 3, v, (int32_t)(t - s->t0));
	if (flag != 4)
		add_line(s, ci, t, v);
	return true;
}

double series_median_step(const struct series *s)
{
	uint64_t seen = 0, half = (s->n_steps + 1) / 2;
	int i;

	if (s->n_steps == 0)
		return 0;
	for (i = 0; i < SERIES_STEP_BINS; i++) {
		seen += s->hist[i];
		if (seen >= half)
			break;
	}
	if (i == SERIES_STEP_BINS)
		i--;
	return exp2((i + 0.5) / 16.0);
}

double series_gap_s(const struct series *s)
{
	return SERIES_GAP_FACTOR * series_median_step(s);
}

static size_t put_pt(struct series_pt *pts, size_t n, size_t cap, int64_t t,
                     double v, bool move)
{
	if (n < cap)
		pts[n] = (struct series_pt){t, v, move};
	return n + 1;
}

size_t series_line(const struct series *s, double gap_s, struct series_pt *pts,
                   size_t cap)
{
	const struct series_col *c;
	bool have = false, move, inner;
	int64_t last = 0;
	size_t i, n = 0;

	for (i = 0; i < s->ncols; i++) {
		c = &s->col[i];
		if (c->n == 0)
			continue;
		move = !have ||
		       (gap_s > 0 && (double)(c->dt_first - last) > gap_s);
		inner = gap_s > 0 && (double)c->max_step > gap_s;
		if (c->n == 1 || c->dt_lo == c->dt_hi) {
			n = put_pt(pts, n, cap, s->t0 + c->dt_lo, c->lo, move);
		} else if (c->dt_lo < c->dt_hi) {
			n = put_pt(pts, n, cap, s->t0 + c->dt_lo, c->lo, move);
			n = put_pt(pts, n, cap, s->t0 + c->dt_hi, c->hi, inner);
		} else {
			n = put_pt(pts, n, cap, s->t0 + c->dt_hi, c->hi, move);
			n = put_pt(pts, n, cap, s->t0 + c->dt_lo, c->lo, inner);
		}
		have = true;
		last = c->dt_last;
	}
	return n < cap ? n : cap;
}

size_t series_marks(const struct series *s, int flag, struct series_pt *pts,
                    size_t cap)
{
	const struct series_col *c;
	const struct series_mark *m;
	int w = flag - 3;
	size_t i, n = 0;

	if (w < 0 || w > 1)
		return 0;
	for (i = 0; i < s->ncols && n < cap; i++) {
		c = &s->col[i];
		m = c->mark[w];
		if (c->n_mark[w] == 0)
			continue;
		n = put_pt(pts, n, cap, s->t0 + m[0].dt, m[0].v, false);
		if (c->n_mark[w] > 1 && n < cap)
			n = put_pt(pts, n, cap, s->t0 + m[1].dt, m[1].v, false);
	}
	return n < cap ? n : cap;
}

/* Columns with line values at or after t_from. */
static size_t count_cols(const struct series *s, int64_t t_from, size_t *first)
{
	size_t i, m = 0;

	*first = s->ncols;
	for (i = 0; i < s->ncols; i++) {
		if (s->col[i].n == 0 || s->t0 + s->col[i].dt_first < t_from)
			continue;
		if (m++ == 0)
			*first = i;
	}
	return m;
}

size_t series_means(const struct series *s, int64_t t_from,
                    struct series_mean *out, size_t cap)
{
	double v = 0, t = 0;
	size_t i, first, m, k, in_group = 0, n = 0;
	uint32_t cnt = 0;

	m = count_cols(s, t_from, &first);
	if (m == 0 || cap == 0)
		return 0;
	k = (m + cap - 1) / cap;
	for (i = first; i < s->ncols && n < cap; i++) {
		if (s->col[i].n == 0)
			continue;
		v += s->col[i].sum;
		t += s->col[i].t_sum;
		cnt += s->col[i].n;
		if (++in_group < k && i + 1 < s->ncols)
			continue;
		out[n++] =
		    (struct series_mean){(double)s->t0 + t / cnt, v / cnt, cnt};
		v = t = 0;
		cnt = 0;
		in_group = 0;
	}
	if (cnt > 0 && n < cap)
		out[n++] =
		    (struct series_mean){(double)s->t0 + t / cnt, v / cnt, cnt};
	return n;
}
