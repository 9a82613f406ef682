/*
 * test_seawater.c - PSS-78 salinity (and its Hill extension), the
 * conductivity inverse, depth/pressure, EOS-80 density, Garcia & Gordon
 * oxygen solubility and saturation, and mCP indicator pH.
 *
 * Check values carry their source and the tag of docs/design SCIENCE.md:
 * [DOC] read in the publication or its official page, [CODE] quoted by
 * public code citing the publication, [COMP] computed with a reference
 * library (python3-gsw 3.6.16) or from the published formulas, [from
 * memory] unverified recollection.
 */
#include <math.h>
#include <stdarg.h>
#include <stdbool.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>

#include <cmocka.h>

#include "tidepost/mcp.h"
#include "tidepost/seawater.h"

#define T68   1.00024 /* t68 = 1.00024 t90 */
#define C3515 42.914  /* mS/cm */

static void near(double got, double want, double tol, const char *what, int row)
{
	if (!(fabs(got - want) <= tol))
		fail_msg("%s row %d: got %.12g, want %.12g (tol %g)", what, row,
		         got, want, tol);
}

/* ---- PSS-78 ---------------------------------------------------------- */

struct sp_case {
	double c_mscm, t90, p, sp, tol;
};

/* Fofonoff & Millard (1983) check values, given as R = C/C(35,15,0) and
 * IPTS-68 temperature; fed here as C = 42.914 R, t90 = t68 / 1.00024. */
static const struct sp_case unesco[] = {
    /* R 1, 15 degC, 0 dbar -> 35.000000: UNESCO 1983 p. 9 [CODE] */
    {1.0 * C3515, 15.0 / T68, 0.0, 35.000000, 1e-6},
    /* R 1.2, 20 degC, 2000 dbar -> 37.245628: UNESCO 1983 p. 9 [CODE] */
    {1.2 * C3515, 20.0 / T68, 2000.0, 37.245628, 1e-6},
    /* R 0.65, 5 degC, 1500 dbar -> 27.995347: UNESCO 1983 p. 9 [CODE] */
    {0.65 * C3515, 5.0 / T68, 1500.0, 27.995347, 1e-6},
    /* R 1.888091, 40 degC, 10000 dbar -> 40.00000: FORTRAN SAL78
     * header, UNESCO 1983 p. 11 [CODE]; R is rounded, so gsw gives
     * 39.999996 [COMP]: tolerance 1e-5 */
    {1.888091 * C3515, 40.0 / T68, 10000.0, 40.00000, 1e-5},
    /* the unrounded R of the inverse check (Pascal port CND,
     * [CODE]) gives 40.000000 in gsw [COMP] */
    {1.8880911555787682 * C3515, 40.0 / T68, 10000.0, 40.0, 1e-8},
};

/* TEOS-10 gsw_SP_from_C documented example, v3.05 [DOC]; gsw 3.6.16
 * reproduces it bit-for-bit [COMP]. */
static const struct sp_case teos10[] = {
    {34.5487, 28.7856, 10.0, 20.009869599086951, 1e-9},
    {34.7275, 28.4329, 50.0, 20.265511864874270, 1e-9},
    {34.8605, 22.8103, 125.0, 22.981513062527689, 1e-9},
    {34.6810, 10.2600, 250.0, 31.204503263727982, 1e-9},
    {34.5680, 6.8863, 600.0, 34.032315787432829, 1e-9},
    {34.5600, 4.4036, 1000.0, 36.400308494388170, 1e-9},
};

