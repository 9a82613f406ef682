/*
 * options.c - the option tables of the config and layout files, and the
 * table-driven reader every section of the loader uses (see options.h).
 *
 * Defaults chosen here where CONFIG.md and LAYOUT.md are silent are part
 * of the documented reference (opt_print_reference prints them).
 */
#include "options.h"

#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>
#include <strings.h>

#include "cfgderive.h"
#include "cfgload.h"

#define NOLIM      1e300 /* "no bound" for NUM ranges */
#define UMAX       4294967295.0
#define K(i)       (1u << (i))
#define OFF(st, m) offsetof(struct st, m)

_Static_assert(sizeof(enum cfg_input_kind) == sizeof(int), "enum size");
_Static_assert(sizeof(enum cfg_output_kind) == sizeof(int), "enum size");
_Static_assert(sizeof(enum cfg_format) == sizeof(int), "enum size");
_Static_assert(sizeof(enum cfg_parity) == sizeof(int), "enum size");
_Static_assert(sizeof(enum cfg_flow) == sizeof(int), "enum size");
_Static_assert(sizeof(enum cfg_alert_kind) == sizeof(int), "enum size");
_Static_assert(sizeof(enum cfg_trend_fit) == sizeof(int), "enum size");

/* Rows, one macro per type: name, where it is stored, flags, kinds,
 * default (number, then as documented), range, description. */
#define OB(nm, off_, k, d, dt, dc)                                             \
	{                                                                      \
		.name = nm, .type = OPT_BOOL, .kinds = k, .def = d,            \
		.def_text = dt, .off = off_, .doc = dc                         \
	}
#define OU(nm, off_, fl, k, d, dt, lo, hi, dc)                                 \
	{                                                                      \
		.name = nm, .type = OPT_UINT, .flags = fl, .kinds = k,         \
		.def = d, .def_text = dt, .min = lo, .max = hi, .off = off_,   \
		.doc = dc                                                      \
	}
#define OI(nm, off_, fl, k, d, dt, lo, hi, dc)                                 \
	{                                                                      \
		.name = nm, .type = OPT_INT, .flags = fl, .kinds = k,          \
		.def = d, .def_text = dt, .min = lo, .max = hi, .off = off_,   \
		.doc = dc                                                      \
	}
#define ON(nm, off_, fl, k, d, dt, lo, hi, dc)                                 \
	{                                                                      \
		.name = nm, .type = OPT_NUM, .flags = fl, .kinds = k,          \
		.def = d, .def_text = dt, .min = lo, .max = hi, .off = off_,   \
		.doc = dc                                                      \
	}
#define OS(nm, off_, fl, k, dt, v, dc)                                         \
	{                                                                      \
		.name = nm, .type = OPT_STR, .flags = fl, .kinds = k,          \
		.def_text = dt, .valid = v, .off = off_, .doc = dc             \
	}
#define OP(nm, off_, fl, k, dt, dc)                                            \
	{                                                                      \
		.name = nm, .type = OPT_PATH, .flags = fl, .kinds = k,         \
		.def_text = dt, .off = off_, .doc = dc                         \
	}
#define OW(nm, off_, fl, k, d, dt, w, v, dc)                                   \
	{                                                                      \
		.name = nm, .type = OPT_WORD, .flags = fl, .kinds = k,         \
		.def = d, .def_text = dt, .words = w, .valid = v, .off = off_, \
		.doc = dc                                                      \
	}
#define OR(nm, off_, k, dc)                                                    \
	{                                                                      \
		.name = nm, .type = OPT_RANGE, .kinds = k, .off = off_,        \
		.doc = dc                                                      \
	}
#define OX(nm, fl, k, dt, v, dc)                                               \
	{                                                                      \
		.name = nm, .type = OPT_NODE, .flags = fl, .kinds = k,         \
		.def_text = dt, .valid = v, .off = OPT_NOWHERE, .doc = dc      \
	}
#define TABLE(var, nm, wh, rows, kw)                                           \
	const struct opt_table var = {nm, wh, rows,                            \
	                              sizeof(rows) / sizeof(rows[0]), kw}

const char *const opt_words_types[] = {"u8",  "i8",  "u16", "i16", "u24",
                                       "i24", "u32", "i32", "u64", "i64",
                                       "f32", "f64", NULL};
const char *const opt_words_order[] = {"big", "little", NULL};
static const char *const w_roles[] = {"station", "seq", "time", "time_offset",
                                      NULL};
static const char *const w_in[] = {"serial", "tcp", "spool", "stdin", NULL};
static const char *const w_parity[] = {"none", "odd", "even", NULL};
static const char *const w_flow[] = {"none", "rtscts", "xonxoff", NULL};
static const char *const w_out[] = {"http", "file", NULL};
static const char *const w_format[] = {"batch", "ndjson", "single", NULL};
static const char *const w_alert[] = {"http", "exec", NULL};
static const char *const w_pressure[] = {"auto",          "field", "depth",
                                         "station_depth", "none",  NULL};
static const char *const w_boron[] = {"uppstrom1974", "lee2010", NULL};
static const char *const w_kf[] = {"perez-fraga1987", "dickson-riley1979",
                                   NULL};
static const char *const w_mcp[] = {"liu2011", "mueller-rehder2018", NULL};
static const char *const w_fit[] = {"theil_sen", "least_squares", NULL};

