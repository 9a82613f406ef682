/*
 * report.c - the report's model: stations, series, pairs, units, the
 * battery forecast; see report.h.
 */
#include "report.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "tidepost/derive.h"

#include "trend.h"

#define DAY_S 86400.0

static const char std_ph[] = "sea_water_ph_reported_on_total_scale";

static const char *const std_oxygen[] = {
    "moles_of_oxygen_per_unit_mass_in_sea_water",
    "mole_concentration_of_dissolved_molecular_oxygen_in_sea_water",
    "mass_concentration_of_oxygen_in_sea_water",
};

/* ---- units ----------------------------------------------------------- */

static char *dup_or_null(const char *s)
{
	return s == NULL ? NULL : strdup(s);
}

const struct report_unit *report_unit_find(const struct report *r,
                                           const char *name)
{
	size_t i;

	for (i = 0; i < r->n_units; i++) {
		if (strcmp(r->unit[i].name, name) == 0)
			return &r->unit[i];
	}
	return NULL;
}

int report_unit_add(struct report *r, const char *name, const char *unit,
                    const char *standard_name)
{
	struct report_unit *u;

	if (name == NULL || report_unit_find(r, name) != NULL)
		return 0;
	if (r->n_units == REPORT_MAX_UNITS) {
		errno = ENOSPC;
		return -1;
	}
	u = &r->unit[r->n_units];
	u->name = strdup(name);
	u->unit = dup_or_null(unit);
	u->standard_name = dup_or_null(standard_name);
	if (u->name == NULL || (unit != NULL && u->unit == NULL) ||
	    (standard_name != NULL && u->standard_name == NULL)) {
		free(u->name);
		free(u->unit);
		free(u->standard_name);
		errno = ENOMEM;
		return -1;
	}
	r->n_units++;
	return 0;
}

/* The layouts' value fields, then the derived values. */
static int units_from_config(struct report *r)
{
	const struct tp_derived_info *d;
	const struct tp_field *f;
	size_t i, j, n;

	for (i = 0; r->cfg != NULL && i < r->cfg->n_layouts; i++) {
		n = tp_layout_n_values(&r->cfg->layouts[i]);
		for (j = 0; j < n; j++) {
			f = tp_layout_field(&r->cfg->layouts[i], j);
			if (f == NULL || f->name == NULL ||
			    f->role != TP_ROLE_VALUE || f->type == TP_T_SKIP)
				continue;
			if (report_unit_add(r, f->name, f->unit,
			                    f->standard_name) < 0)
				return -1;
		}
	}
	for (i = 0; i < TP_DV_N; i++) {
		d = tp_derived_describe((enum tp_derived)i);
		if (d != NULL &&
		    report_unit_add(r, d->name, d->unit, d->standard_name) < 0)
			return -1;
	}
	return 0;
}

/* ---- life ------------------------------------------------------------ */

int report_init(struct report *r, const struct config *cfg, int64_t t0,
                int64_t t1, size_t ncols, const char *only_station)
{
	memset(r, 0, sizeof(*r));
	if (t1 < t0 || t1 - t0 > SERIES_SPAN_MAX || ncols == 0 ||
	    ncols > SERIES_COLS_MAX) {
		errno = EINVAL;
		return -1;
	}
	r->t0 = t0;
	r->t1 = t1;
	r->ncols = ncols;
	r->cfg = cfg;
	r->only_station = only_station;
	r->seen = calloc(REPORT_SEEN_N, sizeof(*r->seen));
	if (r->seen == NULL || units_from_config(r) < 0) {
		report_free(r);
		return -1;
	}
	return 0;
}

void report_free(struct report *r)
{
	size_t i, j;

	if (r == NULL)
		return;
	for (i = 0; i < r->n_st; i++) {
		for (j = 0; j < r->st[i]->n_values; j++) {
			series_free(&r->st[i]->v[j]->s);
			free(r->st[i]->v[j]);
		}
		free(r->st[i]);
	}
	for (i = 0; i < r->n_units; i++) {
		free(r->unit[i].name);
		free(r->unit[i].unit);
		free(r->unit[i].standard_name);
	}
	free(r->seen);
	memset(r, 0, sizeof(*r));
}

