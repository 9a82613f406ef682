/*
 * derive.c - binding derived values to a layout and computing them per
 * reading.  The contract (inputs, units, what is produced, flags) is in
 * tidepost/derive.h; the science is in seawater.c, carbonate.c, mcp.c.
 */
#include <math.h>
#include <stddef.h>
#include <string.h>

#include "tidepost/derive.h"

static const char *const input_names[TP_DIN_N] = {
    "temperature", "conductivity", "salinity",   "pressure", "depth",
    "ph",          "oxygen",       "alkalinity", "meas_t",   "mcp_r"};

/* Standard names per input (NULL-terminated lists). */
static const char *const sn_t[] = {"sea_water_temperature", NULL};
static const char *const sn_c[] = {"sea_water_electrical_conductivity", NULL};
static const char *const sn_sp[] = {"sea_water_practical_salinity", NULL};
static const char *const sn_p[] = {"sea_water_pressure", NULL};
static const char *const sn_d[] = {"depth", NULL};
static const char *const sn_ph[] = {"sea_water_ph_reported_on_total_scale",
                                    NULL};
static const char *const sn_o2[] = {
    "moles_of_oxygen_per_unit_mass_in_sea_water",
    "mole_concentration_of_dissolved_molecular_oxygen_in_sea_water",
    "mass_concentration_of_oxygen_in_sea_water", NULL};
static const char *const sn_ta[] = {
    "sea_water_alkalinity_expressed_as_mole_equivalent",
    "sea_water_alkalinity_per_unit_mass", NULL};
static const char *const sn_tm[] = {"temperature_of_analysis_of_sea_water",
                                    NULL};
static const char *const sn_none[] = {NULL};

static const char *const *const input_sn[TP_DIN_N] = {
    sn_t, sn_c, sn_sp, sn_p, sn_d, sn_ph, sn_o2, sn_ta, sn_tm, sn_none};

static const struct tp_derived_info infos[TP_DV_N] = {
    {TP_DV_SALINITY, "salinity", "1", "sea_water_practical_salinity", 4, 0},
    {TP_DV_OXYGEN_SOLUBILITY, "oxygen_solubility", "umol/kg", NULL, 1, 0},
    {TP_DV_OXYGEN_SATURATION, "oxygen_saturation", "%",
     "fractional_saturation_of_oxygen_in_sea_water", 1, 0},
    {TP_DV_PH, "ph", "1", "sea_water_ph_reported_on_total_scale", 4, 0},
    {TP_DV_ALKALINITY, "alkalinity", "umol/kg",
     "sea_water_alkalinity_per_unit_mass", 1, 0},
    {TP_DV_PH_INSITU, "ph_insitu", "1", "sea_water_ph_reported_on_total_scale",
     4, 0},
    {TP_DV_PCO2, "pco2", "uatm",
     "partial_pressure_of_carbon_dioxide_in_sea_water", 1, 0},
    {TP_DV_FCO2, "fco2", "uatm", "fugacity_of_carbon_dioxide_in_sea_water", 1,
     0},
    {TP_DV_DIC, "dic", "umol/kg",
     "moles_of_dissolved_inorganic_carbon_per_unit_mass_in_sea_water", 1, 0},
    {TP_DV_CARBONATE_ION, "carbonate_ion", "umol/kg", NULL, 1, 0},
    {TP_DV_OMEGA_ARAGONITE, "omega_aragonite", "1", NULL, 2, 0},
    {TP_DV_OMEGA_CALCITE, "omega_calcite", "1", NULL, 2, 0},
};

const char *tp_derive_input_name(enum tp_derive_in in)
{
	if ((unsigned)in >= TP_DIN_N)
		return "unknown";
	return input_names[in];
}

const struct tp_derived_info *tp_derived_describe(enum tp_derived d)
{
	if ((unsigned)d >= TP_DV_N)
		return NULL;
	return &infos[d];
}