/* --- the top level --------------------------------------------------- */

static const struct opt top_rows[] = {
    OX("layouts", OPT_REQUIRED, 0, NULL,
       "a list of layout file paths"
       " and layout objects",
       "the packet layouts, tried in this order"),
    OX("stations", 0, 0, "none", "an object keyed by station number",
       "the stations, keyed by the number their packets carry"),
    OX("inputs", 0, 0, "none", "a list of input objects",
       "where packets come from"),
    OX("ring", 0, 0, "<state_dir>/ring, 16 MiB", "a ring object",
       "the crash-safe store between inputs and outputs"),
    OX("outputs", 0, 0, "none", "a list of output objects",
       "where readings go"),
    OX("alerts", 0, 0, "none", "an alerts object",
       "who is told about silent stations, low batteries, ..."),
    OX("status", 0, 0, "<state_dir>/status.json", "a status object",
       "the status file the daemon keeps"),
    OP("state_dir", OFF(top_in, state_dir), 0, 0, "/var/lib/tidepost",
       "folder for the ring, cursors and status"),
};
TABLE(opt_top, "config", "the top level of the config file", top_rows, NULL);

/* --- layouts --------------------------------------------------------- */

static const struct opt layout_rows[] = {
    OS("name", OFF(lay_in, name), OPT_REQUIRED, 0, NULL,
       "a name of [A-Za-z0-9_.-], 1..64 characters",
       "the layout's name, written in every reading"),
    OW("byte_order", OFF(lay_in, byte_order), 0, 0, 0, "big", opt_words_order,
       NULL, "order of bytes and of bits in fields"),
    OX("match", 0, 0, "none", "a list of {at, type, is} (at most 8)",
       "tests that pick this layout among several"),
    OX("length", 0, 0, "any", "a number of bytes, or {min, max}",
       "the packet length this layout accepts"),
    OX("check", 0, 0, "none", "a check object",
       "where the check value sits and what it is"),
    OX("fields", OPT_REQUIRED, 0, NULL,
       "a list of field objects "
       "(at most 64)",
       "the header fields, in packet order"),
    OX("records", 0, 0, "none", "a records object",
       "a group of fields repeated after the header"),
    OS("description", OFF(lay_in, description), 0, 0, NULL, NULL,
       "free text, for people"),
};
TABLE(opt_layout, "layout", "a layout (file or item of layouts)", layout_rows,
      NULL);

static const struct opt match_rows[] = {
    OI("at", OFF(match_in, at), OPT_REQUIRED, 0, 0, NULL, -4096, 4095,
       "byte offset; negative counts from the end"),
    OW("type", OFF(match_in, type), OPT_REQUIRED, 0, -1, NULL, opt_words_types,
       "u8 i8 u16 i16 u24 i24 u32 i32 u64 i64", "integer type read at `at`"),
    OX("is", OPT_REQUIRED, 0, NULL,
       "a whole number (or \"0x..\") that"
       " fits the type",
       "the value that must be there"),
};
TABLE(opt_match, "match", "an item of layout.match", match_rows, NULL);

static const struct opt length_rows[] = {
    OU("min", OFF(len_in, min), 0, 0, 1, "1", 1, 4096,
       "shortest packet, bytes"),
    OU("max", OFF(len_in, max), 0, 0, 4096, "4096", 1, 4096,
       "longest packet, bytes"),
};
TABLE(opt_length, "length", "layout.length as an object", length_rows, NULL);

static const struct opt check_rows[] = {
    OX("crc", OPT_REQUIRED, 0, NULL,
       "a CRC catalogue name, \"sum8\","
       " \"xor8\" or {width, poly, init, refin, refout, xorout}",
       "the kind of check value"),
    OI("at", OFF(check_in, at), 0, 0, 0, "at the end (-bytes of check)", -4096,
       4095,
       "byte offset of the check value; negative counts"
       " from the end"),
    OX("covers", 0, 0, "every byte before the check value",
       "[from, to): two byte offsets, negative from the end",
       "the bytes the check value covers"),
    OW("order", OFF(check_in, order), 0, 0, -1, "the layout's byte_order",
       opt_words_order, NULL, "byte order of the stored check value"),
};
TABLE(opt_check, "check", "layout.check", check_rows, NULL);

#define HEXV "a whole number, or a string such as \"0x1021\""
static const struct opt crc_rows[] = {
    OU("width", OFF(crc_in, width), OPT_REQUIRED, 0, 0, NULL, 8, 32,
       "CRC width in bits"),
    OX("poly", OPT_REQUIRED, 0, NULL, HEXV,
       "polynomial, normal form without the top bit"),
    OX("init", 0, 0, "0", HEXV, "initial register value"),
    OB("refin", OFF(crc_in, refin), 0, 0, "false", "reflect input bytes"),
    OB("refout", OFF(crc_in, refout), 0, 0, "false",
       "reflect the final register"),
    OX("xorout", 0, 0, "0", HEXV, "value XORed into the result"),
};
TABLE(opt_crc, "crc", "layout.check.crc as parameters (Rocksoft model)",
      crc_rows, NULL);

