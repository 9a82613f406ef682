/*
 * config.h - loading the config file and layout files (JSON, via cJSON)
 * into plain C structs, once, at start or reload.
 *
 * Owns: every string and array reachable from a struct config; all of it
 * is freed by config_free().  Every problem found is reported with its
 * place: "FILE:LINE:COL: KEY.PATH: what was found; what is valid".
 * Unknown keys are errors, with a "did you mean" suggestion when close.
 * Line and block comments are allowed and stripped before parsing.
 *
 * Called by main (run, decode, encode, check, ring, status, replay).
 *
 * Choices where the design is silent (see options.c for every key and
 * default): columns count characters (UTF-8 code points) from 1; strings
 * may not be empty; station numbers are written without leading zeros;
 * field names are [A-Za-z_][A-Za-z0-9_]{0,63}; layout, station, input and
 * output names are [A-Za-z0-9_.-]{1,32} (layouts up to 64); the first
 * problem in a file's text (size, NUL byte, comment, nesting, syntax)
 * stops that file, later ones are all collected.
 */
#ifndef TIDEPOST_CONFIG_H
#define TIDEPOST_CONFIG_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tidepost/frame.h"
#include "tidepost/layout.h"
#include "tidepost/derive.h" /* added for process.h */
#include "tidepost/qc.h"

#define CFG_MAX_ERRORS       64
#define CFG_MAX_CONFIG_BYTES (1024 * 1024) /* config file size cap */
#define CFG_MAX_LAYOUT_BYTES (256 * 1024)  /* layout file size cap */
#define CFG_MAX_DEPTH        32            /* JSON nesting cap */
#define CFG_MAX_LAYOUTS      64
#define CFG_MAX_ITEMS        256 /* inputs, outputs, qc entries, headers ... */
#define CFG_MAX_STATIONS     4096

/* Problems found while loading; each message is complete and printable. */
struct cfg_errors {
	size_t n;                  /* messages kept (<= CFG_MAX_ERRORS) */
	size_t dropped;            /* further messages not kept */
	char *msg[CFG_MAX_ERRORS]; /* owned; freed by cfg_errors_free */
};

/* A closed interval; `set` false when the key was not given. */
struct cfg_range {
	bool set;
	double min, max;
};

enum cfg_alk_kind {
	CFG_ALK_NONE = 0, /* no alkalinity: no carbonate values */
	CFG_ALK_SALINITY, /* TA = per_salinity * S + at_zero */
	CFG_ALK_VALUE,    /* a fixed TA */
	CFG_ALK_FIELD     /* TA measured: a value of the packet */
};

/* Total alkalinity for the carbonate system, umol/kg. */
struct cfg_alkalinity {
	enum cfg_alk_kind kind;
	double per_salinity, at_zero; /* CFG_ALK_SALINITY */
	double value;                 /* CFG_ALK_VALUE */
	char *field;                  /* CFG_ALK_FIELD: a value name */
};

/* QC settings for one value (QARTOD test names; thresholds in the
 * value's unit).  A test whose setting is 0 / unset is not run. */
struct cfg_qc {
	char *value;                      /* value name (layouts or derived) */
	struct cfg_range suspect;         /* gross range: outside -> 3 */
	struct cfg_range fail;            /* gross range: outside -> 4 */
	struct cfg_range climatology[12]; /* per month, [0] = January: -> 3 */
	double spike, spike_fail;     /* spike test thresholds: -> 3, -> 4 */
	double rate_per_h;            /* rate of change limit per hour: -> 3 */
	uint32_t flat_n, flat_fail_n; /* flat line repeat counts: -> 3, -> 4 */
	double flat_eps;              /* flat line tolerance; 0: half the
	                                 field's scale */
	/* added for the QC pipeline (cfgderive.c, process.h) */
	double rate_n_dev;           /* rate of change: N SDs -> 3; 0 off */
	double rate_window_h;        /* hours of history for that SD */
	uint32_t gap_s;              /* 0: not given (2 x expect_every_s) */
	char *mv_with;               /* multi-variate peer value, or NULL */
	struct tp_qc_value_cfg base; /* resolved, except what depends on
	                                the layout (sensor span, flat_eps
	                                default, mv_peer) */
};

