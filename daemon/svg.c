/*
 * svg.c - axis ticks and the SVG panels of `tidepost report`; see svg.h.
 */
#include "svg.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define C_LINE      "#1d5c8a"
#define C_GRID      "#dfe5ea"
#define C_TEXT      "#2b2f33"
#define C_AXIS      "#7d8790"
#define C_F3        "#f0a020"
#define C_F3_EDGE   "#7a4a00"
#define C_F4        "#c62828"
#define C_F4_EDGE   "#4a0b0b"
#define C_TREND     "#6a3d9a"
#define MONTH_S     2629746.0 /* mean Gregorian month, s */
#define MONDAY_1970 345600    /* 1970-01-05T00:00:00Z, a Monday */

/* ---- ticks ---------------------------------------------------------- */

/* A single value (or a tiny span) gets room around it. */
static void widen(double *lo, double *hi)
{
	double pad;

	if (*hi - *lo > 1e-9 * fmax(fabs(*lo), fabs(*hi)))
		return;
	pad = *lo == 0 ? 0.5 : 0.05 * fabs(*lo);
	*lo -= pad;
	*hi += pad;
}

/* Do ticks of this step cover [lo, hi] in at most target intervals? */
static bool step_fits(double lo, double hi, double step, size_t target,
                      double *k0, double *k1)
{
	*k0 = floor(lo / step + 1e-9);
	*k1 = ceil(hi / step - 1e-9);
	return *k1 - *k0 <= (double)target && *k1 > *k0;
}

static void fill_ticks(struct svg_ticks *out, double k0, double k1, double step)
{
	size_t i;
	int d;

	out->n = (size_t)(k1 - k0) + 1;
	for (i = 0; i < out->n; i++)
		out->v[i] = (k0 + (double)i) * step;
	out->lo = k0 * step;
	out->hi = k1 * step;
	out->step = step;
	d = step >= 1 ? 0 : (int)ceil(-log10(step) - 1e-9);
	out->decimals = d > 9 ? 9 : d;
}

int svg_value_ticks(double lo, double hi, size_t target, struct svg_ticks *out)
{
	static const double mult[] = {1, 2, 5};
	double mag, k0, k1;
	int e, e0;
	size_t i;

	memset(out, 0, sizeof(*out));
	if (!isfinite(lo) || !isfinite(hi) || lo > hi || target < 2 ||
	    target >= SVG_TICKS_MAX)
		return -1;
	widen(&lo, &hi);
	e0 = (int)floor(log10((hi - lo) / (double)target));
	for (e = e0; e <= e0 + 2; e++) {
		mag = pow(10.0, e);
		for (i = 0; i < 3; i++) {
			if (!step_fits(lo, hi, mult[i] * mag, target, &k0, &k1))
				continue;
			fill_ticks(out, k0, k1, mult[i] * mag);
			return 0;
		}
	}
	return -1;
}

static int64_t floor_div(int64_t a, int64_t b)
{
	int64_t q = a / b;

	return (a % b != 0 && (a < 0) != (b < 0)) ? q - 1 : q;
}

static void fixed_ticks(int64_t t0, int64_t t1, int64_t step,
                        struct svg_tticks *out)
{
	int64_t origin = step == 604800 ? MONDAY_1970 : 0;
	int64_t t = origin + floor_div(t0 - origin + step - 1, step) * step;

	out->step_s = step;
	out->fmt = step < 60      ? SVG_TF_SECONDS
	           : step < 86400 ? SVG_TF_MINUTES
	                          : SVG_TF_DAYS;
	for (; t <= t1 && out->n < SVG_TICKS_MAX; t += step)
		out->t[out->n++] = t;
}

/* Unix time of the first of month index mi (year * 12 + month 0..11). */
static int64_t month_start(long mi)
{
	struct tm tm;

	memset(&tm, 0, sizeof(tm));
	tm.tm_year = (int)(mi / 12) - 1900;
	tm.tm_mon = (int)(mi % 12);
	tm.tm_mday = 1;
	return (int64_t)timegm(&tm);
}

