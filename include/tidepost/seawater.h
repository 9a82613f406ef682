/*
 * seawater.h - physical properties of seawater that tidepost derives from
 * a station's raw readings: practical salinity from conductivity (PSS-78
 * with the Hill et al. 1986 low-salinity extension, as TEOS-10 applies it),
 * conductivity from practical salinity, sea pressure <-> depth, seawater
 * density at one atmosphere, and dissolved-oxygen solubility, unit
 * conversion and saturation.
 *
 * Pure C11 + libm: no allocation, no I/O, no state.  Every function returns
 * an enum tp_status and writes its result through a pointer; on any error
 * the result is set to NaN, so a caller that ignores the status cannot use
 * a stale number.  TP_ERR_ARG means an input was not finite, a pointer was
 * NULL, an enum was unknown or a value was physically impossible (negative
 * conductivity, negative salinity, latitude beyond +-90, temperature
 * outside -10..100 degC, pressure outside -100..20000 dbar).  TP_ERR_RANGE
 * means no result exists for these inputs.
 *
 * Validity: each function that implements a fitted method also reports, in
 * *valid, whether every input was inside the range the method's authors
 * published.  Outside it the number is still computed (the formulas are
 * smooth) but *valid is false and the caller must not present it as a good
 * value; the derivation layer turns it into a "suspect" flag.
 *
 * Units and scales: temperature is always ITS-90 in degC on input.  The
 * UNESCO/PSS-78 and Garcia & Gordon fits were made on IPTS-68, so these
 * functions convert internally with t68 = 1.00024 * t90 (as TEOS-10 GSW
 * does).  Pressure is sea pressure (absolute minus 10.1325 dbar) in dbar.
 * Salinity is practical salinity SP (dimensionless, PSS-78).
 *
 * Callers: the derivation stage of decoding (daemon and `tidepost decode`)
 * and the reference tests.  The carbonate system is in carbonate.h and the
 * indicator pH in mcp.h.
 */
#ifndef TIDEPOST_SEAWATER_H
#define TIDEPOST_SEAWATER_H

#include <stdbool.h>

#include "tidepost/status.h"

/* Conductivity of standard seawater C(35, 15 degC IPTS-68, 0 dbar) in
 * mS/cm, the PSS-78 reference (Culkin & Smith 1980; UNESCO 1983). */
#define TP_SW_C3515_MS_CM 42.914

enum tp_cond_unit {
	TP_COND_MS_CM = 0, /* mS/cm (= mmho/cm) */
	TP_COND_S_M,       /* S/m: 1 S/m = 10 mS/cm */
	TP_COND_US_CM      /* uS/cm: 1000 uS/cm = 1 mS/cm */
};

/*
 * Practical salinity from conductivity c (in unit), ITS-90 temperature
 * t90 (degC) and sea pressure p (dbar).
 *
 * PSS-78: Fofonoff & Millard (1983), UNESCO Tech. Pap. Mar. Sci. 44,
 * eqs. for R_p, r_t and S, with R = C / 42.914 mS/cm.  Below SP = 2 the
 * result is replaced by the Hill, Dauphinee & Woods (1986) formula scaled
 * so that it equals PSS-78 at SP = 2 at the given temperature, as in
 * TEOS-10 gsw_SP_from_C (IOC et al. 2010); results agree with GSW to
 * ~1e-14.  Validity (UNESCO 1983; TEOS-10): 2 <= SP <= 42 for PSS-78,
 * 0 <= SP < 2 by the Hill extension, -2 <= t90 <= 35 degC,
 * 0 <= p <= 10000 dbar.  A negative p is computed but reported invalid.
 */
enum tp_status tp_sp_from_c(double c, enum tp_cond_unit unit, double t90,
                            double p_dbar, double *sp, bool *valid);

/*
 * The inverse: conductivity (mS/cm) of water of practical salinity sp at
 * t90, p.  Solved numerically on tp_sp_from_c (bracketed, to 1e-10 mS/cm),
 * so it is the exact inverse of the function above, Hill region included.
 * Same validity as tp_sp_from_c.
 */
enum tp_status tp_c_from_sp(double sp, double t90, double p_dbar,
                            double *c_mscm, bool *valid);

/*
 * Depth (m, positive down) from sea pressure (dbar) at latitude lat_deg:
 * UNESCO 1983 (Fofonoff & Millard, "depth" algorithm, Saunders & Fofonoff
 * 1976 with the 1980 EOS), standard ocean (0 degC, SP 35).
 * tp_p_from_depth is its inverse (Newton's method started from Saunders
 * 1981, J. Phys. Oceanogr. 11, 573-574), exact to 1e-9 dbar.
 * Valid for 0 <= p <= 10000 dbar (depth 0 .. ~9800 m).
 */
