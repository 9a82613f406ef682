/*
 * reportout.c - the report page (HTML with inline SVG) and the CSV
 * summary; see reportout.h.
 */
#include "reportout.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "buf.h"
#include "emit.h"
#include "svg.h"

#ifndef TP_VERSION
#define TP_VERSION "0.0.0"
#endif

#define ID_MAX 160
#define DAY_S  86400.0

static const char css[] =
    "body{font-family:sans-serif;color:#1f2428;background:#f4f6f8;"
    "margin:0;padding:0 1.5em 2em}"
    "header{border-bottom:3px solid #1d5c8a;margin-bottom:1em}"
    "h1{font-size:1.5em;margin:.6em 0 .2em}"
    "h2{font-size:1.25em;margin:1.4em 0 .3em;color:#1d5c8a}"
    "h3{font-size:1.05em;margin:1.2em 0 .4em}"
    ".meta,.note{color:#4a5560;font-size:.9em}"
    "section.station{background:#fff;border:1px solid #d5dce2;"
    "border-radius:6px;padding:.4em 1.2em 1.2em;margin:1em 0}"
    "table.summary{border-collapse:collapse;font-size:.88em;"
    "margin:.5em 0}"
    "table.summary th,table.summary td{border:1px solid #d5dce2;"
    "padding:.25em .6em;text-align:right}"
    "table.summary th{background:#eaf0f5}"
    "table.summary td.name,table.summary td.unit{text-align:left}"
    "tr.warn td.f4{background:#fbe3e3}"
    "figure{margin:.6em 0}svg{max-width:100%;height:auto}"
    "p.battery{border-left:4px solid #6a3d9a;padding:.3em .8em;"
    "background:#f5f0fa}"
    "footer{margin-top:2em;font-size:.82em;color:#4a5560}";

/* ---- words ----------------------------------------------------------- */

const char *reportout_label(const char *name)
{
	static const char *const map[][2] = {
	    {"ph", "pH"},
	    {"oxygen", "dissolved oxygen"},
	    {"oxygen_saturation", "oxygen saturation"},
	    {"oxygen_solubility", "oxygen solubility"},
	    {"temperature", "temperature"},
	    {"salinity", "practical salinity"},
	    {"conductivity", "conductivity"},
	    {"battery", "battery voltage"},
	    {"omega_aragonite", "aragonite saturation \xce\xa9"},
	    {"omega_calcite", "calcite saturation \xce\xa9"},
	    {"pco2", "pCO\xe2\x82\x82"},
	    {"fco2", "fCO\xe2\x82\x82"},
	    {"dic", "dissolved inorganic carbon"},
	    {"alkalinity", "total alkalinity"},
	};
	size_t i;

	for (i = 0; i < sizeof(map) / sizeof(map[0]); i++) {
		if (strcmp(name, map[i][0]) == 0)
			return map[i][1];
	}
	return name;
}

const char *reportout_unit(const char *unit)
{
	static const char *const map[][2] = {
	    {"degC", "\xc2\xb0"
	             "C"},
	    {"umol/kg", "\xc2\xb5mol/kg"},
	    {"umol/L", "\xc2\xb5mol/L"},
	    {"uatm", "\xc2\xb5"
	             "atm"},
	    {"uS/cm", "\xc2\xb5S/cm"},
	};
	size_t i;

	if (unit == NULL)
		return NULL;
	for (i = 0; i < sizeof(map) / sizeof(map[0]); i++) {
		if (strcmp(unit, map[i][0]) == 0)
			return map[i][1];
	}
	return unit;
}

static const char *unit_of(const struct report *r, const char *name)
{
	const struct report_unit *u = report_unit_find(r, name);

	return u != NULL ? reportout_unit(u->unit) : NULL;
}

