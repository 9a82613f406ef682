/*
 * test_derive.c - binding derived values to layouts and computing them
 * (decoder/derive.c).
 *
 * Check values: SCIENCE.md tags ([DOC] read in the publication, [CODE]
 * quoted by public code citing it, [COMP] computed with a reference
 * library); tolerances of the carbonate values are those of Orr, Epitalon
 * & Gattuso (2015), Biogeosciences 12, 1483-1510 [DOC, abstract] (0.2 uatm
 * pCO2, 0.1 umol/kg carbonate ion), others as said per row.  Layouts and
 * readings are invented test data.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>

#include "tidepost/derive.h"

#define SN_T "sea_water_temperature"
#define SN_C "sea_water_electrical_conductivity"
#define SN_SP "sea_water_practical_salinity"
#define SN_P "sea_water_pressure"
#define SN_D "depth"
#define SN_PH "sea_water_ph_reported_on_total_scale"
#define SN_O2M "moles_of_oxygen_per_unit_mass_in_sea_water"
#define SN_O2V "mole_concentration_of_dissolved_molecular_oxygen_in_sea_water"
#define SN_O2G "mass_concentration_of_oxygen_in_sea_water"
#define SN_TA "sea_water_alkalinity_expressed_as_mole_equivalent"

/* A value field of a test layout. */
struct fdesc {
	const char *name, *sn, *unit;
};

#define MAXF 8

struct lay {
	struct tp_field f[MAXF];
	struct tp_layout l;
};

/* Header: a station number and a time (role fields), then the value
 * fields of d in one record group, so slots are 2.. */
static void mklayout(struct lay *y, const struct fdesc *d)
{
	size_t n = 0;

	memset(y, 0, sizeof *y);
	y->f[0] = (struct tp_field){.name = "station", .type = TP_T_U16,
	                            .bits = 16, .role = TP_ROLE_STATION};
	y->f[1] = (struct tp_field){.name = "time", .type = TP_T_U32,
	                            .bits = 32, .role = TP_ROLE_TIME};
	while (n + 2 < MAXF && d[n].name != NULL) {
		y->f[n + 2] = (struct tp_field){.name = d[n].name,
		                                .type = TP_T_F32,
		                                .bits = 32,
		                                .unit = d[n].unit,
		                                .standard_name = d[n].sn};
		n++;
	}
	y->l = (struct tp_layout){.name = "test", .fields = y->f,
	                          .n_fields = n + 2};
}

/* "a b c": the plan's derived names in order. */
static void names_of(const struct tp_derive_plan *p, char *buf, size_t cap)
{
	size_t j, len = 0, k;

	buf[0] = '\0';
	for (j = 0; j < p->n_out; j++) {
		const char *s = p->out[j].name;

		if (j > 0 && len + 1 < cap)
			buf[len++] = ' ';
		for (k = 0; s[k] != '\0' && len + 1 < cap; k++)
			buf[len++] = s[k];
		buf[len] = '\0';
	}
}

static const struct fdesc F_T = {"temperature", SN_T, "degC"};
static const struct fdesc F_C = {"conductivity", SN_C, "mS/cm"};
static const struct fdesc F_SP = {"sal", SN_SP, "1"};
static const struct fdesc F_PH = {"ph_sensor", SN_PH, "1"};
static const struct fdesc F_O2 = {"oxygen", SN_O2M, "umol/kg"};
static const struct fdesc F_R = {"r_mcp", NULL, "1"};
static const struct fdesc F_END = {NULL, NULL, NULL};

#define ALL_CO2 "pco2 fco2 dic carbonate_ion omega_aragonite omega_calcite"

struct bind_row {
	const char *why;
	struct fdesc f[MAXF - 2];
	struct tp_derive_cfg cfg;
	enum tp_status want;
	int input;         /* expected problem input (errors) */
	const char *names; /* expected derived values (TP_OK) */
};