static bool eq(const char *a, const char *b)
{
	return a != NULL && b != NULL && strcmp(a, b) == 0;
}

static bool in_list(const char *s, const char *const *list)
{
	for (; *list != NULL; list++)
		if (eq(s, *list))
			return true;
	return false;
}

static enum tp_status problem(struct tp_derive_problem *pb, enum tp_status s,
                              int input, const char *name, const char *what)
{
	if (pb != NULL) {
		pb->input = input;
		pb->name = name;
		pb->what = what;
	}
	return s;
}

/* ---- finding inputs --------------------------------------------------- */

/* Slot of the first value field named `name` (or, when name is NULL,
 * with one of the standard names), or -1. */
static int find_slot(const struct tp_layout *l, const char *name,
                     const char *const *sn)
{
	size_t i, n = tp_layout_n_values(l);
	const struct tp_field *f;

	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (f == NULL || f->type == TP_T_SKIP ||
		    f->role != TP_ROLE_VALUE)
			continue;
		if (name != NULL ? eq(f->name, name)
		                 : in_list(f->standard_name, sn))
			return (int)i;
	}
	return -1;
}

static bool dimensionless(const char *u)
{
	return u == NULL || eq(u, "1");
}

/* Is the bound field's unit usable?  Sets the conversion enums. */
static const char *unit_problem(const struct tp_field *f, enum tp_derive_in in,
                                struct tp_derive_plan *p)
{
	const char *u = f->unit;
	bool per_mass;

	switch (in) {
	case TP_DIN_TEMPERATURE:
	case TP_DIN_MEAS_T:
		return eq(u, "degC") ? NULL : "temperature must be in degC";
	case TP_DIN_CONDUCTIVITY:
		p->cond_unit = eq(u, "S/m")     ? TP_COND_S_M
		               : eq(u, "uS/cm") ? TP_COND_US_CM
		                                : TP_COND_MS_CM;
		return eq(u, "mS/cm") || eq(u, "S/m") || eq(u, "uS/cm")
		           ? NULL
		           : "conductivity must be in mS/cm, S/m or uS/cm";
	case TP_DIN_PRESSURE:
		return eq(u, "dbar") ? NULL : "pressure must be in dbar";
	case TP_DIN_DEPTH:
		return eq(u, "m") ? NULL : "depth must be in m";
	case TP_DIN_ALKALINITY:
		return eq(u, "umol/kg") ? NULL
		                        : "alkalinity must be in umol/kg";
	case TP_DIN_OXYGEN:
		per_mass = eq(f->standard_name, sn_o2[0]);
		p->o2_unit = eq(u, "umol/L") ? TP_O2_UMOL_L
		             : eq(u, "mg/L") ? TP_O2_MG_L
		             : eq(u, "mL/L") ? TP_O2_ML_L
		                             : TP_O2_UMOL_KG;
		if (eq(u, "umol/kg") && (per_mass || f->standard_name == NULL))
			return NULL;
		if (!per_mass &&
		    (eq(u, "umol/L") || eq(u, "mg/L") || eq(u, "mL/L")))
			return NULL;
		return per_mass ? "oxygen per unit mass must be in umol/kg"
		                : "oxygen per volume must be in umol/L, mg/L "
		                  "or mL/L";
	default:
		return dimensionless(u)
		           ? NULL
		           : "a dimensionless value must have unit "
		             "1 (or none)";
	}
}

static enum tp_status bind_inputs(const struct tp_layout *l,
                                  struct tp_derive_plan *p,
                                  struct tp_derive_problem *pb)
{
	int i, s;
	const char *name, *what;