/* An id made of [A-Za-z0-9_-] only. */
static void make_id(char *out, size_t cap, const char *a, const char *b)
{
	size_t o = 0;
	const char *s;
	int part;

	for (part = 0; part < 3 && o + 1 < cap; part++) {
		s = part == 0 ? "p" : part == 1 ? a : b;
		if (part > 0)
			out[o++] = '-';
		for (; *s != '\0' && o + 1 < cap; s++) {
			bool ok = (*s >= 'a' && *s <= 'z') ||
			          (*s >= 'A' && *s <= 'Z') ||
			          (*s >= '0' && *s <= '9') || *s == '_';
			out[o++] = ok ? *s : '_';
		}
	}
	out[o] = '\0';
}

static int flush(FILE *fp, struct buf *b)
{
	if (buf_failed(b)) {
		errno = EMSGSIZE;
		return -1;
	}
	if (b->len > 0 && fwrite(b->data, 1, b->len, fp) != b->len)
		return -1;
	buf_reset(b);
	return 0;
}

static void time_text(struct buf *b, int64_t t)
{
	emit_time(b, t);
}

/* ---- the summary table ---------------------------------------------- */

static void share(struct buf *b, const char *cls, uint64_t k, uint64_t n)
{
	buf_printf(b, "<td class=\"%s\" data-n=\"%llu\">%llu", cls,
	           (unsigned long long)k, (unsigned long long)k);
	if (n > 0)
		buf_printf(b, " (%.1f %%)", 100.0 * (double)k / (double)n);
	buf_adds(b, "</td>");
}

static void summary_row(struct buf *b, const struct report *r,
                        const struct report_value *v)
{
	const struct series_stats *st = &v->s.st;
	const char *unit = unit_of(r, v->name);
	int d = st->decimals;

	buf_adds(b, "<tr data-value=\"");
	svg_escape(b, v->name);
	buf_printf(b, "\"%s><td class=\"name\">",
	           st->n4 > 0 ? " class=\"warn\"" : "");
	svg_escape(b, reportout_label(v->name));
	buf_adds(b, "</td><td class=\"unit\">");
	svg_escape(b, unit != NULL ? unit : "?");
	buf_printf(b, "</td><td class=\"count\">%llu</td>",
	           (unsigned long long)st->n);
	buf_adds(b, "<td class=\"min\">");
	if (st->n_line > 0)
		svg_number(b, st->min, d);
	buf_adds(b, "</td><td class=\"mean\">");
	if (st->n_line > 0)
		svg_number(b, st->sum / (double)st->n_line, d + 1);
	buf_adds(b, "</td><td class=\"max\">");
	if (st->n_line > 0)
		svg_number(b, st->max, d);
	buf_adds(b, "</td>");
	share(b, "f3", st->n3, st->n + st->n9);
	share(b, "f4", st->n4, st->n + st->n9);
	share(b, "missing", st->n9, st->n + st->n9);
	buf_adds(b, "<td class=\"first\">");
	if (st->n > 0)
		time_text(b, st->first);
	buf_adds(b, "</td><td class=\"last\">");
	if (st->n > 0)
		time_text(b, st->last);
	buf_adds(b, "</td></tr>");
}

static void summary(struct buf *b, const struct report *r,
                    struct report_value *const *v, size_t n,
                    const char *station)
{
	size_t i;

	buf_adds(b, "<table class=\"summary\" data-station=\"");
	svg_escape(b, station);
	buf_adds(b, "\"><thead><tr><th>value</th><th>unit</th><th>count</th>"
	            "<th>min</th><th>mean</th><th>max</th><th>suspect (3)</th>"
	            "<th>fail (4)</th><th>missing</th><th>first</th>"
	            "<th>last</th></tr></thead><tbody>");
	for (i = 0; i < n; i++)
		summary_row(b, r, v[i]);
	buf_adds(b, "</tbody></table>");
}

/* ---- battery --------------------------------------------------------- */