static const struct bind_row bind_rows[] = {
    {"CTD only: salinity from conductivity",
     {F_T, F_C, F_END}, {0}, TP_OK, 0, "salinity"},
    {"practical salinity carried: nothing to derive",
     {F_T, F_SP, F_END}, {0}, TP_OK, 0, ""},
    {"oxygen with carried salinity",
     {F_T, F_SP, F_O2, F_END}, {0}, TP_OK, 0,
     "oxygen_solubility oxygen_saturation"},
    {"the full package, TA linear in salinity",
     {F_T, F_C, F_PH, F_O2, F_END},
     {.alk = TP_ALK_SALINITY, .alk_per_salinity = 65.4}, TP_OK, 0,
     "salinity oxygen_solubility oxygen_saturation alkalinity " ALL_CO2},
    {"pH without temperature: only the constant TA",
     {F_SP, F_PH, F_END}, {.alk = TP_ALK_CONSTANT, .alk_umol_kg = 2300},
     TP_OK, 0, "alkalinity"},
    {"housekeeping layout of a carbonate station derives nothing",
     {{"battery", NULL, "V"}, F_END},
     {.alk = TP_ALK_SALINITY, .alk_per_salinity = 65.4}, TP_OK, 0, ""},
    {"pH from mCP R at 25 degC, with in-situ pH",
     {F_T, F_SP, F_R, F_END},
     {.alk = TP_ALK_CONSTANT, .alk_umol_kg = 2300, .ph_from_r = true,
      .meas_t = TP_MEAS_T_CONSTANT, .meas_t_c = 25,
      .field = {[TP_DIN_MCP_R] = "r_mcp"}},
     TP_OK, 0, "ph alkalinity ph_insitu " ALL_CO2},
    {"measured TA: no derived alkalinity",
     {F_T, F_SP, F_PH, {"ta", SN_TA, "umol/kg"}, F_END},
     {.alk = TP_ALK_FIELD}, TP_OK, 0, ALL_CO2},
    {"a named field overrides the standard name",
     {F_T, F_C, {"t2", NULL, "degC"}, F_END},
     {.field = {[TP_DIN_TEMPERATURE] = "t2"}}, TP_OK, 0, "salinity"},
    /* failures */
    {"TA from a field, but none",
     {F_T, F_SP, F_PH, F_END}, {.alk = TP_ALK_FIELD}, TP_ERR_LAYOUT,
     TP_DIN_ALKALINITY, NULL},
    {"pH from R without the R field's name",
     {F_T, F_SP, F_R, F_END}, {.ph_from_r = true}, TP_ERR_LAYOUT,
     TP_DIN_MCP_R, NULL},
    {"a named field that is not in the layout",
     {F_T, F_C, F_END}, {.field = {[TP_DIN_TEMPERATURE] = "ctd_t"}},
     TP_ERR_LAYOUT, TP_DIN_TEMPERATURE, NULL},
    {"temperature in kelvin is not accepted",
     {{"temperature", SN_T, "K"}, F_C, F_END}, {0}, TP_ERR_LAYOUT,
     TP_DIN_TEMPERATURE, NULL},
    {"oxygen per mass with a per-volume unit",
     {F_T, F_SP, {"o2", SN_O2M, "umol/L"}, F_END}, {0}, TP_ERR_LAYOUT,
     TP_DIN_OXYGEN, NULL},
    {"conductivity in volts",
     {F_T, {"c", SN_C, "V"}, F_END}, {0}, TP_ERR_LAYOUT,
     TP_DIN_CONDUCTIVITY, NULL},
    {"pressure from a field, but none",
     {F_T, F_C, F_END}, {.pressure = TP_PRES_FIELD}, TP_ERR_LAYOUT,
     TP_DIN_PRESSURE, NULL},
    {"pressure from the station depth, but no depth_m",
     {F_T, F_C, F_END}, {.pressure = TP_PRES_STATION_DEPTH}, TP_ERR_ARG,
     -1, NULL},
    {"a plain field already called salinity",
     {F_T, F_C, {"salinity", NULL, "1"}, F_END}, {0}, TP_ERR_LAYOUT, -1,
     NULL},
    {"a zero constant TA",
     {F_T, F_SP, F_PH, F_END}, {.alk = TP_ALK_CONSTANT}, TP_ERR_ARG, -1,
     NULL},
    {"an unknown alkalinity source",
     {F_T, F_END}, {.alk = (enum tp_alk_source)9}, TP_ERR_ARG, -1, NULL},
};

