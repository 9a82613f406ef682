/*
 * seawater.c - PSS-78 salinity (with the Hill extension), depth/pressure,
 * EOS-80 one-atmosphere density and Garcia & Gordon oxygen solubility.
 * Contracts, sources and validity ranges are in tidepost/seawater.h.
 */
#include <math.h>
#include <stddef.h>

#include "tidepost/seawater.h"

/* IPTS-68 from ITS-90 (Saunders 1990, as used by UNESCO/GSW codes). */
#define T68_PER_T90 1.00024

/* Sanity bounds beyond which the polynomials are meaningless: inputs out
 * here are errors (TP_ERR_ARG), not merely outside validity. */
#define T_MIN_ARG (-10.0)
#define T_MAX_ARG 100.0
#define P_MIN_ARG (-100.0)
#define P_MAX_ARG 20000.0

/* PSS-78 coefficients, Fofonoff & Millard (1983) / UNESCO (1981). */
static const double pss_a[6] = {0.0080,  -0.1692, 25.3851,
                                14.0941, -7.0261, 2.7081};
static const double pss_b[6] = {0.0005,  -0.0056, -0.0066,
                                -0.0375, 0.0636,  -0.0144};
static const double pss_c[5] = {0.6766097, 2.00564e-2, 1.104259e-4, -6.9698e-7,
                                1.0031e-9};
static const double pss_d[4] = {3.426e-2, 4.464e-4, 0.4215, -3.107e-3};
static const double pss_e[3] = {2.070e-5, -6.370e-10, 3.989e-15};
#define PSS_K 0.0162

static bool in_range(double x, double lo, double hi)
{
	return x >= lo && x <= hi;
}

static bool sane_tp(double t90, double p)
{
	return isfinite(t90) && isfinite(p) &&
	       in_range(t90, T_MIN_ARG, T_MAX_ARG) &&
	       in_range(p, P_MIN_ARG, P_MAX_ARG);
}

static enum tp_status fail(enum tp_status s, double *out, bool *valid)
{
	if (out != NULL)
		*out = NAN;
	if (valid != NULL)
		*valid = false;
	return s;
}

/* sum of k[i] x^i, i = 0..5 */
static double poly5(const double *k, double x)
{
	return k[0] +
	       x * (k[1] + x * (k[2] + x * (k[3] + x * (k[4] + x * k[5]))));
}

/* d/dx of poly5 */
static double dpoly5(const double *k, double x)
{
	return k[1] +
	       x * (2.0 * k[2] +
	            x * (3.0 * k[3] + x * (4.0 * k[4] + x * 5.0 * k[5])));
}

/* PSS-78 S(Rt) with rtx = sqrt(Rt) and f(t) = (t-15)/(1+k(t-15)). */
static double pss78(double rtx, double ft)
{
	return poly5(pss_a, rtx) + ft * poly5(pss_b, rtx);
}

static double dpss78(double rtx, double ft)
{
	return dpoly5(pss_a, rtx) + ft * dpoly5(pss_b, rtx);
}

/* Hill et al. (1986) correction applied to a PSS-78 value sp:
 * S_Hill = S - a0/(1 + 1.5X + X^2) - b0 f(t)/(1 + Y^.5 + Y + Y^1.5),
 * X = 400 Rt, Y = 100 Rt (unscaled form). */
static double hill_raw(double sp, double rtx, double ft)
{
	double x = 400.0 * rtx * rtx;
	double y = 10.0 * rtx;

	return sp - pss_a[0] / (1.0 + x * (1.5 + x)) -
	       pss_b[0] * ft / (1.0 + y * (1.0 + y * (1.0 + y)));
}

/* sqrt(Rt) at which PSS-78 gives exactly SP = 2 at this temperature
 * (Newton; S is monotonic in rtx there, converges in ~5 steps). */
static double rtx_at_sp2(double ft)
{
	double r = 0.24;
	int i;

	for (i = 0; i < 40; i++) {
		double step = (pss78(r, ft) - 2.0) / dpss78(r, ft);

		r -= step;
		if (fabs(step) < 1e-15)
			break;
	}
	return r;
}

static double f_of_t68(double t68)
{
	return (t68 - 15.0) / (1.0 + PSS_K * (t68 - 15.0));
}

/* Signed practical salinity (Hill-corrected below SP = 2) from the
 * conductivity ratio r = C / C(35,15,0), t68 and p; UNESCO 1983 eqs. for
 * r_t (c_i), R_p (d_i, e_i) and S (a_i, b_i). */