static void month_ticks(int64_t t0, int64_t t1, int months,
                        struct svg_tticks *out)
{
	time_t tt = (time_t)t0;
	struct tm tm;
	long mi;

	gmtime_r(&tt, &tm);
	mi = (long)(tm.tm_year + 1900) * 12 + tm.tm_mon;
	if (month_start(mi) < t0)
		mi++;
	while (mi % months != 0)
		mi++;
	out->step_months = months;
	out->fmt = months < 12 ? SVG_TF_MONTHS : SVG_TF_YEARS;
	for (; month_start(mi) <= t1 && out->n < SVG_TICKS_MAX; mi += months)
		out->t[out->n++] = month_start(mi);
}

int svg_time_ticks(int64_t t0, int64_t t1, size_t target,
                   struct svg_tticks *out)
{
	static const int64_t fixed[] = {
	    1,   2,    5,    10,   15,    30,    60,    120,   300,    600,
	    900, 1800, 3600, 7200, 10800, 21600, 43200, 86400, 172800, 604800};
	static const int months[] = {1,   2,   3,   6,    12,   24,   60,
	                             120, 240, 600, 1200, 2400, 6000, 12000};
	double span = (double)t1 - (double)t0;
	size_t i;

	memset(out, 0, sizeof(*out));
	if (t1 <= t0 || target < 2 || target >= SVG_TICKS_MAX)
		return -1;
	for (i = 0; i < sizeof(fixed) / sizeof(fixed[0]); i++) {
		if (span / (double)fixed[i] <= (double)target) {
			fixed_ticks(t0, t1, fixed[i], out);
			return 0;
		}
	}
	for (i = 0; i < sizeof(months) / sizeof(months[0]); i++) {
		if (span / (months[i] * MONTH_S) <= (double)target) {
			month_ticks(t0, t1, months[i], out);
			return 0;
		}
	}
	return -1;
}

void svg_time_label(char *out, size_t cap, int64_t t, enum svg_tfmt fmt)
{
	time_t tt = (time_t)t;
	struct tm tm;
	size_t n = 0;

	if (cap == 0)
		return;
	if (gmtime_r(&tt, &tm) == NULL) {
		out[0] = '\0';
		return;
	}
	switch (fmt) {
	case SVG_TF_SECONDS:
		n = strftime(out, cap, "%m-%d %H:%M:%S", &tm);
		break;
	case SVG_TF_MINUTES:
		n = strftime(out, cap, "%m-%d %H:%M", &tm);
		break;
	case SVG_TF_DAYS:
		n = strftime(out, cap, "%Y-%m-%d", &tm);
		break;
	case SVG_TF_MONTHS:
		n = strftime(out, cap, "%Y-%m", &tm);
		break;
	case SVG_TF_YEARS:
		n = strftime(out, cap, "%Y", &tm);
		break;
	}
	out[n < cap ? n : 0] = '\0';
}

/* ---- text ------------------------------------------------------------ */

void svg_escape(struct buf *b, const char *s)
{
	for (; *s != '\0'; s++) {
		switch (*s) {
		case '&':
			buf_adds(b, "&amp;");
			break;
		case '<':
			buf_adds(b, "&lt;");
			break;
		case '>':
			buf_adds(b, "&gt;");
			break;
		case '"':
			buf_adds(b, "&quot;");
			break;
		case '\'':
			buf_adds(b, "&#39;");
			break;
		default:
			if ((unsigned char)*s < 0x20 && *s != '\t' &&
			    *s != '\n')
				buf_addc(b, ' ');
			else
				buf_addc(b, *s);
		}
	}
}

void svg_number(struct buf *b, double v, int decimals)
{
	if (decimals < 0)
		decimals = 0;
	if (decimals > 9)
		decimals = 9;
	if (!isfinite(v)) {
		buf_adds(b, "-");
		return;
	}
	if (fabs(v) < 0.5 * pow(10.0, -decimals))
		v = 0.0;
	buf_printf(b, "%.*f", decimals, v);
}

/* ---- mapping --------------------------------------------------------- */

struct map {
	double x0, w, top, h;
	int64_t t0, t1;
	double v0, v1;
};