static void test_bind(void **state)
{
	struct lay y;
	struct tp_derive_plan p;
	struct tp_derive_problem pb;
	char got[512];
	size_t i;
	enum tp_status s;

	(void)state;
	for (i = 0; i < sizeof bind_rows / sizeof bind_rows[0]; i++) {
		const struct bind_row *r = &bind_rows[i];

		mklayout(&y, r->f);
		pb = (struct tp_derive_problem){-2, NULL, NULL};
		s = tp_derive_bind(&y.l, &r->cfg, &p, &pb);
		if (s != r->want)
			fail_msg("%s: status %d, want %d (%s)", r->why, s,
			         r->want, pb.what ? pb.what : "-");
		if (s != TP_OK) {
			assert_non_null(pb.what);
			assert_int_equal(pb.input, r->input);
			assert_int_equal(p.n_out, 0);
			continue;
		}
		names_of(&p, got, sizeof got);
		if (strcmp(got, r->names) != 0)
			fail_msg("%s: derives \"%s\", want \"%s\"", r->why, got,
			         r->names);
	}
}

/* Bound slots, appended slots and the descriptions of the values. */
static void test_plan_slots(void **state)
{
	static const struct fdesc d[] = {F_T, F_C, F_PH, F_END};
	struct tp_derive_cfg c = {.alk = TP_ALK_CONSTANT, .alk_umol_kg = 2300};
	struct lay y;
	struct tp_derive_plan p;
	const struct tp_derived_info *x;

	(void)state;
	mklayout(&y, d);
	assert_int_equal(tp_derive_bind(&y.l, &c, &p, NULL), TP_OK);
	assert_int_equal(p.n_slots, 5);
	assert_int_equal(p.in[TP_DIN_TEMPERATURE], 2);
	assert_int_equal(p.in[TP_DIN_CONDUCTIVITY], 3);
	assert_int_equal(p.in[TP_DIN_PH], 4);
	assert_int_equal(p.in[TP_DIN_OXYGEN], -1);
	assert_int_equal(p.pressure, TP_PRES_ZERO); /* auto, nothing set */
	assert_int_equal(p.out[0].slot, 5);         /* right after the layout */
	x = tp_derive_find(&p, "pco2");
	assert_non_null(x);
	assert_string_equal(x->unit, "uatm");
	assert_string_equal(x->standard_name,
	                    "partial_pressure_of_carbon_dioxide_in_sea_water");
	assert_int_equal(x->decimals, 1);
	assert_int_equal(x->slot, 5 + (size_t)(x - p.out));
	x = tp_derive_find(&p, "dic");
	assert_string_equal(
	    x->standard_name,
	    "moles_of_dissolved_inorganic_carbon_per_unit_mass_in_sea_water");
	x = tp_derive_find(&p, "omega_aragonite");
	assert_null(x->standard_name); /* no CF name known */
	assert_int_equal(x->decimals, 2);
	assert_int_equal(tp_derive_find(&p, "salinity")->decimals, 4);
	assert_null(tp_derive_find(&p, "oxygen_saturation"));
	assert_string_equal(tp_derive_input_name(TP_DIN_MCP_R), "mcp_r");
	assert_string_equal(tp_derive_input_name(TP_DIN_N), "unknown");
	assert_null(tp_derived_describe(TP_DV_N));
}

/* A reading of layout y with values v[] (flags f[]) in slots 2.. */
static void mkreading(struct tp_reading *r, const struct lay *y,
                      const double *v, const uint8_t *f, size_t n)
{
	size_t i;

	memset(r, 0, sizeof *r);
	r->n_values = y->l.n_fields;
	r->values[0] = (struct tp_value){7, 1};
	r->values[1] = (struct tp_value){1796019300, 1};
	for (i = 0; i < n; i++)
		r->values[2 + i] = (struct tp_value){v[i], f[i]};
}

