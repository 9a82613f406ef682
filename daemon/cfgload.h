/*
 * cfgload.h - internals shared by the config loader's files: config.c
 * (files, top level, ring, status), cfglayout.c (layouts), cfgstation.c
 * (stations), cfgio.c (inputs, outputs, alerts) and options.c (the
 * tables and the generic table-driven reader).  Not for other modules.
 *
 * A struct ld is one JSON file being read: its name for messages, the
 * folder relative paths resolve against, its position index and the key
 * path of the object being read.  Every allocation that ends up in the
 * config comes from one arena (struct arena), freed whole by config_free;
 * scratch memory is malloc'd and freed by the function that took it.
 *
 * Message form: "FILE:LINE:COL: KEY.PATH: what was found; what is valid".
 */
#ifndef TIDEPOST_CFGLOAD_H
#define TIDEPOST_CFGLOAD_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include <cjson/cJSON.h>

#include "config.h"
#include "jsonpos.h"
#include "options.h"

#define CFG_MAX_OPTS 32 /* options per table, at most */
#define CFG_NAME_MAX 64

struct arena_blk;
struct arena {
	struct arena_blk *head;
	int failed; /* an allocation failed (reported once) */
};

/* Zeroed, 16-byte aligned memory that lives as long as the arena. */
void *arena_alloc(struct arena *a, size_t n);
char *arena_strdup(struct arena *a, const char *s);
void arena_free(struct arena *a);

struct ld {
	const char *file; /* name in messages */
	const char *dir;  /* relative paths resolve against this */
	struct jpos pos;
	struct cfg_errors *errs;
	struct arena *mem;
	char path[JPOS_PATH_MAX]; /* key path of the current object */
	size_t plen;
	bool layouts_ok;     /* layouts loaded cleanly: names checkable */
	const char **vnames; /* cfg_value_names, computed once */
	size_t n_vnames;
};

/* Key path helpers: append ".key" / "[i]"; return the old length. */
size_t ld_key(struct ld *ld, const char *key);
size_t ld_idx(struct ld *ld, size_t i);
void ld_pop(struct ld *ld, size_t old);

/* Add a message at node's value (at_key 0) or key (at_key 1), under the
 * current path.  node NULL: no position (FILE: PATH: ...). */
