/*
 * mcp.h - seawater pH on the total scale from the absorbance ratio of the
 * purified indicator meta-cresol purple (mCP), for spectrophotometric pH
 * sensors that report R = A578 / A434 (baseline-corrected absorbances at
 * 578 and 434 nm) rather than a pH.
 *
 *   pH_T = pK2e2(S, T) + log10[(R - e1) / (1 - R e3/e2)]
 *
 * with e1 = -0.007762 + 4.5174e-5 T and
 * e3/e2 = -0.020813 + 2.60262e-4 T + 1.0436e-4 (S - 35) (T in K), from
 * Liu, Patsavas & Byrne (2011), Environ. Sci. Technol. 45, 4862-4868,
 * doi:10.1021/es200665d, and pK2e2 from either
 *  - TP_MCP_LIU2011: Liu et al. (2011): a + b/T + c ln T - d T (natural
 *    log), valid 20 <= S <= 40, 278.15 <= T <= 308.15 K; or
 *  - TP_MCP_MR2018: Mueller & Rehder (2018), Front. Mar. Sci. 5:177,
 *    doi:10.3389/fmars.2018.00177, eq. 9 / Table 1, for brackish water,
 *    valid 5 <= S <= 40 (authors' code header; seacarb documents 0-40),
 *    278.15 <= T <= 308.15 K.
 * The two agree within 0.002 pH over 20 <= S <= 40.  There is no automatic
 * switch between them (it would put a step into a time series crossing the
 * switch salinity): the caller picks one per station.
 *
 * Temperature is ITS-90 degC on input; T = t90 + 273.15 K (both fits were
 * made on ITS-90).  Contract as in seawater.h: status return, result
 * through a pointer, NaN on error, *valid for the method's range.  An R at
 * or outside (e1, 1/(e3/e2)) makes the logarithm undefined: TP_ERR_RANGE.
 *
 * Callers: the derivation stage (pH from a reported R) and its tests.
 */
#ifndef TIDEPOST_MCP_H
#define TIDEPOST_MCP_H

#include <stdbool.h>

#include "tidepost/status.h"

enum tp_mcp_method { TP_MCP_LIU2011 = 0, TP_MCP_MR2018 };

/* pK2e2 = -log10(K2^T e2) of mCP at salinity sp and t90 (degC). */
enum tp_status tp_mcp_pk2e2(enum tp_mcp_method m, double sp, double t90,
                            double *pk2e2, bool *valid);

/* The open interval of R for which pH exists at (sp, t90). */
enum tp_status tp_mcp_r_limits(double sp, double t90, double *r_min,
                               double *r_max);

/* pH on the total scale (mol/kg-soln) from absorbance ratio r. */
enum tp_status tp_mcp_ph(enum tp_mcp_method m, double r, double sp, double t90,
                         double *ph_t, bool *valid);

#endif