	for (i = 0; i < TP_DIN_N; i++) {
		name = p->cfg.field[i];
		s = find_slot(l, name, input_sn[i]);
		p->in[i] = s;
		if (s < 0 && name != NULL)
			return problem(pb, TP_ERR_LAYOUT, i, name,
			               "no value field of that name in the "
			               "layout");
		if (s < 0)
			continue;
		what = unit_problem(tp_layout_field(l, (size_t)s),
		                    (enum tp_derive_in)i, p);
		if (what != NULL)
			return problem(pb, TP_ERR_LAYOUT, i,
			               tp_layout_field(l, (size_t)s)->name,
			               what);
	}
	return TP_OK;
}

/* ---- deciding what can be derived ------------------------------------- */

static enum tp_status check_cfg(const struct tp_derive_cfg *c,
                                struct tp_derive_problem *pb)
{
	const char *what = NULL;

	if ((unsigned)c->alk > TP_ALK_FIELD ||
	    (unsigned)c->meas_t > TP_MEAS_T_FIELD ||
	    (unsigned)c->pressure > TP_PRES_ZERO ||
	    (unsigned)c->mcp > TP_MCP_MR2018 ||
	    (unsigned)c->co2.boron > TP_BORON_LKB10 ||
	    (unsigned)c->co2.kf > TP_KF_DR79)
		what = "an option has an unknown value";
	else if (c->alk == TP_ALK_CONSTANT &&
	         !(isfinite(c->alk_umol_kg) && c->alk_umol_kg > 0))
		what = "alkalinity: the constant must be > 0 umol/kg";
	else if (c->alk == TP_ALK_SALINITY &&
	         !(isfinite(c->alk_at_zero) && isfinite(c->alk_per_salinity)))
		what = "alkalinity: at_zero and per_salinity must be finite";
	else if (c->meas_t == TP_MEAS_T_CONSTANT &&
	         !(c->meas_t_c >= -2 && c->meas_t_c <= 40))
		what = "measurement temperature must be in -2..40 degC";
	else if (!isfinite(c->lat_deg) || fabs(c->lat_deg) > 90)
		what = "latitude must be in -90..90";
	else if (c->has_depth && !(isfinite(c->depth_m) && c->depth_m >= 0))
		what = "station depth must be >= 0 m";
	if (what == NULL)
		return TP_OK;
	return problem(pb, TP_ERR_ARG, -1, NULL, what);
}

/* Required inputs that the configuration names explicitly. */
static enum tp_status check_required(struct tp_derive_plan *p,
                                     struct tp_derive_problem *pb)
{
	const struct tp_derive_cfg *c = &p->cfg;
	enum tp_pres_source ps = c->pressure;

	if (c->alk == TP_ALK_FIELD && p->in[TP_DIN_ALKALINITY] < 0)
		return problem(pb, TP_ERR_LAYOUT, TP_DIN_ALKALINITY, NULL,
		               "alkalinity from a field, but the layout has "
		               "none");
	if (c->meas_t == TP_MEAS_T_FIELD && p->in[TP_DIN_MEAS_T] < 0)
		return problem(pb, TP_ERR_LAYOUT, TP_DIN_MEAS_T, NULL,
		               "measurement temperature from a field, but the "
		               "layout has none");
	if (c->ph_from_r && p->in[TP_DIN_MCP_R] < 0)
		return problem(pb, TP_ERR_LAYOUT, TP_DIN_MCP_R, NULL,
		               "pH from an mCP ratio needs the ratio's field "
		               "name");
	if (ps == TP_PRES_FIELD && p->in[TP_DIN_PRESSURE] < 0)
		return problem(
		    pb, TP_ERR_LAYOUT, TP_DIN_PRESSURE, NULL,
		    "pressure from a field, but the layout has none");
	if (ps == TP_PRES_DEPTH_FIELD && p->in[TP_DIN_DEPTH] < 0)
		return problem(pb, TP_ERR_LAYOUT, TP_DIN_DEPTH, NULL,
		               "pressure from a depth field, but the layout "
		               "has none");
	if (ps == TP_PRES_STATION_DEPTH && !c->has_depth)
		return problem(pb, TP_ERR_ARG, -1, NULL,
		               "pressure from the station depth, but depth_m "
		               "is not set");
	return TP_OK;
}