void ld_err(struct ld *ld, const cJSON *node, int at_key, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

/* Add a message that has no JSON place ("FILE: what"). */
void cfg_err_plain(struct cfg_errors *e, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

/* Messages so far (kept + dropped). */
size_t cfg_nerr(const struct cfg_errors *e);

/* A short description of a node for messages: `string "abc"`, `number
 * 1.5`, `an object` ...; into buf. */
const char *ld_found(const cJSON *node, char *buf, size_t cap);

/*
 * Read the members of object obj by table t into dst: type and range
 * checks, defaults, unknown keys (with "did you mean"), keys not used by
 * this kind, missing required keys.  seen[i] gets the node of option i
 * (or NULL).  kind: index into t->kinds, or -1 (every key allowed).
 * Returns 0, or -1 when it reported a problem.
 */
int opt_apply(struct ld *ld, const struct opt_table *t, const cJSON *obj,
              void *dst, int kind, const cJSON **seen)
    __attribute__((warn_unused_result));

/* Set the table's defaults in dst (for a section that is absent). */
void opt_defaults(const struct opt_table *t, void *dst);

/* The node opt_apply found for option `name` of t, or NULL. */
const cJSON *opt_seen(const struct opt_table *t, const cJSON **seen,
                      const char *name);

/* The kind word of obj (its "kind" member, by table t), or -1 if absent
 * or not one of t->kinds (opt_apply reports it). */
int opt_peek_kind(const struct opt_table *t, const cJSON *obj);

/* Resolve a path against ld->dir into the arena; NULL on failure (too
 * long or out of memory; reported at node). */
char *ld_path(struct ld *ld, const cJSON *node, const char *p);

/* A whole number (JSON number, or a string "0x1F" / "31") as sign and
 * magnitude.  Returns 0, or -1 after reporting at node. */
int ld_integer(struct ld *ld, const cJSON *node, bool *neg, uint64_t *mag);

/* Is s a name of the form [A-Za-z0-9_.-]{1,max}? */
bool cfg_name_ok(const char *s, size_t max);

/* Read one JSON file and call fn with its tree (deleted afterwards).
 * Problems are reported; returns fn's result, or -1. */
typedef int cfg_doc_fn(struct ld *ld, const cJSON *root, void *arg);
int cfg_with_text(struct ld *ld, const char *text, size_t len, cfg_doc_fn *fn,
                  void *arg) __attribute__((warn_unused_result));

/* Read a file of at most cap bytes into a malloc'd buffer (*len bytes,
 * NUL-terminated).  Returns NULL with errno set. */
char *cfg_read_file(const char *path, size_t cap, size_t *len);

/* --- scratch structs the tables read into (then checked and copied) -- */

struct top_in {
	char *state_dir;
};
struct lay_in {
	char *name;
	int byte_order;
	char *description;
};
struct fld_in {
	char *name;
	int type; /* index into opt_words_types, or -1 */
	uint32_t bits;
	bool is_signed;
	int role; /* index into the role words, or -1 */
	double scale, offset;
	struct cfg_range range;
	char *unit, *standard_name, *epoch, *description;
};
struct skip_in {
	uint32_t bits;
};
struct match_in {
	int32_t at;
	int type;
};
struct len_in {
	uint32_t min, max;
};
struct check_in {
	int32_t at;
	int order;
};
struct crc_in {
	uint32_t width;
	bool refin, refout;
};
struct rec_in {
	uint32_t every_s;
};
struct clim_in {
	struct cfg_range range;
};

/* --- sections (one file each) --------------------------------------- */

struct grp {               /* one parsed group of fields */
	const cJSON *list; /* the JSON list, or NULL */
	struct tp_field *f;
	size_t n;
};

/* Bits of each type word (opt_words_types order). */
extern const uint8_t cfg_type_bits[];

/* The list of fields at `list` (key "fields" under the current path)
 * into g (arena memory). */
int cfg_field_group(struct ld *ld, const cJSON *list, bool in_records,
                    struct grp *g) __attribute__((warn_unused_result));

/* A layout object at the current path into *out (arena memory); its name
 * must differ from the n_prev layouts before it. */
int cfg_layout_parse(struct ld *ld, const cJSON *obj, struct tp_layout *out,
                     const struct tp_layout *prev, size_t n_prev)
    __attribute__((warn_unused_result));

/* Load the layout file named ld->file into *out (ld: errs, mem and the
 * key path prefix set, e.g. "layouts[2]" or "").  A file that cannot be
 * read is reported at ref_node of ref, or plainly when ref is NULL. */
int cfg_layout_file(struct ld *ld, struct ld *ref, const cJSON *ref_node,
                    struct tp_layout *out, const struct tp_layout *prev,
                    size_t n_prev) __attribute__((warn_unused_result));

/* Build layout_ptrs for the n_layouts layouts of c. */
int cfg_layout_ptrs(struct arena *mem, struct config *c)
    __attribute__((warn_unused_result));

/* Join a folder and a name into the arena ("dir/name"). */
char *cfg_join(struct arena *mem, const char *dir, const char *name);

/* The "layouts" list of a config (files or inline objects). */
int cfg_layouts(struct ld *ld, const cJSON *list, struct config *c)
    __attribute__((warn_unused_result));

/* The value names of every layout of c (role-less fields), for checks
 * and suggestions; arena array, *n entries. */
const char **cfg_value_names(struct ld *ld, const struct config *c, size_t *n);

/* Is name a value of some layout of c, or a derived value?  If not,
 * report at node (its key when at_key) with a suggestion.  Returns 0 or
 * -1; always 0 when the layouts had problems (names unknown). */
int cfg_check_value(struct ld *ld, const cJSON *node, int at_key,
                    const char *name, const struct config *c)
    __attribute__((warn_unused_result));

int cfg_stations(struct ld *ld, const cJSON *obj, struct config *c)
    __attribute__((warn_unused_result));
int cfg_inputs(struct ld *ld, const cJSON *list, struct config *c)
    __attribute__((warn_unused_result));
int cfg_outputs(struct ld *ld, const cJSON *list, struct config *c)
    __attribute__((warn_unused_result));
int cfg_alerts(struct ld *ld, const cJSON *obj, struct config *c)
    __attribute__((warn_unused_result));

/* Option tables (options.c). */
extern const struct opt_table opt_top, opt_layout, opt_match, opt_length,
    opt_check, opt_crc, opt_field, opt_skip, opt_records, opt_station,
    opt_alkalinity, opt_qc, opt_climatology, opt_battery, opt_input, opt_ring,
    opt_output, opt_alerts, opt_alert_to, opt_status;

#endif
