/*
 * test_carbonate.c - CO2-system constants and the two solvers.
 *
 * Tags as in docs/design SCIENCE.md: [DOC] read in the publication,
 * [CODE] quoted by public code citing it, [COMP] computed with a reference
 * library (PyCO2SYS 1.8.3.4) or the formulas, [from memory] unverified.
 * Full-system tolerances are those of Orr, Epitalon & Gattuso (2015),
 * Biogeosciences 12, 1483-1510 [DOC, abstract]: inter-package agreement
 * 0.2 uatm pCO2, 0.0002 pH, 0.1 umol/kg carbonate ion.  Tolerances for
 * the other outputs are ours [invented], scaled from those.
 */
#include <math.h>
#include <stdarg.h>
#include <stdbool.h>
#include <stddef.h>
#include <setjmp.h>
#include <stdint.h>
#include <stdio.h>

#include <cmocka.h>

#include "tidepost/carbonate.h"

static void near(double got, double want, double tol, const char *what, int row)
{
	if (!(fabs(got - want) <= tol))
		fail_msg("%s row %d: got %.10g, want %.10g (tol %g)", what, row,
		         got, want, tol);
}

/* Dickson, Sabine & Christian (2007) ch. 5 check values at S 35, 25 degC
 * ([CODE] two independent test suites quoting the Guide), tolerance half
 * a unit of the last printed digit; Ksp from Zeebe & Wolf-Gladrow (2001)
 * Appendix A [CODE]. */
static void test_constants_guide(void **state)
{
	struct tp_co2_consts k;

	(void)state;
	assert_int_equal(tp_co2_constants(35.0, 25.0, NULL, &k), TP_OK);
	near(log(k.k0), -3.5617, 5e-5, "ln K0 Weiss74", 0);
	near(log10(k.k1), -5.8472, 5e-5, "log K1 Lueker00", 0);
	near(log10(k.k2), -8.9660, 5e-5, "log K2 Lueker00", 0);
	near(log(k.kb), -19.7964, 5e-5, "ln KB Dickson90", 0);
	near(log(k.kw), -30.434, 5e-4, "ln KW Millero95", 0);
	near(log(k.ks), -2.30, 5e-3, "ln KS Dickson90", 0);
	near(log(k.kf), -6.09, 5e-3, "ln KF PF87", 0);
	near(log10(k.ksp_ca), -6.3693, 5e-5, "log Ksp calcite", 0);
	near(log10(k.ksp_ar), -6.1883, 5e-5, "log Ksp aragonite", 0);
	assert_int_equal(k.outside, 0);
	/* K_F of Dickson & Riley (1979), free scale: ln K_F = -6.046766
	 * [COMP, SCIENCE.md 5.1] */
	{
		struct tp_co2_opts o = {TP_BORON_U74, TP_KF_DR79};

		assert_int_equal(tp_co2_constants(35.0, 25.0, &o, &k), TP_OK);
		near(log(k.kf), -6.046766, 1e-6, "ln KF DR79", 0);
	}
}

/* Totals at S 35 [CODE+COMP, SCIENCE.md 5.3]. */
static void test_totals(void **state)
{
	struct tp_co2_consts k;
	struct tp_co2_opts lee = {TP_BORON_LKB10, TP_KF_PF87};

	(void)state;
	tp_co2_constants(35.0, 25.0, NULL, &k);
	/* (0.000232/10.811)(35/1.80655) = 415.758 umol/kg, printed as
	 * 0.0004157 S/35 in SCIENCE.md [COMP from PyCO2SYS borate_U74] */
	near(k.bt * 1e6, 415.758, 1e-3, "B_T U74 (CO2SYS form)", 0);
	near(k.ca, 0.0102846, 1e-7, "Ca RT67", 0);
	near(k.st, 0.0282354, 1e-7, "S_T MR66", 0);
	near(k.ft, 6.8326e-5, 1e-9, "F_T R65", 0);
	tp_co2_constants(35.0, 25.0, &lee, &k);
	near(k.bt * 1e6, 432.6, 1e-9, "B_T LKB10", 0);
}

struct k0_case {
	double t, s, k0x100;
};

/* Weiss (1974) Table III as digitised in PyCO2SYS's tests [CODE],
 * K0 x 100 in mol kg-1 atm-1, 3 decimals. */