static double sp_raw(double r, double t68, double p)
{
	const double *c = pss_c, *d = pss_d, *e = pss_e;
	double rt_t =
	    c[0] + t68 * (c[1] + t68 * (c[2] + t68 * (c[3] + t68 * c[4])));
	double rp = 1.0 + p * (e[0] + p * (e[1] + p * e[2])) /
	                      (1.0 + t68 * (d[0] + t68 * d[1]) +
	                       (d[2] + d[3] * t68) * r);
	double rtx = sqrt(r / (rp * rt_t));
	double ft = f_of_t68(t68);
	double sp = pss78(rtx, ft);

	if (sp < 2.0) {
		/* Hill scaled to meet PSS-78 at SP = 2 (TEOS-10). */
		double r2 = rtx_at_sp2(ft);

		sp = 2.0 / hill_raw(2.0, r2, ft) * hill_raw(sp, rtx, ft);
	}
	return sp;
}

static bool sp_valid(double sp, double t90, double p)
{
	return in_range(sp, 0.0, 42.0) && in_range(t90, -2.0, 35.0) &&
	       in_range(p, 0.0, 10000.0);
}

static bool to_mscm(double c, enum tp_cond_unit unit, double *c_ms)
{
	switch (unit) {
	case TP_COND_MS_CM:
		*c_ms = c;
		return true;
	case TP_COND_S_M:
		*c_ms = c * 10.0;
		return true;
	case TP_COND_US_CM:
		*c_ms = c * 1e-3;
		return true;
	}
	return false;
}

enum tp_status tp_sp_from_c(double c, enum tp_cond_unit unit, double t90,
                            double p_dbar, double *sp, bool *valid)
{
	double c_ms;
	double s;

	if (sp == NULL || valid == NULL || !isfinite(c) || c < 0.0 ||
	    !sane_tp(t90, p_dbar) || !to_mscm(c, unit, &c_ms))
		return fail(TP_ERR_ARG, sp, valid);
	s = sp_raw(c_ms / TP_SW_C3515_MS_CM, T68_PER_T90 * t90, p_dbar);
	/* Very dilute water (C below a few uS/cm) drives the Hill formula
	 * negative: no salinity exists there (GSW returns NaN too). */
	if (!(s >= 0.0) || !isfinite(s))
		return fail(TP_ERR_RANGE, sp, valid);
	*sp = s;
	*valid = sp_valid(s, t90, p_dbar);
	return TP_OK;
}

/* Largest conductivity the inverse searches (mS/cm): SP 42 at 100 degC is
 * well below it. */
#define C_SEARCH_MAX 400.0

/* Conductivity (mS/cm) with sp_raw(C) = sp: Illinois false position on
 * [0, C_SEARCH_MAX].  sp_raw <= 0 below the root and grows past it. */
static double solve_c(double sp, double t68, double p)
{
	double lo = 0.0, hi = C_SEARCH_MAX, flo = -sp;
	double fhi = sp_raw(hi / TP_SW_C3515_MS_CM, t68, p) - sp;
	int side = 0, i;

	if (!(fhi > 0.0))
		return NAN;
	for (i = 0; i < 200 && hi - lo > 1e-11; i++) {
		double c = (lo * fhi - hi * flo) / (fhi - flo);
		double fc = sp_raw(c / TP_SW_C3515_MS_CM, t68, p) - sp;

		if (fc == 0.0)
			return c;
		if (fc > 0.0) {
			hi = c;
			fhi = fc;
			flo = side > 0 ? flo / 2.0 : flo;
			side = 1;
		} else {
			lo = c;
			flo = fc;
			fhi = side < 0 ? fhi / 2.0 : fhi;
			side = -1;
		}
	}
	return 0.5 * (lo + hi);
}

enum tp_status tp_c_from_sp(double sp, double t90, double p_dbar,
                            double *c_mscm, bool *valid)
{
	double c;

	if (c_mscm == NULL || valid == NULL || !isfinite(sp) || sp < 0.0 ||
	    !sane_tp(t90, p_dbar))
		return fail(TP_ERR_ARG, c_mscm, valid);
	c = sp == 0.0 ? 0.0 : solve_c(sp, T68_PER_T90 * t90, p_dbar);
	if (!isfinite(c))
		return fail(TP_ERR_RANGE, c_mscm, valid);
	*c_mscm = c;
	*valid = sp_valid(sp, t90, p_dbar);
	return TP_OK;
}

/* UNESCO 1983 depth polynomial: numerator N(p) and its derivative. */
static double depth_num(double p)
{
	return (((-1.82e-15 * p + 2.279e-10) * p - 2.2512e-5) * p + 9.72659) *
	       p;
}

