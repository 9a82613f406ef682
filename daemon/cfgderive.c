/*
 * cfgderive.c - the science keys of a station: QC settings resolved into
 * tp_qc_value_cfg, derivation settings into tp_derive_cfg, and the
 * binding of the latter to every layout checked (see cfgderive.h).
 */
#include <math.h>
#include <string.h>

#include "tidepost/derive.h"
#include "tidepost/qc.h"

#include "cfgderive.h"

#define CFGD_WINDOW_H_MAX 8760       /* one year, the tables' limit */
#define CFGD_FLAT_N_MAX   TP_QC_HIST /* REP_CNT = flat_n - 1 <= 63 */

static const cJSON *member(const cJSON *obj, const char *key)
{
	return cJSON_IsObject(obj) ? cJSON_GetObjectItemCaseSensitive(obj, key)
	                           : NULL;
}

static struct tp_qc_span span(struct cfg_range r)
{
	struct tp_qc_span s;

	s.set = r.set;
	s.min = r.min;
	s.max = r.max;
	return s;
}

/* Report at member `key` of obj (or at obj itself when absent). */
static void err_at(struct ld *ld, const cJSON *obj, const char *key,
                   const char *what)
{
	const cJSON *n = key != NULL ? member(obj, key) : NULL;
	size_t old = n != NULL ? ld_key(ld, key) : ld->plen;

	ld_err(ld, n != NULL ? n : obj, 0, "%s", what);
	ld_pop(ld, old);
}

/* ---- qc ---------------------------------------------------------------- */

/* qc.VALUE.multi_variate into q->base and q->mv_with. */
static int multi_variate(struct ld *ld, const cJSON *n, const struct config *c,
                         struct cfg_qc *q)
{
	const cJSON *seen[CFG_MAX_OPTS];
	struct mv_in mv;
	size_t old = ld_key(ld, "multi_variate");
	int bad;