/* ---- stations and duplicates ---------------------------------------- */

static const struct cfg_station *station_cfg(const struct config *cfg,
                                             const char *name)
{
	size_t i;

	for (i = 0; cfg != NULL && i < cfg->n_stations; i++) {
		if (cfg->stations[i].name != NULL &&
		    strcmp(cfg->stations[i].name, name) == 0)
			return &cfg->stations[i];
	}
	return NULL;
}

static struct report_station *station_get(struct report *r, const char *name)
{
	struct report_station *st;
	size_t i;

	for (i = 0; i < r->n_st; i++) {
		if (strcmp(r->st[i]->name, name) == 0)
			return r->st[i];
	}
	if (r->n_st == REPORT_MAX_STATIONS || strlen(name) > REPORT_NAME_MAX)
		return NULL;
	st = calloc(1, sizeof(*st));
	if (st == NULL)
		return NULL;
	memcpy(st->name, name, strlen(name) + 1);
	st->cfg = station_cfg(r->cfg, name);
	st->pairs.rng = 0x9e3779b97f4a7c15ull;
	r->st[r->n_st++] = st;
	return st;
}

/* FNV-1a, 64 bits (Fowler, Noll, Vo; IETF draft-eastlake-fnv). */
static uint64_t hash_id(const char *s)
{
	uint64_t h = 0xcbf29ce484222325ull;

	for (; *s != '\0'; s++) {
		h ^= (unsigned char)*s;
		h *= 0x100000001b3ull;
	}
	return h == 0 ? 1 : h;
}

/* true when id was seen recently; else it is remembered. */
static bool seen_before(struct report *r, const char *id)
{
	uint64_t h = hash_id(id);
	size_t i = (size_t)(h % REPORT_SEEN_N);

	while (r->seen[i] != 0) {
		if (r->seen[i] == h)
			return true;
		i = (i + 1) % REPORT_SEEN_N;
	}
	if (r->n_seen >= REPORT_SEEN_N / 2) {
		memset(r->seen, 0, REPORT_SEEN_N * sizeof(*r->seen));
		r->n_seen = 0;
		i = (size_t)(h % REPORT_SEEN_N);
	}
	r->seen[i] = h;
	r->n_seen++;
	return false;
}

bool report_begin(struct report *r, const char *station, int64_t t,
                  const char *id)
{
	r->cur = NULL;
	if (r->only_station != NULL && strcmp(station, r->only_station) != 0) {
		r->counts.other++;
		return false;
	}
	if (t < r->t0 || t > r->t1) {
		r->counts.outside++;
		return false;
	}
	if (id != NULL && seen_before(r, id)) {
		r->counts.duplicates++;
		return false;
	}
	r->cur = station_get(r, station);
	if (r->cur == NULL) {
		r->counts.refused++;
		return false;
	}
	r->cur_t = t;
	r->cur->cur_x_ok = false;
	r->cur->cur_y_ok = false;
	r->cur->readings++;
	r->counts.readings++;
	return true;
}

/* ---- values ---------------------------------------------------------- */

static bool is_oxygen_std(const char *std)
{
	size_t i;

	for (i = 0; std != NULL && i < sizeof(std_oxygen) / sizeof(*std_oxygen);
	     i++) {
		if (strcmp(std, std_oxygen[i]) == 0)
			return true;
	}
	return false;
}

static const char *battery_name(const struct report_station *st)
{
	if (st->cfg != NULL && st->cfg->battery.set &&
	    st->cfg->battery.field != NULL)
		return st->cfg->battery.field;
	return "battery";
}

/* Give a new value its role, if it has one and the role is free. */
static void assign_role(const struct report *r, struct report_station *st,
                        struct report_value *v)
{
	const struct report_unit *u = report_unit_find(r, v->name);
	const char *std = u != NULL ? u->standard_name : NULL;