struct cfg_battery {
	bool set;
	char *field;             /* value name of the battery voltage */
	double warn_v, cutoff_v; /* 0: no such alert */
	uint32_t forecast_h;     /* alert when cutoff is forecast within */
	uint32_t trend_h;        /* window the trend is fitted over */
	/* added for the watchdog (watch.h documents each choice) */
	double critical_v;     /* 0: cutoff_v + min(0.5, (warn_v -
	                          cutoff_v) / 2); needs cutoff_v */
	uint32_t median_n;     /* readings in the short median */
	double hysteresis_v;   /* low alerts clear this far above */
	int fit;               /* enum cfg_trend_fit */
	uint32_t trend_min_n;  /* fewer points: no forecast */
	double flat_v_per_day; /* a shallower fall: no forecast */
};

enum cfg_trend_fit { CFG_FIT_THEIL_SEN = 0, CFG_FIT_LEAST_SQUARES };

struct cfg_station {
	uint32_t number; /* the station role's value */
	char *name;      /* short name used in readings and ids */
	char *title;     /* optional long name, or NULL */
	bool has_position;
	double lat, lon; /* degrees north, east (WGS 84) */
	bool has_depth;
	double depth_m;          /* sensor depth below the surface */
	uint32_t expect_every_s; /* expected packet interval; 0 unknown */
	uint32_t silent_after_s; /* 0: alerts.silent_after_s */
	struct cfg_alkalinity alkalinity;
	struct cfg_qc *qc; /* n_qc, in file order */
	size_t n_qc;
	struct cfg_battery battery;
	/* added for the watchdog (watch.h) */
	uint32_t qc_streak_n;   /* flag 3/4 this often in a row: alert */
	uint32_t qc_clear_n;    /* good values in a row that clear it */
	uint32_t clock_limit_s; /* packet time vs received; 0: off */
	/* added for derived values (cfgderive.c, process.h) */
	bool derive;                     /* false: no derived values */
	int pressure_from;               /* enum tp_pres_source */
	struct tp_derive_cfg derive_cfg; /* resolved; names in the arena */
};

enum cfg_input_kind {
	CFG_IN_SERIAL = 0,
	CFG_IN_TCP,
	CFG_IN_SPOOL,
	CFG_IN_STDIN
};
enum cfg_parity { CFG_PARITY_NONE = 0, CFG_PARITY_ODD, CFG_PARITY_EVEN };
enum cfg_flow { CFG_FLOW_NONE = 0, CFG_FLOW_RTSCTS, CFG_FLOW_XONXOFF };

struct cfg_input {
	enum cfg_input_kind kind;
	char *name;              /* given, or "<kind><index>" */
	enum tp_framing framing; /* default cobs; whole for spool */
	size_t fixed_n;          /* framing fixed:N */
	char *device;            /* serial */
	uint32_t baud, data_bits, stop_bits;
	enum cfg_parity parity;
	enum cfg_flow flow;
	char *host; /* tcp */
	uint32_t port;
	uint32_t reconnect_s; /* serial, tcp: wait before reopening */
	char *dir;            /* spool: folder watched */
	char *done;           /* spool: finished files go here, or
	                         NULL when delete_done */
	char *rejected;       /* spool: undecodable files go here */
	bool delete_done;
	char *pattern;    /* spool: file name glob */
	size_t *layouts;  /* indices into config.layouts; */
	size_t n_layouts; /* 0: every layout */
};

enum cfg_output_kind { CFG_OUT_HTTP = 0, CFG_OUT_FILE };
enum cfg_format { CFG_FMT_BATCH = 0, CFG_FMT_NDJSON, CFG_FMT_SINGLE };

/* A key and a text value.  For `extra`, value is the member's JSON text
 * (e.g. "\"reef\"", "12", "true"). */
struct cfg_pair {
	char *key;
	char *value;
};