static double map_x(const struct map *m, double t)
{
	return m->x0 + (t - (double)m->t0) * m->w / (double)(m->t1 - m->t0);
}

static double map_y(const struct map *m, double v)
{
	return m->top + (m->v1 - v) * m->h / (m->v1 - m->v0);
}

static void y_grid(struct buf *b, const struct map *m,
                   const struct svg_ticks *yt)
{
	double y;
	size_t i;

	buf_printf(b, "<g class=\"grid-y\" stroke=\"%s\" stroke-width=\"1\">",
	           C_GRID);
	for (i = 0; i < yt->n; i++) {
		y = map_y(m, yt->v[i]);
		buf_printf(b,
		           "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" "
		           "y2=\"%.1f\"/>",
		           m->x0, y, m->x0 + m->w, y);
	}
	buf_printf(b,
	           "</g><g class=\"ticks-y\" font-size=\"11\" fill=\"%s\" "
	           "text-anchor=\"end\">",
	           C_TEXT);
	for (i = 0; i < yt->n; i++) {
		buf_printf(b, "<text x=\"%.1f\" y=\"%.1f\">", m->x0 - 6,
		           map_y(m, yt->v[i]) + 4);
		svg_number(b, yt->v[i], yt->decimals);
		buf_adds(b, "</text>");
	}
	buf_adds(b, "</g>");
}

static void x_grid(struct buf *b, const struct map *m,
                   const struct svg_tticks *xt)
{
	char label[32];
	double x;
	size_t i;

	buf_printf(b, "<g class=\"grid-x\" stroke=\"%s\" stroke-width=\"1\">",
	           C_GRID);
	for (i = 0; i < xt->n; i++) {
		x = map_x(m, (double)xt->t[i]);
		buf_printf(b,
		           "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" "
		           "y2=\"%.1f\"/>",
		           x, m->top, x, m->top + m->h);
	}
	buf_printf(b,
	           "</g><g class=\"ticks-x\" font-size=\"11\" fill=\"%s\" "
	           "text-anchor=\"middle\">",
	           C_TEXT);
	for (i = 0; i < xt->n; i++) {
		svg_time_label(label, sizeof(label), xt->t[i], xt->fmt);
		buf_printf(b, "<text x=\"%.1f\" y=\"%.1f\">%s</text>",
		           map_x(m, (double)xt->t[i]), m->top + m->h + 16,
		           label);
	}
	buf_adds(b, "</g>");
}

/* The plot box, both grids and both axis labels. */
static int axes(struct buf *b, const struct map *m, const char *xlabel,
                const char *ylabel, size_t y_target)
{
	struct svg_ticks yt;
	struct svg_tticks xt;
	double cy = m->top + m->h / 2;

	if (svg_value_ticks(m->v0, m->v1, y_target, &yt) < 0 ||
	    svg_time_ticks(m->t0, m->t1, 11, &xt) < 0)
		return -1;
	buf_printf(b,
	           "<rect class=\"plot\" x=\"%.1f\" y=\"%.1f\" "
	           "width=\"%.1f\" height=\"%.1f\" fill=\"#fbfcfd\" "
	           "stroke=\"%s\"/>",
	           m->x0, m->top, m->w, m->h, C_AXIS);
	y_grid(b, m, &yt);
	x_grid(b, m, &xt);
	buf_printf(b,
	           "<text class=\"xlabel\" x=\"%.1f\" y=\"%.1f\" "
	           "font-size=\"11\" fill=\"%s\" text-anchor=\"middle\">",
	           m->x0 + m->w / 2, m->top + m->h + 34, C_TEXT);
	svg_escape(b, xlabel);
	buf_printf(b,
	           "</text><text class=\"ylabel\" x=\"14\" y=\"%.1f\" "
	           "font-size=\"11\" fill=\"%s\" text-anchor=\"middle\" "
	           "transform=\"rotate(-90 14 %.1f)\">",
	           cy, C_TEXT, cy);
	svg_escape(b, ylabel);
	buf_adds(b, "</text>");
	return 0;
}

/* ---- the time-series panel ------------------------------------------- */

/* The value axis: the line values' span (the marks' when there are
 * none), with the battery cutoff level included. */