/* gsw.SP_from_C grid, SCIENCE.md 3.4 [COMP], printed to 6 decimals. */
static const struct sp_case grid[] = {
    {20.0, 0.0, 0.0, 23.254212, 1e-6}, /* cold, fresh-ish */
    {25.0, 5.0, 10.0, 25.374072, 1e-6},
    {30.0, 10.0, 0.0, 26.859166, 1e-6},
    {35.0, 15.0, 20.0, 27.883914, 1e-6},
    {40.0, 20.0, 0.0, 28.604726, 1e-6},
    /* standard conductivity at 15 degC ITS-90 (not IPTS-68) */
    {42.914, 15.0, 0.0, 34.996770, 1e-6},
    {45.0, 25.0, 5.0, 29.092461, 1e-6},
    {50.0, 30.0, 0.0, 29.422940, 1e-6},
    {55.0, 35.0, 50.0, 29.627802, 1e-6}, /* warm edge of validity */
    {60.0, 35.0, 0.0, 32.682623, 1e-6},
    {2.0, 10.0, 0.0, 1.461806, 1e-6}, /* Hill region */
    {0.5, 20.0, 0.0, 0.268206, 1e-6}, /* Hill region, dilute */
};

static void run_sp(const struct sp_case *t, size_t n, const char *what)
{
	size_t i;

	for (i = 0; i < n; i++) {
		double sp;
		bool valid;

		assert_int_equal(tp_sp_from_c(t[i].c_mscm, TP_COND_MS_CM,
		                              t[i].t90, t[i].p, &sp, &valid),
		                 TP_OK);
		near(sp, t[i].sp, t[i].tol, what, (int)i);
	}
}

static void test_sp_unesco(void **state)
{
	(void)state;
	run_sp(unesco, sizeof(unesco) / sizeof(unesco[0]), "unesco");
}

static void test_sp_teos10(void **state)
{
	(void)state;
	run_sp(teos10, sizeof(teos10) / sizeof(teos10[0]), "teos10");
}

static void test_sp_grid(void **state)
{
	(void)state;
	run_sp(grid, sizeof(grid) / sizeof(grid[0]), "grid");
}

/* IPTS-68 values passed unconverted as ITS-90 give these [COMP] (gsw):
 * a missing t68 conversion inside the function would instead give the
 * published 35, 37.245628, 27.995347 here. */
static void test_sp_catches_missing_t68(void **state)
{
	static const struct sp_case wrong[] = {
	    {1.0 * C3515, 15.0, 0.0, 34.996770, 1e-6},
	    {1.2 * C3515, 20.0, 2000.0, 37.241438, 1e-6},
	    {0.65 * C3515, 5.0, 1500.0, 27.994358, 1e-6},
	};

	(void)state;
	run_sp(wrong, sizeof(wrong) / sizeof(wrong[0]), "t68 trap");
}

/* S/m and uS/cm give the same salinity as mS/cm (1 S/m = 10 mS/cm). */
static void test_sp_units(void **state)
{
	double a, b, c;
	bool v;

	(void)state;
	assert_int_equal(tp_sp_from_c(42.914, TP_COND_MS_CM, 15.0, 0, &a, &v),
	                 TP_OK);
	assert_int_equal(tp_sp_from_c(4.2914, TP_COND_S_M, 15.0, 0, &b, &v),
	                 TP_OK);
	assert_int_equal(tp_sp_from_c(42914.0, TP_COND_US_CM, 15.0, 0, &c, &v),
	                 TP_OK);
	near(b, a, 1e-12, "S/m", 0);
	near(c, a, 1e-12, "uS/cm", 0);
}

struct valid_case {
	double c, t90, p;
	bool valid;
};

static void test_sp_validity(void **state)
{
	static const struct valid_case t[] = {
	    {42.914, 15.0, 0.0, true},      /* the reference point */
	    {42.914, 36.0, 0.0, false},     /* t above 35 degC */
	    {42.914, -2.5, 0.0, false},     /* t below -2 degC */
	    {42.914, 15.0, -0.5, false},    /* negative sea pressure */
	    {42.914, 15.0, 10001.0, false}, /* beyond 10000 dbar */
	    {70.0, 20.0, 0.0, false},       /* SP about 51 > 42 */
	    {0.5, 20.0, 0.0, true},         /* Hill region is valid */
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(t) / sizeof(t[0]); i++) {
		double sp;
		bool valid = !t[i].valid;

		assert_int_equal(tp_sp_from_c(t[i].c, TP_COND_MS_CM, t[i].t90,
		                              t[i].p, &sp, &valid),
		                 TP_OK);
		if (valid != t[i].valid)
			fail_msg("validity row %zu: got %d", i, (int)valid);
	}
}