static struct tp_value dv(const struct tp_derive_plan *p,
                          const struct tp_reading *r, const char *name)
{
	const struct tp_derived_info *x = tp_derive_find(p, name);

	if (x == NULL)
		fail_msg("no derived value %s", name);
	return r->values[x->slot];
}

static void near(double got, double want, double tol, const char *what)
{
	if (!(fabs(got - want) <= tol))
		fail_msg("%s: got %.10g, want %.10g (tol %g)", what, got, want,
		         tol);
}

/* Conductivity units: the TEOS-10 gsw_SP_from_C documented example
 * C 34.5487 mS/cm, t 28.7856 degC, p 10 dbar -> SP 20.009869599086951
 * [DOC, SCIENCE.md 3.3], in each accepted unit. */
static void test_conductivity_units(void **state)
{
	static const struct {
		const char *unit;
		double c;
	} rows[] = {
	    {"mS/cm", 34.5487},  /* as documented */
	    {"S/m", 3.45487},    /* 1 S/m = 10 mS/cm */
	    {"uS/cm", 34548.7},  /* 1000 uS/cm = 1 mS/cm */
	};
	struct fdesc d[] = {F_T, F_C, {"p", SN_P, "dbar"}, F_END};
	const struct tp_derive_cfg c = {0};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;
	const uint8_t ok[3] = {1, 1, 1};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		double v[3] = {28.7856, rows[i].c, 10};

		d[1].unit = rows[i].unit;
		mklayout(&y, d);
		assert_int_equal(tp_derive_bind(&y.l, &c, &p, NULL), TP_OK);
		assert_int_equal(p.pressure, TP_PRES_FIELD); /* auto */
		mkreading(&r, &y, v, ok, 3);
		assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
		near(dv(&p, &r, "salinity").v, 20.009869599086951, 1e-9,
		     rows[i].unit);
		assert_int_equal(dv(&p, &r, "salinity").flag, 1);
	}
}

/* Pressure sources: the same water at 0 and at 10 dbar (gsw.SP_from_C
 * 3.6.16: 20.011611 at 0 dbar, 20.009870 at 10 dbar [COMP]); a depth
 * of 9.94 m is ~10 dbar (UNESCO 1983 depth formula; tolerance covers
 * the depth/pressure difference [estimate]). */
static void test_pressure_sources(void **state)
{
	static const struct fdesc dd[] = {F_T, F_C, {"d", SN_D, "m"}, F_END};
	static const struct fdesc dn[] = {F_T, F_C, F_END};
	static const struct {
		const struct fdesc *d;
		struct tp_derive_cfg c;
		double sp, tol;
	} rows[] = {
	    {dn, {0}, 20.011611276988923, 1e-9},         /* auto: 0 dbar */
	    {dd, {0}, 20.009870, 2e-5},                  /* auto: depth */
	    {dn, {.has_depth = true, .depth_m = 9.94}, 20.009870, 2e-5},
	    /* auto: the station's depth_m */
	    {dd, {.pressure = TP_PRES_ZERO}, 20.011611276988923, 1e-9},
	    /* forced 0 though a depth field exists */
	};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;
	const double v[3] = {28.7856, 34.5487, 9.94};
	const uint8_t ok[3] = {1, 1, 1};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		mklayout(&y, rows[i].d);
		assert_int_equal(tp_derive_bind(&y.l, &rows[i].c, &p, NULL),
		                 TP_OK);
		mkreading(&r, &y, v, ok, 3);
		assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
		near(dv(&p, &r, "salinity").v, rows[i].sp, rows[i].tol,
		     "salinity by pressure source");
	}
}

