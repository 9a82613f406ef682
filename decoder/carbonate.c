/*
 * carbonate.c - CO2-system constants and solvers at one atmosphere.
 * Formulas, sources and validity ranges are listed in tidepost/carbonate.h;
 * each function below names the equation it evaluates.
 */
#include <math.h>
#include <stddef.h>

#include "tidepost/carbonate.h"

#define KELVIN 273.15
/* Gas constant, cm3 bar mol-1 K-1 (CODATA 2018), and 1 atm in bar. */
#define R_CM3_BAR 83.14462618
#define P_ATM_BAR 1.01325

static bool in_range(double x, double lo, double hi)
{
	return x >= lo && x <= hi;
}

/* Set bit when (t, s) leaves [t_lo, t_hi] x [s_lo, s_hi]. */
static unsigned out_bit(double t, double s, const double r[4], unsigned bit)
{
	return in_range(t, r[0], r[1]) && in_range(s, r[2], r[3]) ? 0u : bit;
}

/* Weiss (1974) eq. 12 with the mol kg-1 atm-1 constants. */
static double k0_weiss74(double tk, double s)
{
	double th = tk / 100.0;

	return exp(-60.2409 + 93.4517 / th + 23.3585 * log(th) +
	           s * (0.023517 - 0.023656 * th + 0.0047036 * th * th));
}

/* Lueker et al. (2000) eqs. 9 and 10 (pK, total scale). */
static double k1_lueker00(double tk, double lt, double s)
{
	return pow(10.0, -(3633.86 / tk - 61.2172 + 9.6777 * lt - 0.011555 * s +
	                   0.0001152 * s * s));
}

static double k2_lueker00(double tk, double lt, double s)
{
	return pow(10.0, -(471.78 / tk + 25.9290 - 3.16967 * lt - 0.01781 * s +
	                   0.0001122 * s * s));
}

/* Dickson (1990b) eq. 23, total scale. */
static double kb_dickson90(double tk, double lt, double s)
{
	double sq = sqrt(s);
	double a = -8966.90 - 2890.53 * sq - 77.942 * s + 1.728 * s * sq -
	           0.0996 * s * s;

	return exp(a / tk + 148.0248 + 137.1942 * sq + 1.62142 * s -
	           (24.4344 + 25.085 * sq + 0.2474 * s) * lt +
	           0.053105 * sq * tk);
}

/* Millero (1995), Guide (2007) ch. 5 total-scale form. */
static double kw_millero95(double tk, double lt, double s)
{
	return exp(148.9652 - 13847.26 / tk - 23.6521 * lt +
	           (118.67 / tk - 5.977 + 1.0495 * lt) * sqrt(s) - 0.01615 * s);
}

/* Ionic strength, Dickson (1990a) / Guide (2007). */
static double ionic(double s)
{
	return 19.924 * s / (1000.0 - 1.005 * s);
}

/* Dickson (1990a) eq. 22, free scale, converted to mol/kg-soln. */
static double ks_dickson90(double tk, double lt, double s)
{
	double i = ionic(s), si = sqrt(i);

	return exp(-4276.1 / tk + 141.328 - 23.093 * lt +
	           (-13856.0 / tk + 324.57 - 47.986 * lt) * si +
	           (35474.0 / tk - 771.54 + 114.723 * lt) * i -
	           2698.0 / tk * i * si + 1776.0 / tk * i * i +
	           log(1.0 - 0.001005 * s));
}

/* Perez & Fraga (1987), free scale. */
static double kf_pf87(double tk, double s)
{
	return exp(874.0 / tk - 9.68 + 0.111 * sqrt(s));
}

/* Dickson & Riley (1979), free scale, mol/kg-soln. */
static double kf_dr79(double tk, double s)
{
	return exp(1590.2 / tk - 12.641 + 1.525 * sqrt(ionic(s)) +
	           log(1.0 - 0.001005 * s));
}