static void panel_range(const struct svg_panel *p, double *lo, double *hi)
{
	const struct series_stats *st = &p->s->st;
	const struct series_col *c;
	size_t i;

	*lo = HUGE_VAL;
	*hi = -HUGE_VAL;
	if (st->n_line > 0) {
		*lo = st->min;
		*hi = st->max;
	}
	for (i = 0; st->n_line == 0 && i < p->s->ncols; i++) {
		c = &p->s->col[i];
		if (c->n_mark[1] == 0)
			continue;
		*lo = fmin(*lo, c->mark[1][0].v);
		*hi = fmax(*hi, c->mark[1][1].v);
	}
	if (p->bat != NULL && p->bat->cutoff_v > 0) {
		*lo = fmin(*lo, p->bat->cutoff_v);
		*hi = fmax(*hi, p->bat->cutoff_v);
	}
	if (!(*lo <= *hi)) {
		*lo = 0;
		*hi = 1;
	}
}

static void line_path(struct buf *b, const struct map *m,
                      const struct series_pt *pt, size_t n)
{
	bool alone;
	size_t i;

	if (n == 0)
		return;
	buf_printf(b,
	           "<path class=\"line\" fill=\"none\" stroke=\"%s\" "
	           "stroke-width=\"1.3\" stroke-linejoin=\"round\" "
	           "stroke-linecap=\"round\" d=\"",
	           C_LINE);
	for (i = 0; i < n; i++) {
		alone = pt[i].move && (i + 1 == n || pt[i + 1].move);
		buf_printf(b, "%s%.1f %.1f%s",
		           i == 0       ? "M"
		           : pt[i].move ? " M"
		                        : " L",
		           map_x(m, (double)pt[i].t), map_y(m, pt[i].v),
		           alone ? " h0.5" : "");
	}
	buf_adds(b, "\"/>");
}

static void marks3(struct buf *b, const struct map *m,
                   const struct series_pt *pt, size_t n)
{
	size_t i;

	buf_printf(b,
	           "<g class=\"flag3\" fill=\"%s\" stroke=\"%s\" "
	           "stroke-width=\"0.8\">",
	           C_F3, C_F3_EDGE);
	for (i = 0; i < n; i++)
		buf_printf(b, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"3.4\"/>",
		           map_x(m, (double)pt[i].t), map_y(m, pt[i].v));
	buf_adds(b, "</g>");
}

static void marks4(struct buf *b, const struct map *m,
                   const struct series_pt *pt, size_t n)
{
	double x, y;
	size_t i;

	buf_printf(b,
	           "<g class=\"flag4\" fill=\"%s\" stroke=\"%s\" "
	           "stroke-width=\"0.8\">",
	           C_F4, C_F4_EDGE);
	for (i = 0; i < n; i++) {
		x = map_x(m, (double)pt[i].t);
		y = map_y(m, pt[i].v);
		if (pt[i].v > m->v1)
			buf_printf(b,
			           "<path class=\"off-high\" d=\"M%.1f "
			           "%.1f l-4.5 8 h9 z\"/>",
			           x, m->top);
		else if (pt[i].v < m->v0)
			buf_printf(b,
			           "<path class=\"off-low\" d=\"M%.1f "
			           "%.1f l-4.5 -8 h9 z\"/>",
			           x, m->top + m->h);
		else
			buf_printf(b,
			           "<rect x=\"%.1f\" y=\"%.1f\" width=\"7\" "
			           "height=\"7\"/>",
			           x - 3.5, y - 3.5);
	}
	buf_adds(b, "</g>");
}

