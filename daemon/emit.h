/*
 * emit.h - writing readings out: one JSON line (WIRE.md) or one CSV row
 * (RFC 4180), into a capped struct buf.  Also the pieces they are made
 * of, which other writers reuse: numbers at the precision of their field,
 * JSON strings, RFC 3339 times, reading ids, CSV cells.
 *
 * Owns nothing but the column table of struct emit_csv (emit_csv_init /
 * emit_csv_free).  Every writer appends to a struct buf and relies on its
 * sticky error: the caller checks buf_failed() once per line.
 *
 * Choices made here (the README states them):
 * - Numbers of integer-typed fields (uN, iN, bits) are written with
 *   exactly tp_field_decimals() decimals ("%.*f"), so scale 0.001 gives
 *   8.012, never 8.011999999; a value that rounds to zero is written
 *   without a minus sign.  f32 fields are written with 9 significant
 *   digits ("%.9g", enough to round-trip any float), f64 fields with the
 *   shortest of 15, 16 or 17 significant digits that reads back as the
 *   same double.
 * - A value is null when its flag is 9 or it is not a finite number (JSON
 *   has no NaN or Inf); a null value is always written with flag 9.
 * - `seq` is null (JSON) or an empty cell (CSV) when the layout has no
 *   seq field; the id then uses 0.
 * - Times are UTC, RFC 3339 with "Z", whole seconds.  Times before
 *   0000-01-01T00:00:00Z or after 9999-12-31T23:59:59Z are written as
 *   those bounds (RFC 3339 has four-digit years); the id keeps the true
 *   Unix seconds so it stays unique.
 * - JSON strings escape '"', '\\' and every control byte (< 0x20, 0x7f)
 *   as \u00XX; bytes that are not valid UTF-8 become U+FFFD, so the
 *   output is always valid JSON.
 * - CSV cells are quoted when they hold a comma, quote, CR or LF (quotes
 *   doubled); lines end with CRLF.
 *
 * Called by `tidepost decode` and, later, by the daemon's outputs.
 */
#ifndef TIDEPOST_EMIT_H
#define TIDEPOST_EMIT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tidepost/layout.h"

#include "buf.h"
#include "process.h" /* added: derived values and per-test flags */

/* Times RFC 3339 can write: 0000-01-01T00:00:00Z .. 9999-12-31T23:59:59Z */
#define EMIT_TIME_MIN (-62167219200LL)
#define EMIT_TIME_MAX 253402300799LL

/* Room for a station number, time and seq in text ("%" PRIu64 ...). */
#define EMIT_NUM_MAX 24

/* Bytes of a time as emit_time writes it ("YYYY-MM-DDTHH:MM:SSZ"). */
#define EMIT_TIME_LEN 20

/* Room emit_fixed_chars needs at out: it writes at most 21 characters
 * (sign, 19 digits, point) but copies in blocks past them. */
#define EMIT_FIXED_MAX 40

/* One reading and what it came from; nothing is owned. */
struct emit_reading {
	const char *station;            /* config name, or the number as text */
	const struct tp_packet *packet; /* packet->layout is the layout */
	const struct tp_reading *reading;
	int64_t received_s; /* Unix seconds the packet came in */
};

/* Added for derived values and QC (process.h): what a reading carries
 * beyond its layout's values.  Derived values follow the layout's in
 * "values"/"flags" (and CSV), printed with their info's decimals; tests
 * add "tests":{"ph":{"gross_range":1,...},...} after "flags".  The _sci
 * writers take one (NULL: none, the same as the plain writers). */
struct emit_sci {
	const struct tp_derived_info *derived; /* n_derived, slot order */
	size_t n_derived;
	const struct proc_test *tests; /* n_tests; NULL: no "tests" */
	size_t n_tests;
};

/* Is slot f a value (printed in values/flags), not a role or skip? */
bool emit_is_value(const struct tp_field *f);

/* A number as its field wants it (see above).  Non-finite -> "null". */
void emit_number(struct buf *b, const struct tp_field *f, double v);

/* The three number forms emit_number chooses between. */
void emit_fixed(struct buf *b, double v, int decimals);

/*
 * The fast, exact form of emit_fixed: the text of "%.*f" (decimals 0..9)
 * for |v| < 10^(18 - decimals), without the minus sign of a value that
 * rounds to zero, written at out (EMIT_FIXED_MAX bytes, no NUL).  Rounds
 * like glibc's printf in the default rounding mode: the exact binary
 * value to nearest, ties to even.  Returns the length, or 0 when it does
 * not apply (other decimals, |v| too large, NaN; and where the compiler
 * has no 128-bit integers, values within 2^-20 of a rounding tie or with
 * |v| * 10^decimals >= 2^32): emit_fixed then uses snprintf.
 */
size_t emit_fixed_chars(char *out, double v, int decimals);
void emit_float32(struct buf *b, double v);
void emit_shortest(struct buf *b, double v);

/* s as a JSON string with its quotes. */
void emit_json_string(struct buf *b, const char *s);

/* t (Unix seconds) as "YYYY-MM-DDTHH:MM:SSZ", clamped (see above). */
void emit_time(struct buf *b, int64_t t);

/*
 * Parse an RFC 3339 date-time ("2026-11-30T06:15:00Z", lower-case t/z,
 * a space for T, fractional seconds (dropped) and +hh:mm / -hh:mm offsets
 * are accepted) into Unix seconds.  Returns 0, or -1 if s is not one.
 */