struct err_case {
	double c, t90, p;
	int unit;
	enum tp_status want;
};

static void test_sp_errors(void **state)
{
	static const struct err_case t[] = {
	    {NAN, 15.0, 0.0, TP_COND_MS_CM, TP_ERR_ARG},      /* NaN C */
	    {40.0, INFINITY, 0.0, TP_COND_MS_CM, TP_ERR_ARG}, /* inf t */
	    {-0.1, 15.0, 0.0, TP_COND_MS_CM, TP_ERR_ARG},     /* C < 0 */
	    {40.0, 15.0, 0.0, 7, TP_ERR_ARG},                 /* unit */
	    {40.0, -60.0, 0.0, TP_COND_MS_CM, TP_ERR_ARG},    /* absurd t */
	    /* absurd C: no finite salinity */
	    {1e308, 10.0, 0.0, TP_COND_MS_CM, TP_ERR_RANGE},
	    /* 1 nS/cm: Hill goes negative, gsw gives NaN [COMP] */
	    {1e-6, 10.0, 0.0, TP_COND_MS_CM, TP_ERR_RANGE},
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(t) / sizeof(t[0]); i++) {
		double sp = 1.0;
		bool valid = true;

		assert_int_equal(tp_sp_from_c(t[i].c,
		                              (enum tp_cond_unit)t[i].unit,
		                              t[i].t90, t[i].p, &sp, &valid),
		                 t[i].want);
		assert_true(isnan(sp));
		assert_false(valid);
	}
	assert_int_equal(tp_sp_from_c(40, TP_COND_MS_CM, 15, 0, NULL, NULL),
	                 TP_ERR_ARG);
	/* exactly zero conductivity is pure water: SP 0 */
	{
		double sp;
		bool valid;

		assert_int_equal(
		    tp_sp_from_c(0.0, TP_COND_MS_CM, 10, 0, &sp, &valid),
		    TP_OK);
		near(sp, 0.0, 1e-15, "zero C", 0);
	}
}

/* The inverse: UNESCO 1983 FORTRAN check "cnd = 1.888091" for S 40,
 * 40 degC (IPTS-68), 10000 dbar [CODE]; the Pascal port's unrounded
 * 1.8880911555787682 [CODE], which gsw.C_from_SP reproduces [COMP]. */
static void test_c_from_sp(void **state)
{
	double c;
	bool valid;

	(void)state;
	assert_int_equal(tp_c_from_sp(40.0, 40.0 / T68, 10000.0, &c, &valid),
	                 TP_OK);
	near(c / C3515, 1.888091, 5e-7, "cnd", 0);
	near(c / C3515, 1.8880911555787682, 1e-10, "cnd", 1);
	assert_false(valid); /* 40 degC is outside -2..35 */
	/* S 35 at 15 degC IPTS-68 is C(35,15,0) by definition */
	assert_int_equal(tp_c_from_sp(35.0, 15.0 / T68, 0.0, &c, &valid),
	                 TP_OK);
	near(c, C3515, 1e-5, "c3515", 0);
	assert_true(valid);
	assert_int_equal(tp_c_from_sp(-1.0, 15.0, 0.0, &c, &valid), TP_ERR_ARG);
	assert_true(isnan(c));
}

/* Round trip over a grid including the Hill region and SP = 2 exactly:
 * the inverse is solved on the forward function, so SP comes back to
 * 1e-9; and SP is continuous across 2 (the Hill scaling). */