static void legend(struct buf *b, const struct series_stats *st)
{
	double x = SVG_W - SVG_RIGHT - 300;

	buf_printf(b,
	           "<g class=\"legend\" font-size=\"11\" fill=\"%s\">"
	           "<path d=\"M%.1f 17 h18\" stroke=\"%s\" stroke-width=\"2\"/>"
	           "<text x=\"%.1f\" y=\"21\">values</text>",
	           C_TEXT, x, C_LINE, x + 23);
	buf_printf(b,
	           "<circle cx=\"%.1f\" cy=\"17\" r=\"3.4\" fill=\"%s\" "
	           "stroke=\"%s\" stroke-width=\"0.8\"/><text x=\"%.1f\" "
	           "y=\"21\">suspect (3): %llu</text>",
	           x + 82, C_F3, C_F3_EDGE, x + 90, (unsigned long long)st->n3);
	buf_printf(b,
	           "<rect x=\"%.1f\" y=\"13.5\" width=\"7\" height=\"7\" "
	           "fill=\"%s\" stroke=\"%s\" stroke-width=\"0.8\"/><text "
	           "x=\"%.1f\" y=\"21\">fail (4): %llu</text></g>",
	           x + 184, C_F4, C_F4_EDGE, x + 195,
	           (unsigned long long)st->n4);
}

/* The trend line (clipped to the plot), the cutoff level and the
 * forecast marker of the battery panel. */
static void forecast(struct buf *b, const struct map *m,
                     const struct svg_battery *bt)
{
	char label[32];
	double x;

	svg_time_label(label, sizeof(label), bt->forecast_t, SVG_TF_DAYS);
	if (bt->forecast_t > m->t1) {
		buf_printf(
		    b,
		    "<g class=\"forecast\"><text x=\"%.1f\" "
		    "y=\"%.1f\" font-size=\"11\" fill=\"%s\" "
		    "text-anchor=\"end\">cutoff forecast %s, beyond this "
		    "chart \xe2\x86\x92</text></g>",
		    m->x0 + m->w - 4, m->top + 14, C_TREND, label);
		return;
	}
	x = map_x(m, (double)bt->forecast_t);
	svg_time_label(label, sizeof(label), bt->forecast_t, SVG_TF_MINUTES);
	buf_printf(
	    b,
	    "<g class=\"forecast\"><path d=\"M%.1f %.1f V%.1f\" "
	    "stroke=\"%s\" stroke-width=\"1.5\"/><text x=\"%.1f\" "
	    "y=\"%.1f\" font-size=\"11\" fill=\"%s\" text-anchor=\"end\">"
	    "cutoff forecast %s</text></g>",
	    x, m->top, m->top + m->h, C_TREND, x - 4, m->top + 14, C_TREND,
	    label);
}

static void battery(struct buf *b, const struct map *m,
                    const struct svg_panel *p)
{
	const struct svg_battery *bt = p->bat;
	double y = map_y(m, bt->cutoff_v), ta, tb;

	buf_printf(b,
	           "<g class=\"cutoff\"><path d=\"M%.1f %.1f h%.1f\" "
	           "stroke=\"%s\" stroke-width=\"1\" stroke-dasharray=\"6 4\"/>"
	           "<text x=\"%.1f\" y=\"%.1f\" font-size=\"11\" fill=\"%s\">"
	           "cutoff ",
	           m->x0, y, m->w, C_F4, m->x0 + 6, y - 4, C_F4);
	svg_number(b, bt->cutoff_v, 2);
	buf_adds(b, " V</text></g>");
	if (!bt->has_fit)
		return;
	ta = fmax(bt->fit_from, (double)m->t0);
	tb = bt->has_forecast ? fmin((double)bt->forecast_t, (double)m->t1)
	                      : (double)m->t1;
	buf_printf(b,
	           "<clipPath id=\"clip-%s\"><rect x=\"%.1f\" y=\"%.1f\" "
	           "width=\"%.1f\" height=\"%.1f\"/></clipPath>",
	           p->id, m->x0, m->top, m->w, m->h);
	buf_printf(
	    b,
	    "<path class=\"trend\" clip-path=\"url(#clip-%s)\" "
	    "d=\"M%.1f %.1f L%.1f %.1f\" stroke=\"%s\" "
	    "stroke-width=\"2\" stroke-dasharray=\"8 3\" fill=\"none\"/>",
	    p->id, map_x(m, ta),
	    map_y(m, bt->at_ref + bt->slope_per_s * (ta - bt->t_ref)),
	    map_x(m, tb),
	    map_y(m, bt->at_ref + bt->slope_per_s * (tb - bt->t_ref)), C_TREND);
	if (bt->has_forecast)
		forecast(b, m, bt);
}