static enum tp_pres_source resolve_pressure(const struct tp_derive_plan *p)
{
	if (p->cfg.pressure != TP_PRES_AUTO)
		return p->cfg.pressure;
	if (p->in[TP_DIN_PRESSURE] >= 0)
		return TP_PRES_FIELD;
	if (p->in[TP_DIN_DEPTH] >= 0)
		return TP_PRES_DEPTH_FIELD;
	if (p->cfg.has_depth)
		return TP_PRES_STATION_DEPTH;
	return TP_PRES_ZERO;
}

static void want(struct tp_derive_plan *p, enum tp_derived d)
{
	p->pos[d] = (int)p->n_out;
	p->out[p->n_out] = infos[d];
	p->out[p->n_out].slot = p->n_slots + p->n_out;
	p->n_out++;
}

static void choose(struct tp_derive_plan *p)
{
	const struct tp_derive_cfg *c = &p->cfg;
	bool t = p->in[TP_DIN_TEMPERATURE] >= 0, sp, ph, ta;
	enum tp_derived d;

	sp = p->in[TP_DIN_SALINITY] >= 0;
	if (!sp && t && p->in[TP_DIN_CONDUCTIVITY] >= 0) {
		want(p, TP_DV_SALINITY);
		sp = true;
	}
	if (sp && t && p->in[TP_DIN_OXYGEN] >= 0) {
		want(p, TP_DV_OXYGEN_SOLUBILITY);
		want(p, TP_DV_OXYGEN_SATURATION);
	}
	ph = !c->ph_from_r && p->in[TP_DIN_PH] >= 0;
	if (c->ph_from_r && sp && (t || c->meas_t != TP_MEAS_T_NONE)) {
		want(p, TP_DV_PH);
		ph = true;
	}
	ta = c->alk == TP_ALK_FIELD || c->alk == TP_ALK_CONSTANT ||
	     (c->alk == TP_ALK_SALINITY && sp);
	if (ta && c->alk != TP_ALK_FIELD)
		want(p, TP_DV_ALKALINITY);
	if (!(ph && ta && sp && t))
		return;
	if (c->meas_t != TP_MEAS_T_NONE)
		want(p, TP_DV_PH_INSITU);
	for (d = TP_DV_PCO2; d < TP_DV_N; d++)
		want(p, d);
}

static enum tp_status check_names(const struct tp_layout *l,
                                  struct tp_derive_plan *p,
                                  struct tp_derive_problem *pb)
{
	size_t j, i, n = tp_layout_n_values(l);
	const struct tp_field *f;

	if (p->n_slots + p->n_out > TP_MAX_VALUES)
		return problem(pb, TP_ERR_SPACE, -1, NULL,
		               "the layout's values and the derived values "
		               "exceed TP_MAX_VALUES");
	for (j = 0; j < p->n_out; j++)
		for (i = 0; i < n; i++) {
			f = tp_layout_field(l, i);
			if (f != NULL && eq(f->name, p->out[j].name))
				return problem(
				    pb, TP_ERR_LAYOUT, -1, p->out[j].name,
				    "a layout field already has this "
				    "derived value's name");
		}
	return TP_OK;
}

static struct tp_value from_depth(const struct tp_derive_plan *p,
                                  struct tp_value d);

static void plan_empty(struct tp_derive_plan *p, size_t n_slots)
{
	int i;

	p->n_slots = n_slots;
	p->n_out = 0;
	p->cond_unit = TP_COND_MS_CM;
	p->o2_unit = TP_O2_UMOL_KG;
	p->pressure = TP_PRES_ZERO;
	p->station_p = (struct tp_value){.v = 0.0, .flag = TP_FLAG_PASS};
	for (i = 0; i < TP_DIN_N; i++)
		p->in[i] = -1;
	for (i = 0; i < TP_DV_N; i++)
		p->pos[i] = -1;
}