struct cfg_output {
	enum cfg_output_kind kind;
	char *name;           /* unique; given or "<kind><index>" */
	char *url;            /* http: https:// (http:// only with
	                         allow_plain_http) */
	char *token_file;     /* http: secret from this file, or */
	char *token_env;      /* from this environment variable */
	uint32_t batch;       /* readings per request, at most */
	uint32_t batch_bytes; /* body bytes per request, at most */
	uint32_t timeout_s, connect_timeout_s;
	enum cfg_format format;
	struct cfg_pair *rename; /* value name -> receiver's name */
	size_t n_rename;
	struct cfg_pair *extra; /* fixed members added to readings */
	size_t n_extra;
	struct cfg_pair *headers; /* request headers (no secrets) */
	size_t n_headers;
	char *ca_file; /* trust only this CA bundle */
	bool allow_plain_http;
	uint32_t backoff_base_s, backoff_cap_s;
	char *path; /* file: NDJSON file appended to */
};

enum cfg_alert_kind { CFG_ALERT_HTTP = 0, CFG_ALERT_EXEC };

struct cfg_alert_to {
	enum cfg_alert_kind kind;
	char *url;                    /* http */
	char *token_file, *token_env; /* http */
	char *ca_file;                /* http */
	bool allow_plain_http;        /* http */
	char **argv;                  /* exec: argc strings + NULL; argv[0]
	                                 is an absolute path */
	size_t argc;
	uint32_t timeout_s; /* per alert delivery */
};

struct cfg_alerts {
	struct cfg_alert_to *to;
	size_t n_to;
	uint32_t silent_after_s; /* station silent this long -> alert */
	uint32_t repeat_s;       /* repeat an open alert this often */
	/* added for the watchdog and alert delivery (watch.h, alert.h) */
	uint32_t down_after_s; /* an output failing this long: alert */
	double backlog_share;  /* ring share of unsent readings: alert */
	uint32_t exec_per_min; /* exec target runs per minute, at most */
};

struct cfg_ring {
	char *path; /* default <state_dir>/ring */
	uint32_t size_mb;
};

struct cfg_status {
	char *path;         /* default <state_dir>/status.json */
	char *metrics_path; /* NULL: no metrics file */
	uint32_t every_s;   /* rewrite interval */
};

struct config {
	char *path;                /* the config file, or NULL (-l only) */
	struct tp_layout *layouts; /* n_layouts, in file order */
	const struct tp_layout **layout_ptrs; /* same, for tp_layout_select */
	size_t n_layouts;
	struct cfg_station *stations;
	size_t n_stations;
	void *priv;      /* loader-owned storage */
	char *state_dir; /* NULL for config_load_layouts */
	struct cfg_input *inputs;
	size_t n_inputs;
	struct cfg_ring ring;
	struct cfg_output *outputs;
	size_t n_outputs;
	struct cfg_alerts alerts;
	struct cfg_status status;
};

/* Load a config file (for `tidepost run`, `check`, ...).  Returns 0 and
 * sets *out, or -1 with every problem in errs (the caller frees errs with
 * cfg_errors_free).  All of *out is freed by config_free.  On error *out
 * is NULL: never a partial config.  errs is initialised here; on success
 * it holds no messages. */
int config_load(const char *path, struct config **out, struct cfg_errors *errs)
    __attribute__((warn_unused_result));

/* Same, from text in memory (used by the fuzz target and tests).  `name`
 * is the file name used in messages; relative paths resolve against
 * base_dir.  The text need not be NUL-terminated. */
int config_load_buffer(const char *name, const char *text, size_t len,
                       const char *base_dir, struct config **out,
                       struct cfg_errors *errs)
    __attribute__((warn_unused_result));

/* Build a config from layout files only (`decode -l A.json -l B.json`). */
int config_load_layouts(const char *const *paths, size_t n, struct config **out,
                        struct cfg_errors *errs)
    __attribute__((warn_unused_result));

/* Free a config; NULL is fine. */
void config_free(struct config *c);

/* The station with this number, or NULL. */
const struct cfg_station *config_station(const struct config *c,
                                         uint32_t number);

void cfg_errors_free(struct cfg_errors *e);

#endif