static void test_sp_round_trip(void **state)
{
	static const double sps[] = {0.01, 0.5, 1.999, 2.0, 2.001, 10, 35, 42};
	static const double ts[] = {-2, 0, 12.5, 25, 35};
	size_t i, j;

	(void)state;
	for (i = 0; i < sizeof(sps) / sizeof(sps[0]); i++) {
		for (j = 0; j < sizeof(ts) / sizeof(ts[0]); j++) {
			double c, sp, lo, hi;
			bool v;

			assert_int_equal(
			    tp_c_from_sp(sps[i], ts[j], 100, &c, &v), TP_OK);
			assert_int_equal(
			    tp_sp_from_c(c, TP_COND_MS_CM, ts[j], 100, &sp, &v),
			    TP_OK);
			near(sp, sps[i], 1e-9, "round trip", (int)(i * 10 + j));
			if (sps[i] != 2.0)
				continue;
			tp_sp_from_c(c - 1e-7, TP_COND_MS_CM, ts[j], 100, &lo,
			             &v);
			tp_sp_from_c(c + 1e-7, TP_COND_MS_CM, ts[j], 100, &hi,
			             &v);
			assert_true(lo < 2.0 && hi > 2.0);
			near(hi - lo, 0.0, 1e-6, "continuity at 2", (int)j);
		}
	}
}

/* ---- depth / pressure ------------------------------------------------ */

static void test_depth_pressure(void **state)
{
	double z, p;
	bool v;

	(void)state;
	/* 10000 dbar at 30 deg -> 9712.653 m: UNESCO 1983 p. 28 check
	 * value [from memory] */
	assert_int_equal(tp_depth_from_p(10000.0, 30.0, &z, &v), TP_OK);
	near(z, 9712.653, 5e-4, "depth", 0);
	assert_true(v);
	/* inverse to 1e-8 dbar */
	assert_int_equal(tp_p_from_depth(z, 30.0, &p, &v), TP_OK);
	near(p, 10000.0, 1e-8, "pressure", 0);
	/* shallow: 10 m at the equator and pole; Saunders (1981) eq. 3
	 * gives p ~ z / (1 - c1), c1 = (5.92 + 5.25 sin^2 lat) 1e-3, near
	 * the surface: 10.060 and 10.113 dbar [COMP from his formula] */
	assert_int_equal(tp_p_from_depth(10.0, 0.0, &p, &v), TP_OK);
	assert_true(p > 10.05 && p < 10.07);
	assert_int_equal(tp_p_from_depth(10.0, 90.0, &p, &v), TP_OK);
	assert_true(p > 10.10 && p < 10.12);
	assert_int_equal(tp_p_from_depth(0.0, 45.0, &p, &v), TP_OK);
	near(p, 0.0, 1e-12, "surface", 0);
	/* errors and validity */
	assert_int_equal(tp_p_from_depth(10.0, 91.0, &p, &v), TP_ERR_ARG);
	assert_true(isnan(p));
	assert_int_equal(tp_depth_from_p(NAN, 0.0, &z, &v), TP_ERR_ARG);
	assert_int_equal(tp_depth_from_p(-5.0, 0.0, &z, &v), TP_OK);
	assert_false(v);
}

/* ---- density ----------------------------------------------------------- */

static void test_rho0(void **state)
{
	double rho;
	bool v;

	(void)state;
	/* SMOW at 0 degC: 999.842594 kg/m3, the constant term of the
	 * Bigg (1967) / EOS-80 pure-water polynomial [DOC, Millero &
	 * Poisson 1981 as quoted in UNESCO 1983] */
	assert_int_equal(tp_sw_rho0(0.0, 0.0, &rho, &v), TP_OK);
	near(rho, 999.842594, 1e-9, "rho", 0);
	/* S 35, 25 degC (IPTS-68): 1023.343 kg/m3 [from memory] */
	assert_int_equal(tp_sw_rho0(35.0, 25.0 / T68, &rho, &v), TP_OK);
	near(rho, 1023.343, 6e-4, "rho", 1);
	assert_true(v);
	assert_int_equal(tp_sw_rho0(45.0, 25.0, &rho, &v), TP_OK);
	assert_false(v);
	/* freezing point S 40, 500 dbar: -2.588567 degC, UNESCO 1983 p. 30
	 * [from memory] */
	near(tp_sw_freezing_t(40.0, 500.0), -2.588567, 1e-6, "t_f", 0);
}