/* Mucci (1983), stoichiometric solubility products, log10 forms. */
static double ksp_calcite_m83(double tk, double s)
{
	double sq = sqrt(s);

	return pow(10.0, -171.9065 - 0.077993 * tk + 2839.319 / tk +
	                     71.595 * log10(tk) +
	                     (-0.77712 + 0.0028426 * tk + 178.34 / tk) * sq -
	                     0.07711 * s + 0.0041249 * s * sq);
}

static double ksp_aragonite_m83(double tk, double s)
{
	double sq = sqrt(s);

	return pow(10.0, -171.945 - 0.077993 * tk + 2903.293 / tk +
	                     71.595 * log10(tk) +
	                     (-0.068393 + 0.0017276 * tk + 88.135 / tk) * sq -
	                     0.10018 * s + 0.0059415 * s * sq);
}

/* fCO2/pCO2 from Weiss (1974) virial coefficients B and delta (cm3/mol)
 * of CO2 in air, at 1 atm total pressure. */
static double fugacity_factor(double tk)
{
	double b =
	    -1636.75 + tk * (12.0408 + tk * (-3.27957e-2 + tk * 3.16528e-5));
	double delta = 57.7 - 0.118 * tk;

	return exp((b + 2.0 * delta) * P_ATM_BAR / (R_CM3_BAR * tk));
}

/* Conservative totals (mol/kg), proportional to salinity. */
static void totals(double s, enum tp_boron boron, struct tp_co2_consts *k)
{
	double cl = s / 1.80655; /* chlorinity */

	if (boron == TP_BORON_LKB10)
		k->bt = 0.0004326 * s / 35.0; /* Lee et al. 2010 */
	else
		k->bt = 0.000232 / 10.811 * cl; /* Uppstroem 1974 */
	k->st = 0.14 / 96.062 * cl;             /* Morris & Riley 1966 */
	k->ft = 0.000067 / 18.998 * cl;         /* Riley 1965 */
	k->ca = 0.02128 / 40.087 * cl;          /* Riley & Tongudai 1967 */
}

/* Validity boxes {t_lo, t_hi, s_lo, s_hi} of each constant (see header). */
static const double rng_k0[4] = {-1.0, 40.0, 0.0, 40.0};
static const double rng_k12[4] = {2.0, 35.0, 19.0, 43.0};
static const double rng_kb[4] = {0.0, 45.0, 5.0, 45.0};
static const double rng_kw[4] = {0.0, 45.0, 0.0, 45.0};
static const double rng_ks[4] = {0.0, 45.0, 5.0, 45.0};
static const double rng_pf87[4] = {9.0, 33.0, 10.0, 40.0};
static const double rng_dr79[4] = {5.0, 35.0, 10.0, 45.0};
static const double rng_ksp[4] = {5.0, 40.0, 5.0, 44.0};

static unsigned outside_bits(double t, double s, enum tp_kf kf)
{
	return out_bit(t, s, rng_k0, TP_CO2_OUT_K0) |
	       out_bit(t, s, rng_k12, TP_CO2_OUT_K1K2) |
	       out_bit(t, s, rng_kb, TP_CO2_OUT_KB) |
	       out_bit(t, s, rng_kw, TP_CO2_OUT_KW) |
	       out_bit(t, s, rng_ks, TP_CO2_OUT_KS) |
	       out_bit(t, s, kf == TP_KF_DR79 ? rng_dr79 : rng_pf87,
	               TP_CO2_OUT_KF) |
	       out_bit(t, s, rng_ksp, TP_CO2_OUT_KSP);
}

static bool opts_ok(const struct tp_co2_opts *o)
{
	return o == NULL ||
	       ((o->boron == TP_BORON_U74 || o->boron == TP_BORON_LKB10) &&
	        (o->kf == TP_KF_PF87 || o->kf == TP_KF_DR79));
}

static bool sane_st(double sp, double t90)
{
	return isfinite(sp) && isfinite(t90) && in_range(sp, 0.0, 50.0) &&
	       in_range(t90, -5.0, 50.0);
}