enum tp_status tp_derive_bind(const struct tp_layout *l,
                              const struct tp_derive_cfg *cfg,
                              struct tp_derive_plan *plan,
                              struct tp_derive_problem *pb)
{
	enum tp_status s;

	if (plan == NULL)
		return problem(pb, TP_ERR_ARG, -1, NULL, "no plan given");
	plan->cfg = (struct tp_derive_cfg){0};
	plan_empty(plan, 0);
	if (l == NULL || cfg == NULL)
		return problem(pb, TP_ERR_ARG, -1, NULL, "no layout or cfg");
	plan->cfg = *cfg;
	s = check_cfg(cfg, pb);
	if (s == TP_OK)
		s = bind_inputs(l, plan, pb);
	if (s == TP_OK)
		s = check_required(plan, pb);
	if (s == TP_OK) {
		plan->n_slots = tp_layout_n_values(l);
		plan->pressure = resolve_pressure(plan);
		if (plan->pressure == TP_PRES_STATION_DEPTH)
			plan->station_p = from_depth(
			    plan, (struct tp_value){.v = plan->cfg.depth_m,
			                            .flag = TP_FLAG_PASS});
		choose(plan);
		s = check_names(l, plan, pb);
	}
	if (s != TP_OK)
		plan_empty(plan, plan->n_slots);
	return s;
}

const struct tp_derived_info *tp_derive_find(const struct tp_derive_plan *plan,
                                             const char *name)
{
	size_t j;

	if (plan == NULL)
		return NULL;
	for (j = 0; j < plan->n_out; j++)
		if (eq(plan->out[j].name, name))
			return &plan->out[j];
	return NULL;
}

/* ---- per reading ------------------------------------------------------ */

static struct tp_value mk(double v, uint8_t flag)
{
	struct tp_value x;

	x.v = flag == TP_FLAG_MISSING ? NAN : v;
	x.flag = flag;
	return x;
}

static bool missing(struct tp_value x)
{
	return x.flag == TP_FLAG_MISSING || !isfinite(x.v);
}

/* Numerically worst of two flags (4 > 3 > 2 > 1); 9 if either is 9. */
static uint8_t fw(uint8_t a, uint8_t b)
{
	if (a == TP_FLAG_MISSING || b == TP_FLAG_MISSING)
		return TP_FLAG_MISSING;
	return a > b ? a : b;
}

/* A value's flag as a derivation input: 9 when it has no number. */
static uint8_t vf(struct tp_value x)
{
	return missing(x) ? TP_FLAG_MISSING : x.flag;
}

static uint8_t worst(struct tp_value a, struct tp_value b)
{
	return fw(vf(a), vf(b));
}

/* The result of a science call with inputs flagged `flag`. */
static struct tp_value result(enum tp_status s, double v, bool valid,
                              uint8_t flag)
{
	if (flag == TP_FLAG_MISSING || s != TP_OK || !isfinite(v))
		return mk(NAN, TP_FLAG_MISSING);
	if (!valid && flag < TP_FLAG_SUSPECT)
		flag = TP_FLAG_SUSPECT;
	return mk(v, flag);
}

/* The inputs of one reading, constants and derived ones resolved. */
struct inputs {
	struct tp_value t, sp, p, ph, ta, tm;
};

static struct tp_value slot_value(const struct tp_derive_plan *p,
                                  const struct tp_reading *r,
                                  enum tp_derive_in in)
{
	if (p->in[in] < 0)
		return mk(NAN, TP_FLAG_MISSING);
	return r->values[p->in[in]];
}

static void put(const struct tp_derive_plan *p, struct tp_reading *r,
                enum tp_derived d, struct tp_value x)
{
	if (p->pos[d] >= 0)
		r->values[p->out[p->pos[d]].slot] = x;
}