static void test_k0_weiss_table(void **state)
{
	static const struct k0_case t[] = {
	    {0, 35, 6.287},  {10, 35, 4.388}, {20, 35, 3.241},
	    {30, 35, 2.517}, {20, 0, 3.916},  /* fresh water */
	    {0, 0, 7.758},   {40, 40, 2.000}, /* warm, salty corner */
	    {16, 30, 3.738},
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(t) / sizeof(t[0]); i++) {
		struct tp_co2_consts k;

		assert_int_equal(tp_co2_constants(t[i].s, t[i].t, NULL, &k),
		                 TP_OK);
		near(k.k0 * 100.0, t[i].k0x100, 6e-4, "K0 Weiss III", (int)i);
	}
}

struct sys_case {
	struct tp_co2_opts o;
	double ph, dic, pco2, fco2, hco3, co3, co2, om_ar, om_ca;
};

static void check_sys(const struct tp_co2_system *y, const struct sys_case *c,
                      int row)
{
	near(y->ph, c->ph, 2e-4, "pH", row);                /* Orr 2015 */
	near(y->pco2, c->pco2, 0.2, "pCO2", row);           /* Orr 2015 */
	near(y->co3, c->co3, 0.1, "CO3", row);              /* Orr 2015 */
	near(y->fco2, c->fco2, 0.2, "fCO2", row);           /* as pCO2 */
	near(y->dic, c->dic, 0.1, "DIC", row);              /* as CO3 */
	near(y->hco3, c->hco3, 0.1, "HCO3", row);           /* as CO3 */
	near(y->co2, c->co2, 0.01, "CO2*", row);            /* 0.2 uatm * K0 */
	near(y->omega_ar, c->om_ar, 2e-3, "Omega ar", row); /* 0.1 CO3 */
	near(y->omega_ca, c->om_ca, 3e-3, "Omega ca", row);
	assert_true(y->valid);
}

/* Case A: TA 2300, DIC 2000 umol/kg, S 35, 18 degC (the Orr et al. 2018
 * test point [CODE]); PyCO2SYS 1.8.3.4, Lueker K1/K2, Dickson KS, total
 * scale, P_T = Si_T = 0 [COMP, SCIENCE.md 5.4]. */
static void test_case_a_ta_dic(void **state)
{
	static const struct sys_case t[] = {
	    /* Uppstroem boron, Dickson & Riley K_F */
	    {{TP_BORON_U74, TP_KF_DR79},
	     8.1525,
	     2000.00,
	     298.13,
	     297.09,
	     1779.24,
	     210.57,
	     10.187,
	     3.2512,
	     5.0277},
	    /* Uppstroem boron, Perez & Fraga K_F (our default) */
	    {{TP_BORON_U74, TP_KF_PF87},
	     8.1525,
	     2000.00,
	     298.12,
	     297.08,
	     1779.24,
	     210.58,
	     10.186,
	     3.2513,
	     5.0278},
	    /* Lee et al. boron moves pH by 0.006: the option must work */
	    {{TP_BORON_LKB10, TP_KF_DR79},
	     8.1465,
	     2000.00,
	     302.69,
	     301.64,
	     1781.69,
	     207.97,
	     10.342,
	     3.2110,
	     4.9656},
	    {{TP_BORON_LKB10, TP_KF_PF87},
	     8.1465,
	     2000.00,
	     302.68,
	     301.62,
	     1781.68,
	     207.98,
	     10.342,
	     3.2111,
	     4.9657},
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(t) / sizeof(t[0]); i++) {
		struct tp_co2_system y;

		assert_int_equal(
		    tp_co2_from_ta_dic(2300.0, 2000.0, 35.0, 18.0, &t[i].o, &y),
		    TP_OK);
		check_sys(&y, &t[i], (int)i);
		near(y.ta, 2300.0, 0.0, "TA kept", (int)i);
	}
}

/* Case B: TA 2300, pH_T 8.05, S 35, 25 degC; PyCO2SYS with Dickson &
 * Riley K_F (the only K_F computed for this case) [COMP, SCIENCE.md 5.4]. */
