/*
 * config.h - loading the config file and layout files (JSON, via cJSON)
 * into plain C structs, once, at start or reload.
 *
 * Owns: every string and array reachable from a struct config; all of it
 * is freed by config_free().  Every problem found is reported with its
 * place: "FILE:LINE:COL: KEY.PATH: what was found; what is valid".
 * Unknown keys are errors, with a "did you mean" suggestion when close.
 * `//` and `/* */` comments are allowed and stripped before parsing.
 *
 * Called by main (run, decode, encode, check, ring, status, replay).
 */
#ifndef TIDEPOST_CONFIG_H
#define TIDEPOST_CONFIG_H

#include <stddef.h>
#include <stdint.h>

#include "tidepost/layout.h"

#define CFG_MAX_ERRORS 64

/* Problems found while loading; each message is complete and printable. */
struct cfg_errors {
	size_t n;                     /* messages kept (<= CFG_MAX_ERRORS) */
	size_t dropped;               /* further messages not kept */
	char *msg[CFG_MAX_ERRORS];    /* owned; freed by cfg_errors_free */
};

struct cfg_station {
	uint32_t number;              /* the station role's value */
	char *name;                   /* short name used in readings and ids */
	char *title;                  /* optional long name, or NULL */
};

struct config {
	char *path;                   /* the config file, or NULL (-l only) */
	struct tp_layout *layouts;    /* n_layouts, in file order */
	const struct tp_layout **layout_ptrs; /* same, for tp_layout_select */
	size_t n_layouts;
	struct cfg_station *stations;
	size_t n_stations;
	void *priv;                   /* loader-owned storage */
};

/* Load a config file.  Returns 0 and sets *out, or -1 with every problem
 * in errs (the caller frees errs with cfg_errors_free). */
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
int config_load_layouts(const char *const *paths, size_t n,
                        struct config **out, struct cfg_errors *errs)
	__attribute__((warn_unused_result));

/* Free a config; NULL is fine. */
void config_free(struct config *c);

/* The station with this number, or NULL. */
const struct cfg_station *config_station(const struct config *c,
                                         uint32_t number);

void cfg_errors_free(struct cfg_errors *e);

#endif