/* ---- oxygen ------------------------------------------------------------ */

struct o2_case {
	double sp, t90, want, tol;
};

/* TEOS-10 gsw_O2sol_SP_pt documented example, v3.05 [DOC]; pt = t90 at
 * p = 0.  gsw converts pt68 = 1.00024 pt as we do. */
static const struct o2_case o2_teos10[] = {
    {34.7118, 28.8099, 194.6825431692940, 1e-9},
    {34.8915, 28.4392, 195.6135062814438, 1e-9},
    {35.0256, 22.7862, 214.6559360234014, 1e-9},
    {34.8472, 10.2262, 273.5652832698713, 1e-9},
    {34.7366, 6.8272, 295.1580761415903, 1e-9},
    {34.7324, 4.3236, 312.9598716631408, 1e-9},
};

/* gsw.O2sol_SP_pt grid, SCIENCE.md 4 [COMP], 6 decimals. */
static const struct o2_case o2_grid[] = {
    {0, 0, 457.005730, 1e-6}, /* fresh, cold: maximum */
    {0, 20, 284.625295, 1e-6},
    {0, 35, 218.458871, 1e-6},
    {10, 5, 370.413385, 1e-6}, /* brackish */
    {20, 15, 274.795134, 1e-6},
    {30, 25, 213.533071, 1e-6},
    {35, 0, 347.902871, 1e-6},
    {35, 10, 274.595664, 1e-6}, /* the G&G point, t as ITS-90 */
    {35, 20, 225.517078, 1e-6},
    {35, 25, 206.766791, 1e-6},
    {35, 30, 190.718982, 1e-6},
    {40, 0, 334.588239, 1e-6},
    {40, 35, 171.452697, 1e-6},
};

static void run_o2(const struct o2_case *t, size_t n, const char *what)
{
	size_t i;

	for (i = 0; i < n; i++) {
		double o;
		bool v;

		assert_int_equal(tp_o2_solubility(t[i].sp, t[i].t90,
		                                  TP_O2SOL_UMOL_KG, &o, &v),
		                 TP_OK);
		near(o, t[i].want, t[i].tol, what, (int)i);
		assert_true(v);
	}
}

static void test_o2sol_teos10(void **state)
{
	(void)state;
	run_o2(o2_teos10, sizeof(o2_teos10) / sizeof(o2_teos10[0]), "o2 doc");
	run_o2(o2_grid, sizeof(o2_grid) / sizeof(o2_grid[0]), "o2 grid");
}

/* Garcia & Gordon (1992) check values at 10 degC (IPTS-68), S 35:
 * 274.610 umol/kg and 6.315 mL/L ([CODE], an R package doc-comment
 * quoting the paper). */