static void consts_nan(struct tp_co2_consts *k)
{
	k->k0 = k->k1 = k->k2 = k->kb = k->kw = NAN;
	k->ks = k->kf = k->ksp_ar = k->ksp_ca = NAN;
	k->bt = k->st = k->ft = k->ca = k->fug = NAN;
	k->outside = ~0u;
}

enum tp_status tp_co2_constants(double sp, double t90,
                                const struct tp_co2_opts *opts,
                                struct tp_co2_consts *k)
{
	static const struct tp_co2_opts defaults = {TP_BORON_U74, TP_KF_PF87};
	double tk = t90 + KELVIN, lt; /* ln(tk), shared by five constants */

	if (k == NULL)
		return TP_ERR_ARG;
	if (!sane_st(sp, t90) || !opts_ok(opts)) {
		consts_nan(k);
		return TP_ERR_ARG;
	}
	if (opts == NULL)
		opts = &defaults;
	lt = log(tk);
	k->k0 = k0_weiss74(tk, sp);
	k->k1 = k1_lueker00(tk, lt, sp);
	k->k2 = k2_lueker00(tk, lt, sp);
	k->kb = kb_dickson90(tk, lt, sp);
	k->kw = kw_millero95(tk, lt, sp);
	k->ks = ks_dickson90(tk, lt, sp);
	k->kf = opts->kf == TP_KF_DR79 ? kf_dr79(tk, sp) : kf_pf87(tk, sp);
	k->ksp_ar = ksp_aragonite_m83(tk, sp);
	k->ksp_ca = ksp_calcite_m83(tk, sp);
	k->fug = fugacity_factor(tk);
	totals(sp, opts->boron, k);
	k->outside = outside_bits(t90, sp, opts->kf);
	return TP_OK;
}

/* Non-carbonate alkalinity (mol/kg) at total-scale [H+] h:
 * B(OH)4 + OH - H_free - HSO4 - HF. */
static double alk_other(const struct tp_co2_consts *k, double h)
{
	double hf = h / (1.0 + k->st / k->ks);

	return k->bt * k->kb / (k->kb + h) + k->kw / h - hf -
	       k->st / (1.0 + k->ks / hf) - k->ft / (1.0 + k->kf / hf);
}

/* Carbonate alkalinity HCO3 + 2 CO3 (mol/kg) of dic at h. */
static double alk_carb(const struct tp_co2_consts *k, double dic, double h)
{
	double k1 = k->k1, k12 = k->k1 * k->k2;

	return dic * (k1 * h + 2.0 * k12) / (h * h + k1 * h + k12);
}

static const unsigned minor_bits = TP_CO2_OUT_KS | TP_CO2_OUT_KF;

/* Fill the species of out from dic (mol/kg), h, ta (umol/kg). */
static void speciate(const struct tp_co2_consts *k, double dic, double h,
                     double ta, struct tp_co2_system *out)
{
	double d = h * h + k->k1 * h + k->k1 * k->k2;
	double co3 = dic * k->k1 * k->k2 / d;

	out->ph = -log10(h);
	out->ta = ta;
	out->dic = dic * 1e6;
	out->co2 = dic * h * h / d * 1e6;
	out->hco3 = dic * k->k1 * h / d * 1e6;
	out->co3 = co3 * 1e6;
	out->fco2 = out->co2 / k->k0;
	out->pco2 = out->fco2 / k->fug;
	out->omega_ar = k->ca * co3 / k->ksp_ar;
	out->omega_ca = k->ca * co3 / k->ksp_ca;
	out->outside = k->outside;
	out->valid = (k->outside & ~minor_bits) == 0;
}

static enum tp_status sys_fail(enum tp_status s, struct tp_co2_system *out)
{
	if (out == NULL)
		return TP_ERR_ARG;
	out->ph = out->ta = out->dic = out->pco2 = out->fco2 = NAN;
	out->co2 = out->hco3 = out->co3 = NAN;
	out->omega_ar = out->omega_ca = NAN;
	out->outside = ~0u;
	out->valid = false;
	return s;
}

static bool sane_amount(double x)
{
	return isfinite(x) && x > 0.0 && x < 1e5;
}

