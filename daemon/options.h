/*
 * options.h - the option tables: every key of the config file and of a
 * layout file, with its type, whether it is required, its default, its
 * range or valid words and a one-line description.
 *
 * One table per kind of JSON object (the top level, a layout, a field,
 * a station, an input, ...).  The same tables drive parsing and
 * validation (opt_apply, in the loader), the messages about bad values,
 * and the reference printed by opt_print_reference, so the documented
 * keys cannot drift from the accepted ones.
 *
 * Invariants: tables are const and sorted by nothing in particular (file
 * order is documentation order); a key appears once per table; `kinds`
 * is a bit mask over the table's `kind` words (0: every kind).
 *
 * Called by the config loader (config.c, cfglayout.c, cfgstation.c,
 * cfgio.c), by `tidepost check` and by the tests.
 */
#ifndef TIDEPOST_OPTIONS_H
#define TIDEPOST_OPTIONS_H

#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>

enum opt_type {
	OPT_BOOL,  /* bool */
	OPT_UINT,  /* uint32_t, a whole number */
	OPT_INT,   /* int32_t, a whole number */
	OPT_NUM,   /* double, finite */
	OPT_STR,   /* char *, non-empty, copied */
	OPT_PATH,  /* char *, non-empty; relative to the config folder */
	OPT_WORD,  /* int: index into `words` */
	OPT_RANGE, /* struct cfg_range: [min, max], min <= max */
	OPT_NODE   /* object, list or mixed: handled by the loader */
};

#define OPT_REQUIRED 0x1u         /* missing -> error at the enclosing object */
#define OPT_POSITIVE 0x2u         /* numbers: must be > min, not >= min */
#define OPT_NONZERO  0x4u         /* numbers: 0 is not allowed */
#define OPT_NOWHERE  ((size_t)-1) /* `off` when the loader stores it */

struct opt {
	const char *name;
	enum opt_type type;
	unsigned flags;           /* OPT_REQUIRED ... */
	unsigned kinds;           /* bit i: used by kind word i; 0: all */
	double def;               /* default of BOOL/UINT/INT/NUM/WORD */
	const char *def_text;     /* default as documented; NULL: none */
	double min, max;          /* UINT/INT/NUM range (inclusive) */
	const char *const *words; /* WORD: valid words, NULL-terminated */
	const char *valid;        /* NODE (or override): what is valid */
	size_t off;               /* offset in the target struct */
	const char *doc;          /* one line */
};

struct opt_table {
	const char *name;  /* "layout", "field", "input", ... */
	const char *where; /* where the object sits, for the docs */
	const struct opt *opt;
	size_t n;
	const char *const *kinds; /* kind words, or NULL */
};

/* Every table, in documentation order; *n gets the count. */
const struct opt_table *const *opt_tables(size_t *n);

/* The table with this name, or NULL. */
const struct opt_table *opt_table_find(const char *name);

/* The option named `name` in t, or NULL. */
const struct opt *opt_find(const struct opt_table *t, const char *name);

/* Index of o in its table. */
size_t opt_index(const struct opt_table *t, const struct opt *o);

/* "what is valid" for o, e.g. "a whole number 1..64" or "one of: big
 * little"; written into buf (cap bytes, always terminated). */
void opt_describe(const struct opt *o, char *buf, size_t cap);

/* The closest of `cands` (n strings) to s: edit distance <= 2 or one is
 * a prefix of the other (at least 2 characters); NULL if none. */
const char *opt_suggest(const char *s, const char *const *cands, size_t n);

/* Print every table as a Markdown reference (name, type, default,
 * valid values, description).  Returns 0, or -1 on a write error. */
int opt_print_reference(FILE *f) __attribute__((warn_unused_result));

/* Word lists shared with the loader (NULL-terminated). */
extern const char *const opt_words_types[]; /* u8 ... f64 */
extern const char *const opt_words_order[]; /* big little */

#endif