static const struct opt field_rows[] = {
    OS("name", OFF(fld_in, name), OPT_REQUIRED, 0, NULL,
       "[A-Za-z_][A-Za-z0-9_]*, at most 64 characters, unique in the"
       " layout",
       "the value's name in readings"),
    OW("type", OFF(fld_in, type), 0, 0, -1, "none (give type or bits)",
       opt_words_types,
       "u8 i8 u16 i16 u24 i24 u32 i32 u64 i64 f32 f64"
       " (or \"bits\": 1..64)",
       "a whole-byte type"),
    OU("bits", OFF(fld_in, bits), 0, 0, 0, "none (give type or bits)", 1, 64,
       "a bit field of this width"),
    OB("signed", OFF(fld_in, is_signed), 0, 0, "false",
       "with bits: two's complement"),
    ON("scale", OFF(fld_in, scale), OPT_NONZERO, 0, 1, "1", -NOLIM, NOLIM,
       "value = raw * scale + offset"),
    ON("offset", OFF(fld_in, offset), 0, 0, 0, "0", -NOLIM, NOLIM,
       "value = raw * scale + offset"),
    OX("missing", 0, 0, "none",
       "a raw value that fits the field "
       "(negative allowed for signed fields; \"0x..\" strings)",
       "the raw value meaning no reading"),
    OR("range", OFF(fld_in, range), 0,
       "sensor span [min, max]; outside it -> flag 4"),
    OW("role", OFF(fld_in, role), 0, 0, -1, "none (a value)", w_roles, NULL,
       "what the field means to tidepost"),
    OS("unit", OFF(fld_in, unit), 0, 0, "none", NULL,
       "UDUNITS unit; for time roles s or min"),
    OS("standard_name", OFF(fld_in, standard_name), 0, 0, "none",
       "a CF standard name ([a-z0-9_])", "what the value is"),
    OS("epoch", OFF(fld_in, epoch), 0, 0, "1970-01-01T00:00:00Z",
       "an RFC 3339 time such as \"2000-01-01T00:00:00Z\"",
       "role time: the time raw 0 stands for"),
    OS("description", OFF(fld_in, description), 0, 0, NULL, NULL,
       "free text, for people"),
};
TABLE(opt_field, "field", "an item of fields (layout or records)", field_rows,
      NULL);

static const struct opt skip_rows[] = {
    OU("skip_bits", OFF(skip_in, bits), OPT_REQUIRED, 0, 0, NULL, 1, 32768,
       "bits to skip"),
};
TABLE(opt_skip, "skip", "an item of fields that skips bits", skip_rows, NULL);

static const struct opt records_rows[] = {
    OX("count", OPT_REQUIRED, 0, NULL,
       "a number 1..4096, or the name"
       " of a header field",
       "how many records the packet holds"),
    OU("every_s", OFF(rec_in, every_s), 0, 0, 0, "0", 0, 86400 * 366.0,
       "record k is k * every_s after the packet time"),
    OX("fields", OPT_REQUIRED, 0, NULL,
       "a list of field objects (at "
       "most 64)",
       "the fields of one record"),
};
TABLE(opt_records, "records", "layout.records", records_rows, NULL);

/* --- stations -------------------------------------------------------- */

static const struct opt station_rows[] = {
    OS("name", OFF(cfg_station, name), OPT_REQUIRED, 0, NULL,
       "[A-Za-z0-9_.-], 1..32 characters, unique",
       "short name used in readings and ids"),
    OS("title", OFF(cfg_station, title), 0, 0, "none", NULL,
       "long name, for people"),
    ON("lat", OFF(cfg_station, lat), 0, 0, 0, "none", -90, 90,
       "latitude, degrees north (with lon)"),
    ON("lon", OFF(cfg_station, lon), 0, 0, 0, "none", -180, 180,
       "longitude, degrees east (with lat)"),
    ON("depth_m", OFF(cfg_station, depth_m), 0, 0, 0, "none", 0, 11000,
       "sensor depth below the surface, m"),
    OU("expect_every_s", OFF(cfg_station, expect_every_s), 0, 0, 0, "unknown",
       0, 86400 * 31.0, "how often packets should come"),
    OX("alkalinity", 0, 0, "none",
       "{per_salinity, at_zero}, {value} or"
       " {field}",
       "total alkalinity for the carbonate values"),
    OX("qc", 0, 0, "none", "an object keyed by value name",
       "QC test settings per value"),
    OX("battery", 0, 0, "none", "a battery object", "battery voltage alerts"),
    OU("silent_after_s", OFF(cfg_station, silent_after_s), 0, 0, 0,
       "3 x expect_every_s, else alerts.silent_after_s", 0, 86400 * 366.0,
       "alert when no packet came for this long"),
    OU("qc_streak_n", OFF(cfg_station, qc_streak_n), 0, 0, 6, "6", 0, 10000,
       "alert when a value is flagged 3 or 4 this often in a row; 0: off"),
    OU("qc_clear_n", OFF(cfg_station, qc_clear_n), 0, 0, 3, "3", 1, 10000,
       "good values in a row that clear a qc_streak alert"),
    OU("clock_limit_s", OFF(cfg_station, clock_limit_s), 0, 0, 600, "600", 0,
       86400 * 366.0,
       "alert when packet times are this far from the receive time; 0: off"),
    /* derived values (cfgderive.h) */
    OB("derive", OFF(cfg_station, derive), 0, 1, "true",
       "compute the derived values (salinity, oxygen saturation, ...)"),
    OX("derive_inputs", 0, 0, "by CF standard name",
       "an object: input -> value name", "which values feed the formulas"),
    OW("pressure_from", OFF(cfg_station, pressure_from), 0, 0, 0, "auto",
       w_pressure, NULL,
       "sea pressure for salinity: auto = a pressure field, else a depth"
       " field, else depth_m, else 0"),
    OX("carbonate", 0, 0, "uppstrom1974, perez-fraga1987", "a carbonate object",
       "constants of the carbonate system"),
    OX("ph_temperature", 0, 0, "the in-situ temperature",
       "a number (degC) or a value name",
       "temperature the pH was measured at (adds ph_insitu)"),
    OX("ph_from_ratio", 0, 0, "none", "{field, method}",
       "pH from an mCP absorbance ratio field"),
};
TABLE(opt_station, "station", "stations.NUMBER", station_rows, NULL);