/* Oxygen units.  Garcia & Gordon (1992) check values at 10 degC (IPTS-68,
 * t90 = 10/1.00024) and S 35: 274.610 umol/kg and 6.315 mL/L [CODE,
 * SCIENCE.md 4].  A reading equal to the solubility is 100 % saturated;
 * the mL/L fit and the density conversion agree within 0.1 % [estimate].
 * Per volume: 274.610 umol/kg * rho, with rho = 1026.955 kg/m3 at S 35,
 * 9.9976 degC, 0 dbar (gsw.rho 3.6.16, TEOS-10 [COMP]; the library uses
 * EOS-80, within 0.01 %), and 31.9988 ug per umol for mg/L; 0.1 %. */
static void test_oxygen_units(void **state)
{
	static const struct {
		const char *sn, *unit;
		double o2, pct, tol;
	} rows[] = {
	    {SN_O2M, "umol/kg", 274.610, 100.0, 0.01}, /* the check value */
	    {SN_O2V, "mL/L", 6.315, 100.0, 0.1},       /* the mL/L one */
	    {SN_O2V, "umol/L", 274.610 * 1.02695, 100.0, 0.1},
	    /* per volume, via the density */
	    {SN_O2G, "mg/L", 274.610 * 1.02695 * 0.0319988, 100.0, 0.1},
	    /* mass per volume */
	    {SN_O2M, "umol/kg", 137.305, 50.0, 0.01}, /* half saturated */
	};
	struct fdesc d[] = {F_T, F_SP, F_O2, F_END};
	const struct tp_derive_cfg c = {0};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;
	const uint8_t ok[3] = {1, 1, 1};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		double v[3] = {10.0 / 1.00024, 35.0, rows[i].o2};

		d[2].sn = rows[i].sn;
		d[2].unit = rows[i].unit;
		mklayout(&y, d);
		assert_int_equal(tp_derive_bind(&y.l, &c, &p, NULL), TP_OK);
		mkreading(&r, &y, v, ok, 3);
		assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
		near(dv(&p, &r, "oxygen_solubility").v, 274.610, 5e-4,
		     "O2 solubility G&G check value");
		near(dv(&p, &r, "oxygen_saturation").v, rows[i].pct,
		     rows[i].tol, rows[i].unit);
	}
}

/* Flags.  Layout T, C, pH, O2 with TA 2300 constant; typical reef water
 * (invented): 27 degC, 55 mS/cm, pH 8.05, 200 umol/kg. */
static void test_flags(void **state)
{
	static const struct {
		const char *why;
		double v[4];
		uint8_t f[4];
		const char *name;
		uint8_t want;
	} rows[] = {
	    {"all pass", {27, 55, 8.05, 200}, {1, 1, 1, 1}, "pco2", 1},
	    {"worst input: T suspect", {27, 55, 8.05, 200}, {3, 1, 1, 1},
	     "salinity", 3},
	    {"worst input: C failed", {27, 55, 8.05, 200}, {1, 4, 1, 1},
	     "omega_aragonite", 4},
	    {"an unevaluated input makes the result 2",
	     {27, 55, 8.05, 200}, {1, 1, 2, 1}, "dic", 2},
	    {"pH does not enter oxygen values", {27, 55, 8.05, 200},
	     {1, 1, 4, 1}, "oxygen_saturation", 1},
	    {"missing conductivity: salinity null", {27, NAN, 8.05, 200},
	     {1, 9, 1, 1}, "salinity", 9},
	    {"... and everything that needs salinity",
	     {27, NAN, 8.05, 200}, {1, 9, 1, 1}, "oxygen_solubility", 9},
	    {"... the carbonate values too", {27, NAN, 8.05, 200},
	     {1, 9, 1, 1}, "pco2", 9},
	    {"missing oxygen: solubility still computed",
	     {27, 55, 8.05, NAN}, {1, 1, 1, 9}, "oxygen_solubility", 1},
	    {"missing oxygen: saturation null", {27, 55, 8.05, NAN},
	     {1, 1, 1, 9}, "oxygen_saturation", 9},
	    {"38 degC is outside PSS-78 (-2..35): at least 3",
	     {38, 60, 8.05, 200}, {1, 1, 1, 1}, "salinity", 3},
	    {"outside validity does not lower a 4", {38, 60, 8.05, 200},
	     {1, 4, 1, 1}, "salinity", 4},
	    {"S 8.96 (gsw) is outside Lueker K1/K2 (S 19..43): 3",
	     {27, 16, 8.05, 200}, {1, 1, 1, 1}, "pco2", 3},
	    {"a number with flag 9 is still missing", {27, 55, 8.05, 200},
	     {1, 1, 9, 1}, "pco2", 9},
	};
	static const struct fdesc d[] = {F_T, F_C, F_PH, F_O2, F_END};
	const struct tp_derive_cfg c = {.alk = TP_ALK_CONSTANT,
	                                .alk_umol_kg = 2300};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;
	struct tp_value x;
	size_t i;

	(void)state;
	mklayout(&y, d);
	assert_int_equal(tp_derive_bind(&y.l, &c, &p, NULL), TP_OK);
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		mkreading(&r, &y, rows[i].v, rows[i].f, 4);
		assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
		assert_int_equal(r.n_values, p.n_slots + p.n_out);
		x = dv(&p, &r, rows[i].name);
		if (x.flag != rows[i].want)
			fail_msg("%s: %s flag %u, want %u", rows[i].why,
			         rows[i].name, x.flag, rows[i].want);
		assert_true(rows[i].want == 9 ? isnan(x.v) : isfinite(x.v));
	}
}