enum tp_status tp_depth_from_p(double p_dbar, double lat_deg, double *depth_m,
                               bool *valid);
enum tp_status tp_p_from_depth(double depth_m, double lat_deg, double *p_dbar,
                               bool *valid);

/*
 * Density of seawater (kg/m3) at one standard atmosphere (sea pressure 0):
 * the one-atmosphere international equation of state EOS-80 (Millero &
 * Poisson 1981, Deep-Sea Res. 28A, 625-629; UNESCO 1981), in IPTS-68
 * (converted from t90 internally).  Validity: 0 <= SP <= 42,
 * -2 <= t90 <= 40 degC.
 */
enum tp_status tp_sw_rho0(double sp, double t90, double *rho, bool *valid);

/* Freezing temperature (degC) of seawater at sea pressure p, UNESCO 1983
 * (Millero & Leung 1976 as given by Fofonoff & Millard); used to bound
 * validity ranges.  Returns NaN for non-finite input. */
double tp_sw_freezing_t(double sp, double p_dbar);

enum tp_o2sol_unit {
	TP_O2SOL_UMOL_KG = 0, /* umol/kg, Garcia & Gordon Table 1 */
	TP_O2SOL_ML_L         /* mL/L (cm3/dm3), Garcia & Gordon Table 1 */
};

/*
 * Oxygen solubility: the equilibrium concentration with water-saturated
 * air at one atmosphere total pressure, Garcia & Gordon (1992, Limnol.
 * Oceanogr. 37, 1307-1312; erratum 1993, 38, 656), fit to the Benson &
 * Krause (1984) data, eq. 8 with their Table 1 coefficients.
 *
 * Temperature: the fit is in IPTS-68 degC; t90 is converted with
 * t68 = 1.00024 * t90, exactly as TEOS-10 gsw_O2sol_SP_pt does, so the
 * result equals gsw.O2sol_SP_pt(sp, t90) when t90 is the potential
 * temperature.  Callers pass the in-situ temperature; for a coastal
 * station (p < 100 dbar) in-situ and potential temperature differ by less
 * than 0.01 degC, a solubility change < 0.02 %.  The published check value
 * 274.610 umol/kg at "10 degC" is therefore t68 = 10 (t90 = 9.9976).
 * Validity: freezing point <= t <= 40 degC, 0 <= SP <= 42
 * (Garcia & Gordon's range for the Benson & Krause fit).
 */
enum tp_status tp_o2_solubility(double sp, double t90, enum tp_o2sol_unit unit,
                                double *o2sol, bool *valid);

enum tp_o2_unit {
	TP_O2_UMOL_KG = 0, /* umol/kg */
	TP_O2_UMOL_L,      /* umol/L = mmol/m3 */
	TP_O2_MG_L,        /* mg/L */
	TP_O2_ML_L         /* mL/L (gas volume at STP) */
};

/* Molar mass of O2, g/mol (IUPAC standard atomic weight of O, 15.9994;
 * [from memory]) and the O2 volume-to-amount factor of SCOR WG 142
 * (Bittig et al. 2018): 1 mL O2 = 44.6596 umol, i.e. the real-gas molar
 * volume 22.3916 L/mol used by Garcia & Gordon (1992) [from memory]. */
#define TP_O2_G_PER_MOL   31.9988
#define TP_O2_UMOL_PER_ML 44.6596

/*
 * Convert a dissolved-oxygen reading to umol/kg.  Per-volume units are
 * turned into per-mass with the density of tp_sw_rho0 (EOS-80 at p = 0,
 * at the in-situ temperature), the usual convention for sensor oxygen
 * (SCOR WG 142); at coastal depths the in-situ density differs by less
 * than 0.05 %.  mg/L uses TP_O2_G_PER_MOL, mL/L uses TP_O2_UMOL_PER_ML.
 * *valid reports the density's validity (always true for umol/kg input).
 */
enum tp_status tp_o2_to_umolkg(double value, enum tp_o2_unit unit, double sp,
                               double t90, double *umol_kg, bool *valid);

/*
 * Oxygen saturation in percent: 100 * O2 / O2sol, with the reading
 * converted by tp_o2_to_umolkg and the solubility in umol/kg from
 * tp_o2_solubility (one atmosphere, no barometric correction).  *valid
 * is the conjunction of both validities.  Negative readings are not an
 * error here: they give a negative percentage for QC to catch.
 */
enum tp_status tp_o2_saturation(double value, enum tp_o2_unit unit, double sp,
                                double t90, double *percent, bool *valid);

#endif