static const struct opt alk_rows[] = {
    ON("per_salinity", OFF(cfg_alkalinity, per_salinity), 0, 0, 0, "none",
       -1000, 1000, "TA = per_salinity * S + at_zero, umol/kg"),
    ON("at_zero", OFF(cfg_alkalinity, at_zero), 0, 0, 0, "0", -5000, 5000,
       "TA at salinity 0, umol/kg"),
    ON("value", OFF(cfg_alkalinity, value), OPT_POSITIVE, 0, 0, "none", 0, 5000,
       "a fixed TA, umol/kg"),
    OS("field", OFF(cfg_alkalinity, field), 0, 0, "none",
       "a value name of the layouts", "the value holding TA"),
};
TABLE(opt_alkalinity, "alkalinity", "stations.NUMBER.alkalinity", alk_rows,
      NULL);

static const struct opt qc_rows[] = {
    OR("suspect", OFF(cfg_qc, suspect), 0, "gross range: outside -> flag 3"),
    OR("fail", OFF(cfg_qc, fail), 0, "gross range: outside -> flag 4"),
    OX("climatology", 0, 0, "none", "a list of {months, range}",
       "seasonal range per month: outside -> flag 3"),
    ON("spike", OFF(cfg_qc, spike), OPT_POSITIVE, 0, 0, "off", 0, NOLIM,
       "spike test threshold -> flag 3"),
    ON("spike_fail", OFF(cfg_qc, spike_fail), OPT_POSITIVE, 0, 0, "off", 0,
       NOLIM, "spike test threshold -> flag 4"),
    ON("rate_per_h", OFF(cfg_qc, rate_per_h), OPT_POSITIVE, 0, 0, "off", 0,
       NOLIM, "rate of change limit per hour -> flag 3"),
    OU("flat_n", OFF(cfg_qc, flat_n), 0, 0, 0, "off", 2, 10000,
       "flat line: this many equal values -> flag 3"),
    OU("flat_fail_n", OFF(cfg_qc, flat_fail_n), 0, 0, 0, "off", 2, 10000,
       "flat line: this many equal values -> flag 4"),
    ON("flat_eps", OFF(cfg_qc, flat_eps), OPT_POSITIVE, 0, 0,
       "half the field's scale", 0, NOLIM,
       "flat line: values closer than this are equal"),
    /* added for the QC pipeline (cfgderive.h) */
    ON("rate_n_dev", OFF(cfg_qc, rate_n_dev), OPT_POSITIVE, 0, 0, "off", 0,
       NOLIM, "rate of change: a step over this many SDs -> flag 3"),
    ON("rate_window_h", OFF(cfg_qc, rate_window_h), OPT_POSITIVE, 0, 25, "25",
       0, 8760, "rate of change: hours of history the SD is taken over"),
    OX("multi_variate", 0, 0, "off", "{with, n_dev, with_n_dev, window_h}",
       "a step this value shows but the `with` value does not -> flag 3"),
    OU("gap_s", OFF(cfg_qc, gap_s), 0, 0, 0, "2 x expect_every_s", 1,
       86400 * 366.0, "gap test: this long since the previous value -> flag 9"),
};
TABLE(opt_qc, "qc", "stations.NUMBER.qc.VALUE", qc_rows, NULL);

static const struct opt mv_rows[] = {
    OS("with", OFF(mv_in, with), OPT_REQUIRED, 0, NULL,
       "a value name (layouts or derived)",
       "the co-measured value, e.g. temperature"),
    ON("n_dev", OFF(mv_in, n_dev), OPT_POSITIVE | OPT_REQUIRED, 0, 0, NULL, 0,
       NOLIM, "this value's step, in its SDs (N_V_DEV)"),
    ON("with_n_dev", OFF(mv_in, with_n_dev), OPT_POSITIVE | OPT_REQUIRED, 0, 0,
       NULL, 0, NOLIM, "the with value's step, in its SDs (N_T_DEV)"),
    ON("window_h", OFF(mv_in, window_h), OPT_POSITIVE, 0, 25, "25", 0, 8760,
       "hours of history the SDs are taken over"),
};
TABLE(opt_multi_variate, "multi_variate",
      "stations.NUMBER.qc.VALUE.multi_variate", mv_rows, NULL);