	if (st->battery == NULL && strcmp(v->name, battery_name(st)) == 0) {
		v->role = REPORT_ROLE_BATTERY;
		st->battery = v;
	} else if (st->ph == NULL &&
	           (strcmp(v->name, "ph") == 0 ||
	            (std != NULL && strcmp(std, std_ph) == 0))) {
		v->role = REPORT_ROLE_PH;
		st->ph = v;
	} else if (st->oxygen == NULL &&
	           (strcmp(v->name, "oxygen") == 0 || is_oxygen_std(std))) {
		v->role = REPORT_ROLE_OXYGEN;
		st->oxygen = v;
	}
}

static struct report_value *
value_get(struct report *r, struct report_station *st, const char *name)
{
	struct report_value *v;
	size_t i, n = strlen(name);

	for (i = 0; i < st->n_values; i++) {
		if (strcmp(st->v[i]->name, name) == 0)
			return st->v[i];
	}
	if (st->n_values == REPORT_MAX_VALUES ||
	    r->n_series == REPORT_MAX_SERIES || n == 0 || n > REPORT_NAME_MAX)
		return NULL;
	v = calloc(1, sizeof(*v));
	if (v == NULL)
		return NULL;
	if (series_init(&v->s, r->t0, r->t1, r->ncols) < 0) {
		free(v);
		return NULL;
	}
	memcpy(v->name, name, n + 1);
	v->order = st->n_values;
	assign_role(r, st, v);
	st->v[st->n_values++] = v;
	r->n_series++;
	return v;
}

void report_value(struct report *r, const char *name, double v, int flag)
{
	struct report_station *st = r->cur;
	struct report_value *rv;
	bool ok = flag != 4 && flag != 9 && isfinite(v);

	if (st == NULL)
		return;
	rv = value_get(r, st, name);
	if (rv == NULL) {
		r->counts.refused++;
		return;
	}
	series_add(&rv->s, r->cur_t, v, flag);
	if (rv == st->ph && ok) {
		st->cur_y = v;
		st->cur_y_ok = true;
	} else if (rv == st->oxygen && ok) {
		st->cur_x = v;
		st->cur_x_ok = true;
	}
}

/* xorshift64* (Vigna 2016, ACM TOMS 42(4):30). */
static uint64_t next_rand(uint64_t *s)
{
	*s ^= *s >> 12;
	*s ^= *s << 25;
	*s ^= *s >> 27;
	return *s * 0x2545f4914f6cdd1dull;
}

static void pairs_add(struct report_pairs *p, double x, double y)
{
	double dx, dy;
	uint64_t j;

	p->n++;
	dx = x - p->mx;
	p->mx += dx / (double)p->n;
	dy = y - p->my;
	p->my += dy / (double)p->n;
	p->sxx += dx * (x - p->mx);
	p->syy += dy * (y - p->my);
	p->sxy += dx * (y - p->my);
	p->xlo = p->n == 1 ? x : fmin(p->xlo, x);
	p->xhi = p->n == 1 ? x : fmax(p->xhi, x);
	p->ylo = p->n == 1 ? y : fmin(p->ylo, y);
	p->yhi = p->n == 1 ? y : fmax(p->yhi, y);
	j = p->n <= REPORT_SAMPLE_N ? p->n - 1 : next_rand(&p->rng) % p->n;
	if (j < REPORT_SAMPLE_N) {
		p->x[j] = x;
		p->y[j] = y;
		if (p->n_sample < REPORT_SAMPLE_N)
			p->n_sample++;
	}
}

void report_end(struct report *r)
{
	struct report_station *st = r->cur;

	if (st != NULL && st->cur_x_ok && st->cur_y_ok)
		pairs_add(&st->pairs, st->cur_x, st->cur_y);
	r->cur = NULL;
}

double report_pearson(const struct report_pairs *p)
{
	if (p->n < 3 || !(p->sxx > 0) || !(p->syy > 0))
		return NAN;
	return p->sxy / sqrt(p->sxx * p->syy);
}

/* ---- order ----------------------------------------------------------- */