/* The solver has no answer: TA 10 umol/kg is less than the borate and
 * water alkalinity at pH 8.05 -> null with flag 9 (carbonate.h). */
static void test_solver_failure(void **state)
{
	static const struct fdesc d[] = {F_T, F_SP, F_PH, F_END};
	const struct tp_derive_cfg c = {.alk = TP_ALK_CONSTANT,
	                                .alk_umol_kg = 10};
	const double v[3] = {25, 35, 8.05};
	const uint8_t ok[3] = {1, 1, 1};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;

	(void)state;
	mklayout(&y, d);
	assert_int_equal(tp_derive_bind(&y.l, &c, &p, NULL), TP_OK);
	mkreading(&r, &y, v, ok, 3);
	assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
	assert_int_equal(dv(&p, &r, "pco2").flag, 9);
	assert_true(isnan(dv(&p, &r, "omega_calcite").v));
	assert_int_equal(dv(&p, &r, "alkalinity").flag, 1); /* the constant */
	/* A reading already carrying derived values is refused. */
	assert_int_equal(tp_derive_apply(&p, &r), TP_ERR_ARG);
}

/* Case B of SCIENCE.md 5.4: TA 2300, pH_T 8.05, S 35, 25 degC, p 0,
 * Lueker K1/K2, Dickson KS, K_F Dickson & Riley; PyCO2SYS 1.8.3.4
 * [COMP].  Tolerances: Orr et al. 2015 for pCO2 (0.2 uatm) and CO3
 * (0.1 umol/kg); fCO2 as pCO2, DIC as CO3, Omega 0.002 (= 0.1 umol/kg
 * CO3 [derived]). */