static void panel_open(struct buf *b, const struct svg_panel *p,
                       const struct map *m)
{
	buf_printf(
	    b,
	    "<svg xmlns=\"http://www.w3.org/2000/svg\" "
	    "class=\"panel\" id=\"%s\" width=\"%d\" height=\"%d\" "
	    "viewBox=\"0 0 %d %d\" role=\"img\" font-family=\"sans-serif\""
	    " data-value=\"",
	    p->id, SVG_W, SVG_H, SVG_W, SVG_H);
	svg_escape(b, p->value);
	buf_printf(b,
	           "\" data-t0=\"%lld\" data-t1=\"%lld\" data-x0=\"%.1f\" "
	           "data-w=\"%.1f\" data-v0=\"%.17g\" data-v1=\"%.17g\" "
	           "data-top=\"%.1f\" data-h=\"%.1f\" data-gap-s=\"%.1f\">"
	           "<title>",
	           (long long)m->t0, (long long)m->t1, m->x0, m->w, m->v0,
	           m->v1, m->top, m->h, p->gap_s);
	svg_escape(b, p->title);
	buf_printf(b,
	           "</title><rect width=\"%d\" height=\"%d\" fill=\"#fff\"/>"
	           "<text class=\"title\" x=\"%d\" y=\"21\" font-size=\"13\" "
	           "font-weight=\"bold\" fill=\"%s\">",
	           SVG_W, SVG_H, SVG_LEFT, C_TEXT);
	svg_escape(b, p->title);
	buf_adds(b, "</text>");
}

/* Line and marks: one scratch array for all three. */
static int panel_data(struct buf *b, const struct map *m,
                      const struct series *s, double gap_s)
{
	size_t cap = 2 * s->ncols, n;
	struct series_pt *pt = malloc(cap * sizeof(*pt));

	if (pt == NULL)
		return -1;
	n = series_line(s, gap_s, pt, cap);
	line_path(b, m, pt, n);
	n = series_marks(s, 3, pt, cap);
	marks3(b, m, pt, n);
	n = series_marks(s, 4, pt, cap);
	marks4(b, m, pt, n);
	free(pt);
	return 0;
}

int svg_panel_write(struct buf *b, const struct svg_panel *p)
{
	struct svg_ticks yt;
	struct map m;
	double lo, hi;

	if (p->t1 <= p->t0)
		return -1;
	panel_range(p, &lo, &hi);
	if (svg_value_ticks(lo, hi, 5, &yt) < 0)
		return -1;
	m = (struct map){SVG_LEFT, SVG_PLOT_W, SVG_TOP, SVG_PLOT_H,
	                 p->t0,    p->t1,      yt.lo,   yt.hi};
	panel_open(b, p, &m);
	if (axes(b, &m, "time (UTC)", p->ylabel, 5) < 0)
		return -1;
	if (p->bat != NULL)
		battery(b, &m, p);
	if (panel_data(b, &m, p->s, p->gap_s) < 0)
		return -1;
	legend(b, &p->s->st);
	buf_adds(b, "</svg>");
	return 0;
}

/* ---- the scatter panel ----------------------------------------------- */

#define SC_W    560
#define SC_H    440
#define SC_LEFT 76
#define SC_TOP  44

static void scatter_axes(struct buf *b, const struct map *m,
                         const struct svg_ticks *xt, const struct svg_ticks *yt)
{
	double x;
	size_t i;

	buf_printf(b,
	           "<rect class=\"plot\" x=\"%.1f\" y=\"%.1f\" width=\"%.1f\""
	           " height=\"%.1f\" fill=\"#fbfcfd\" stroke=\"%s\"/>",
	           m->x0, m->top, m->w, m->h, C_AXIS);
	y_grid(b, m, yt);
	buf_printf(b, "<g class=\"grid-x\" stroke=\"%s\">", C_GRID);
	for (i = 0; i < xt->n; i++) {
		x = m->x0 + (xt->v[i] - xt->lo) * m->w / (xt->hi - xt->lo);
		buf_printf(b,
		           "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" "
		           "y2=\"%.1f\"/>",
		           x, m->top, x, m->top + m->h);
	}
	buf_printf(b,
	           "</g><g class=\"ticks-x\" font-size=\"11\" fill=\"%s\" "
	           "text-anchor=\"middle\">",
	           C_TEXT);
	for (i = 0; i < xt->n; i++) {
		x = m->x0 + (xt->v[i] - xt->lo) * m->w / (xt->hi - xt->lo);
		buf_printf(b, "<text x=\"%.1f\" y=\"%.1f\">", x,
		           m->top + m->h + 16);
		svg_number(b, xt->v[i], xt->decimals);
		buf_adds(b, "</text>");
	}
	buf_adds(b, "</g>");
}