static void test_o2sol_garcia_gordon(void **state)
{
	double o;
	bool v;

	(void)state;
	assert_int_equal(
	    tp_o2_solubility(35, 10 / T68, TP_O2SOL_UMOL_KG, &o, &v), TP_OK);
	near(o, 274.610, 5e-4, "G&G umol/kg", 0);
	assert_int_equal(tp_o2_solubility(35, 10 / T68, TP_O2SOL_ML_L, &o, &v),
	                 TP_OK);
	near(o, 6.315, 5e-4, "G&G mL/L", 0);
	/* validity: 40 degC limit, freezing point, salinity 42 */
	tp_o2_solubility(35, 40.5, TP_O2SOL_UMOL_KG, &o, &v);
	assert_false(v);
	tp_o2_solubility(35, -1.95, TP_O2SOL_UMOL_KG, &o, &v);
	assert_false(v); /* below t_f(35) = -1.92 degC */
	tp_o2_solubility(0, -0.5, TP_O2SOL_UMOL_KG, &o, &v);
	assert_false(v); /* fresh water freezes at 0 */
	tp_o2_solubility(43, 10, TP_O2SOL_UMOL_KG, &o, &v);
	assert_false(v);
	assert_int_equal(tp_o2_solubility(-1, 10, TP_O2SOL_UMOL_KG, &o, &v),
	                 TP_ERR_ARG);
	assert_true(isnan(o));
	assert_int_equal(
	    tp_o2_solubility(35, 10, (enum tp_o2sol_unit)9, &o, &v),
	    TP_ERR_ARG);
}

/* The two Garcia & Gordon fits are the same data in two units: the mL/L
 * fit converted with 44.6596 umol/mL and EOS-80 density must match the
 * umol/kg fit.  Tolerance 0.05 % [invented; the fits' own rms error is
 * about 0.03 %, Garcia & Gordon 1992, from memory]. */
static void test_o2_units_consistent(void **state)
{
	static const double sps[] = {0, 20, 35, 40};
	static const double ts[] = {0, 10, 25, 35};
	size_t i, j;

	(void)state;
	for (i = 0; i < 4; i++) {
		for (j = 0; j < 4; j++) {
			double ml, umol, conv, sat;
			bool v;

			tp_o2_solubility(sps[i], ts[j], TP_O2SOL_ML_L, &ml, &v);
			tp_o2_solubility(sps[i], ts[j], TP_O2SOL_UMOL_KG, &umol,
			                 &v);
			assert_int_equal(tp_o2_to_umolkg(ml, TP_O2_ML_L, sps[i],
			                                 ts[j], &conv, &v),
			                 TP_OK);
			near(conv / umol, 1.0, 5e-4, "mL/L fit",
			     (int)(i * 4 + j));
			assert_int_equal(tp_o2_saturation(ml, TP_O2_ML_L,
			                                  sps[i], ts[j], &sat,
			                                  &v),
			                 TP_OK);
			near(sat, 100.0, 0.05, "sat of mL/L fit",
			     (int)(i * 4 + j));
		}
	}
}

/* Conversions by hand: 1 mg/L = 1000/31.9988 umol/L; 1 mL/L = 44.6596
 * umol/L; umol/kg = umol/L * 1000 / rho. */
static void test_o2_conversions(void **state)
{
	double rho, a, b, sat;
	bool v;

	(void)state;
	assert_int_equal(tp_sw_rho0(35, 10, &rho, &v), TP_OK);
	tp_o2_to_umolkg(8.0, TP_O2_MG_L, 35, 10, &a, &v);
	near(a, 8.0 * 1000.0 / 31.9988 * 1000.0 / rho, 1e-9, "mg/L", 0);
	tp_o2_to_umolkg(250.0, TP_O2_UMOL_L, 35, 10, &a, &v);
	near(a, 250.0 * 1000.0 / rho, 1e-9, "umol/L", 0);
	tp_o2_to_umolkg(5.0, TP_O2_ML_L, 35, 10, &a, &v);
	near(a, 5.0 * 44.6596 * 1000.0 / rho, 1e-9, "mL/L", 0);
	assert_int_equal(
	    tp_o2_to_umolkg(123.0, TP_O2_UMOL_KG, NAN, NAN, &b, &v), TP_OK);
	near(b, 123.0, 0.0, "umol/kg passes through", 0);
	assert_true(v);
	/* a reading equal to the solubility is 100 %; half of it 50 % */
	tp_o2_solubility(30, 18, TP_O2SOL_UMOL_KG, &a, &v);
	tp_o2_saturation(a, TP_O2_UMOL_KG, 30, 18, &sat, &v);
	near(sat, 100.0, 1e-9, "100 %", 0);
	tp_o2_saturation(a / 2, TP_O2_UMOL_KG, 30, 18, &sat, &v);
	near(sat, 50.0, 1e-9, "50 %", 0);
	assert_true(v);
	assert_int_equal(
	    tp_o2_saturation(200, (enum tp_o2_unit)8, 30, 18, &sat, &v),
	    TP_ERR_ARG);
	assert_true(isnan(sat));
	assert_int_equal(
	    tp_o2_saturation(200, TP_O2_UMOL_KG, 30, NAN, &sat, &v),
	    TP_ERR_ARG);
	tp_o2_saturation(200, TP_O2_UMOL_KG, 30, 41, &sat, &v);
	assert_false(v);
}

