/*
 * report.h - what `tidepost report` learns from the readings, in bounded
 * memory: per station and value a series (series.h: statistics and pixel
 * columns over one fixed time range), the pH-oxygen pairs (Pearson r
 * over all of them and a fixed-size sample to draw), the battery trend
 * and its cutoff forecast, and the units of every value.
 *
 * Owns: the stations, their series, the unit table, the set of recent
 * reading ids; report_free releases all.  Borrows the config (may be
 * NULL), which must outlive the report.
 *
 * Feeding it: report_begin (station, time, id) -> report_value per value
 * -> report_end.  Memory does not grow with the number of readings: at
 * most REPORT_MAX_STATIONS stations and REPORT_MAX_SERIES series of
 * SVG_PLOT_W columns each (about 125 KB a series); further stations or
 * values are counted and skipped, not kept.
 *
 * Choices (the README states them):
 * - A reading is kept when its time lies in [t0, t1] (both inclusive)
 *   and, with a station filter, its station text equals it.
 * - Duplicates (the same reading id again, as at-least-once delivery and
 *   the file output after a crash may write) are dropped while they come
 *   within REPORT_SEEN_N / 2 readings of each other (a table of id
 *   hashes, emptied when half full).  Readings without an id are kept.
 * - Units: from the config's layouts, then the derived values' table
 *   (derive.h), then any `quantities` table in the input; first wins.
 * - pH is the value named "ph" (else the first with the CF name
 *   sea_water_ph_reported_on_total_scale); oxygen the value named
 *   "oxygen" (else the first with a CF dissolved-oxygen name).  A pair
 *   is both from one reading, neither missing nor flagged 4.  Pearson's
 *   r uses every pair (Welford's running co-moments, Welford 1962,
 *   Technometrics 4:419-420); the scatter draws a uniform sample of
 *   REPORT_SAMPLE_N pairs (reservoir sampling, Vitter 1985, ACM TOMS
 *   11:37-57, "algorithm R"; fixed seed, so a report is reproducible).
 * - Battery: the value named by the station's battery.field (default
 *   "battery"); cutoff the station's battery.cutoff_v, default 6 V
 *   (common practice for 12 V lead-acid packs, no source).  The trend is
 *   fitted over the last REPORT_TREND_DAYS days of battery readings (or
 *   all of them if they span less), on the pixel columns' means (at most
 *   REPORT_TREND_PTS points), with the station's battery.fit (Theil-Sen
 *   by default, trend.h); at least REPORT_TREND_MIN points are needed.
 *   A fall flatter than battery.flat_v_per_day (the config's, default
 *   0.02 V/day as there) or a rising line gives no forecast.
 *
 * Called by reportin.c (feeding), reportout.c (writing) and
 * cmd_report.c.
 */
#ifndef TIDEPOST_REPORT_H
#define TIDEPOST_REPORT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "config.h"
#include "series.h"

#define REPORT_MAX_STATIONS       64
#define REPORT_MAX_VALUES         96 /* per station */
#define REPORT_MAX_SERIES         256
#define REPORT_NAME_MAX           64
#define REPORT_MAX_UNITS          512
#define REPORT_SAMPLE_N           2000
#define REPORT_SEEN_N             32768
#define REPORT_TREND_DAYS         7
#define REPORT_TREND_PTS          240
#define REPORT_TREND_MIN          6
#define REPORT_CUTOFF_DEFAULT_V   6.0
#define REPORT_FLAT_DEFAULT_V_DAY 0.02

enum report_role {
	REPORT_ROLE_NONE = 0,
	REPORT_ROLE_PH,
	REPORT_ROLE_OXYGEN,
	REPORT_ROLE_BATTERY
};

struct report_value {
	char name[REPORT_NAME_MAX + 1];
	enum report_role role;
	size_t order; /* first appearance */
	struct series s;
};

struct report_pairs {
	uint64_t n;
	double mx, my, sxx, syy, sxy; /* Welford's running moments */
	double xlo, xhi, ylo, yhi;
	size_t n_sample;
	double x[REPORT_SAMPLE_N], y[REPORT_SAMPLE_N];
	uint64_t rng;
};