static void scatter_labels(struct buf *b, const struct svg_scatter *sc,
                           const struct map *m)
{
	double cy = m->top + m->h / 2;

	buf_printf(b,
	           "<text class=\"title\" x=\"%d\" y=\"20\" font-size=\"13\""
	           " font-weight=\"bold\" fill=\"%s\">",
	           SC_LEFT, C_TEXT);
	svg_escape(b, sc->title);
	buf_printf(b,
	           "</text><text class=\"pearson\" x=\"%d\" y=\"36\" "
	           "font-size=\"12\" fill=\"%s\" data-r=\"%.6f\" "
	           "data-n=\"%llu\">",
	           SC_LEFT, C_TEXT, sc->r, (unsigned long long)sc->n_pairs);
	if (isfinite(sc->r))
		buf_printf(b, "Pearson r = %.3f over %llu pairs", sc->r,
		           (unsigned long long)sc->n_pairs);
	else
		buf_adds(b, "Pearson r: not defined (too few pairs)");
	buf_printf(b,
	           "</text><text class=\"xlabel\" x=\"%.1f\" y=\"%.1f\" "
	           "font-size=\"11\" fill=\"%s\" text-anchor=\"middle\">",
	           m->x0 + m->w / 2, m->top + m->h + 34, C_TEXT);
	svg_escape(b, sc->xlabel);
	buf_printf(b,
	           "</text><text class=\"ylabel\" x=\"14\" y=\"%.1f\" "
	           "font-size=\"11\" fill=\"%s\" text-anchor=\"middle\" "
	           "transform=\"rotate(-90 14 %.1f)\">",
	           cy, C_TEXT, cy);
	svg_escape(b, sc->ylabel);
	buf_adds(b, "</text>");
}

int svg_scatter_write(struct buf *b, const struct svg_scatter *sc)
{
	struct svg_ticks xt, yt;
	struct map m;
	size_t i;

	if (svg_value_ticks(sc->xlo, sc->xhi, 6, &xt) < 0 ||
	    svg_value_ticks(sc->ylo, sc->yhi, 6, &yt) < 0)
		return -1;
	m = (struct map){SC_LEFT, SC_W - SC_LEFT - 20,
	                 SC_TOP,  SC_H - SC_TOP - 44,
	                 0,       1,
	                 yt.lo,   yt.hi};
	buf_printf(b,
	           "<svg xmlns=\"http://www.w3.org/2000/svg\" "
	           "class=\"scatter\" id=\"%s\" width=\"%d\" height=\"%d\" "
	           "viewBox=\"0 0 %d %d\" role=\"img\" "
	           "font-family=\"sans-serif\"><title>",
	           sc->id, SC_W, SC_H, SC_W, SC_H);
	svg_escape(b, sc->title);
	buf_printf(b,
	           "</title><rect width=\"%d\" height=\"%d\" fill=\"#fff\"/>",
	           SC_W, SC_H);
	scatter_axes(b, &m, &xt, &yt);
	scatter_labels(b, sc, &m);
	buf_printf(b, "<g class=\"points\" fill=\"%s\" fill-opacity=\"0.45\">",
	           C_LINE);
	for (i = 0; i < sc->n; i++)
		buf_printf(b, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"2\"/>",
		           m.x0 + (sc->x[i] - xt.lo) * m.w / (xt.hi - xt.lo),
		           map_y(&m, sc->y[i]));
	buf_adds(b, "</g></svg>");
	return 0;
}