/* Sea pressure at depth d (its flag carried on). */
static struct tp_value from_depth(const struct tp_derive_plan *p,
                                  struct tp_value d)
{
	double dbar = NAN;
	bool valid = false;
	enum tp_status s;

	if (missing(d))
		return mk(NAN, TP_FLAG_MISSING);
	s = tp_p_from_depth(d.v, p->cfg.lat_deg, &dbar, &valid);
	return result(s, dbar, valid, d.flag);
}

static struct tp_value pressure(const struct tp_derive_plan *p,
                                const struct tp_reading *r)
{
	switch (p->pressure) {
	case TP_PRES_FIELD:
		return slot_value(p, r, TP_DIN_PRESSURE);
	case TP_PRES_DEPTH_FIELD:
		return from_depth(p, slot_value(p, r, TP_DIN_DEPTH));
	case TP_PRES_STATION_DEPTH:
		return p->station_p; /* worked out by tp_derive_bind */
	default:
		return mk(0.0, TP_FLAG_PASS);
	}
}

static void salinity(const struct tp_derive_plan *p, struct tp_reading *r,
                     struct inputs *x)
{
	struct tp_value c = slot_value(p, r, TP_DIN_CONDUCTIVITY);
	double sp = NAN;
	bool valid = false;
	enum tp_status s;
	uint8_t f;

	if (p->pos[TP_DV_SALINITY] < 0) {
		x->sp = slot_value(p, r, TP_DIN_SALINITY);
		return;
	}
	x->p = pressure(p, r);
	f = fw(worst(c, x->t), vf(x->p));
	s = f == TP_FLAG_MISSING
	        ? TP_ERR_ARG
	        : tp_sp_from_c(c.v, p->cond_unit, x->t.v, x->p.v, &sp, &valid);
	x->sp = result(s, sp, valid, f);
	put(p, r, TP_DV_SALINITY, x->sp);
}

static void oxygen(const struct tp_derive_plan *p, struct tp_reading *r,
                   const struct inputs *x)
{
	struct tp_value o2 = slot_value(p, r, TP_DIN_OXYGEN);
	double sol = NAN, pct = NAN;
	bool v1 = false, v2 = false;
	enum tp_status s1 = TP_ERR_ARG, s2 = TP_ERR_ARG;
	uint8_t f = worst(x->sp, x->t);

	if (p->pos[TP_DV_OXYGEN_SOLUBILITY] < 0)
		return;
	if (f != TP_FLAG_MISSING)
		s1 = tp_o2_solubility(x->sp.v, x->t.v, TP_O2SOL_UMOL_KG, &sol,
		                      &v1);
	put(p, r, TP_DV_OXYGEN_SOLUBILITY, result(s1, sol, v1, f));
	f = fw(f, vf(o2));
	if (f != TP_FLAG_MISSING)
		s2 = tp_o2_saturation(o2.v, p->o2_unit, x->sp.v, x->t.v, &pct,
		                      &v2);
	put(p, r, TP_DV_OXYGEN_SATURATION, result(s2, pct, v2, f));
}

/* Measurement temperature (or the in-situ one when none is set). */
static struct tp_value meas_t(const struct tp_derive_plan *p,
                              const struct tp_reading *r,
                              const struct inputs *x)
{
	switch (p->cfg.meas_t) {
	case TP_MEAS_T_CONSTANT:
		return mk(p->cfg.meas_t_c, TP_FLAG_PASS);
	case TP_MEAS_T_FIELD:
		return slot_value(p, r, TP_DIN_MEAS_T);
	default:
		return x->t;
	}
}

static void ph_and_ta(const struct tp_derive_plan *p, struct tp_reading *r,
                      struct inputs *x)
{
	struct tp_value rr = slot_value(p, r, TP_DIN_MCP_R);
	double ph = NAN;
	bool valid = false;
	enum tp_status s = TP_ERR_ARG;
	uint8_t f = fw(worst(rr, x->sp), vf(x->tm));

