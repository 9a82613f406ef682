/*
 * svg.h - the pictures of `tidepost report`: axis ticks, and SVG panels
 * (a time series of one value, a scatter of two) written as text into a
 * struct buf.
 *
 * Owns nothing beyond a temporary point array per panel (allocated and
 * freed inside svg_panel_write).  Every panel is a complete, standalone
 * SVG element with its own xmlns and presentation attributes (no CSS
 * classes needed to look right, no script, no external reference), so an
 * extracted panel renders alone, and the markup is well-formed XML.
 *
 * Choices (the README states them):
 * - Value ticks: steps 1, 2 or 5 x 10^k, the smallest giving at most
 *   `target` intervals; the axis runs from the tick at or below the
 *   lowest value to the one at or above the highest.  A single value v
 *   gets v +- 5 % (+- 0.5 for 0).  Labels have the step's decimals.
 * - Time ticks, UTC, the smallest calendar step giving at most `target`
 *   intervals: 1, 2, 5, 10, 15, 30 s; 1, 2, 5, 10, 15, 30 min; 1, 2, 3, 6,
 *   12 h; 1, 2 days; 1 week (Mondays 00:00); 1, 2, 3, 6 months (first of
 *   the month); 1, 2, 5, 10 ... years (1 January).  Labels: "MM-DD HH:MM"
 *   below a day (with seconds below a minute), "YYYY-MM-DD" for days and
 *   weeks, "YYYY-MM" for months, "YYYY" for years.
 * - The line is the decimated line of series.h, broken (a new "M") at
 *   gaps.  Points flagged 3 (suspect) are orange circles; points flagged
 *   4 (fail) are red squares, or red triangles at the top or bottom edge
 *   pointing outwards when off the axis (the axis is set by the values
 *   that are not failed).  Each panel has a legend with the true counts.
 * - Markup carries data-* attributes with the panel's mapping (time and
 *   value range, plot box) so tests and tools can read positions back.
 *
 * Called by reportout.c; tested by tests/unit/test_svg.c.
 */
#ifndef TIDEPOST_SVG_H
#define TIDEPOST_SVG_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "buf.h"
#include "series.h"

#define SVG_TICKS_MAX 24

/* Panel geometry (px): the plot box is SVG_PLOT_W wide, which is also
 * the number of pixel columns report gives a series. */
#define SVG_W      1000
#define SVG_H      250
#define SVG_LEFT   76
#define SVG_RIGHT  20
#define SVG_TOP    34
#define SVG_BOTTOM 44
#define SVG_PLOT_W (SVG_W - SVG_LEFT - SVG_RIGHT)
#define SVG_PLOT_H (SVG_H - SVG_TOP - SVG_BOTTOM)

struct svg_ticks {
	size_t n;
	double v[SVG_TICKS_MAX];
	double lo, hi; /* the axis range (first and last tick) */
	double step;
	int decimals; /* for labels */
};

enum svg_tfmt {
	SVG_TF_SECONDS = 0, /* MM-DD HH:MM:SS */
	SVG_TF_MINUTES,     /* MM-DD HH:MM */
	SVG_TF_DAYS,        /* YYYY-MM-DD */
	SVG_TF_MONTHS,      /* YYYY-MM */
	SVG_TF_YEARS        /* YYYY */
};

struct svg_tticks {
	size_t n;
	int64_t t[SVG_TICKS_MAX]; /* ticks inside [t0, t1], ascending */
	int64_t step_s;           /* fixed steps; 0 for months and years */
	int step_months;          /* calendar steps; 0 for fixed ones */
	enum svg_tfmt fmt;
};

/* Ticks for values in [lo, hi] (finite; lo <= hi), at most `target`
 * intervals (2..SVG_TICKS_MAX - 1).  0, or -1 for bad arguments. */
int svg_value_ticks(double lo, double hi, size_t target, struct svg_ticks *out)
    __attribute__((warn_unused_result));

/* Ticks for times in [t0, t1] (t0 < t1), at most `target` intervals.
 * 0, or -1 for bad arguments. */
int svg_time_ticks(int64_t t0, int64_t t1, size_t target,
                   struct svg_tticks *out) __attribute__((warn_unused_result));

/* A tick label (NUL-terminated; cap >= 24). */
void svg_time_label(char *out, size_t cap, int64_t t, enum svg_tfmt fmt);

/* Text with & < > " ' escaped for XML content and attributes. */
void svg_escape(struct buf *b, const char *s);

/* A number with `decimals` decimals (0..9), no "-0". */
void svg_number(struct buf *b, double v, int decimals);

/* Battery extras: the fitted line v(t) = at_ref + slope_per_s (t - t_ref)
 * drawn from fit_from to the right edge, the cutoff level, and the
 * forecast time it crosses it. */
struct svg_battery {
	double cutoff_v;
	bool has_fit;
	double slope_per_s, at_ref, t_ref, fit_from;
	bool has_forecast;
	int64_t forecast_t;
};

struct svg_panel {
	const char *id;     /* element id, [A-Za-z0-9_-] only */
	const char *value;  /* the value name */
	const char *title;  /* heading inside the panel */
	const char *ylabel; /* axis label with the unit */
	const struct series *s;
	int64_t t0, t1; /* the time axis (may exceed the series') */
	double gap_s;   /* line breaks beyond this; <= 0: none */
	const struct svg_battery *bat; /* NULL: not the battery */
};

/* One time-series panel.  0, or -1 (out of memory or bad ranges; the
 * buffer's sticky error is not set by this function itself). */
int svg_panel_write(struct buf *b, const struct svg_panel *p)
    __attribute__((warn_unused_result));

struct svg_scatter {
	const char *id;
	const char *title;
	const char *xlabel, *ylabel;
	const double *x, *y; /* n sample points */
	size_t n;
	double r; /* Pearson r over all pairs (NaN: none) */
	uint64_t n_pairs;
	double xlo, xhi, ylo, yhi; /* value ranges of all pairs */
};

/* The scatter panel.  0, or -1 for bad ranges. */
int svg_scatter_write(struct buf *b, const struct svg_scatter *sc)
    __attribute__((warn_unused_result));

#endif