static const struct opt co2_rows[] = {
    OW("boron", OFF(co2_in, boron), 0, 0, 0, "uppstrom1974", w_boron, NULL,
       "total boron: Uppstrom (1974) or Lee et al. (2010)"),
    OW("kf", OFF(co2_in, kf), 0, 0, 0, "perez-fraga1987", w_kf, NULL,
       "HF constant: Perez & Fraga (1987) or Dickson & Riley (1979)"),
};
TABLE(opt_carbonate, "carbonate", "stations.NUMBER.carbonate", co2_rows, NULL);

static const struct opt ratio_rows[] = {
    OS("field", OFF(ratio_in, field), OPT_REQUIRED, 0, NULL,
       "a value name of the layouts", "the absorbance ratio R = A578/A434"),
    OW("method", OFF(ratio_in, method), 0, 0, 0, "liu2011", w_mcp, NULL,
       "pK2e2 of mCP: Liu et al. (2011) or Mueller & Rehder (2018)"),
};
TABLE(opt_ph_from_ratio, "ph_from_ratio", "stations.NUMBER.ph_from_ratio",
      ratio_rows, NULL);

#define DIN(i, nm, what)                                                       \
	OS(nm, OFF(din_in, name[i]), 0, 0, "by CF standard name",              \
	   "a value name of the layouts", what)
static const struct opt din_rows[] = {
    DIN(TP_DIN_TEMPERATURE, "temperature", "in-situ temperature, degC"),
    DIN(TP_DIN_CONDUCTIVITY, "conductivity", "conductivity"),
    DIN(TP_DIN_SALINITY, "salinity", "practical salinity"),
    DIN(TP_DIN_PRESSURE, "pressure", "sea pressure, dbar"),
    DIN(TP_DIN_DEPTH, "depth", "depth, m"),
    DIN(TP_DIN_PH, "ph", "pH, total scale"),
    DIN(TP_DIN_OXYGEN, "oxygen", "dissolved oxygen"),
    DIN(TP_DIN_ALKALINITY, "alkalinity", "total alkalinity, umol/kg"),
    DIN(TP_DIN_MEAS_T, "meas_t", "temperature of the pH measurement"),
    DIN(TP_DIN_MCP_R, "mcp_r", "mCP absorbance ratio"),
};
TABLE(opt_derive_inputs, "derive_inputs", "stations.NUMBER.derive_inputs",
      din_rows, NULL);

static const struct opt clim_rows[] = {
    OX("months", OPT_REQUIRED, 0, NULL, "a list of months 1..12",
       "the months this range applies to"),
    OR("range", OFF(clim_in, range), 0, "[min, max] for those months"),
};
TABLE(opt_climatology, "climatology", "an item of qc.VALUE.climatology",
      clim_rows, NULL);

static const struct opt battery_rows[] = {
    OS("field", OFF(cfg_battery, field), OPT_REQUIRED, 0, NULL,
       "a value name of the layouts", "the battery voltage value"),
    ON("warn_v", OFF(cfg_battery, warn_v), OPT_POSITIVE, 0, 0, "off", 0, 100,
       "alert below this voltage"),
    ON("cutoff_v", OFF(cfg_battery, cutoff_v), OPT_POSITIVE, 0, 0, "off", 0,
       100, "the voltage the station stops at"),
    OU("forecast_h", OFF(cfg_battery, forecast_h), 0, 0, 72, "72", 1, 8760,
       "alert when cutoff is forecast within this many hours"),
    OU("trend_h", OFF(cfg_battery, trend_h), 0, 0, 24, "24", 1, 8760,
       "hours of readings the voltage trend is fitted over"),
    ON("critical_v", OFF(cfg_battery, critical_v), OPT_POSITIVE, 0, 0,
       "cutoff_v + min(0.5, (warn_v - cutoff_v) / 2)", 0, 100,
       "critical alert below this voltage"),
    OU("median_n", OFF(cfg_battery, median_n), 0, 0, 5, "5", 1, 99,
       "low/critical judge the median of this many readings"),
    ON("hysteresis_v", OFF(cfg_battery, hysteresis_v), 0, 0, 0.2, "0.2", 0, 10,
       "a low/critical alert clears this far above its level"),
    OW("fit", OFF(cfg_battery, fit), 0, 0, 0, "theil_sen", w_fit, NULL,
       "how the voltage trend is fitted"),
    OU("trend_min_n", OFF(cfg_battery, trend_min_n), 0, 0, 8, "8", 3, 4096,
       "fewer readings in the window: no forecast"),
    ON("flat_v_per_day", OFF(cfg_battery, flat_v_per_day), 0, 0, 0.02, "0.02",
       0, 100, "a slower fall is flat: no forecast"),
};
TABLE(opt_battery, "battery", "stations.NUMBER.battery", battery_rows, NULL);

/* --- inputs, ring, outputs, alerts, status --------------------------- */