static void test_case_b_ph_ta(void **state)
{
	static const struct sys_case t[] = {
	    {{TP_BORON_U74, TP_KF_DR79},
	     8.0500,
	     1997.57,
	     392.36,
	     391.11,
	     1771.49,
	     214.97,
	     11.104,
	     3.4110,
	     5.1750},
	    {{TP_BORON_LKB10, TP_KF_DR79},
	     8.0500,
	     1994.18,
	     391.69,
	     390.45,
	     1768.49,
	     214.61,
	     11.085,
	     3.4052,
	     5.1662},
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(t) / sizeof(t[0]); i++) {
		struct tp_co2_system y;

		assert_int_equal(
		    tp_co2_from_ph_ta(8.05, 2300.0, 35.0, 25.0, &t[i].o, &y),
		    TP_OK);
		check_sys(&y, &t[i], (int)i);
	}
}

/* xorshift64*, a fixed-seed generator for the grid (no libc rand). */
static double uniform(uint64_t *s, double lo, double hi)
{
	*s ^= *s >> 12;
	*s ^= *s << 25;
	*s ^= *s >> 27;
	return lo + (hi - lo) * (double)((*s * 2685821657736338717ULL) >> 11) /
	                9007199254740992.0;
}

/* pH + TA -> DIC, then TA + DIC -> pH must return the same pH (1e-9) and
 * the same species, over a random grid of the validity box. */
static void test_round_trip_grid(void **state)
{
	const uint64_t seed = 20240611u;
	uint64_t s = seed;
	int i;

	(void)state;
	printf("carbonate round trip: seed %llu, 2000 points\n",
	       (unsigned long long)seed);
	for (i = 0; i < 2000; i++) {
		struct tp_co2_opts o = {i % 2 ? TP_BORON_LKB10 : TP_BORON_U74,
		                        i % 3 ? TP_KF_PF87 : TP_KF_DR79};
		double ph = uniform(&s, 7.3, 8.6), ta = uniform(&s, 1500, 2600);
		double sp = uniform(&s, 19, 40), t = uniform(&s, 2, 35);
		struct tp_co2_system a, b;

		assert_int_equal(tp_co2_from_ph_ta(ph, ta, sp, t, &o, &a),
		                 TP_OK);
		assert_int_equal(tp_co2_from_ta_dic(ta, a.dic, sp, t, &o, &b),
		                 TP_OK);
		near(b.ph, ph, 1e-9, "round trip pH", i);
		near(b.co3, a.co3, 1e-6, "round trip CO3", i);
		near(b.pco2, a.pco2, 1e-5, "round trip pCO2", i);
		near(a.co2 + a.hco3 + a.co3, a.dic, 1e-9, "DIC sum", i);
	}
}

/* In-situ pH: at constant TA and DIC, pH_T falls as temperature rises,
 * by about 0.015 per degC in surface seawater [from memory; e.g. Gieskes
 * 1969, and the CO2SYS "pH at output conditions" behaviour]. */
static void test_ph_at_temperature(void **state)
{
	struct tp_co2_system y, back;
	double prev = 99.0, slope;
	int t;

	(void)state;
	for (t = 2; t <= 35; t += 3) {
		assert_int_equal(tp_co2_ph_at(8.0, 25.0, 2300, 35, t, NULL, &y),
		                 TP_OK);
		if (!(y.ph < prev))
			fail_msg("pH not falling with t at %d degC", t);
		prev = y.ph;
	}
	tp_co2_ph_at(8.0, 25.0, 2300, 35, 20.0, NULL, &y);
	slope = (8.0 - y.ph) / 5.0;
	if (!(slope > -0.018 && slope < -0.012))
		fail_msg("dpH/dt = %g per degC", slope);
	/* same temperature: the identity */
	tp_co2_ph_at(7.9, 18.0, 2100, 30, 18.0, NULL, &y);
	near(y.ph, 7.9, 1e-10, "identity", 0);
	/* there and back */
	tp_co2_ph_at(7.9, 25.0, 2100, 30, 12.0, NULL, &y);
	tp_co2_ph_at(y.ph, 12.0, 2100, 30, 25.0, NULL, &back);
	near(back.ph, 7.9, 1e-9, "there and back", 0);
	/* a validity problem at either temperature is reported */
	tp_co2_ph_at(8.0, 25.0, 2300, 35, 1.0, NULL, &y);
	assert_true(y.outside & TP_CO2_OUT_K1K2);
	assert_false(y.valid);
}

struct valid_case {
	double s, t;
	unsigned must_have, must_not;
	bool valid;
};