static int rank(const char *name)
{
	static const char *const first[] = {
	    "ph",       "oxygen",       "oxygen_saturation", "temperature",
	    "salinity", "conductivity", "battery",           "omega_aragonite"};
	size_t i;

	for (i = 0; i < sizeof(first) / sizeof(first[0]); i++) {
		if (strcmp(name, first[i]) == 0)
			return (int)i;
	}
	return (int)(sizeof(first) / sizeof(first[0]));
}

size_t report_values_sorted(const struct report_station *st,
                            struct report_value **out, size_t cap)
{
	struct report_value *t;
	size_t i, j, n = st->n_values < cap ? st->n_values : cap;

	for (i = 0; i < n; i++)
		out[i] = st->v[i];
	for (i = 1; i < n; i++) { /* insertion sort: stable, n is small */
		t = out[i];
		for (j = i;
		     j > 0 && (rank(out[j - 1]->name) > rank(t->name) ||
		               (rank(out[j - 1]->name) == rank(t->name) &&
		                out[j - 1]->order > t->order));
		     j--)
			out[j] = out[j - 1];
		out[j] = t;
	}
	return n;
}

/* ---- battery --------------------------------------------------------- */

static void battery_settings(const struct report_station *st,
                             struct report_battery *out, double *flat,
                             bool *least_squares)
{
	const struct cfg_battery *b =
	    st->cfg != NULL ? &st->cfg->battery : NULL;

	out->cutoff_v = REPORT_CUTOFF_DEFAULT_V;
	out->cutoff_default = true;
	*flat = REPORT_FLAT_DEFAULT_V_DAY;
	*least_squares = false;
	if (b == NULL || !b->set)
		return;
	if (b->cutoff_v > 0) {
		out->cutoff_v = b->cutoff_v;
		out->cutoff_default = false;
	}
	*flat = b->flat_v_per_day;
	*least_squares = b->fit == CFG_FIT_LEAST_SQUARES;
}

/* Fit pts (t: s from out->last) and judge it. */
static int battery_fit(struct trend_pt *pts, size_t n, bool least_squares,
                       double flat, struct report_battery *out)
{
	struct trend_fit f;
	double *work = NULL, t;
	int rc;

	if (least_squares) {
		rc = trend_least_squares(pts, n, &f);
	} else {
		work = malloc(trend_work_n(n) * sizeof(*work));
		if (work == NULL)
			return -1;
		rc = trend_theil_sen(pts, n, work, trend_work_n(n), &f);
		free(work);
	}
	out->method = least_squares ? "least squares" : "Theil-Sen";
	if (rc < 0) {
		out->state = REPORT_BAT_TOO_FEW;
		return 0;
	}
	out->slope_per_day = f.slope * DAY_S;
	out->at_last = f.at0;
	if (f.at0 <= out->cutoff_v) {
		out->state = REPORT_BAT_BELOW;
	} else if (f.slope >= 0 || -out->slope_per_day < flat ||
	           trend_reach(&f, out->cutoff_v, &t) < 0) {
		out->state = REPORT_BAT_NOT_FALLING;
	} else {
		out->state = REPORT_BAT_FORECAST;
		out->forecast_t = out->last + (int64_t)llround(t);
	}
	return 0;
}

int report_battery(const struct report_station *st, struct report_battery *out)
{
	struct series_mean m[REPORT_TREND_PTS];
	struct trend_pt pts[REPORT_TREND_PTS];
	const struct series *s;
	bool least_squares;
	double flat;
	size_t i, n;

	memset(out, 0, sizeof(*out));
	battery_settings(st, out, &flat, &least_squares);
	if (st->battery == NULL || st->battery->s.st.n_line == 0)
		return 0;
	s = &st->battery->s;
	out->last = s->st.last;
	out->from = out->last - REPORT_TREND_DAYS * 86400LL;
	if (out->from < s->st.first)
		out->from = s->st.first;
	n = series_means(s, out->from, m, REPORT_TREND_PTS);
	out->n_pts = n;
	out->state = REPORT_BAT_TOO_FEW;
	if (n < REPORT_TREND_MIN)
		return 0;
	for (i = 0; i < n; i++)
		pts[i] = (struct trend_pt){m[i].t - (double)out->last, m[i].v};
	return battery_fit(pts, n, least_squares, flat, out);
}