/* ---- mCP pH ------------------------------------------------------------ */

struct mcp_case {
	double sp, t_k, r, liu, mr18;
};

/* SCIENCE.md 6 [COMP]: pH_T from the Liu et al. (2011) and Mueller &
 * Rehder (2018) equations, 6 decimals.  Rows vary R, S and T. */
static const struct mcp_case mcp_rows[] = {
    {35, 298.15, 1.0, 7.670834, 7.671282}, /* centre point */
    {35, 298.15, 0.5, 7.354424, 7.354872}, /* low R */
    {35, 298.15, 1.5, 7.861029, 7.861477},
    {35, 298.15, 2.0, 8.000074, 8.000522}, /* high R */
    {20, 298.15, 1.0, 7.712311, 7.714219}, /* Liu's lowest S */
    {40, 298.15, 1.0, 7.666734, 7.666702}, /* highest S */
    {35, 278.15, 1.0, 7.936861, 7.936873}, /* 5 degC */
    {35, 308.15, 1.0, 7.545254, 7.546157}, /* 35 degC */
    {30, 288.15, 1.2, 7.891401, 7.890981}, /* all off-centre */
};

static void test_mcp_table(void **state)
{
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(mcp_rows) / sizeof(mcp_rows[0]); i++) {
		const struct mcp_case *c = &mcp_rows[i];
		double ph;
		bool v;

		assert_int_equal(tp_mcp_ph(TP_MCP_LIU2011, c->r, c->sp,
		                           c->t_k - 273.15, &ph, &v),
		                 TP_OK);
		near(ph, c->liu, 1e-6, "liu", (int)i);
		assert_true(v);
		assert_int_equal(tp_mcp_ph(TP_MCP_MR2018, c->r, c->sp,
		                           c->t_k - 273.15, &ph, &v),
		                 TP_OK);
		near(ph, c->mr18, 1e-6, "mr18", (int)i);
		assert_true(v);
	}
}

/* Mueller & Rehder (2018) control values: pK2e2(S 20, 298.15 K) = 7.6920
 * and pH_T(S 20, 298.15 K, R 1) = 7.7142 (authors' snippet [CODE]);
 * seacarb pHspec(S 35, T 25, R 1, k "m18") = 7.6713 [CODE].  The Liu
 * value -log(K2 e2) at S 35, 298.15 K is 7.647931 [COMP]: a log10 in
 * place of the natural log (a known slip) would miss it by ~50. */
static void test_mcp_control(void **state)
{
	double x;
	bool v;

	(void)state;
	tp_mcp_pk2e2(TP_MCP_MR2018, 20, 25, &x, &v);
	near(x, 7.6920, 5e-5, "pK2e2 m18", 0);
	tp_mcp_ph(TP_MCP_MR2018, 1.0, 20, 25, &x, &v);
	near(x, 7.7142, 5e-5, "pH m18 S20", 0);
	tp_mcp_ph(TP_MCP_MR2018, 1.0, 35, 25, &x, &v);
	near(x, 7.6713, 5e-5, "pH m18 S35", 0);
	tp_mcp_pk2e2(TP_MCP_LIU2011, 35, 25, &x, &v);
	near(x, 7.647931, 1e-6, "pK2e2 liu", 0);
}

