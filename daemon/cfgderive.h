/*
 * cfgderive.h - the station keys of the science: QC settings per value
 * resolved into struct tp_qc_value_cfg (cfg_qc.base) and the derivation
 * settings into struct tp_derive_cfg (cfg_station.derive_cfg), with every
 * problem reported as a placed config message.  Part of the config loader
 * (see cfgload.h); called once per station by cfgstation.c, after the
 * station's own keys, alkalinity and qc were read.
 *
 * Keys (stations.NUMBER; tables in options.c):
 *   qc.VALUE.rate_n_dev, rate_window_h (25), gap_s (2 x expect_every_s),
 *     multi_variate {with, n_dev, with_n_dev, window_h (25)}; the older
 *     keys (suspect, fail, climatology, spike, spike_fail, rate_per_h,
 *     flat_n, flat_fail_n, flat_eps) keep their meaning.  flat_n and
 *     flat_fail_n count equal values in a row, so QARTOD's REP_CNT is
 *     flat_n - 1 (qc.h); both at most 64.
 *   carbonate {boron: uppstrom1974 | lee2010, kf: perez-fraga1987 |
 *     dickson-riley1979}; ph_temperature: a number (degC) or a value name
 *     (the temperature the pH was measured at); ph_from_ratio {field,
 *     method: liu2011 | mueller-rehder2018}; pressure_from: auto | field |
 *     depth | station_depth | none; derive_inputs {temperature: NAME, ...}
 *     (the inputs of derive.h by key name); derive: false switches the
 *     derived values off.  alkalinity {value} / {per_salinity, at_zero} /
 *     {field} feeds the carbonate values.
 *
 * Binding: the station's derive settings are bound to every layout of the
 * config (tp_derive_bind).  A problem about a field of a layout (a unit
 * that cannot be used, a field named like a derived value) is always an
 * error; a missing input (a named field, a pressure source) is an error
 * only when no layout at all binds, since a station may send other
 * layouts (housekeeping) that lack it.
 */
#ifndef TIDEPOST_CFGDERIVE_H
#define TIDEPOST_CFGDERIVE_H

#include <cjson/cJSON.h>

#include "tidepost/derive.h"

#include "cfgload.h"

/* Scratch structs the tables below read into. */
struct mv_in {
	char *with;
	double n_dev, with_n_dev, window_h;
};
struct co2_in {
	int boron, kf;
};
struct ratio_in {
	char *field;
	int method;
};
struct din_in {
	char *name[TP_DIN_N];
};

extern const struct opt_table opt_multi_variate, opt_carbonate,
    opt_ph_from_ratio, opt_derive_inputs;

/* Resolve the science keys of station st (JSON object node) into
 * st->qc[i].base and st->derive_cfg.  0, or -1 after reporting. */
int cfg_station_science(struct ld *ld, const cJSON *node,
                        const struct config *c, struct cfg_station *st)
    __attribute__((warn_unused_result));

#endif