static void battery_words(struct buf *b, const struct report_battery *bt)
{
	buf_printf(
	    b, "Battery trend (%s over %.1f days, %zu points): ", bt->method,
	    (double)(bt->last - bt->from) / DAY_S, bt->n_pts);
	buf_printf(b, "%+.3f V/day, %.2f V at ", bt->slope_per_day,
	           bt->at_last);
	time_text(b, bt->last);
	if (bt->state == REPORT_BAT_FORECAST) {
		buf_printf(b,
		           "; reaches the cutoff of %.2f V at "
		           "<time class=\"forecast\" data-t=\"%lld\">",
		           bt->cutoff_v, (long long)bt->forecast_t);
		time_text(b, bt->forecast_t);
		buf_printf(b, "</time> (%.1f days after the last reading).",
		           (double)(bt->forecast_t - bt->last) / DAY_S);
	} else if (bt->state == REPORT_BAT_BELOW) {
		buf_printf(b, "; at or below the cutoff of %.2f V.",
		           bt->cutoff_v);
	} else {
		buf_printf(b,
		           "; not falling toward the cutoff of %.2f V: no "
		           "forecast.",
		           bt->cutoff_v);
	}
}

static void battery_note(struct buf *b, const struct report_station *st,
                         const struct report_battery *bt)
{
	if (bt->state == REPORT_BAT_NONE)
		return;
	buf_printf(b, "<p class=\"battery\" data-state=\"%d\">", bt->state);
	if (bt->state == REPORT_BAT_TOO_FEW)
		buf_printf(b,
		           "Battery: too few readings in the last %d days "
		           "for a trend (cutoff %.2f V).",
		           REPORT_TREND_DAYS, bt->cutoff_v);
	else
		battery_words(b, bt);
	if (bt->cutoff_default)
		buf_adds(b,
		         " The cutoff is the common 6 V default: the "
		         "config gives no battery.cutoff_v for this station.");
	buf_adds(b, "</p>");
	(void)st;
}

static void battery_svg(const struct report_battery *bt, struct svg_battery *sb,
                        int64_t *t1, int64_t t0)
{
	int64_t span = *t1 - t0;

	memset(sb, 0, sizeof(*sb));
	sb->cutoff_v = bt->cutoff_v;
	if (bt->state != REPORT_BAT_FORECAST &&
	    bt->state != REPORT_BAT_NOT_FALLING &&
	    bt->state != REPORT_BAT_BELOW)
		return;
	sb->has_fit = true;
	sb->slope_per_s = bt->slope_per_day / DAY_S;
	sb->at_ref = bt->at_last;
	sb->t_ref = (double)bt->last;
	sb->fit_from = (double)bt->from;
	if (bt->state != REPORT_BAT_FORECAST)
		return;
	sb->has_forecast = true;
	sb->forecast_t = bt->forecast_t;
	if (bt->forecast_t > *t1 && bt->forecast_t - *t1 <= span)
		*t1 = bt->forecast_t + span / 50 + 1;
}

/* ---- panels ---------------------------------------------------------- */

static int value_panel(struct buf *b, const struct report *r,
                       const struct report_station *st,
                       const struct report_value *v,
                       const struct report_battery *bt)
{
	char id[ID_MAX], title[2 * REPORT_NAME_MAX + 64];
	char ylabel[2 * REPORT_NAME_MAX + 64];
	const char *unit = unit_of(r, v->name);
	const char *label = reportout_label(v->name);
	struct svg_battery sb;
	struct svg_panel p;

	make_id(id, sizeof(id), st->name, v->name);
	if (strcmp(label, v->name) == 0)
		snprintf(title, sizeof(title), "%s", label);
	else
		snprintf(title, sizeof(title), "%s (%s)", label, v->name);
	snprintf(ylabel, sizeof(ylabel), "%s (%s)", label,
	         unit != NULL ? unit : "unit unknown");
	p = (struct svg_panel){id,    v->name, title, ylabel,
	                       &v->s, r->t0,   r->t1, series_gap_s(&v->s),
	                       NULL};
	if (v == st->battery && bt->state != REPORT_BAT_NONE) {
		battery_svg(bt, &sb, &p.t1, p.t0);
		p.bat = &sb;
	}
	if (p.t1 <= p.t0)
		p.t1 = p.t0 + 1;
	buf_adds(b, "<figure class=\"value\">");
	if (svg_panel_write(b, &p) < 0)
		return -1;
	buf_adds(b, "</figure>");
	return 0;
}