/* The guard e1 < R < 1/(e3/e2): 0.005707 < R < 17.61 at 298.15 K, S 35
 * [COMP, SCIENCE.md 6]. */
static void test_mcp_guard(void **state)
{
	static const double bad_r[] = {-1.0, 0.0, 0.005, 0.0057, 17.62, 100.0};
	double lo, hi, ph;
	bool v;
	size_t i;

	(void)state;
	assert_int_equal(tp_mcp_r_limits(35, 25, &lo, &hi), TP_OK);
	near(lo, 0.005707, 1e-6, "r_min", 0);
	near(hi, 17.61, 0.01, "r_max", 0);
	for (i = 0; i < sizeof(bad_r) / sizeof(bad_r[0]); i++) {
		ph = 0.0;
		v = true;
		assert_int_equal(
		    tp_mcp_ph(TP_MCP_LIU2011, bad_r[i], 35, 25, &ph, &v),
		    TP_ERR_RANGE);
		assert_true(isnan(ph));
		assert_false(v);
	}
	/* just inside both limits still computes */
	assert_int_equal(tp_mcp_ph(TP_MCP_LIU2011, 0.0058, 35, 25, &ph, &v),
	                 TP_OK);
	assert_int_equal(tp_mcp_ph(TP_MCP_LIU2011, 17.6, 35, 25, &ph, &v),
	                 TP_OK);
	assert_int_equal(tp_mcp_ph(TP_MCP_LIU2011, NAN, 35, 25, &ph, &v),
	                 TP_ERR_ARG);
	assert_int_equal(tp_mcp_ph((enum tp_mcp_method)5, 1, 35, 25, &ph, &v),
	                 TP_ERR_ARG);
}

/* Validity: Liu 20..40 S, MR18 5..40 S, both 5..35 degC. */
static void test_mcp_validity(void **state)
{
	double ph;
	bool v;

	(void)state;
	tp_mcp_ph(TP_MCP_LIU2011, 1.0, 10, 25, &ph, &v);
	assert_false(v); /* brackish: outside Liu */
	tp_mcp_ph(TP_MCP_MR2018, 1.0, 10, 25, &ph, &v);
	assert_true(v); /* inside Mueller & Rehder */
	tp_mcp_ph(TP_MCP_MR2018, 1.0, 3, 25, &ph, &v);
	assert_false(v);
	tp_mcp_ph(TP_MCP_MR2018, 1.0, 35, 36, &ph, &v);
	assert_false(v);
	tp_mcp_ph(TP_MCP_LIU2011, 1.0, 35, 4, &ph, &v);
	assert_false(v);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test(test_sp_unesco),
	    cmocka_unit_test(test_sp_teos10),
	    cmocka_unit_test(test_sp_grid),
	    cmocka_unit_test(test_sp_catches_missing_t68),
	    cmocka_unit_test(test_sp_units),
	    cmocka_unit_test(test_sp_validity),
	    cmocka_unit_test(test_sp_errors),
	    cmocka_unit_test(test_c_from_sp),
	    cmocka_unit_test(test_sp_round_trip),
	    cmocka_unit_test(test_depth_pressure),
	    cmocka_unit_test(test_rho0),
	    cmocka_unit_test(test_o2sol_teos10),
	    cmocka_unit_test(test_o2sol_garcia_gordon),
	    cmocka_unit_test(test_o2_units_consistent),
	    cmocka_unit_test(test_o2_conversions),
	    cmocka_unit_test(test_mcp_table),
	    cmocka_unit_test(test_mcp_control),
	    cmocka_unit_test(test_mcp_guard),
	    cmocka_unit_test(test_mcp_validity),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