int emit_parse_time(const char *s, int64_t *out)
    __attribute__((warn_unused_result));

/* "<station>-<packet time>-<seq>-<record>", e.g. "rf2-1796020500-118-3". */
void emit_id(struct buf *b, const char *station, int64_t packet_time_s,
             uint64_t seq, uint32_t record);

/* The id of a reading. */
void emit_reading_id(struct buf *b, const struct emit_reading *er);

/* The reading as one JSON object line, '\n' included. */
void emit_json(struct buf *b, const struct emit_reading *er);
void emit_json_sci(struct buf *b, const struct emit_reading *er,
                   const struct emit_sci *sc);

/*
 * Per-layout plans: what every reading of a layout prints the same way,
 * worked out once (which slots are values, each one's number form, its
 * JSON key with the escaping done, the layout name as a JSON string).
 * emit_json_planned writes exactly what emit_json writes, faster.
 * A plan borrows its layout: the layout must not change while the plans
 * live.  Owned by the caller: emit_plans_init allocates, emit_plans_free
 * releases.
 */
struct emit_col {
	size_t slot;         /* value slot */
	int form;            /* decimals 0..9, or -1 f64, -2 f32 */
	size_t key, key_len; /* `,"name":` at text + key */
};

struct emit_plan {
	const struct tp_layout *layout; /* not owned */
	struct emit_col *cols;          /* value slots in slot order */
	size_t n_cols;
	size_t n_head_cols; /* the first ones, header fields */
	size_t room;        /* bytes all members may take in place */
	char *text;         /* layout name as JSON string, then keys */
	size_t name_len;
	size_t flags, flags_len; /* text + flags: the record columns' flag
	                            members, each flag a '0' to fill in */
};

struct emit_pcache; /* private to emit.c */
struct emit_sk;

#define EMIT_SCI_KEYS 4 /* derived-value lists whose keys are kept */

struct emit_plans {
	struct emit_plan *plan;
	size_t n;
	struct emit_pcache *pc; /* what the last packet's records share */
	struct emit_sk *sk;     /* keys of the last derived lists used */
};

/* Plans for n layouts.  Returns 0, or -1 (out of memory, errno set). */
int emit_plans_init(struct emit_plans *ps, const struct tp_layout *const *ls,
                    size_t n) __attribute__((warn_unused_result));

/* Release the plans; NULL is fine. */
void emit_plans_free(struct emit_plans *ps);

/* emit_json through the plan of er's layout (emit_json itself when ps
 * has none for it). */
void emit_json_planned(struct buf *b, const struct emit_plans *ps,
                       const struct emit_reading *er);
void emit_json_planned_sci(struct buf *b, const struct emit_plans *ps,
                           const struct emit_reading *er,
                           const struct emit_sci *sc);

/* One CSV cell, quoted when needed (no separator). */
void emit_csv_cell(struct buf *b, const char *s, size_t n);

/*
 * CSV column table: id,station,time,seq, then <name>,<name>_flag for
 * every value name of the given layouts, the union in order of first
 * appearance.  Built before any input, so the header comes first and
 * each row costs no memory.
 */
struct emit_csv {
	const struct tp_layout *const *layouts; /* not owned */
	size_t n_layouts;
	const char **names; /* n_names value names (borrowed strings) */
	size_t n_names;
	int *slot;              /* [layout * n_names + column]: slot or -1 */
	int *form;              /* same index: number form (struct emit_col) */
	struct emit_pcache *pc; /* what the last packet's rows share */
	/* added by emit_csv_science (borrowed strings; arrays owned) */
	const char **dnames; /* derived value columns, after the above */
	size_t n_dnames;
	const char **qnames; /* <name>_<test> columns, after those */
	size_t n_qnames;
};

/* Build the table.  Returns 0, or -1 (out of memory, errno set). */
int emit_csv_init(struct emit_csv *c, const struct tp_layout *const *ls,
                  size_t n) __attribute__((warn_unused_result));

/*
 * Add derived value columns (<name>,<name>_flag, after the layouts'
 * columns; a name already among them is skipped) and per-test columns
 * <name>_<test> for every value in qnames and every QARTOD test in
 * enum tp_qc_test order.  Call after emit_csv_init, before the header.
 * emit_csv_row_sci fills them from its emit_sci (empty cells without).
 * Returns 0, or -1 (out of memory, errno set).
 */
int emit_csv_science(struct emit_csv *c, const char *const *dnames,
                     size_t n_dnames, const char *const *qnames,
                     size_t n_qnames) __attribute__((warn_unused_result));

/* Release the table; NULL is fine. */
void emit_csv_free(struct emit_csv *c);

/* The header line, CRLF included. */
void emit_csv_header(struct buf *b, const struct emit_csv *c);

/* One reading as a CSV row, CRLF included.  A column the reading's layout
 * lacks, and a null value, leave empty cells.  Sets the buffer's error if
 * the layout is not one the table was built for. */
void emit_csv_row(struct buf *b, const struct emit_csv *c,
                  const struct emit_reading *er);
void emit_csv_row_sci(struct buf *b, const struct emit_csv *c,
                      const struct emit_reading *er, const struct emit_sci *sc);

#endif
