/*
 * series.h - one value of one station over a fixed time range, kept in
 * bounded memory for `tidepost report`: summary statistics over every
 * reading, and a decimated picture of the values in fixed pixel columns.
 *
 * Owns: its column array (series_init allocates, series_free releases).
 * Memory is ncols columns whatever the number of readings: a year of
 * 10-minute data costs the same as a day.
 *
 * What a column keeps (the "min/max per pixel column" decimation):
 *   - the lowest and highest line value and their times, so the drawn
 *     line keeps every peak and trough a pixel can show;
 *   - the first and last time of a line value, and the largest step
 *     between consecutive line values inside the column, to break the
 *     line at gaps;
 *   - the sum of line values and of their times, for trend fits;
 *   - for flags 3 (suspect) and 4 (fail) each, the lowest and highest
 *     flagged value and their times: every flagged point is kept while a
 *     column holds at most two of each flag, else its extremes.
 * Line values are numbers flagged 1, 2 or 3; a value flagged 4 (fail) is
 * a marker only, never part of the line or of min/mean/max.  A null or
 * non-finite value, or flag 9, counts as missing.
 *
 * Gaps: the step between consecutive line values (in input order; steps
 * <= 0, from out-of-order input, are not counted) goes into a histogram
 * of 1/16-octave bins, so the median step is known to within 2.2 % in
 * fixed memory.  series_line breaks the line wherever consecutive points
 * lie more than `gap_s` apart (report uses SERIES_GAP_FACTOR x median).
 *
 * Times are Unix seconds; inside the columns they are kept as offsets
 * from t0 (so t1 - t0 must stay below 2^31 s, about 68 years).
 *
 * Called by report.c (adding readings) and svg.c (drawing); tested by
 * tests/unit/test_svg.c.
 */
#ifndef TIDEPOST_SERIES_H
#define TIDEPOST_SERIES_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#define SERIES_COLS_MAX     4096
#define SERIES_SPAN_MAX     2000000000LL /* t1 - t0, seconds, at most */
#define SERIES_GAP_FACTOR   2.5          /* line breaks at this x median */
#define SERIES_STEP_BINS    (31 * 16)    /* 1 s .. 2^31 s, 16 per octave */
#define SERIES_DECIMALS_MAX 6

struct series_mark {
	double v;
	int32_t dt; /* seconds from t0 */
};

struct series_col {
	uint32_t n;           /* line values in the column */
	double lo, hi;        /* their lowest and highest */
	int32_t dt_lo, dt_hi; /* times of lo and hi (from t0) */
	int32_t dt_first, dt_last;
	uint32_t max_step;             /* largest in-order step inside */
	double sum, t_sum;             /* line values and their dt, summed */
	uint32_t n_mark[2];            /* flag 3, flag 4 values in the column */
	struct series_mark mark[2][2]; /* [flag 3/4][lowest, highest] */
};

struct series_stats {
	uint64_t n;          /* readings holding the value as a number */
	uint64_t n_line;     /* of them not flagged 4: min/mean/max */
	uint64_t n3, n4, n9; /* flagged 3, flagged 4, missing */
	double min, max, sum;
	int64_t first, last; /* times of the first, last number */
	int decimals;        /* decimals the values need (<= 6) */
};

struct series {
	int64_t t0, t1; /* the range; readings outside are refused */
	size_t ncols;
	struct series_col *col;
	struct series_stats st;
	uint32_t hist[SERIES_STEP_BINS];
	uint64_t n_steps;
	bool has_prev;
	int64_t prev_t; /* time of the previous line value */
	size_t prev_col;
};

/* A point of the decimated line; `move` starts a new piece (a gap). */
struct series_pt {
	int64_t t;
	double v;
	bool move;
};

/* A point of the trend input: a column's mean time and value. */
struct series_mean {
	double t; /* Unix seconds */
	double v;
	uint32_t n;
};

/* Columns over [t0, t1] (t0 <= t1, span <= SERIES_SPAN_MAX, ncols
 * 1..SERIES_COLS_MAX).  0, or -1 with errno (EINVAL, ENOMEM). */
int series_init(struct series *s, int64_t t0, int64_t t1, size_t ncols)
    __attribute__((warn_unused_result));

/* Release the columns; NULL and a zeroed series are fine. */
void series_free(struct series *s);

/* One reading's value.  Returns false (nothing counted) when t lies
 * outside [t0, t1]. */
bool series_add(struct series *s, int64_t t, double v, int flag);

/* The column of time t (t within the range). */
size_t series_col_of(const struct series *s, int64_t t);

/* The median step between consecutive line values, in seconds (the
 * centre of its histogram bin), or 0 when there is none. */
double series_median_step(const struct series *s);

/* The step beyond which the line breaks: SERIES_GAP_FACTOR x the median
 * step, or 0 (never break) when there is no step. */
double series_gap_s(const struct series *s);

/* The decimated line in time order into pts (cap >= 2 * ncols always
 * suffices).  gap_s <= 0: no breaks.  Returns the number of points. */
size_t series_line(const struct series *s, double gap_s, struct series_pt *pts,
                   size_t cap);

/* The kept points flagged `flag` (3 or 4), in column order.  Returns the
 * number written (at most cap). */
size_t series_marks(const struct series *s, int flag, struct series_pt *pts,
                    size_t cap);

/* Mean time and value of the columns with line values at or after
 * t_from, adjacent columns merged so that at most cap come out.
 * Returns the number written. */
size_t series_means(const struct series *s, int64_t t_from,
                    struct series_mean *out, size_t cap);

#endif