enum tp_status tp_co2_from_ph_ta(double ph, double ta, double sp, double t90,
                                 const struct tp_co2_opts *opts,
                                 struct tp_co2_system *out)
{
	struct tp_co2_consts k;
	double h, ca, dic;

	if (out == NULL || !isfinite(ph) || !in_range(ph, 0.0, 14.0) ||
	    !sane_amount(ta))
		return sys_fail(TP_ERR_ARG, out);
	if (tp_co2_constants(sp, t90, opts, &k) != TP_OK)
		return sys_fail(TP_ERR_ARG, out);
	h = pow(10.0, -ph);
	ca = ta * 1e-6 - alk_other(&k, h);
	if (!(ca > 0.0))
		return sys_fail(TP_ERR_RANGE, out);
	dic = ca * (h * h + k.k1 * h + k.k1 * k.k2) /
	      (k.k1 * h + 2.0 * k.k1 * k.k2);
	speciate(&k, dic, h, ta, out);
	return TP_OK;
}

/* TA residual (mol/kg) at pH x: model alkalinity minus ta; increases
 * with pH. */
static double ta_resid(const struct tp_co2_consts *k, double dic, double ta,
                       double x)
{
	double h = pow(10.0, -x);

	return alk_carb(k, dic, h) + alk_other(k, h) - ta;
}

/* pH in [2, 12] with ta_resid = 0 (Illinois false position), or NaN if
 * the interval does not bracket a root. */
static double solve_ph(const struct tp_co2_consts *k, double dic, double ta)
{
	double lo = 2.0, hi = 12.0;
	double flo = ta_resid(k, dic, ta, lo), fhi = ta_resid(k, dic, ta, hi);
	int side = 0, i;

	if (!(flo < 0.0 && fhi > 0.0))
		return flo == 0.0 ? lo : (fhi == 0.0 ? hi : NAN);
	for (i = 0; i < 200 && hi - lo > 1e-12; i++) {
		double x = (lo * fhi - hi * flo) / (fhi - flo);
		double fx = ta_resid(k, dic, ta, x);

		if (fx == 0.0)
			return x;
		if (fx > 0.0) {
			hi = x;
			fhi = fx;
			flo = side > 0 ? flo / 2.0 : flo;
			side = 1;
		} else {
			lo = x;
			flo = fx;
			fhi = side < 0 ? fhi / 2.0 : fhi;
			side = -1;
		}
	}
	return 0.5 * (lo + hi);
}

enum tp_status tp_co2_from_ta_dic(double ta, double dic, double sp, double t90,
                                  const struct tp_co2_opts *opts,
                                  struct tp_co2_system *out)
{
	struct tp_co2_consts k;
	double ph;

	if (out == NULL || !sane_amount(ta) || !sane_amount(dic))
		return sys_fail(TP_ERR_ARG, out);
	if (tp_co2_constants(sp, t90, opts, &k) != TP_OK)
		return sys_fail(TP_ERR_ARG, out);
	ph = solve_ph(&k, dic * 1e-6, ta * 1e-6);
	if (!isfinite(ph))
		return sys_fail(TP_ERR_RANGE, out);
	speciate(&k, dic * 1e-6, pow(10.0, -ph), ta, out);
	return TP_OK;
}

enum tp_status tp_co2_ph_at(double ph, double t_meas, double ta, double sp,
                            double t_new, const struct tp_co2_opts *opts,
                            struct tp_co2_system *out)
{
	struct tp_co2_system at_meas;
	enum tp_status s;

	if (out == NULL)
		return TP_ERR_ARG;
	s = tp_co2_from_ph_ta(ph, ta, sp, t_meas, opts, &at_meas);
	if (s != TP_OK)
		return sys_fail(s, out);
	s = tp_co2_from_ta_dic(ta, at_meas.dic, sp, t_new, opts, out);
	if (s != TP_OK)
		return sys_fail(s, out);
	out->outside |= at_meas.outside;
	out->valid = (out->outside & ~minor_bits) == 0;
	return TP_OK;
}