static int scatter(struct buf *b, const struct report *r,
                   const struct report_station *st)
{
	const struct report_pairs *pr = &st->pairs;
	char id[ID_MAX], xl[REPORT_NAME_MAX + 64], yl[REPORT_NAME_MAX + 64];
	const char *xu = unit_of(r, st->oxygen->name);
	const char *yu = unit_of(r, st->ph->name);
	struct svg_scatter sc;

	make_id(id, sizeof(id), st->name, "ph-oxygen");
	snprintf(xl, sizeof(xl), "%s (%s)", reportout_label(st->oxygen->name),
	         xu != NULL ? xu : "unit unknown");
	snprintf(yl, sizeof(yl), "%s (%s)", reportout_label(st->ph->name),
	         yu != NULL ? yu : "unit unknown");
	sc = (struct svg_scatter){
	    id,           "pH against oxygen", xl,    yl,      pr->x,   pr->y,
	    pr->n_sample, report_pearson(pr),  pr->n, pr->xlo, pr->xhi, pr->ylo,
	    pr->yhi};
	buf_adds(b,
	         "<h3>pH against oxygen</h3><p class=\"note\">Pairs from "
	         "the same reading, neither missing nor flagged 4; a "
	         "strongly positive r is the expected day-night signal of "
	         "photosynthesis and respiration.</p><figure class=\"pairs\">");
	if (svg_scatter_write(b, &sc) < 0)
		return -1;
	buf_adds(b, "</figure>");
	return 0;
}

/* ---- the page -------------------------------------------------------- */

static void station_head(struct buf *b, const struct report_station *st)
{
	buf_adds(b, "<section class=\"station\" data-station=\"");
	svg_escape(b, st->name);
	buf_adds(b, "\"><h2>Station ");
	svg_escape(b, st->name);
	if (st->cfg != NULL && st->cfg->title != NULL) {
		buf_adds(b, ": ");
		svg_escape(b, st->cfg->title);
	}
	buf_printf(b, "</h2><p class=\"meta\">%llu readings.</p>",
	           (unsigned long long)st->readings);
}

static int station(FILE *fp, struct buf *b, const struct report *r,
                   const struct report_station *st)
{
	struct report_value *v[REPORT_MAX_VALUES];
	struct report_battery bt;
	size_t i, n = report_values_sorted(st, v, REPORT_MAX_VALUES);

	if (report_battery(st, &bt) < 0)
		return -1;
	station_head(b, st);
	battery_note(b, st, &bt);
	summary(b, r, v, n, st->name);
	buf_adds(b, "<h3>Time series</h3>");
	for (i = 0; i < n; i++) {
		if (value_panel(b, r, st, v[i], &bt) < 0 || flush(fp, b) < 0)
			return -1;
	}
	if (st->ph != NULL && st->oxygen != NULL && st->pairs.n > 0 &&
	    scatter(b, r, st) < 0)
		return -1;
	buf_adds(b, "</section>");
	return flush(fp, b);
}

static void page_head(struct buf *b, const struct report *r,
                      const struct reportout_info *info)
{
	buf_adds(b, "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/"
	            "xhtml\" lang=\"en\"><head><meta charset=\"utf-8\"/>"
	            "<meta name=\"viewport\" content=\"width=device-width, "
	            "initial-scale=1\"/><title>tidepost report ");
	time_text(b, r->t0);
	buf_adds(b, " to ");
	time_text(b, r->t1);
	buf_printf(b,
	           "</title><style>%s</style></head><body><header>"
	           "<h1>Station report</h1><p class=\"meta\">From <time>",
	           css);
	time_text(b, r->t0);
	buf_adds(b, "</time> to <time>");
	time_text(b, r->t1);
	buf_printf(b, "</time> (UTC; %s). Made ",
	           info->range_given ? "as asked" : "the span of the data");
	time_text(b, info->generated_s);
	buf_adds(b, " by tidepost " TP_VERSION " from ");
	svg_escape(b, info->inputs != NULL ? info->inputs : "?");
	buf_printf(b, ": %llu readings, %llu duplicates dropped",
	           (unsigned long long)r->counts.readings,
	           (unsigned long long)r->counts.duplicates);
	if (info->in != NULL)
		buf_printf(b, ", %llu bad lines, %llu bad frames",
		           (unsigned long long)info->in->bad_lines,
		           (unsigned long long)info->in->bad_frames);
	buf_adds(b, ".</p></header>");
}