	x->ph = slot_value(p, r, TP_DIN_PH);
	if (p->pos[TP_DV_PH] >= 0) {
		if (f != TP_FLAG_MISSING)
			s = tp_mcp_ph(p->cfg.mcp, rr.v, x->sp.v, x->tm.v, &ph,
			              &valid);
		x->ph = result(s, ph, valid, f);
		put(p, r, TP_DV_PH, x->ph);
	}
	switch (p->cfg.alk) {
	case TP_ALK_CONSTANT:
		x->ta = mk(p->cfg.alk_umol_kg, TP_FLAG_PASS);
		break;
	case TP_ALK_SALINITY:
		x->ta = result(TP_OK,
		               p->cfg.alk_at_zero +
		                   p->cfg.alk_per_salinity * x->sp.v,
		               true, vf(x->sp));
		break;
	case TP_ALK_FIELD:
		x->ta = slot_value(p, r, TP_DIN_ALKALINITY);
		break;
	default:
		x->ta = mk(NAN, TP_FLAG_MISSING);
	}
	put(p, r, TP_DV_ALKALINITY, x->ta);
}

static void carbonate(const struct tp_derive_plan *p, struct tp_reading *r,
                      const struct inputs *x)
{
	struct tp_co2_system sys = {0};
	enum tp_status s = TP_ERR_ARG;
	uint8_t f = fw(worst(x->ph, x->ta), worst(x->sp, x->t));
	bool v;

	if (p->pos[TP_DV_PCO2] < 0)
		return;
	if (p->cfg.meas_t != TP_MEAS_T_NONE)
		f = fw(f, vf(x->tm));
	if (f != TP_FLAG_MISSING && p->cfg.meas_t != TP_MEAS_T_NONE)
		s = tp_co2_ph_at(x->ph.v, x->tm.v, x->ta.v, x->sp.v, x->t.v,
		                 &p->cfg.co2, &sys);
	else if (f != TP_FLAG_MISSING)
		s = tp_co2_from_ph_ta(x->ph.v, x->ta.v, x->sp.v, x->t.v,
		                      &p->cfg.co2, &sys);
	v = sys.valid;
	put(p, r, TP_DV_PH_INSITU, result(s, sys.ph, v, f));
	put(p, r, TP_DV_PCO2, result(s, sys.pco2, v, f));
	put(p, r, TP_DV_FCO2, result(s, sys.fco2, v, f));
	put(p, r, TP_DV_DIC, result(s, sys.dic, v, f));
	put(p, r, TP_DV_CARBONATE_ION, result(s, sys.co3, v, f));
	put(p, r, TP_DV_OMEGA_ARAGONITE, result(s, sys.omega_ar, v, f));
	put(p, r, TP_DV_OMEGA_CALCITE, result(s, sys.omega_ca, v, f));
}

enum tp_status tp_derive_apply(const struct tp_derive_plan *plan,
                               struct tp_reading *r)
{
	struct inputs x;
	size_t j;

	if (plan == NULL || r == NULL || r->n_values != plan->n_slots ||
	    plan->n_slots + plan->n_out > TP_MAX_VALUES)
		return TP_ERR_ARG;
	for (j = 0; j < plan->n_out; j++)
		r->values[plan->out[j].slot] = mk(NAN, TP_FLAG_MISSING);
	r->n_values = plan->n_slots + plan->n_out;
	x.t = slot_value(plan, r, TP_DIN_TEMPERATURE);
	x.p = mk(0.0, TP_FLAG_PASS);
	salinity(plan, r, &x);
	oxygen(plan, r, &x);
	x.tm = meas_t(plan, r, &x);
	ph_and_ta(plan, r, &x);
	carbonate(plan, r, &x);
	return TP_OK;
}