/* Each constant's range (header) shows in `outside`; KS/KF alone do not
 * make the result invalid. */
static void test_validity(void **state)
{
	static const struct valid_case t[] = {
	    {35, 25, 0, ~0u, true},                          /* inside all */
	    {10, 25, TP_CO2_OUT_K1K2, TP_CO2_OUT_K0, false}, /* S < 19 */
	    {35, 1.0, TP_CO2_OUT_K1K2 | TP_CO2_OUT_KSP, 0, false},
	    {35, 36, TP_CO2_OUT_K1K2, TP_CO2_OUT_KB, false}, /* t > 35 */
	    /* 5 degC: only PF87 (9..33 degC) is left: still valid */
	    {35, 5, TP_CO2_OUT_KF, TP_CO2_OUT_K1K2, true},
	    {44, 20, TP_CO2_OUT_K1K2 | TP_CO2_OUT_K0, 0, false},
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(t) / sizeof(t[0]); i++) {
		struct tp_co2_system y;

		assert_int_equal(
		    tp_co2_from_ph_ta(8.0, 2300, t[i].s, t[i].t, NULL, &y),
		    TP_OK);
		if ((y.outside & t[i].must_have) != t[i].must_have ||
		    (t[i].must_not != ~0u && (y.outside & t[i].must_not)) ||
		    (t[i].must_not == ~0u && y.outside != 0) ||
		    y.valid != t[i].valid)
			fail_msg("validity row %zu: outside %#x valid %d", i,
			         y.outside, (int)y.valid);
	}
}

struct err_case {
	double a, b, s, t;
	bool from_ph;
	enum tp_status want;
};

static void test_errors(void **state)
{
	static const struct err_case t[] = {
	    {NAN, 2300, 35, 25, true, TP_ERR_ARG},  /* NaN pH */
	    {15.0, 2300, 35, 25, true, TP_ERR_ARG}, /* pH > 14 */
	    {8.0, 0.0, 35, 25, true, TP_ERR_ARG},   /* TA = 0 */
	    {8.0, 2300, -1, 25, true, TP_ERR_ARG},  /* S < 0 */
	    {8.0, 2300, 35, 80, true, TP_ERR_ARG},  /* absurd t */
	    /* TA below the borate+OH alkalinity at pH 8: no DIC exists */
	    {8.0, 50.0, 35, 25, true, TP_ERR_RANGE},
	    {2300, -5, 35, 25, false, TP_ERR_ARG}, /* DIC < 0 */
	    /* TA beyond any carbonate + OH at pH 12: no root in 2..12 */
	    {99000, 10, 35, 25, false, TP_ERR_RANGE},
	};
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(t) / sizeof(t[0]); i++) {
		struct tp_co2_system y;
		enum tp_status s;

		y.ph = 1.0;
		if (t[i].from_ph)
			s = tp_co2_from_ph_ta(t[i].a, t[i].b, t[i].s, t[i].t,
			                      NULL, &y);
		else
			s = tp_co2_from_ta_dic(t[i].a, t[i].b, t[i].s, t[i].t,
			                       NULL, &y);
		if (s != t[i].want)
			fail_msg("error row %zu: status %d", i, (int)s);
		assert_true(isnan(y.ph) && isnan(y.pco2));
		assert_false(y.valid);
	}
	{
		struct tp_co2_opts bad = {(enum tp_boron)7, TP_KF_PF87};
		struct tp_co2_consts k;
		struct tp_co2_system y;

		assert_int_equal(tp_co2_constants(35, 25, &bad, &k),
		                 TP_ERR_ARG);
		assert_true(isnan(k.k1));
		assert_int_equal(tp_co2_from_ph_ta(8, 2300, 35, 25, &bad, &y),
		                 TP_ERR_ARG);
		assert_int_equal(tp_co2_constants(35, 25, NULL, NULL),
		                 TP_ERR_ARG);
	}
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test(test_constants_guide),
	    cmocka_unit_test(test_totals),
	    cmocka_unit_test(test_k0_weiss_table),
	    cmocka_unit_test(test_case_a_ta_dic),
	    cmocka_unit_test(test_case_b_ph_ta),
	    cmocka_unit_test(test_round_trip_grid),
	    cmocka_unit_test(test_ph_at_temperature),
	    cmocka_unit_test(test_validity),
	    cmocka_unit_test(test_errors),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