static void page_foot(struct buf *b)
{
	buf_printf(b,
	           "<footer><p>Flags are QARTOD codes: 1 pass, 2 not "
	           "evaluated, 3 suspect (orange circles), 4 fail (red "
	           "squares; triangles at the edge when off the axis), 9 "
	           "missing. Failed values are left out of the line and of "
	           "min, mean and max. The line breaks where consecutive "
	           "values lie more than %.1f times the median step apart. "
	           "Each panel keeps the lowest and highest value of every "
	           "pixel column and every flagged point (at most two per "
	           "column and flag). Times are UTC.</p></footer></body>"
	           "</html>\n",
	           SERIES_GAP_FACTOR);
}

int reportout_html(FILE *fp, const struct report *r,
                   const struct reportout_info *info)
{
	struct buf b;
	size_t i;
	int rc = 0;

	buf_init(&b, REPORTOUT_CHUNK_MAX);
	page_head(&b, r, info);
	for (i = 0; i < r->n_st && rc == 0; i++)
		rc = station(fp, &b, r, r->st[i]);
	if (rc == 0) {
		page_foot(&b);
		rc = flush(fp, &b);
	}
	buf_free(&b);
	return rc;
}

/* ---- CSV ------------------------------------------------------------- */

static void csv_cell(struct buf *b, const char *s)
{
	emit_csv_cell(b, s, strlen(s));
	buf_addc(b, ',');
}

static void csv_row(struct buf *b, const struct report *r,
                    const struct report_station *st,
                    const struct report_value *v)
{
	const struct series_stats *s = &v->s.st;
	const struct report_unit *u = report_unit_find(r, v->name);

	csv_cell(b, st->name);
	csv_cell(b, v->name);
	csv_cell(b, u != NULL && u->unit != NULL ? u->unit : "");
	buf_printf(b, "%llu,", (unsigned long long)s->n);
	if (s->n_line > 0) {
		svg_number(b, s->min, s->decimals);
		buf_addc(b, ',');
		svg_number(b, s->sum / (double)s->n_line, s->decimals + 1);
		buf_addc(b, ',');
		svg_number(b, s->max, s->decimals);
		buf_addc(b, ',');
	} else {
		buf_adds(b, ",,,");
	}
	buf_printf(b, "%llu,%llu,%llu,", (unsigned long long)s->n3,
	           (unsigned long long)s->n4, (unsigned long long)s->n9);
	if (s->n > 0)
		emit_time(b, s->first);
	buf_addc(b, ',');
	if (s->n > 0)
		emit_time(b, s->last);
	buf_adds(b, "\r\n");
}

int reportout_csv(FILE *fp, const struct report *r)
{
	struct report_value *v[REPORT_MAX_VALUES];
	struct buf b;
	size_t i, j, n;
	int rc = 0;

	buf_init(&b, REPORTOUT_CHUNK_MAX);
	buf_adds(&b, "station,value,unit,count,min,mean,max,flagged_3,"
	             "flagged_4,missing,first,last\r\n");
	for (i = 0; i < r->n_st && rc == 0; i++) {
		n = report_values_sorted(r->st[i], v, REPORT_MAX_VALUES);
		for (j = 0; j < n; j++)
			csv_row(&b, r, r->st[i], v[j]);
		rc = flush(fp, &b);
	}
	buf_free(&b);
	return rc;
}