static void test_case_b(void **state)
{
	static const struct {
		enum tp_boron b;
		double dic, pco2, fco2, co3, om_ar, om_ca;
	} rows[] = {
	    {TP_BORON_U74, 1997.57, 392.36, 391.11, 214.97, 3.4110, 5.1750},
	    /* Uppstroem 1974 (default) */
	    {TP_BORON_LKB10, 1994.18, 391.69, 390.45, 214.61, 3.4052,
	     5.1662}, /* Lee et al. 2010 */
	};
	static const struct fdesc d[] = {F_T, F_SP, F_PH, F_END};
	const double v[3] = {25, 35, 8.05};
	const uint8_t ok[3] = {1, 1, 1};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;
	size_t i;

	(void)state;
	mklayout(&y, d);
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		struct tp_derive_cfg c = {.alk = TP_ALK_CONSTANT,
		                          .alk_umol_kg = 2300,
		                          .co2 = {rows[i].b, TP_KF_DR79}};

		assert_int_equal(tp_derive_bind(&y.l, &c, &p, NULL), TP_OK);
		mkreading(&r, &y, v, ok, 3);
		assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
		near(dv(&p, &r, "pco2").v, rows[i].pco2, 0.2, "pCO2");
		near(dv(&p, &r, "fco2").v, rows[i].fco2, 0.2, "fCO2");
		near(dv(&p, &r, "dic").v, rows[i].dic, 0.1, "DIC");
		near(dv(&p, &r, "carbonate_ion").v, rows[i].co3, 0.1, "CO3");
		near(dv(&p, &r, "omega_aragonite").v, rows[i].om_ar, 2e-3,
		     "Omega ar");
		near(dv(&p, &r, "omega_calcite").v, rows[i].om_ca, 3e-3,
		     "Omega ca");
		near(dv(&p, &r, "alkalinity").v, 2300, 0, "TA constant");
		assert_int_equal(dv(&p, &r, "pco2").flag, 1);
	}
}

/* TA linear in salinity: CONFIG.md's example 65.4 umol/kg per unit S,
 * at_zero 0 -> 2289 umol/kg at S 35 (arithmetic). */
static void test_alkalinity_salinity(void **state)
{
	static const struct fdesc d[] = {F_T, F_SP, F_PH, F_END};
	const struct tp_derive_cfg c = {.alk = TP_ALK_SALINITY,
	                                .alk_per_salinity = 65.4,
	                                .alk_at_zero = 0};
	const double v[3] = {25, 35, 8.05};
	const uint8_t f[3] = {1, 3, 1};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;

	(void)state;
	mklayout(&y, d);
	assert_int_equal(tp_derive_bind(&y.l, &c, &p, NULL), TP_OK);
	mkreading(&r, &y, v, f, 3);
	assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
	near(dv(&p, &r, "alkalinity").v, 2289.0, 1e-9, "TA from S");
	assert_int_equal(dv(&p, &r, "alkalinity").flag, 3); /* from S's 3 */
}

/* Warm reef-flat water, 28 degC, S 35, TA 2300, pH 8.05: aragonite
 * saturation ~3-4 (common practice for tropical surface water, no
 * source); and pH measured at 25 degC re-expressed in situ at 28 degC
 * falls, by about 0.015 per K [from memory]. */
static void test_reef_and_insitu(void **state)
{
	static const struct fdesc d[] = {F_T, F_SP, F_PH, F_END};
	const struct tp_derive_cfg c1 = {.alk = TP_ALK_CONSTANT,
	                                 .alk_umol_kg = 2300};
	const struct tp_derive_cfg c2 = {.alk = TP_ALK_CONSTANT,
	                                 .alk_umol_kg = 2300,
	                                 .meas_t = TP_MEAS_T_CONSTANT,
	                                 .meas_t_c = 25};
	const double v[3] = {28, 35, 8.05};
	const uint8_t ok[3] = {1, 1, 1};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;
	struct tp_co2_system s;
	double om;

	(void)state;
	mklayout(&y, d);
	assert_int_equal(tp_derive_bind(&y.l, &c1, &p, NULL), TP_OK);
	assert_null(tp_derive_find(&p, "ph_insitu"));
	mkreading(&r, &y, v, ok, 3);
	assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
	om = dv(&p, &r, "omega_aragonite").v;
	if (!(om > 3.0 && om < 4.0))
		fail_msg("reef Omega_ar %g outside 3..4", om);

	assert_int_equal(tp_derive_bind(&y.l, &c2, &p, NULL), TP_OK);
	mkreading(&r, &y, v, ok, 3);
	assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
	near(dv(&p, &r, "ph_insitu").v, 8.05 - 3 * 0.015, 0.01,
	     "in-situ pH, 25 -> 28 degC");
	/* The carbonate values are those at the in-situ temperature. */
	assert_int_equal(tp_co2_ph_at(8.05, 25, 2300, 35, 28, NULL, &s),
	                 TP_OK);
	near(dv(&p, &r, "pco2").v, s.pco2, 1e-9, "pCO2 in situ");
	near(dv(&p, &r, "ph_insitu").v, s.ph, 1e-12, "pH in situ");
}

