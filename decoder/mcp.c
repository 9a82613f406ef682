/*
 * mcp.c - pH_T from meta-cresol purple absorbance ratios (Liu et al. 2011;
 * Mueller & Rehder 2018).  Contracts and sources in tidepost/mcp.h.
 */
#include <math.h>
#include <stddef.h>

#include "tidepost/mcp.h"

#define KELVIN 273.15

static bool in_range(double x, double lo, double hi)
{
	return x >= lo && x <= hi;
}

static bool sane(double sp, double t90)
{
	return isfinite(sp) && isfinite(t90) && sp >= 0.0 && sp <= 60.0 &&
	       t90 >= -10.0 && t90 <= 100.0;
}

/* Liu et al. (2011): -log(K2 e2) = a + b/T + c ln T - d T. */
static double pk_liu(double s, double t)
{
	double a = -246.64209 + 0.315971 * s + 2.8855e-4 * s * s;
	double b = 7229.23864 - 7.098137 * s - 0.057034 * s * s;
	double c = 44.493382 - 0.052711 * s;

	return a + b / t + c * log(t) - 0.0781344 * t;
}

/* Mueller & Rehder (2018) eq. 9, Table 1, grouped by S power; each row
 * multiplies 1, 1/T, ln T, T. */
/* clang-format off */
static const double mr18[6][4] = {
	/* S^0 */   { 1.08071477e+03, -2.66457425e+04, -1.89671212e+02,
	              3.27430677e-01 },
	/* S^0.5 */ { -1.35394946e-01, 0.0, 0.0, -7.51448528e-04 },
	/* S^1 */   { 0.0, 0.0, 0.0, 3.94838229e-04 },
	/* S^1.5 */ { -1.98063716e+02, 5.08796578e+03, 3.49038762e+01,
	              -6.00237876e-02 },
	/* S^2 */   { 6.31924397e+01, -1.62454827e+03, -1.11336508e+01,
	              1.90997693e-02 },
	/* S^2.5 */ { -5.18141866e+00, 1.33276788e+02, 9.12761930e-01,
	              -1.56396488e-03 },
};
/* clang-format on */

static double pk_mr18(double s, double t)
{
	double lnt = log(t), sum = 0.0, sq = sqrt(s), spow = 1.0;
	int i;

	for (i = 0; i < 6; i++) {
		const double *k = mr18[i];

		sum += spow * (k[0] + k[1] / t + k[2] * lnt + k[3] * t);
		spow *= sq;
	}
	return sum;
}

static bool method_valid(enum tp_mcp_method m, double sp, double t90)
{
	double s_min = m == TP_MCP_LIU2011 ? 20.0 : 5.0;

	return in_range(sp, s_min, 40.0) && in_range(t90, 5.0, 35.0);
}

enum tp_status tp_mcp_pk2e2(enum tp_mcp_method m, double sp, double t90,
                            double *pk2e2, bool *valid)
{
	double t = t90 + KELVIN;

	if (pk2e2 == NULL || valid == NULL || !sane(sp, t90) ||
	    (m != TP_MCP_LIU2011 && m != TP_MCP_MR2018)) {
		if (pk2e2 != NULL)
			*pk2e2 = NAN;
		if (valid != NULL)
			*valid = false;
		return TP_ERR_ARG;
	}
	*pk2e2 = m == TP_MCP_LIU2011 ? pk_liu(sp, t) : pk_mr18(sp, t);
	*valid = method_valid(m, sp, t90);
	return TP_OK;
}

/* e1 and e3/e2 of Liu et al. (2011). */
static void e_ratios(double sp, double t90, double *e1, double *e32)
{
	double t = t90 + KELVIN;

	*e1 = -0.007762 + 4.5174e-5 * t;
	*e32 = -0.020813 + 2.60262e-4 * t + 1.0436e-4 * (sp - 35.0);
}

enum tp_status tp_mcp_r_limits(double sp, double t90, double *r_min,
                               double *r_max)
{
	double e1, e32;

	if (r_min == NULL || r_max == NULL || !sane(sp, t90)) {
		if (r_min != NULL)
			*r_min = NAN;
		if (r_max != NULL)
			*r_max = NAN;
		return TP_ERR_ARG;
	}
	e_ratios(sp, t90, &e1, &e32);
	*r_min = e1;
	*r_max = e32 > 0.0 ? 1.0 / e32 : INFINITY;
	return TP_OK;
}

enum tp_status tp_mcp_ph(enum tp_mcp_method m, double r, double sp, double t90,
                         double *ph_t, bool *valid)
{
	double pk, e1, e32;
	enum tp_status s;

	if (ph_t == NULL || valid == NULL || !isfinite(r)) {
		s = TP_ERR_ARG;
		goto out_nan;
	}
	s = tp_mcp_pk2e2(m, sp, t90, &pk, valid);
	if (s != TP_OK)
		goto out_nan;
	e_ratios(sp, t90, &e1, &e32);
	/* Guard: both factors of the log's argument must be positive. */
	if (!(r > e1) || !(1.0 - r * e32 > 0.0)) {
		s = TP_ERR_RANGE;
		goto out_nan;
	}
	*ph_t = pk + log10((r - e1) / (1.0 - r * e32));
	return TP_OK;
out_nan:
	if (ph_t != NULL)
		*ph_t = NAN;
	if (valid != NULL)
		*valid = false;
	return s;
}