#define SER K(CFG_IN_SERIAL)
#define TCP K(CFG_IN_TCP)
#define SPL K(CFG_IN_SPOOL)
static const struct opt input_rows[] = {
    OW("kind", OFF(cfg_input, kind), OPT_REQUIRED, 0, 0, NULL, w_in, NULL,
       "what kind of input"),
    OS("name", OFF(cfg_input, name), 0, 0, "<kind><index>",
       "[A-Za-z0-9_.-], 1..32 characters", "the input's name in logs"),
    OX("framing", 0, SER | TCP | K(CFG_IN_STDIN) | SPL, "cobs (spool: whole)",
       "cobs slip hex whole fixed:N", "how packets are cut out of the bytes"),
    OS("device", OFF(cfg_input, device), OPT_REQUIRED, SER, NULL, NULL,
       "serial device, e.g. /dev/ttyUSB0"),
    OU("baud", OFF(cfg_input, baud), 0, SER, 9600, "9600", 50, 4000000,
       "line speed"),
    OU("data_bits", OFF(cfg_input, data_bits), 0, SER, 8, "8", 5, 8,
       "bits per character"),
    OW("parity", OFF(cfg_input, parity), 0, SER, 0, "none", w_parity, NULL,
       "parity bit"),
    OU("stop_bits", OFF(cfg_input, stop_bits), 0, SER, 1, "1", 1, 2,
       "stop bits"),
    OW("flow", OFF(cfg_input, flow), 0, SER, 0, "none", w_flow, NULL,
       "flow control"),
    OS("host", OFF(cfg_input, host), OPT_REQUIRED, TCP, NULL, NULL,
       "host name or address to connect to"),
    OU("port", OFF(cfg_input, port), OPT_REQUIRED, TCP, 0, NULL, 1, 65535,
       "TCP port"),
    OU("reconnect_s", OFF(cfg_input, reconnect_s), 0, SER | TCP, 5, "5", 1,
       3600, "wait before reopening a lost device or connection"),
    OP("dir", OFF(cfg_input, dir), OPT_REQUIRED, SPL, NULL,
       "folder where message files arrive"),
    OP("done", OFF(cfg_input, done), 0, SPL, "<dir>/done",
       "folder finished files are moved to"),
    OP("rejected", OFF(cfg_input, rejected), 0, SPL, "<dir>/rejected",
       "folder files that decode to nothing are moved to"),
    OB("delete_done", OFF(cfg_input, delete_done), SPL, 0, "false",
       "delete finished files instead of moving them"),
    OS("pattern", OFF(cfg_input, pattern), 0, SPL, "*", "a file name glob",
       "which files of dir are messages"),
    OX("layouts", 0, 0, "every layout", "a list of layout names",
       "restrict this input to these layouts"),
};
TABLE(opt_input, "input", "an item of inputs", input_rows, w_in);

static const struct opt ring_rows[] = {
    OP("path", OFF(cfg_ring, path), 0, 0, "<state_dir>/ring", "the ring file"),
    OU("size_mb", OFF(cfg_ring, size_mb), 0, 0, 16, "16", 1, 4096,
       "ring file size, MiB"),
};
TABLE(opt_ring, "ring", "ring", ring_rows, NULL);

#define HTTP K(CFG_OUT_HTTP)
static const struct opt output_rows[] = {
    OW("kind", OFF(cfg_output, kind), OPT_REQUIRED, 0, 0, NULL, w_out, NULL,
       "what kind of output"),
    OS("name", OFF(cfg_output, name), 0, 0, "<kind><index>",
       "[A-Za-z0-9_.-], 1..32 characters, unique",
       "the output's name (logs, status, ring cursor)"),
    OS("url", OFF(cfg_output, url), OPT_REQUIRED, HTTP, NULL,
       "an https:// URL (http:// with allow_plain_http)",
       "where batches are POSTed"),
    OP("token_file", OFF(cfg_output, token_file), 0, HTTP, "none",
       "file holding the bearer token"),
    OS("token_env", OFF(cfg_output, token_env), 0, HTTP, "none",
       "an environment variable name", "variable holding the token"),
    OU("batch", OFF(cfg_output, batch), 0, HTTP, 500, "500", 1, 100000,
       "readings per request, at most"),
    OU("batch_bytes", OFF(cfg_output, batch_bytes), 0, HTTP, 1048576, "1048576",
       1024, 67108864, "request body bytes, at most"),
    OU("timeout_s", OFF(cfg_output, timeout_s), 0, HTTP, 30, "30", 1, 3600,
       "whole request time limit"),
    OU("connect_timeout_s", OFF(cfg_output, connect_timeout_s), 0, HTTP, 10,
       "10", 1, 600, "connection time limit"),
    OW("format", OFF(cfg_output, format), 0, HTTP, 0, "batch", w_format, NULL,
       "request body: batch object, NDJSON, one reading"),
    OX("rename", 0, 0, "none", "an object: value name -> new name",
       "names the receiver uses"),
    OX("extra", 0, 0, "none", "an object of JSON members",
       "fixed members added to every reading"),
    OX("headers", 0, HTTP, "none", "an object: header name -> text",
       "request headers (no secrets: use token_file/token_env)"),
    OP("ca_file", OFF(cfg_output, ca_file), 0, HTTP, "system CAs",
       "trust only the CAs in this file"),
    OB("allow_plain_http", OFF(cfg_output, allow_plain_http), HTTP, 0, "false",
       "allow an http:// URL (no TLS)"),
    OU("backoff_base_s", OFF(cfg_output, backoff_base_s), 0, HTTP, 1, "1", 1,
       3600, "first retry delay (full jitter)"),
    OU("backoff_cap_s", OFF(cfg_output, backoff_cap_s), 0, HTTP, 600, "600", 1,
       86400, "longest retry delay"),
    OP("path", OFF(cfg_output, path), OPT_REQUIRED, K(CFG_OUT_FILE), NULL,
       "NDJSON file readings are appended to"),
};
TABLE(opt_output, "output", "an item of outputs", output_rows, w_out);