/* pH from the mCP ratio: R 1, S 35, 25 degC: Liu et al. 2011 7.670834
 * [COMP, SCIENCE.md 6]; Mueller & Rehder 2018 7.6713 (seacarb example
 * test value [CODE]). */
static void test_mcp(void **state)
{
	static const struct {
		enum tp_mcp_method m;
		double ph, tol;
	} rows[] = {
	    {TP_MCP_LIU2011, 7.670834, 1e-6}, /* default method */
	    {TP_MCP_MR2018, 7.6713, 5e-5},    /* brackish method */
	};
	static const struct fdesc d[] = {F_T, F_SP, F_R, F_END};
	const double v[3] = {18, 35, 1.0};
	const uint8_t ok[3] = {1, 1, 1};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;
	size_t i;

	(void)state;
	mklayout(&y, d);
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		struct tp_derive_cfg c = {.ph_from_r = true,
		                          .mcp = rows[i].m,
		                          .meas_t = TP_MEAS_T_CONSTANT,
		                          .meas_t_c = 25,
		                          .field = {[TP_DIN_MCP_R] = "r_mcp"}};

		assert_int_equal(tp_derive_bind(&y.l, &c, &p, NULL), TP_OK);
		mkreading(&r, &y, v, ok, 3);
		assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
		near(dv(&p, &r, "ph").v, rows[i].ph, rows[i].tol, "mCP pH");
	}
}

/* Measurement temperature from a field (CF temperature_of_analysis_of_
 * sea_water): its flag enters the in-situ values; missing -> null. */
static void test_meas_t_field(void **state)
{
	static const struct {
		uint8_t tm_flag;
		uint8_t want;
	} rows[] = {
	    {1, 1}, /* all inputs pass */
	    {3, 3}, /* a suspect cell temperature makes ph_insitu suspect */
	    {9, 9}, /* no cell temperature: no in-situ values */
	};
	static const struct fdesc d[] = {
	    F_T, F_SP, F_PH,
	    {"cell_t", "temperature_of_analysis_of_sea_water", "degC"}, F_END};
	const struct tp_derive_cfg c = {.alk = TP_ALK_CONSTANT,
	                                .alk_umol_kg = 2300,
	                                .meas_t = TP_MEAS_T_FIELD};
	const double v[4] = {28, 35, 8.05, 25};
	struct lay y;
	struct tp_derive_plan p;
	struct tp_reading r;
	size_t i;

	(void)state;
	mklayout(&y, d);
	assert_int_equal(tp_derive_bind(&y.l, &c, &p, NULL), TP_OK);
	assert_int_equal(p.in[TP_DIN_MEAS_T], 5);
	for (i = 0; i < sizeof rows / sizeof rows[0]; i++) {
		const uint8_t f[4] = {1, 1, 1, rows[i].tm_flag};

		mkreading(&r, &y, v, f, 4);
		assert_int_equal(tp_derive_apply(&p, &r), TP_OK);
		assert_int_equal(dv(&p, &r, "ph_insitu").flag, rows[i].want);
		assert_int_equal(dv(&p, &r, "omega_aragonite").flag,
		                 rows[i].want);
	}
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test(test_bind),
	    cmocka_unit_test(test_plan_slots),
	    cmocka_unit_test(test_conductivity_units),
	    cmocka_unit_test(test_pressure_sources),
	    cmocka_unit_test(test_oxygen_units),
	    cmocka_unit_test(test_flags),
	    cmocka_unit_test(test_solver_failure),
	    cmocka_unit_test(test_case_b),
	    cmocka_unit_test(test_alkalinity_salinity),
	    cmocka_unit_test(test_reef_and_insitu),
	    cmocka_unit_test(test_mcp),
	    cmocka_unit_test(test_meas_t_field),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
