/*
 * cfgstation.c - the "stations" object: one struct cfg_station per
 * station number, with its QC settings, alkalinity and battery alerts.
 * Value names (qc keys, battery.field, alkalinity.field) are checked
 * against the layouts' value names and the derived values.
 */
#include <string.h>

#include "cfgderive.h"
#include "cfgload.h"

/* "7" -> 7; no sign, no leading zeros, at most 4294967295. */
static int station_number(const char *s, uint32_t *out)
{
	uint64_t v = 0;
	size_t i, n = strlen(s);

	if (n == 0 || n > 10 || (n > 1 && s[0] == '0'))
		return -1;
	for (i = 0; i < n; i++) {
		if (s[i] < '0' || s[i] > '9')
			return -1;
		v = v * 10 + (uint64_t)(s[i] - '0');
	}
	if (v > UINT32_MAX)
		return -1;
	*out = (uint32_t)v;
	return 0;
}

static int alkalinity(struct ld *ld, const cJSON *node, struct config *c,
                      struct cfg_alkalinity *a)
{
	const cJSON *seen[CFG_MAX_OPTS];
	size_t old = ld_key(ld, "alkalinity");
	bool ps, az, v, f;
	int bad;

	bad = opt_apply(ld, &opt_alkalinity, node, a, -1, seen) != 0;
	ps = opt_seen(&opt_alkalinity, seen, "per_salinity") != NULL;
	az = opt_seen(&opt_alkalinity, seen, "at_zero") != NULL;
	v = opt_seen(&opt_alkalinity, seen, "value") != NULL;
	f = opt_seen(&opt_alkalinity, seen, "field") != NULL;
	if (cJSON_IsObject(node) && (ps + v + f != 1 || (az && !ps))) {
		ld_err(ld, node, 0,
		       "%s; give one of {per_salinity, at_zero},"
		       " {value} or {field}",
		       ps + v + f == 0 ? "no alkalinity given"
		                       : "more than one form given");
		bad = 1;
	}
	a->kind = ps  ? CFG_ALK_SALINITY
	          : v ? CFG_ALK_VALUE
	          : f ? CFG_ALK_FIELD
	              : CFG_ALK_NONE;
	if (f && a->field != NULL) {
		size_t o2 = ld_key(ld, "field");

		bad |= cfg_check_value(ld,
		                       opt_seen(&opt_alkalinity, seen, "field"),
		                       0, a->field, c) != 0;
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int battery(struct ld *ld, const cJSON *node, struct config *c,
                   struct cfg_battery *b)
{
	const cJSON *seen[CFG_MAX_OPTS], *n;
	size_t old = ld_key(ld, "battery"), o2;
	int bad;

	bad = opt_apply(ld, &opt_battery, node, b, -1, seen) != 0;
	b->set = true;
	n = opt_seen(&opt_battery, seen, "field");
	if (n != NULL && b->field != NULL) {
		o2 = ld_key(ld, "field");
		bad |= cfg_check_value(ld, n, 0, b->field, c) != 0;
		ld_pop(ld, o2);
	}
	n = opt_seen(&opt_battery, seen, "cutoff_v");
	if (n != NULL && b->warn_v > 0 && b->cutoff_v >= b->warn_v) {
		o2 = ld_key(ld, "cutoff_v");
		ld_err(ld, n, 0,
		       "%.15g is not below warn_v %.15g; the cutoff"
		       " lies below the warning level",
		       b->cutoff_v, b->warn_v);
		ld_pop(ld, o2);
		bad = 1;
	}
	n = opt_seen(&opt_battery, seen, "critical_v");
	if (n != NULL && ((b->warn_v > 0 && b->critical_v >= b->warn_v) ||
	                  b->critical_v <= b->cutoff_v)) {
		o2 = ld_key(ld, "critical_v");
		ld_err(ld, n, 0,
		       "%.15g is not between cutoff_v and warn_v; the"
		       " critical level lies between them",
		       b->critical_v);
		ld_pop(ld, o2);
		bad = 1;
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

/* One {months, range} item of a climatology list. */
static int clim_item(struct ld *ld, const cJSON *el, struct cfg_qc *q,
                     bool *taken)
{
	const cJSON *seen[CFG_MAX_OPTS], *months, *m;
	struct clim_in in = {{false, 0, 0}};
	size_t old, k = 0;
	int bad;

	bad = opt_apply(ld, &opt_climatology, el, &in, -1, seen) != 0;
	months = opt_seen(&opt_climatology, seen, "months");
	if (months == NULL)
		return -1;
	old = ld_key(ld, "months");
	if (!cJSON_IsArray(months) || months->child == NULL) {
		ld_err(ld, months, 0, "expected a list of months 1..12");
		bad = 1;
	}
	for (m = cJSON_IsArray(months) ? months->child : NULL; m != NULL;
	     m = m->next, k++) {
		double d = cJSON_IsNumber(m) ? m->valuedouble : 0;
		int v = d >= 1 && d <= 12 ? (int)d : 0;
		size_t o2 = ld_idx(ld, k);

		if (v == 0 || d != v) {
			ld_err(ld, m, 0, "not a month; valid: 1..12");
			bad = 1;
		} else if (taken[v - 1]) {
			ld_err(ld, m, 0,
			       "month %d given twice; each month has"
			       " one range",
			       v);
			bad = 1;
		} else {
			taken[v - 1] = true;
			q->climatology[v - 1] = in.range;
		}
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int climatology(struct ld *ld, const cJSON *list, struct cfg_qc *q)
{
	bool taken[12] = {false};
	const cJSON *el;
	size_t old = ld_key(ld, "climatology"), k = 0, o2;
	int bad = 0;

	if (!cJSON_IsArray(list)) {
		ld_err(ld, list, 0, "expected a list of {months, range}");
		ld_pop(ld, old);
		return -1;
	}
	for (el = list->child; el != NULL; el = el->next, k++) {
		o2 = ld_idx(ld, k);
		bad |= clim_item(ld, el, q, taken) != 0;
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

/* Settings that only make sense together. */
static int qc_consistent(struct ld *ld, const cJSON **seen,
                         const struct cfg_qc *q)
{
	const char *key = NULL;
	char what[160] = "";
	size_t old;

	if (q->suspect.set && q->fail.set &&
	    (q->suspect.min < q->fail.min || q->suspect.max > q->fail.max)) {
		key = "suspect";
		snprintf(what, sizeof(what),
		         "reaches outside fail [%.15g, "
		         "%.15g]; the suspect range lies inside the fail range",
		         q->fail.min, q->fail.max);
	} else if (q->spike > 0 && q->spike_fail > 0 &&
	           q->spike_fail < q->spike) {
		key = "spike_fail";
		snprintf(what, sizeof(what),
		         "%.15g is below spike %.15g;"
		         " expected spike_fail >= spike",
		         q->spike_fail, q->spike);
	} else if (q->flat_n > 0 && q->flat_fail_n > 0 &&
	           q->flat_fail_n <= q->flat_n) {
		key = "flat_fail_n";
		snprintf(what, sizeof(what),
		         "%u is not above flat_n %u;"
		         " expected flat_fail_n > flat_n",
		         q->flat_fail_n, q->flat_n);
	}
	if (key == NULL)
		return 0;
	old = ld_key(ld, key);
	ld_err(ld, opt_seen(&opt_qc, seen, key), 0, "%s", what);
	ld_pop(ld, old);
	return -1;
}

static int qc_value(struct ld *ld, const cJSON *m, struct config *c,
                    struct cfg_qc *q)
{
	const cJSON *seen[CFG_MAX_OPTS], *n;
	size_t old = ld_key(ld, m->string);
	int bad;

	bad = cfg_check_value(ld, m, 1, m->string, c) != 0;
	bad |= opt_apply(ld, &opt_qc, m, q, -1, seen) != 0;
	q->value = arena_strdup(ld->mem, m->string);
	n = opt_seen(&opt_qc, seen, "climatology");
	if (n != NULL)
		bad |= climatology(ld, n, q) != 0;
	if (!bad)
		bad |= qc_consistent(ld, seen, q) != 0;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int qc(struct ld *ld, const cJSON *obj, struct config *c,
              struct cfg_station *st)
{
	size_t old = ld_key(ld, "qc"), n, i = 0;
	const cJSON *m;
	int bad = 0;

	n = cJSON_IsObject(obj) ? (size_t)cJSON_GetArraySize(obj) : 0;
	if (!cJSON_IsObject(obj) || n > CFG_MAX_ITEMS) {
		ld_err(ld, obj, 0,
		       "expected an object keyed by value name "
		       "(at most %d)",
		       CFG_MAX_ITEMS);
		ld_pop(ld, old);
		return -1;
	}
	st->qc = arena_alloc(ld->mem, (n + 1) * sizeof(*st->qc));
	if (st->qc == NULL) {
		ld_pop(ld, old);
		return -1;
	}
	for (m = obj->child; m != NULL; m = m->next)
		bad |= qc_value(ld, m, c, &st->qc[i++]) != 0;
	st->n_qc = n;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int station_name(struct ld *ld, const cJSON **seen,
                        const struct config *c, const struct cfg_station *st)
{
	const cJSON *n = opt_seen(&opt_station, seen, "name");
	size_t old = ld_key(ld, "name"), i;
	int rc = 0;

	if (!cfg_name_ok(st->name, 32)) {
		ld_err(ld, n, 0,
		       "bad name \"%s\"; valid: [A-Za-z0-9_.-], 1..32"
		       " characters",
		       st->name);
		rc = -1;
	}
	for (i = 0; rc == 0 && i < c->n_stations; i++) {
		if (c->stations[i].name != NULL &&
		    strcmp(c->stations[i].name, st->name) == 0) {
			ld_err(ld, n, 0,
			       "duplicate station name \"%s\" (also "
			       "station %u); names are unique",
			       st->name, c->stations[i].number);
			rc = -1;
		}
	}
	ld_pop(ld, old);
	return rc;
}

static int station(struct ld *ld, const cJSON *m, struct config *c,
                   struct cfg_station *st)
{
	const cJSON *seen[CFG_MAX_OPTS], *n;
	bool lat, lon;
	int bad;

	if (station_number(m->string, &st->number) != 0) {
		ld_err(ld, m, 1,
		       "bad station number \"%s\"; expected a decimal"
		       " number 0..4294967295 without leading zeros",
		       m->string);
		return -1;
	}
	bad = opt_apply(ld, &opt_station, m, st, -1, seen) != 0;
	if (st->name != NULL)
		bad |= station_name(ld, seen, c, st) != 0;
	lat = opt_seen(&opt_station, seen, "lat") != NULL;
	lon = opt_seen(&opt_station, seen, "lon") != NULL;
	if (lat != lon) {
		size_t old = ld_key(ld, lat ? "lon" : "lat");

		ld_err(ld, m, 0, "missing; lat and lon go together");
		ld_pop(ld, old);
		bad = 1;
	}
	st->has_position = lat && lon;
	st->has_depth = opt_seen(&opt_station, seen, "depth_m") != NULL;
	n = opt_seen(&opt_station, seen, "alkalinity");
	bad |= n != NULL && alkalinity(ld, n, c, &st->alkalinity) != 0;
	n = opt_seen(&opt_station, seen, "qc");
	bad |= n != NULL && qc(ld, n, c, st) != 0;
	n = opt_seen(&opt_station, seen, "battery");
	bad |= n != NULL && battery(ld, n, c, &st->battery) != 0;
	bad |= cfg_station_science(ld, m, c, st) != 0; /* cfgderive.c */
	return bad ? -1 : 0;
}

int cfg_stations(struct ld *ld, const cJSON *obj, struct config *c)
{
	const cJSON *m;
	size_t n, old = ld_key(ld, "stations"), o2;
	int bad = 0;

	n = cJSON_IsObject(obj) ? (size_t)cJSON_GetArraySize(obj) : 0;
	if (!cJSON_IsObject(obj) || n > CFG_MAX_STATIONS) {
		ld_err(ld, obj, 0,
		       "expected an object keyed by station number"
		       " (at most %d stations)",
		       CFG_MAX_STATIONS);
		ld_pop(ld, old);
		return -1;
	}
	c->stations = arena_alloc(ld->mem, (n + 1) * sizeof(*c->stations));
	if (c->stations == NULL) {
		ld_pop(ld, old);
		return -1;
	}
	for (m = obj->child; m != NULL; m = m->next) {
		o2 = ld_key(ld, m->string);
		bad |= station(ld, m, c, &c->stations[c->n_stations]) != 0;
		c->n_stations++;
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}