static const struct opt alerts_rows[] = {
    OX("to", 0, 0, "none", "a list of alert targets", "where alerts are sent"),
    OU("silent_after_s", OFF(cfg_alerts, silent_after_s), 0, 0, 3600, "3600",
       60, 86400 * 31.0,
       "alert when a station is silent this"
       " long"),
    OU("repeat_s", OFF(cfg_alerts, repeat_s), 0, 0, 21600, "21600", 60,
       86400 * 31.0, "repeat an open alert this often"),
    OU("down_after_s", OFF(cfg_alerts, down_after_s), 0, 0, 900, "900", 0,
       86400 * 31.0, "alert when an output has failed this long"),
    ON("backlog_share", OFF(cfg_alerts, backlog_share), OPT_POSITIVE, 0, 0.8,
       "0.8", 0, 1, "alert when unsent readings fill this share of the ring"),
    OU("exec_per_min", OFF(cfg_alerts, exec_per_min), 0, 0, 6, "6", 1, 600,
       "runs of an exec target per minute, at most (more wait)"),
};
TABLE(opt_alerts, "alerts", "alerts", alerts_rows, NULL);

#define AH K(CFG_ALERT_HTTP)
static const struct opt alert_to_rows[] = {
    OW("kind", OFF(cfg_alert_to, kind), OPT_REQUIRED, 0, 0, NULL, w_alert, NULL,
       "how the alert is sent"),
    OS("url", OFF(cfg_alert_to, url), OPT_REQUIRED, AH, NULL,
       "an https:// URL (http:// with allow_plain_http)",
       "where alerts are POSTed"),
    OP("token_file", OFF(cfg_alert_to, token_file), 0, AH, "none",
       "file holding the bearer token"),
    OS("token_env", OFF(cfg_alert_to, token_env), 0, AH, "none",
       "an environment variable name", "variable holding the token"),
    OP("ca_file", OFF(cfg_alert_to, ca_file), 0, AH, "system CAs",
       "trust only the CAs in this file"),
    OB("allow_plain_http", OFF(cfg_alert_to, allow_plain_http), AH, 0, "false",
       "allow an http:// URL (no TLS)"),
    OX("argv", OPT_REQUIRED, K(CFG_ALERT_EXEC), NULL,
       "a list of strings,"
       " the first an absolute path",
       "the command run (no shell)"),
    OU("timeout_s", OFF(cfg_alert_to, timeout_s), 0, 0, 10, "10", 1, 600,
       "time limit per alert"),
};
TABLE(opt_alert_to, "alert", "an item of alerts.to", alert_to_rows, w_alert);

static const struct opt status_rows[] = {
    OP("path", OFF(cfg_status, path), 0, 0, "<state_dir>/status.json",
       "status file, rewritten as a whole"),
    OP("metrics_path", OFF(cfg_status, metrics_path), 0, 0, "none",
       "counters in text form for monitoring"),
    OU("every_s", OFF(cfg_status, every_s), 0, 0, 10, "10", 1, 3600,
       "how often the files are rewritten"),
};
TABLE(opt_status, "status", "status", status_rows, NULL);

static const struct opt_table *const all_tables[] = {
    &opt_top,           &opt_layout,    &opt_match,         &opt_length,
    &opt_check,         &opt_crc,       &opt_field,         &opt_skip,
    &opt_records,       &opt_station,   &opt_alkalinity,    &opt_qc,
    &opt_climatology,   &opt_battery,   &opt_input,         &opt_ring,
    &opt_output,        &opt_alerts,    &opt_alert_to,      &opt_status,
    &opt_multi_variate, &opt_carbonate, &opt_ph_from_ratio, &opt_derive_inputs,
};

const struct opt_table *const *opt_tables(size_t *n)
{
	*n = sizeof(all_tables) / sizeof(all_tables[0]);
	return all_tables;
}

const struct opt_table *opt_table_find(const char *name)
{
	size_t i;

	for (i = 0; i < sizeof(all_tables) / sizeof(all_tables[0]); i++)
		if (strcmp(all_tables[i]->name, name) == 0)
			return all_tables[i];
	return NULL;
}

const struct opt *opt_find(const struct opt_table *t, const char *name)
{
	size_t i;

	for (i = 0; i < t->n; i++)
		if (strcmp(t->opt[i].name, name) == 0)
			return &t->opt[i];
	return NULL;
}

size_t opt_index(const struct opt_table *t, const struct opt *o)
{
	return (size_t)(o - t->opt);
}

/* --- words, suggestions, descriptions -------------------------------- */

/* Levenshtein distance, for strings shorter than 64 bytes. */
static size_t edit_distance(const char *a, const char *b)
{
	size_t la = strlen(a), lb = strlen(b), i, j, prev, cur, best;
	size_t row[64];

	if (la >= 64 || lb >= 64)
		return 99;
	for (j = 0; j <= lb; j++)
		row[j] = j;
	for (i = 1; i <= la; i++) {
		prev = row[0];
		row[0] = i;
		for (j = 1; j <= lb; j++) {
			cur = row[j];
			best = prev + (a[i - 1] != b[j - 1]);
			if (row[j] + 1 < best)
				best = row[j] + 1;
			if (row[j - 1] + 1 < best)
				best = row[j - 1] + 1;
			row[j] = best;
			prev = cur;
		}
	}
	return row[lb];
}

