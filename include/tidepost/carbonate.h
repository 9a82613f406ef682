/*
 * carbonate.h - the seawater CO2 system at one atmosphere: equilibrium
 * constants, and the full system (pCO2, fCO2, DIC, CO2*, HCO3-, CO3--,
 * aragonite and calcite saturation) from pH_T + total alkalinity or from
 * total alkalinity + DIC; and pH at another temperature (the "in-situ pH"
 * of a pH measured at a different temperature, at constant TA and DIC).
 *
 * Constants (all mol/kg-soln, T = t90 + 273.15 K, t90 used as given, as
 * CO2SYS/PyCO2SYS do; ln = natural log) as compiled in Dickson, Sabine &
 * Christian (2007), Guide to Best Practices for Ocean CO2 Measurements,
 * PICES Spec. Publ. 3, ch. 5:
 *   K0    Weiss (1974), Mar. Chem. 2, 203-215; valid -1..40 degC, S 0..40
 *   K1,K2 Lueker, Dickson & Keeling (2000), Mar. Chem. 70, 105-119, total
 *         scale; valid 2..35 degC, S 19..43
 *   KB    Dickson (1990b), Deep-Sea Res. 37, 755-766, total scale;
 *         valid 0..45 degC, S 5..45
 *   KW    Millero (1995), Geochim. Cosmochim. Acta 59, 661-677, in the
 *         Guide's total-scale form (constant 148.9652); valid 0..45 degC,
 *         S 0..45 [range from memory]
 *   KS    Dickson (1990a), J. Chem. Thermodyn. 22, 113-127, free scale;
 *         valid 0..45 degC, S 5..45
 *   KF    Perez & Fraga (1987), Mar. Chem. 21, 161-168 (default), free
 *         scale, valid 9..33 degC, S 10..40; or Dickson & Riley (1979),
 *         Mar. Chem. 7, 89-99, free scale, valid 5..35 degC, S 10..45
 *         [range from memory]
 *   Ksp   aragonite and calcite, Mucci (1983), Am. J. Sci. 283, 780-799;
 *         valid 5..40 degC, S 5..44 [range from memory]
 * Totals, proportional to S: boron Uppstroem (1974) in the CO2SYS form
 * (0.000232/10.811) S/1.80655 = 415.7 umol/kg at S 35 (default) or Lee et
 * al. (2010) 0.0004326 S/35; sulfate Morris & Riley (1966); fluoride Riley
 * (1965); calcium Riley & Tongudai (1967) (0.02128/40.087) S/1.80655.
 * Phosphate, silicate and pressure corrections are not included (p = 0:
 * constants at one atmosphere; for a coastal station at < 50 dbar the
 * neglected pressure effect on pH_T is of order 0.001 [estimate]).
 *
 * Alkalinity model: TA = HCO3 + 2 CO3 + B(OH)4 + OH - H_free - HSO4 - HF.
 * fCO2 = CO2* / K0; pCO2 = fCO2 / exp((B + 2 delta) P / RT), the Weiss
 * (1974) virial coefficients of CO2 in air at P = 1 atm.
 *
 * Validity: every constant whose range the inputs leave sets its bit in
 * `outside`.  `valid` is false when any bit except TP_CO2_OUT_KS and
 * TP_CO2_OUT_KF is set: HSO4- and HF together are less than 0.03 umol/kg
 * of TA at pH_T >= 7 (about 0.003 at pH 8), so even a large error in KS
 * or KF outside their fitted ranges changes no output measurably; their
 * bits stay visible (PF87's 9 degC lower limit would otherwise mark every
 * cold-water result suspect).
 *
 * Contract as in seawater.h: status return, NaN results on error.
 * TP_ERR_ARG for non-finite or impossible input (S < 0 or > 50, t90
 * outside -5..50 degC, pH outside 0..14, TA or DIC <= 0, bad option);
 * TP_ERR_RANGE when the inputs admit no solution (e.g. a TA smaller than
 * the non-carbonate alkalinity at that pH, or no pH in 2..12 balances
 * TA and DIC).  Units: TA, DIC and species umol/kg, pCO2/fCO2 uatm.
 *
 * Callers: the derivation stage (station TA from salinity + measured pH
 * -> carbonate values, in-situ pH) and the tests.
 */
#ifndef TIDEPOST_CARBONATE_H
#define TIDEPOST_CARBONATE_H

#include <stdbool.h>

#include "tidepost/status.h"

enum tp_boron {
	TP_BORON_U74 = 0, /* Uppstroem (1974), CO2SYS form */
	TP_BORON_LKB10    /* Lee et al. (2010) */
};

enum tp_kf {
	TP_KF_PF87 = 0, /* Perez & Fraga (1987) */
	TP_KF_DR79      /* Dickson & Riley (1979) */
};

/* Options; a NULL pointer or a zeroed struct means the defaults. */
struct tp_co2_opts {
	enum tp_boron boron;
	enum tp_kf kf;
};

/* Bits of `outside`: which constant's validity range the inputs left. */
enum tp_co2_outside {
	TP_CO2_OUT_K0 = 1u << 0,
	TP_CO2_OUT_K1K2 = 1u << 1,
	TP_CO2_OUT_KB = 1u << 2,
	TP_CO2_OUT_KW = 1u << 3,
	TP_CO2_OUT_KS = 1u << 4,
	TP_CO2_OUT_KF = 1u << 5,
	TP_CO2_OUT_KSP = 1u << 6
};

struct tp_co2_consts {
	double k0;             /* mol kg-1 atm-1 */
	double k1, k2, kb, kw; /* total scale */
	double ks, kf;         /* free scale */
	double ksp_ar, ksp_ca; /* mol2 kg-2 */
	double bt, st, ft, ca; /* totals, mol/kg */
	double fug;            /* fCO2 / pCO2 */
	unsigned outside;      /* TP_CO2_OUT_* bits */
};

struct tp_co2_system {
	double ph;             /* total scale */
	double ta, dic;        /* umol/kg */
	double pco2, fco2;     /* uatm */
	double co2, hco3, co3; /* umol/kg; co2 is CO2* (aq + H2CO3) */
	double omega_ar, omega_ca;
	unsigned outside; /* TP_CO2_OUT_* bits */
	bool valid;       /* see above */
};

/* All constants and totals at practical salinity sp and t90 (degC). */
enum tp_status tp_co2_constants(double sp, double t90,
                                const struct tp_co2_opts *opts,
                                struct tp_co2_consts *k);

/* The system from pH_T and TA (umol/kg). */
enum tp_status tp_co2_from_ph_ta(double ph, double ta, double sp, double t90,
                                 const struct tp_co2_opts *opts,
                                 struct tp_co2_system *out);

/* The system from TA and DIC (umol/kg); pH_T solved by bracketed
 * false position on [2, 12] to 1e-12. */
enum tp_status tp_co2_from_ta_dic(double ta, double dic, double sp, double t90,
                                  const struct tp_co2_opts *opts,
                                  struct tp_co2_system *out);

/* A pH_T measured at t_meas, with alkalinity ta, re-expressed at t_new:
 * DIC from (pH, TA) at t_meas, then the system from (TA, DIC) at t_new.
 * out is the system at t_new; out->outside holds the bits of both
 * temperatures. */
enum tp_status tp_co2_ph_at(double ph, double t_meas, double ta, double sp,
                            double t_new, const struct tp_co2_opts *opts,
                            struct tp_co2_system *out);

#endif
