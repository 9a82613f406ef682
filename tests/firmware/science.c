/*
 * science.c - the science module (seawater.h, carbonate.h, mcp.h) on a
 * bare Cortex-M4: calls every public function so the image measures what
 * the module costs in flash, checks the published check values it can,
 * and prints every result as its IEEE 754 bit pattern ("name 0x...") so
 * tests/firmware/run.sh can compare the Cortex-M4 build (soft-float
 * double, newlib libm) with the same file built for the host (glibc).
 *
 * Published check values, as in tests/unit/test_seawater.c and
 * test_carbonate.c:
 *   SP 40.00000 from R 1.888091, 40 degC (IPTS-68), 10000 dbar:
 *     Fofonoff & Millard (1983), UNESCO Tech. Pap. Mar. Sci. 44;
 *   depth 9712.653 m at 10000 dbar, 30 deg N: the same, p. 28;
 *   O2 solubility 274.610 umol/kg at 10 degC (IPTS-68), S 35:
 *     Garcia & Gordon (1992), Limnol. Oceanogr. 37;
 *   log10 K1 -5.8472, log10 K2 -8.9660 (Lueker et al. 2000), ln KB
 *     -19.7964 (Dickson 1990) at S 35, 25 degC: Dickson, Sabine &
 *     Christian (2007), PICES Spec. Publ. 3, ch. 5.
 * The other inputs are invented, chosen inside every method's range.
 * Exit status 0 when every status is TP_OK and every check holds.
 */
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "tidepost/carbonate.h"
#include "tidepost/mcp.h"
#include "tidepost/seawater.h"
#include "tidepost/status.h"

#include "fw.h"

#define T68 1.00024 /* t68 = 1.00024 t90, as seawater.h uses */

static int failures;

static void put_hex(double x)
{
	static const char digits[] = "0123456789abcdef";
	char buf[19];
	uint64_t u;
	int i;

	memcpy(&u, &x, sizeof(u));
	buf[0] = '0';
	buf[1] = 'x';
	for (i = 0; i < 16; i++)
		buf[2 + i] = digits[(u >> (60 - 4 * i)) & 0xF];
	buf[18] = '\0';
	fw_puts(buf);
}

/* Print one result; a status other than TP_OK is a failure. */
static void keep(const char *name, enum tp_status s, double v)
{
	if (s != TP_OK) {
		fw_puts("science: FAIL: ");
		fw_puts(name);
		fw_puts(": ");
		fw_puts(tp_strerror(s));
		fw_puts("\n");
		failures++;
	}
	fw_puts(name);
	fw_puts(" ");
	put_hex(v);
	fw_puts("\n");
}

static void near(const char *name, double got, double want, double tol)
{
	if (!(fabs(got - want) <= tol)) {
		fw_puts("science: FAIL: check value: ");
		fw_puts(name);
		fw_puts("\n");
		failures++;
	}
}

static void seawater(void)
{
	double sp, c, z, p, rho, o2, sat;
	enum tp_status st;
	bool ok;

	st = tp_sp_from_c(1.888091 * TP_SW_C3515_MS_CM, TP_COND_MS_CM,
	                  40.0 / T68, 10000.0, &sp, &ok);
	keep("sp_from_c", st, sp);
	near("SP 40 (Fofonoff & Millard 1983)", sp, 40.0, 1e-5);
	st = tp_c_from_sp(40.0, 40.0 / T68, 10000.0, &c, &ok);
	keep("c_from_sp", st, c);
	near("C inverse", c / TP_SW_C3515_MS_CM, 1.888091, 5e-7);
	st = tp_sp_from_c(1.5, TP_COND_MS_CM, 12.0, 2.0, &sp, &ok);
	keep("sp_hill", st, sp);
	st = tp_depth_from_p(10000.0, 30.0, &z, &ok);
	keep("depth", st, z);
	near("depth 9712.653 m (UNESCO 1983)", z, 9712.653, 5e-4);
	st = tp_p_from_depth(z, 30.0, &p, &ok);
	keep("p_from_depth", st, p);
	near("p inverse", p, 10000.0, 1e-6);
	st = tp_sw_rho0(35.0, 25.0, &rho, &ok);
	keep("rho0", st, rho);
	keep("freezing_t", TP_OK, tp_sw_freezing_t(35.0, 0.0));
	st = tp_o2_solubility(35.0, 10.0 / T68, TP_O2SOL_UMOL_KG, &o2,
	                      &ok);
	keep("o2sol", st, o2);
	near("O2sol 274.610 (Garcia & Gordon 1992)", o2, 274.610, 5e-4);
	st = tp_o2_to_umolkg(8.1, TP_O2_MG_L, 33.0, 18.0, &o2, &ok);
	keep("o2_umolkg", st, o2);
	st = tp_o2_saturation(6.0, TP_O2_ML_L, 33.0, 18.0, &sat, &ok);
	keep("o2_sat", st, sat);
}

static void carbonate(void)
{
	struct tp_co2_consts k;
	struct tp_co2_system s, back, warm;
	enum tp_status st;

	st = tp_co2_constants(35.0, 25.0, NULL, &k);
	keep("co2_k1", st, k.k1);
	near("log10 K1 (Lueker 2000)", log10(k.k1), -5.8472, 5e-5);
	near("log10 K2 (Lueker 2000)", log10(k.k2), -8.9660, 5e-5);
	near("ln KB (Dickson 1990)", log(k.kb), -19.7964, 5e-5);
	st = tp_co2_from_ph_ta(8.05, 2300.0, 35.0, 25.0, NULL, &s);
	keep("co2_pco2", st, s.pco2);
	keep("co2_dic", TP_OK, s.dic);
	keep("co2_omega_ar", TP_OK, s.omega_ar);
	st = tp_co2_from_ta_dic(2300.0, s.dic, 35.0, 25.0, NULL,
	                        &back);
	keep("co2_ph_back", st, back.ph);
	near("pH from (TA, DIC) inverse", back.ph, 8.05, 1e-9);
	st = tp_co2_ph_at(8.05, 25.0, 2300.0, 35.0, 15.0, NULL, &warm);
	keep("co2_ph_at", st, warm.ph);
}

static void mcp(void)
{
	double pk, lo, hi, ph;
	enum tp_status st;
	bool ok;

	st = tp_mcp_pk2e2(TP_MCP_LIU2011, 35.0, 25.0, &pk, &ok);
	keep("mcp_pk2e2", st, pk);
	st = tp_mcp_r_limits(35.0, 25.0, &lo, &hi);
	keep("mcp_r_max", st, hi);
	st = tp_mcp_ph(TP_MCP_LIU2011, 1.0, 35.0, 25.0, &ph, &ok);
	keep("mcp_ph_liu", st, ph);
	st = tp_mcp_ph(TP_MCP_MR2018, 1.0, 12.0, 20.0, &ph, &ok);
	keep("mcp_ph_mr", st, ph);
}

int main(void)
{
	seawater();
	carbonate();
	mcp();
	if (failures != 0)
		return 1;
	fw_puts("science: ok\n");
	return 0;
}