	memset(&mv, 0, sizeof(mv));
	bad = opt_apply(ld, &opt_multi_variate, n, &mv, -1, seen) != 0;
	if (!bad && mv.with != NULL) {
		size_t o2 = ld_key(ld, "with");
		const cJSON *w = opt_seen(&opt_multi_variate, seen, "with");

		bad = cfg_check_value(ld, w, 0, mv.with, c) != 0;
		if (!bad && q->value != NULL &&
		    strcmp(mv.with, q->value) == 0) {
			ld_err(ld, w, 0,
			       "\"%s\" is the value itself; valid: another "
			       "value measured with it, e.g. temperature",
			       mv.with);
			bad = 1;
		}
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	if (bad)
		return -1;
	q->mv_with = mv.with;
	q->base.mv_n_dev = mv.n_dev;
	q->base.mv_peer_n_dev = mv.with_n_dev;
	q->base.mv_window_s = (int64_t)llround(mv.window_h * 3600.0);
	return 0;
}

/* The settings that need no layout. */
static void qc_base(const struct cfg_station *st, struct cfg_qc *q)
{
	struct tp_qc_value_cfg *b = &q->base;
	int m;

	memset(b, 0, sizeof(*b));
	b->sensor = span(q->fail);
	b->user = span(q->suspect);
	for (m = 0; m < 12; m++)
		b->climatology[m] = span(q->climatology[m]);
	b->spike_low = q->spike;
	b->spike_high = q->spike_fail;
	b->roc_n_dev = q->rate_n_dev;
	b->roc_window_s = (int64_t)llround(q->rate_window_h * 3600.0);
	b->rate_per_h = q->rate_per_h;
	b->flat_suspect_n = q->flat_n > 0 ? q->flat_n - 1 : 0;
	b->flat_fail_n = q->flat_fail_n > 0 ? q->flat_fail_n - 1 : 0;
	b->flat_eps = q->flat_eps; /* 0: per layout (process.c) */
	b->gap_s =
	    q->gap_s > 0 ? (int64_t)q->gap_s : 2 * (int64_t)st->expect_every_s;
}

/* The key a QARTOD test's settings live under. */
static const char *test_key(enum tp_qc_test t)
{
	static const char *const keys[TP_QC_N_TESTS] = {
	    "fail",   "climatology",   "spike", "rate_n_dev",
	    "flat_n", "multi_variate", "gap_s", NULL};

	return (unsigned)t < TP_QC_N_TESTS ? keys[t] : NULL;
}

static int qc_check(struct ld *ld, const cJSON *m, const struct cfg_qc *q)
{
	struct tp_qc_problem pb;
	char what[200];
	const char *k = q->flat_n > CFGD_FLAT_N_MAX        ? "flat_n"
	                : q->flat_fail_n > CFGD_FLAT_N_MAX ? "flat_fail_n"
	                                                   : NULL;

	if (k != NULL) {
		snprintf(what, sizeof(what),
		         "%u equal values in a row is more than the history "
		         "holds; valid: 2..%d",
		         strcmp(k, "flat_n") == 0 ? q->flat_n : q->flat_fail_n,
		         CFGD_FLAT_N_MAX);
		err_at(ld, m, k, what);
		return -1;
	}
	if (tp_qc_cfg_check(&q->base, &pb) == TP_OK)
		return 0;
	snprintf(what, sizeof(what), "%s (QARTOD %s test)", pb.what,
	         tp_qc_test_name(pb.test));
	err_at(ld, m, test_key(pb.test), what);
	return -1;
}

static int qc_entry(struct ld *ld, const cJSON *m, const struct config *c,
                    const struct cfg_station *st, struct cfg_qc *q)
{
	const cJSON *mv = member(m, "multi_variate");
	size_t old = ld_key(ld, q->value);
	int bad = 0;

	qc_base(st, q);
	if (mv != NULL)
		bad = multi_variate(ld, mv, c, q) != 0;
	if (!bad)
		bad = qc_check(ld, m, q) != 0;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int qc_all(struct ld *ld, const cJSON *node, const struct config *c,
                  struct cfg_station *st)
{
	const cJSON *qn = member(node, "qc"), *m;
	size_t i, old;
	int bad = 0;

	if (!cJSON_IsObject(qn) || st->qc == NULL)
		return 0;
	old = ld_key(ld, "qc");
	for (i = 0; i < st->n_qc; i++) {
		if (st->qc[i].value == NULL)
			continue;
		m = member(qn, st->qc[i].value);
		if (cJSON_IsObject(m))
			bad |= qc_entry(ld, m, c, st, &st->qc[i]) != 0;
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

/* ---- derivation settings ----------------------------------------------- */

/* Set input `in` to name, unless another key already set it otherwise. */
static int set_input(struct ld *ld, const cJSON *n, struct tp_derive_cfg *d,
                     enum tp_derive_in in, const char *name)
{
	if (d->field[in] != NULL && strcmp(d->field[in], name) != 0) {
		ld_err(ld, n, 0,
		       "\"%s\" differs from \"%s\" given for the %s input "
		       "elsewhere; name one field per input",
		       name, d->field[in], tp_derive_input_name(in));
		return -1;
	}
	d->field[in] = name;
	return 0;
}

static int derive_inputs(struct ld *ld, const cJSON *n, const struct config *c,
                         struct tp_derive_cfg *d)
{
	const cJSON *seen[CFG_MAX_OPTS], *v;
	struct din_in din;
	size_t old = ld_key(ld, "derive_inputs"), o2;
	int i, bad;

	memset(&din, 0, sizeof(din));
	bad = opt_apply(ld, &opt_derive_inputs, n, &din, -1, seen) != 0;
	for (i = 0; !bad && i < TP_DIN_N; i++) {
		if (din.name[i] == NULL)
			continue;
		o2 = ld_key(ld, tp_derive_input_name((enum tp_derive_in)i));
		v = opt_seen(&opt_derive_inputs, seen,
		             tp_derive_input_name((enum tp_derive_in)i));
		bad |= cfg_check_value(ld, v, 0, din.name[i], c) != 0;
		bad |=
		    set_input(ld, v, d, (enum tp_derive_in)i, din.name[i]) != 0;
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int carbonate(struct ld *ld, const cJSON *n, struct tp_derive_cfg *d)
{
	const cJSON *seen[CFG_MAX_OPTS];
	struct co2_in in = {0, 0};
	size_t old = ld_key(ld, "carbonate");
	int bad;

	bad = opt_apply(ld, &opt_carbonate, n, &in, -1, seen) != 0;
	d->co2.boron = in.boron == 1 ? TP_BORON_LKB10 : TP_BORON_U74;
	d->co2.kf = in.kf == 1 ? TP_KF_DR79 : TP_KF_PF87;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int ph_temperature(struct ld *ld, const cJSON *n, const struct config *c,
                          struct tp_derive_cfg *d)
{
	size_t old = ld_key(ld, "ph_temperature");
	char found[96];
	int bad = 0;

	if (cJSON_IsNumber(n) && n->valuedouble >= -2 && n->valuedouble <= 40) {
		d->meas_t = TP_MEAS_T_CONSTANT;
		d->meas_t_c = n->valuedouble;
	} else if (cJSON_IsString(n) && n->valuestring[0] != '\0') {
		d->meas_t = TP_MEAS_T_FIELD;
		bad = cfg_check_value(ld, n, 0, n->valuestring, c) != 0;
		if (!bad)
			bad = set_input(
			          ld, n, d, TP_DIN_MEAS_T,
			          arena_strdup(ld->mem, n->valuestring)) != 0;
	} else {
		ld_err(ld, n, 0,
		       "found %s; valid: a number -2..40 (degC) or the name"
		       " of the value holding it",
		       ld_found(n, found, sizeof(found)));
		bad = 1;
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int ph_from_ratio(struct ld *ld, const cJSON *n, const struct config *c,
                         struct tp_derive_cfg *d)
{
	const cJSON *seen[CFG_MAX_OPTS];
	struct ratio_in in = {NULL, 0};
	size_t old = ld_key(ld, "ph_from_ratio"), o2;
	int bad;

	bad = opt_apply(ld, &opt_ph_from_ratio, n, &in, -1, seen) != 0;
	if (!bad && in.field != NULL) {
		o2 = ld_key(ld, "field");
		bad = cfg_check_value(
		          ld, opt_seen(&opt_ph_from_ratio, seen, "field"), 0,
		          in.field, c) != 0;
		bad |= set_input(ld, n, d, TP_DIN_MCP_R, in.field) != 0;
		ld_pop(ld, o2);
	}
	d->ph_from_r = !bad;
	d->mcp = in.method == 1 ? TP_MCP_MR2018 : TP_MCP_LIU2011;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static void alkalinity(const struct cfg_station *st, struct tp_derive_cfg *d)
{
	const struct cfg_alkalinity *a = &st->alkalinity;

	switch (a->kind) {
	case CFG_ALK_SALINITY:
		d->alk = TP_ALK_SALINITY;
		d->alk_per_salinity = a->per_salinity;
		d->alk_at_zero = a->at_zero;
		break;
	case CFG_ALK_VALUE:
		d->alk = TP_ALK_CONSTANT;
		d->alk_umol_kg = a->value;
		break;
	case CFG_ALK_FIELD:
		d->alk = TP_ALK_FIELD;
		d->field[TP_DIN_ALKALINITY] = a->field;
		break;
	default:
		d->alk = TP_ALK_NONE;
	}
}

static int derive_settings(struct ld *ld, const cJSON *node,
                           const struct config *c, struct cfg_station *st)
{
	struct tp_derive_cfg *d = &st->derive_cfg;
	const cJSON *n;
	int bad = 0;

	memset(d, 0, sizeof(*d));
	alkalinity(st, d);
	d->pressure = (enum tp_pres_source)st->pressure_from;
	d->has_depth = st->has_depth;
	d->depth_m = st->depth_m;
	d->lat_deg = st->has_position ? st->lat : 0;
	n = member(node, "derive_inputs");
	bad |= n != NULL && derive_inputs(ld, n, c, d) != 0;
	n = member(node, "carbonate");
	bad |= n != NULL && carbonate(ld, n, d) != 0;
	n = member(node, "ph_temperature");
	bad |= n != NULL && ph_temperature(ld, n, c, d) != 0;
	n = member(node, "ph_from_ratio");
	bad |= n != NULL && ph_from_ratio(ld, n, c, d) != 0;
	return bad ? -1 : 0;
}

/* ---- binding ------------------------------------------------------------ */

/* Is the problem about a field the layout has (unit, name clash)? */
static bool about_a_field(const struct tp_layout *l,
                          const struct tp_derive_problem *pb)
{
	size_t i, n = tp_layout_n_values(l);
	const struct tp_field *f;

	if (pb->name == NULL)
		return false;
	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (f != NULL && f->name != NULL &&
		    strcmp(f->name, pb->name) == 0)
			return true;
	}
	return false;
}

/* The station key a binding problem is about. */
static const char *problem_key(const cJSON *node, int input)
{
	if (input == TP_DIN_MCP_R)
		return "ph_from_ratio";
	if (input == TP_DIN_MEAS_T)
		return "ph_temperature";
	if (input == TP_DIN_ALKALINITY && member(node, "alkalinity") != NULL)
		return "alkalinity";
	if (input == TP_DIN_PRESSURE || input == TP_DIN_DEPTH || input < 0)
		return member(node, "pressure_from") != NULL ? "pressure_from"
		                                             : NULL;
	return member(node, "derive_inputs") != NULL ? "derive_inputs" : NULL;
}

static void bind_report(struct ld *ld, const cJSON *node,
                        const struct tp_layout *l,
                        const struct tp_derive_problem *pb)
{
	char what[256];

	snprintf(what, sizeof(what),
	         "layout \"%s\": %s%s%s%s; valid: see the derive_inputs, "
	         "alkalinity and pressure_from keys",
	         l->name != NULL ? l->name : "?", pb->what,
	         pb->name != NULL ? " (\"" : "",
	         pb->name != NULL ? pb->name : "",
	         pb->name != NULL ? "\")" : "");
	err_at(ld, node, problem_key(node, pb->input), what);
}

static int bind_all(struct ld *ld, const cJSON *node, const struct config *c,
                    const struct cfg_station *st)
{
	struct tp_derive_plan plan;
	struct tp_derive_problem pb, first = {-1, NULL, NULL};
	const struct tp_layout *first_l = NULL;
	size_t i, n_ok = 0;
	int bad = 0;

	for (i = 0; i < c->n_layouts; i++) {
		if (tp_derive_bind(&c->layouts[i], &st->derive_cfg, &plan,
		                   &pb) == TP_OK) {
			n_ok++;
		} else if (about_a_field(&c->layouts[i], &pb)) {
			bind_report(ld, node, &c->layouts[i], &pb);
			bad = 1;
		} else if (first_l == NULL) {
			first = pb;
			first_l = &c->layouts[i];
		}
	}
	if (n_ok == 0 && first_l != NULL && !bad) {
		bind_report(ld, node, first_l, &first);
		bad = 1;
	}
	return bad ? -1 : 0;
}

int cfg_station_science(struct ld *ld, const cJSON *node,
                        const struct config *c, struct cfg_station *st)
{
	int bad;

	bad = qc_all(ld, node, c, st) != 0;
	if (!st->derive) {
		memset(&st->derive_cfg, 0, sizeof(st->derive_cfg));
		return bad ? -1 : 0;
	}
	if (derive_settings(ld, node, c, st) != 0)
		return -1;
	if (ld->layouts_ok && !bad)
		bad = bind_all(ld, node, c, st) != 0;
	return bad ? -1 : 0;
}