static double depth_dnum(double p)
{
	return ((-4.0 * 1.82e-15 * p + 3.0 * 2.279e-10) * p - 2.0 * 2.2512e-5) *
	           p +
	       9.72659;
}

/* Gravity (m/s2) at latitude with sin^2(lat) = x, International Formula
 * 1967 as used by UNESCO 1983, plus the mean vertical gradient term. */
static double gravity(double x, double p)
{
	return 9.780318 * (1.0 + (5.2788e-3 + 2.36e-5 * x) * x) + 1.092e-6 * p;
}

static double sin2_deg(double lat_deg)
{
	double s = sin(lat_deg * (3.14159265358979323846 / 180.0));

	return s * s;
}

static bool sane_lat(double lat_deg)
{
	return isfinite(lat_deg) && in_range(lat_deg, -90.0, 90.0);
}

enum tp_status tp_depth_from_p(double p_dbar, double lat_deg, double *depth_m,
                               bool *valid)
{
	if (depth_m == NULL || valid == NULL || !isfinite(p_dbar) ||
	    !in_range(p_dbar, P_MIN_ARG, P_MAX_ARG) || !sane_lat(lat_deg))
		return fail(TP_ERR_ARG, depth_m, valid);
	*depth_m = depth_num(p_dbar) / gravity(sin2_deg(lat_deg), p_dbar);
	*valid = in_range(p_dbar, 0.0, 10000.0);
	return TP_OK;
}

/* Depth accepted by tp_p_from_depth (m); beyond, Saunders' start fails. */
#define DEPTH_MIN_ARG (-100.0)
#define DEPTH_MAX_ARG 19000.0

enum tp_status tp_p_from_depth(double depth_m, double lat_deg, double *p_dbar,
                               bool *valid)
{
	double x, c1, p;
	int i;

	if (p_dbar == NULL || valid == NULL || !isfinite(depth_m) ||
	    !in_range(depth_m, DEPTH_MIN_ARG, DEPTH_MAX_ARG) ||
	    !sane_lat(lat_deg))
		return fail(TP_ERR_ARG, p_dbar, valid);
	x = sin2_deg(lat_deg);
	/* Saunders (1981) eq. 3 as the starting point. */
	c1 = (5.92 + 5.25 * x) * 1e-3;
	p = ((1.0 - c1) - sqrt((1.0 - c1) * (1.0 - c1) - 8.84e-6 * depth_m)) /
	    4.42e-6;
	for (i = 0; i < 20; i++) {
		double g = gravity(x, p);
		double f = depth_num(p) / g - depth_m;
		double df =
		    (depth_dnum(p) * g - depth_num(p) * 1.092e-6) / (g * g);

		p -= f / df;
		if (fabs(f) < 1e-10)
			break;
	}
	*p_dbar = p;
	*valid = in_range(p, 0.0, 10000.0);
	return TP_OK;
}

/* EOS-80 one-atmosphere density, Millero & Poisson (1981), t = t68:
 * rho = rho_w(t) + A(t) S + B(t) S^1.5 + C S^2, rho_w the SMOW density
 * polynomial of Bigg (1967) as adopted there. */
static double rho0_eos80(double s, double t)
{
	double rw =
	    999.842594 +
	    t * (6.793952e-2 + t * (-9.095290e-3 +
	                            t * (1.001685e-4 + t * (-1.120083e-6 +
	                                                    t * 6.536332e-9))));
	double a = 8.24493e-1 +
	           t * (-4.0899e-3 +
	                t * (7.6438e-5 + t * (-8.2467e-7 + t * 5.3875e-9)));
	double b = -5.72466e-3 + t * (1.0227e-4 - 1.6546e-6 * t);

	return rw + s * (a + b * sqrt(s) + 4.8314e-4 * s);
}

enum tp_status tp_sw_rho0(double sp, double t90, double *rho, bool *valid)
{
	if (rho == NULL || valid == NULL || !isfinite(sp) || sp < 0.0 ||
	    !sane_tp(t90, 0.0))
		return fail(TP_ERR_ARG, rho, valid);
	*rho = rho0_eos80(sp, T68_PER_T90 * t90);
	*valid = in_range(sp, 0.0, 42.0) && in_range(t90, -2.0, 40.0);
	return TP_OK;
}

double tp_sw_freezing_t(double sp, double p_dbar)
{
	if (!isfinite(sp) || !isfinite(p_dbar) || sp < 0.0)
		return NAN;
	return (-0.0575 + 1.710523e-3 * sqrt(sp) - 2.154996e-4 * sp) * sp -
	       7.53e-4 * p_dbar;
}