static bool is_prefix(const char *s, const char *c)
{
	size_t ls = strlen(s), lc = strlen(c);

	if (ls < 2 || lc < 2)
		return false;
	return strncmp(s, c, ls < lc ? ls : lc) == 0;
}

const char *opt_suggest(const char *s, const char *const *cands, size_t n)
{
	const char *best = NULL;
	size_t i, d, bd = 3;

	for (i = 0; i < n; i++) {
		if (cands[i] == NULL)
			continue;
		d = edit_distance(s, cands[i]);
		if (d == 0 || d >= strlen(s)) /* "b" is no typo of "a" */
			continue;
		if (d < bd) {
			bd = d;
			best = cands[i];
		}
	}
	for (i = 0; best == NULL && i < n; i++)
		if (cands[i] != NULL && is_prefix(s, cands[i]))
			best = cands[i];
	return best;
}

/* Append the words of w, blank-separated. */
static void put_words(char *buf, size_t cap, const char *const *w)
{
	size_t i, len;

	for (i = 0; w != NULL && w[i] != NULL; i++) {
		len = strlen(buf);
		if (len + 1 >= cap)
			return;
		snprintf(buf + len, cap - len, "%s%s", i ? " " : "", w[i]);
	}
}

static void describe_number(const struct opt *o, char *buf, size_t cap)
{
	const char *what = o->type == OPT_NUM ? "a number" : "a whole number";

	if (o->min <= -NOLIM && o->max >= NOLIM)
		snprintf(buf, cap, "%s%s", what,
		         o->flags & OPT_NONZERO ? ", not 0" : "");
	else if (o->max >= NOLIM || (o->type == OPT_UINT && o->max >= UMAX))
		snprintf(buf, cap, "%s %s %.15g", what,
		         o->flags & OPT_POSITIVE ? ">" : ">=", o->min);
	else if (o->flags & OPT_POSITIVE)
		snprintf(buf, cap, "%s > %.15g and <= %.15g", what, o->min,
		         o->max);
	else
		snprintf(buf, cap, "%s %.15g..%.15g", what, o->min, o->max);
}

void opt_describe(const struct opt *o, char *buf, size_t cap)
{
	buf[0] = '\0';
	if (o->valid != NULL) {
		snprintf(buf, cap, "%s", o->valid);
		return;
	}
	switch (o->type) {
	case OPT_BOOL:
		snprintf(buf, cap, "true or false");
		break;
	case OPT_UINT:
	case OPT_INT:
	case OPT_NUM:
		describe_number(o, buf, cap);
		break;
	case OPT_STR:
		snprintf(buf, cap, "a non-empty string");
		break;
	case OPT_PATH:
		snprintf(buf, cap,
		         "a path (relative: to the config file's"
		         " folder)");
		break;
	case OPT_WORD:
		put_words(buf, cap, o->words);
		break;
	case OPT_RANGE:
		snprintf(buf, cap, "[min, max], two numbers, min <= max");
		break;
	case OPT_NODE:
		snprintf(buf, cap, "see the reference");
		break;
	}
}

/* --- the reference --------------------------------------------------- */

static const char *type_name(enum opt_type t)
{
	static const char *const names[] = {
	    "bool", "whole number", "whole number", "number",     "string",
	    "path", "word",         "range",        "object/list"};

	return names[t];
}

static int print_row(FILE *f, const struct opt_table *t, const struct opt *o)
{
	char valid[256], kinds[96] = "";
	size_t i;

	opt_describe(o, valid, sizeof(valid));
	for (i = 0; o->kinds != 0 && t->kinds != NULL && t->kinds[i]; i++) {
		if (!(o->kinds & K(i)))
			continue;
		snprintf(kinds + strlen(kinds), sizeof(kinds) - strlen(kinds),
		         "%s%s", kinds[0] ? " " : " (", t->kinds[i]);
	}
	if (kinds[0] != '\0')
		snprintf(kinds + strlen(kinds), sizeof(kinds) - strlen(kinds),
		         " only)");
	return fprintf(f, "| `%s` | %s | %s | %s | %s%s |\n", o->name,
	               type_name(o->type),
	               o->flags & OPT_REQUIRED ? "required"
	               : o->def_text           ? o->def_text
	                                       : "none",
	               valid, o->doc, kinds) < 0
	           ? -1
	           : 0;
}

int opt_print_reference(FILE *f)
{
	size_t i, j;
	int bad = 0;

	for (i = 0; i < sizeof(all_tables) / sizeof(all_tables[0]); i++) {
		const struct opt_table *t = all_tables[i];

		if (fprintf(f,
		            "\n### %s (%s)\n\n| key | type | default |"
		            " valid | meaning |\n|---|---|---|---|---|\n",
		            t->name, t->where) < 0)
			bad = 1;
		for (j = 0; j < t->n; j++)
			if (print_row(f, t, &t->opt[j]) != 0)
				bad = 1;
	}
	return bad ? -1 : 0;
}