struct report_station {
	char name[REPORT_NAME_MAX + 1];
	const struct cfg_station *cfg; /* NULL: not in the config */
	uint64_t readings;
	struct report_value *v[REPORT_MAX_VALUES];
	size_t n_values;
	struct report_value *ph, *oxygen, *battery;
	struct report_pairs pairs;
	bool cur_x_ok, cur_y_ok; /* this reading's oxygen, pH */
	double cur_x, cur_y;
};

struct report_unit {
	char *name, *unit, *standard_name; /* owned; unit/std may be NULL */
};

struct report_counts {
	uint64_t readings;   /* kept */
	uint64_t duplicates; /* dropped: id seen before */
	uint64_t outside;    /* dropped: time outside the range */
	uint64_t other;      /* dropped: another station (--station) */
	uint64_t refused;    /* readings or values beyond the caps */
};

struct report {
	int64_t t0, t1;
	size_t ncols;
	const char *only_station; /* NULL: every station */
	const struct config *cfg; /* borrowed, may be NULL */
	struct report_station *st[REPORT_MAX_STATIONS];
	size_t n_st;
	size_t n_series;
	struct report_unit unit[REPORT_MAX_UNITS];
	size_t n_units;
	uint64_t *seen; /* REPORT_SEEN_N id hashes, 0 empty */
	size_t n_seen;
	struct report_counts counts;
	struct report_station *cur; /* the reading being fed, or NULL */
	int64_t cur_t;
};

/* Empty report over [t0, t1] with ncols columns per series.  0, or -1
 * with errno (EINVAL bad range, ENOMEM). */
int report_init(struct report *r, const struct config *cfg, int64_t t0,
                int64_t t1, size_t ncols, const char *only_station)
    __attribute__((warn_unused_result));

/* Release everything; a zeroed report and NULL are fine. */
void report_free(struct report *r);

/* A unit from a `quantities` table (kept only if name has none yet).
 * 0, or -1 when out of memory or the table is full. */
int report_unit_add(struct report *r, const char *name, const char *unit,
                    const char *standard_name)
    __attribute__((warn_unused_result));

/* The unit entry of a value name, or NULL. */
const struct report_unit *report_unit_find(const struct report *r,
                                           const char *name);

/* Start a reading.  id may be NULL (no duplicate check).  true: feed
 * its values, then report_end; false: the reading is skipped (counted),
 * report_value and report_end do nothing until the next begin. */
bool report_begin(struct report *r, const char *station, int64_t t,
                  const char *id);

/* One value of the current reading (flag: QARTOD 1..4, 9). */
void report_value(struct report *r, const char *name, double v, int flag);

void report_end(struct report *r);

/* The station's values in report order: pH, oxygen, oxygen saturation,
 * temperature, salinity, conductivity, battery, aragonite saturation,
 * then the others in order of first appearance.  Returns n. */
size_t report_values_sorted(const struct report_station *st,
                            struct report_value **out, size_t cap);

/* Pearson r of the pairs, NaN with fewer than 3 or no spread. */
double report_pearson(const struct report_pairs *p);

enum report_bat_state {
	REPORT_BAT_NONE = 0, /* no battery value */
	REPORT_BAT_TOO_FEW,  /* too few points for a trend */
	REPORT_BAT_NOT_FALLING,
	REPORT_BAT_BELOW,   /* the fitted line is at or below cutoff now */
	REPORT_BAT_FORECAST /* reaches cutoff at forecast_t */
};

struct report_battery {
	enum report_bat_state state;
	double cutoff_v;
	bool cutoff_default; /* no cutoff_v in the config: 6 V */
	const char *method;  /* "Theil-Sen" or "least squares" */
	size_t n_pts;
	int64_t from, last;   /* the window fitted */
	double slope_per_day; /* V per day */
	double at_last;       /* the line's value at `last` */
	int64_t forecast_t;
};

/* Fit the station's battery trend.  0, or -1 when out of memory. */
int report_battery(const struct report_station *st, struct report_battery *out)
    __attribute__((warn_unused_result));

#endif