/* Garcia & Gordon (1992) Table 1, Benson & Krause (1984) data. */
struct gg_fit {
	double a[6]; /* A0..A5 */
	double b[4]; /* B0..B3 */
	double c0;
};

static const struct gg_fit gg_umol_kg = {
    {5.80871, 3.20291, 4.17887, 5.10006, -9.86643e-2, 3.80369},
    {-7.01577e-3, -7.70028e-3, -1.13864e-2, -9.51519e-3},
    -2.75915e-7};

static const struct gg_fit gg_ml_l = {
    {2.00907, 3.22014, 4.05010, 4.94457, -2.56847e-1, 3.88767},
    {-6.24523e-3, -7.37614e-3, -1.03410e-2, -8.17083e-3},
    -4.88682e-7};

/* ln C* = A0 + A1 Ts + .. + A5 Ts^5 + S (B0 + .. + B3 Ts^3) + C0 S^2,
 * Ts = ln((298.15 - t)/(273.15 + t)), t in degC (IPTS-68). */
static double gg_eval(const struct gg_fit *f, double s, double t68)
{
	double ts = log((298.15 - t68) / (273.15 + t68));
	double sb = f->b[0] + ts * (f->b[1] + ts * (f->b[2] + ts * f->b[3]));

	return exp(poly5(f->a, ts) + s * sb + f->c0 * s * s);
}

static bool o2sol_valid(double sp, double t90)
{
	return in_range(sp, 0.0, 42.0) && t90 <= 40.0 &&
	       t90 >= tp_sw_freezing_t(sp, 0.0);
}

enum tp_status tp_o2_solubility(double sp, double t90, enum tp_o2sol_unit unit,
                                double *o2sol, bool *valid)
{
	const struct gg_fit *f;

	if (unit == TP_O2SOL_UMOL_KG)
		f = &gg_umol_kg;
	else if (unit == TP_O2SOL_ML_L)
		f = &gg_ml_l;
	else
		f = NULL;
	if (f == NULL || o2sol == NULL || valid == NULL || !isfinite(sp) ||
	    sp < 0.0 || !sane_tp(t90, 0.0))
		return fail(TP_ERR_ARG, o2sol, valid);
	*o2sol = gg_eval(f, sp, T68_PER_T90 * t90);
	*valid = o2sol_valid(sp, t90);
	return TP_OK;
}

/* umol per litre from value in a per-volume unit; false if unknown. */
static bool o2_per_litre(double value, enum tp_o2_unit unit, double *umol_l)
{
	switch (unit) {
	case TP_O2_UMOL_L:
		*umol_l = value;
		return true;
	case TP_O2_MG_L:
		*umol_l = value * 1000.0 / TP_O2_G_PER_MOL;
		return true;
	case TP_O2_ML_L:
		*umol_l = value * TP_O2_UMOL_PER_ML;
		return true;
	case TP_O2_UMOL_KG:
		break;
	}
	return false;
}

enum tp_status tp_o2_to_umolkg(double value, enum tp_o2_unit unit, double sp,
                               double t90, double *umol_kg, bool *valid)
{
	double per_l, rho;
	enum tp_status s;

	if (umol_kg == NULL || valid == NULL || !isfinite(value))
		return fail(TP_ERR_ARG, umol_kg, valid);
	if (unit == TP_O2_UMOL_KG) {
		*umol_kg = value;
		*valid = true;
		return TP_OK;
	}
	if (!o2_per_litre(value, unit, &per_l))
		return fail(TP_ERR_ARG, umol_kg, valid);
	s = tp_sw_rho0(sp, t90, &rho, valid);
	if (s != TP_OK)
		return fail(s, umol_kg, valid);
	*umol_kg = per_l * 1000.0 / rho;
	return TP_OK;
}

enum tp_status tp_o2_saturation(double value, enum tp_o2_unit unit, double sp,
                                double t90, double *percent, bool *valid)
{
	double o2, sol;
	bool v_conv, v_sol;
	enum tp_status s;

	if (percent == NULL || valid == NULL)
		return fail(TP_ERR_ARG, percent, valid);
	s = tp_o2_to_umolkg(value, unit, sp, t90, &o2, &v_conv);
	if (s == TP_OK)
		s = tp_o2_solubility(sp, t90, TP_O2SOL_UMOL_KG, &sol, &v_sol);
	if (s != TP_OK)
		return fail(s, percent, valid);
	*percent = 100.0 * o2 / sol;
	*valid = v_conv && v_sol;
	return TP_OK;
}
