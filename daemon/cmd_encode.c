/*
 * cmd_encode.c - `tidepost encode`: readings as CSV (a header row of field
 * names, one row per reading) -> framed packets of one layout on stdout.
 * The inverse of `tidepost decode --format csv`, whose output it accepts.
 *
 * Choices (the README states them):
 * - columns are field names, header and record fields, role fields
 *   included.  `station`, `seq` and `time` also name the layout's
 *   station/seq/time field whatever it is called, and are ignored when
 *   the layout has no such field; `id`, `layout`, `received` and every
 *   `*_flag` column are ignored; any other unknown column is an error.
 * - station: a number or a station name of the config; time: RFC 3339 or
 *   Unix seconds; an empty cell is null (the field's `missing` value).
 * - packets: without records, one row per packet.  A fixed count N: N
 *   consecutive rows per packet, the header values from the first row;
 *   an incomplete last packet is an error naming its first line.  A count
 *   given by a field: consecutive rows with the same station, seq and
 *   packet time form one packet, where a row's packet time is its time
 *   minus k * every_s (k its index in the packet), so decode's CSV, whose
 *   time column is the record time, groups back as it was.
 * - a record `time_offset` field without a column gets the row's time
 *   minus the packet time (the first row's time); rows are then grouped
 *   by station and seq only.
 * - a header field without a column that a `match` test pins (same byte
 *   offset and width, e.g. a packet-kind byte) gets the tested value.
 * - a column naming a field of another loaded layout (decode's CSV has
 *   the union of them all) is ignored while empty, an error otherwise.
 * - a value outside what its field holds is clamped (LAYOUT.md) with a
 *   warning naming line and column; a value that would encode as the
 *   field's `missing` value is an error.
 * - the first bad row stops the run (exit 1); packets before it have
 *   been written.  Blank lines are skipped; a UTF-8 byte order mark
 *   before the header is ignored.
 */
#include <errno.h>
#include <getopt.h>
#include <inttypes.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "tidepost/frame.h"
#include "tidepost/layout.h"

#include "cli.h"
#include "log.h"

#define CSV_ROW_MAX  (64 * 1024) /* bytes of one row, at most */
#define CSV_COLS_MAX 1024        /* cells of one row, at most */
#define ENC_MAX_WARN 20          /* clamping warnings before going quiet */
#define COL_IGNORE   (-1)        /* a column encode does not use */
#define COL_UNKNOWN  (-2) /* not a column of any loaded layout: an error */
#define COL_OTHER    (-3) /* a field of another layout: must stay empty */

const char cmd_encode_usage[] =
    "usage: tidepost encode [-c CONFIG | -l LAYOUT ...] [--layout NAME]\n"
    "                       [--framing F] [FILE | -]\n"
    "\n"
    "Read readings as CSV (RFC 4180; the first row names the columns)\n"
    "and write packets of one layout, framed, on stdout.  Columns are\n"
    "field names; station may be a station name of the config, time an\n"
    "RFC 3339 time or Unix seconds; an empty cell is a missing value.\n"
    "The output of 'tidepost decode --format csv' is accepted: id,\n"
    "layout, received and *_flag columns are ignored.  Rows are grouped\n"
    "into packets by the layout's records (see the README).\n"
    "\n"
    "  -c, --config CONFIG   layouts and station names from a config\n"
    "  -l, --layout-file L   a layout file (repeat for several)\n"
    "  --layout NAME         the layout to encode (when several are)\n"
    "  --framing F           cobs (default), slip, hex, whole, fixed:N\n"
    "  -h, --help            this text\n"
    "\n"
    "Exit status: 0 packets written, 1 a bad row (its line and column\n"
    "are named) or no rows, 2 usage, config or I/O error.\n";

/* One CSV row being read: cells NUL-terminated in text. */
struct csv_in {
	FILE *fp;
	const char *name;
	unsigned long line;     /* physical line being read, from 1 */
	unsigned long row_line; /* line where the current row starts */
	char text[CSV_ROW_MAX];
	size_t len;
	size_t cell[CSV_COLS_MAX];
	size_t n;        /* cells in the row */
	const char *err; /* why csv_read failed */
};

struct enc {
	const struct config *cfg;
	const struct tp_layout *l;
	enum tp_framing framing;
	size_t fixed_n;
	struct csv_in in;
	char *names; /* copy of the header row's text */
	size_t name_at[CSV_COLS_MAX];
	int col[CSV_COLS_MAX]; /* value slot of each column, or COL_* */
	size_t n_cols;
	int time_slot, station_slot, seq_slot; /* header slots, or -1 */
	int offset_j;    /* record time_offset field, or -1 */
	bool offset_col; /* ... and it has a column */
	struct tp_value row[TP_MAX_VALUES]; /* the current row, by slot */
	struct tp_value pin[TP_MAX_FIELDS]; /* values set by match tests */
	bool pinned[TP_MAX_FIELDS];         /* for header fields w/o column */
	struct tp_value head[TP_MAX_FIELDS];
	struct tp_value *recs; /* max_recs rows of records.n_fields */
	uint32_t n_recs, max_recs;
	unsigned long first_line; /* line of the packet's first row */
	uint64_t packets;
	unsigned warned;
	uint8_t pkt[TP_MAX_PACKET];
	uint8_t framed[2 * TP_MAX_PACKET + 16];
};

/* ---- CSV reading ------------------------------------------------------ */

static int csv_put(struct csv_in *c, char ch)
{
	if (c->len >= sizeof(c->text)) {
		c->err = "row longer than 64 KiB";
		return -1;
	}
	c->text[c->len++] = ch;
	return 0;
}

static int csv_end_cell(struct csv_in *c)
{
	if (csv_put(c, '\0') < 0)
		return -1;
	if (c->n + 1 >= CSV_COLS_MAX) {
		c->err = "more than 1024 cells in a row";
		return -1;
	}
	c->n++;
	c->cell[c->n] = c->len;
	return 0;
}

/* Inside quotes: a quote ends the cell or is doubled.  0 or -1. */
static int csv_quoted(struct csv_in *c, int ch, bool *quoted)
{
	int next;

	if (ch == EOF) {
		c->err = "quoted cell not closed before the end of the input";
		return -1;
	}
	if (ch == '\n')
		c->line++;
	if (ch != '"')
		return csv_put(c, (char)ch);
	next = getc(c->fp);
	if (next == '"')
		return csv_put(c, '"');
	if (next != EOF)
		ungetc(next, c->fp);
	*quoted = false;
	return 0;
}

/* A CR, LF or CRLF outside quotes ends the row. */
static int csv_newline(struct csv_in *c, int ch)
{
	int next;

	if (ch == '\r') {
		next = getc(c->fp);
		if (next != '\n' && next != EOF)
			ungetc(next, c->fp);
		ch = '\n';
	}
	if (ch == '\n')
		c->line++;
	return ch;
}

/* A character outside quotes.  1: the row ended, 0: go on, -1: error. */
static int csv_plain(struct csv_in *c, int ch, bool *quoted, bool *closed)
{
	if (ch == '\n' || ch == EOF)
		return csv_end_cell(c) < 0 ? -1 : 1;
	if (ch == ',') {
		*closed = false;
		return csv_end_cell(c);
	}
	if (ch == '"' && !*closed && c->len == c->cell[c->n]) {
		*quoted = true;
		return 0;
	}
	if (*closed || ch == '"') {
		c->err = "a quote inside a cell: quote the whole cell and "
		         "double the quote";
		return -1;
	}
	return csv_put(c, (char)ch);
}

/* Read one row.  1: a row, 0: end of input, -1: c->err says why. */
static int csv_read(struct csv_in *c)
{
	bool quoted = false, closed = false;
	int ch, rc;

	c->len = c->n = 0;
	c->cell[0] = 0;
	c->row_line = c->line;
	for (;;) {
		ch = getc(c->fp);
		if (ch == '\0') {
			c->err = "a NUL byte in the input";
			return -1;
		}
		if (quoted) {
			if (csv_quoted(c, ch, &quoted) < 0)
				return -1;
			closed = !quoted;
			continue;
		}
		ch = csv_newline(c, ch);
		if ((ch == '\n' || ch == EOF) && c->n == 0 && c->len == 0 &&
		    !closed) {
			if (ch == EOF && ferror(c->fp))
				c->err = strerror(errno);
			if (ch == EOF)
				return ferror(c->fp) ? -1 : 0;
			c->row_line = c->line;
			continue;
		}
		rc = csv_plain(c, ch, &quoted, &closed);
		if (rc != 0)
			return rc;
	}
}

static const char *cell(const struct csv_in *c, size_t i)
{
	return c->text + c->cell[i];
}

/* ---- columns ---------------------------------------------------------- */

static const char *col_name(const struct enc *e, size_t i)
{
	return e->names + e->name_at[i];
}

/* An error about row cell i: "encode: FILE:LINE: column NAME: ...". */
static int row_err(const struct enc *e, size_t i, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static int row_err(const struct enc *e, size_t i, const char *fmt, ...)
{
	char what[512];
	va_list ap;

	va_start(ap, fmt);
	vsnprintf(what, sizeof(what), fmt, ap);
	va_end(ap);
	log_err("encode: %s:%lu: column %s: %s", e->in.name, e->in.row_line,
	        col_name(e, i), what);
	return -1;
}

/* Value slot of the field called name (header fields first), or -1. */
static int find_field(const struct tp_layout *l, const char *name)
{
	const struct tp_field *f;
	size_t i, n = tp_layout_n_values(l);

	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (f != NULL && f->name != NULL && f->type != TP_T_SKIP &&
		    strcmp(f->name, name) == 0)
			return (int)i;
	}
	return -1;
}

/* Header slot of the field with this role, or -1. */
static int find_role(const struct tp_layout *l, enum tp_role role)
{
	size_t i;

	for (i = 0; i < l->n_fields; i++) {
		if (l->fields[i].role == role && l->fields[i].type != TP_T_SKIP)
			return (int)i;
	}
	return -1;
}

static bool ends_with(const char *s, const char *suffix)
{
	size_t n = strlen(s), m = strlen(suffix);

	return n >= m && strcmp(s + n - m, suffix) == 0;
}

/* What a column means: a value slot or a COL_* code. */
static int column_slot(const struct enc *e, const char *name)
{
	int s = find_field(e->l, name);
	size_t i;

	if (s >= 0)
		return s;
	if (strcmp(name, "station") == 0)
		return e->station_slot >= 0 ? e->station_slot : COL_IGNORE;
	if (strcmp(name, "seq") == 0)
		return e->seq_slot >= 0 ? e->seq_slot : COL_IGNORE;
	if (strcmp(name, "time") == 0)
		return e->time_slot >= 0 ? e->time_slot : COL_IGNORE;
	if (strcmp(name, "id") == 0 || strcmp(name, "layout") == 0 ||
	    strcmp(name, "received") == 0 || ends_with(name, "_flag"))
		return COL_IGNORE;
	for (i = 0; i < e->cfg->n_layouts; i++) {
		if (find_field(&e->cfg->layouts[i], name) >= 0)
			return COL_OTHER;
	}
	return COL_UNKNOWN;
}

/* The layout's field names, for "not a field" messages. */
static void field_list(const struct tp_layout *l, char *out, size_t cap)
{
	const struct tp_field *f;
	size_t i, n = tp_layout_n_values(l), len = 0;
	int w;

	out[0] = '\0';
	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (f == NULL || f->name == NULL || f->type == TP_T_SKIP)
			continue;
		w = snprintf(out + len, cap - len, "%s%s", len > 0 ? ", " : "",
		             f->name);
		if (w < 0 || (size_t)w >= cap - len)
			break;
		len += (size_t)w;
	}
}

/* Is slot s the field that holds the record count? */
static bool is_count(const struct tp_layout *l, int s)
{
	return l->has_records && l->records.count_field >= 0 &&
	       s == l->records.count_field;
}

/* Is there a column for slot s? */
static bool has_column(const struct enc *e, int s)
{
	size_t i;

	for (i = 0; i < e->n_cols; i++) {
		if (e->col[i] == s)
			return true;
	}
	return false;
}

static const char *role_name(enum tp_role r)
{
	switch (r) {
	case TP_ROLE_STATION:
		return "station";
	case TP_ROLE_SEQ:
		return "seq";
	case TP_ROLE_TIME:
		return "time";
	case TP_ROLE_TIME_OFFSET:
		return "time_offset";
	default:
		return "value";
	}
}

/* Bits of a match test's type (byte-aligned integers), else 0. */
static uint32_t match_bits(enum tp_type t)
{
	switch (t) {
	case TP_T_U8:
	case TP_T_I8:
		return 8;
	case TP_T_U16:
	case TP_T_I16:
		return 16;
	case TP_T_U24:
	case TP_T_I24:
		return 24;
	case TP_T_U32:
	case TP_T_I32:
		return 32;
	case TP_T_U64:
	case TP_T_I64:
		return 64;
	default:
		return 0;
	}
}

/* A match test that pins header field i (same byte offset and width):
 * its value into *v.  So `kind` need not be a column. */
static bool match_value(const struct tp_layout *l, size_t i, double *v)
{
	const struct tp_field *f = &l->fields[i];
	const struct tp_match *m;
	uint64_t at = 0;
	size_t j;

	for (j = 0; j < i; j++)
		at += l->fields[j].bits;
	for (j = 0; j < l->n_match && at % 8 == 0; j++) {
		m = &l->match[j];
		if (m->at >= 0 && (uint64_t)m->at * 8 == at &&
		    match_bits(m->type) == f->bits &&
		    f->role == TP_ROLE_VALUE && f->type != TP_T_F32 &&
		    f->type != TP_T_F64) {
			*v = (double)m->is * (f->scale == 0 ? 1 : f->scale) +
			     f->offset;
			return true;
		}
	}
	return false;
}

/* Header fields without a column that a match test pins. */
static void enc_pins(struct enc *e)
{
	size_t i;
	double v;

	for (i = 0; i < e->l->n_fields; i++) {
		e->pinned[i] =
		    !has_column(e, (int)i) && match_value(e->l, i, &v);
		if (e->pinned[i])
			e->pin[i] =
			    (struct tp_value){.v = v, .flag = TP_FLAG_PASS};
	}
}

/* Every field that needs a column has one. */
static int enc_required(struct enc *e)
{
	const struct tp_field *f;
	size_t i, n = tp_layout_n_values(e->l);

	for (i = 0; i < n; i++) {
		f = tp_layout_field(e->l, i);
		if (f == NULL || f->name == NULL || f->type == TP_T_SKIP ||
		    is_count(e->l, (int)i) || has_column(e, (int)i) ||
		    (i < e->l->n_fields && e->pinned[i]))
			continue;
		if (f->role == TP_ROLE_TIME_OFFSET && e->time_slot >= 0 &&
		    has_column(e, e->time_slot))
			continue;
		if (f->role == TP_ROLE_VALUE &&
		    (f->has_missing || f->type == TP_T_F32 ||
		     f->type == TP_T_F64))
			continue;
		log_err("encode: %s:%lu: no column for the %s field '%s' of "
		        "layout %s%s",
		        e->in.name, e->in.row_line, role_name(f->role), f->name,
		        e->l->name,
		        f->role == TP_ROLE_VALUE
		            ? ", and it has no missing value"
		            : "");
		return -1;
	}
	return 0;
}

/* Map one header cell to its slot; -1 on an unknown or repeated name. */
static int enc_column(struct enc *e, size_t i)
{
	char fields[512];
	int s = column_slot(e, col_name(e, i));
	size_t j;

	if (s == COL_UNKNOWN) {
		field_list(e->l, fields, sizeof(fields));
		return row_err(e, i, "not a field of layout %s (fields: %s)",
		               e->l->name, fields);
	}
	for (j = 0; s >= 0 && j < i; j++) {
		if (e->col[j] == s)
			return row_err(e, i, "the same field as column %s",
			               col_name(e, j));
	}
	e->col[i] = s;
	return 0;
}

/* Read the header row and map the columns. */
static int enc_header(struct enc *e)
{
	const char *bom = "\xef\xbb\xbf";
	size_t i, skip = 0;
	int r = csv_read(&e->in);

	if (r <= 0) {
		log_err("encode: %s:%lu: %s", e->in.name, e->in.line,
		        r < 0 ? e->in.err : "no header row (field names)");
		return -1;
	}
	if (strncmp(e->in.text, bom, 3) == 0)
		skip = 3;
	e->names = malloc(e->in.len);
	if (e->names == NULL) {
		log_err("encode: header: %s", strerror(errno));
		return -1;
	}
	memcpy(e->names, e->in.text, e->in.len);
	e->n_cols = e->in.n;
	for (i = 0; i < e->n_cols; i++) {
		e->name_at[i] = e->in.cell[i] + (i == 0 ? skip : 0);
		if (enc_column(e, i) < 0)
			return -1;
	}
	e->offset_col = e->offset_j >= 0 &&
	                has_column(e, (int)e->l->n_fields + e->offset_j);
	enc_pins(e);
	return enc_required(e);
}

/* ---- cells ------------------------------------------------------------ */

static int parse_number(const char *s, double *out)
{
	char *end;

	errno = 0;
	*out = strtod(s, &end);
	return end != s && *end == '\0' && errno != ERANGE && isfinite(*out)
	           ? 0
	           : -1;
}

/* A station number, or the number of a station name in the config. */
static int parse_station(const struct enc *e, const char *s, double *out)
{
	long long v;
	size_t i;

	if (cli_parse_int(s, 0, UINT32_MAX, &v) == 0) {
		*out = (double)v;
		return 0;
	}
	for (i = 0; i < e->cfg->n_stations; i++) {
		if (e->cfg->stations[i].name != NULL &&
		    strcmp(e->cfg->stations[i].name, s) == 0) {
			*out = (double)e->cfg->stations[i].number;
			return 0;
		}
	}
	return -1;
}

/* An empty cell: fine for a value with `missing` (or a float, NaN). */
static int check_null(const struct enc *e, size_t i, const struct tp_field *f)
{
	int s = e->col[i];

	if (is_count(e->l, s) ||
	    (f->role == TP_ROLE_TIME_OFFSET && !e->offset_col))
		return 0;
	if (f->role != TP_ROLE_VALUE)
		return row_err(e, i, "empty, but the %s field needs a value",
		               role_name(f->role));
	if (f->has_missing || f->type == TP_T_F32 || f->type == TP_T_F64)
		return 0;
	return row_err(e, i, "empty, but field %s has no missing value",
	               f->name);
}

static bool is_signed_field(const struct tp_field *f)
{
	return f->is_signed || f->type == TP_T_I8 || f->type == TP_T_I16 ||
	       f->type == TP_T_I24 || f->type == TP_T_I32 ||
	       f->type == TP_T_I64;
}

/*
 * Does value v of integer field f fit its width?  Out of range: clamped
 * by the encoder, so warn (a few times).  Landing exactly on `missing`
 * would decode as null: an error.
 */
static int check_fit(struct enc *e, size_t i, const struct tp_field *f,
                     double v)
{
	double scale = f->scale == 0 ? 1 : f->scale, x, half;
	uint64_t mask, raw;

	if (f->type == TP_T_F32 || f->type == TP_T_F64 || f->bits == 0 ||
	    f->bits > 64 || is_count(e->l, e->col[i]))
		return 0;
	x = round((v - f->offset) / scale);
	half = ldexp(1.0, (int)f->bits - 1);
	if (is_signed_field(f) ? (x < -half || x >= half)
	                       : (x < 0 || x >= 2 * half)) {
		if (e->warned++ < ENC_MAX_WARN)
			log_warn("encode: %s:%lu: column %s: %s does not fit "
			         "the field (%u bits, scale %g, offset %g); "
			         "clamped",
			         e->in.name, e->in.row_line, col_name(e, i),
			         cell(&e->in, i), (unsigned)f->bits, scale,
			         f->offset);
		return 0;
	}
	mask = f->bits == 64 ? UINT64_MAX : ((uint64_t)1 << f->bits) - 1;
	raw = is_signed_field(f) ? (uint64_t)(int64_t)x : (uint64_t)x;
	if (f->has_missing && ((raw ^ f->missing) & mask) == 0)
		return row_err(e, i,
		               "%s encodes as the field's missing value "
		               "(raw %llu) and would read back as null",
		               cell(&e->in, i), (unsigned long long)f->missing);
	return 0;
}

/* Parse cell i into e->row[its slot]. */
static int parse_cell(struct enc *e, size_t i)
{
	const struct tp_field *f = tp_layout_field(e->l, (size_t)e->col[i]);
	const char *s = cell(&e->in, i);
	struct tp_value *v = &e->row[e->col[i]];
	long long n = 0;
	int64_t t = 0;
	int rc;

	if (s[0] == '\0')
		return check_null(e, i, f);
	if (f->role == TP_ROLE_STATION) {
		rc = parse_station(e, s, &v->v);
		if (rc < 0)
			return row_err(e, i,
			               "'%s' is not a station number or "
			               "a station name of the config",
			               s);
	} else if (f->role == TP_ROLE_TIME) {
		rc = cli_parse_time(s, &t);
		v->v = (double)t;
		if (rc < 0)
			return row_err(e, i,
			               "'%s' is not a time (RFC 3339 "
			               "like 2026-11-30T06:15:00Z, or Unix "
			               "seconds)",
			               s);
	} else if (f->role == TP_ROLE_SEQ) {
		rc = cli_parse_int(s, 0, INT64_MAX, &n);
		v->v = (double)n;
		if (rc < 0)
			return row_err(e, i,
			               "'%s' is not a counter (a whole "
			               "number >= 0)",
			               s);
	} else if (parse_number(s, &v->v) < 0) {
		return row_err(e, i, "'%s' is not a number", s);
	}
	v->flag = TP_FLAG_PASS;
	return f->role == TP_ROLE_VALUE ? check_fit(e, i, f, v->v) : 0;
}

/* Every cell of the current row into e->row. */
static int enc_row_values(struct enc *e)
{
	size_t i, n = tp_layout_n_values(e->l);

	if (e->in.n != e->n_cols) {
		log_err("encode: %s:%lu: %zu cells, but the header has %zu "
		        "columns",
		        e->in.name, e->in.row_line, e->in.n, e->n_cols);
		return -1;
	}
	for (i = 0; i < n; i++)
		e->row[i] =
		    (struct tp_value){.v = NAN, .flag = TP_FLAG_MISSING};
	for (i = 0; i < e->l->n_fields; i++) {
		if (e->pinned[i])
			e->row[i] = e->pin[i];
	}
	for (i = 0; i < e->n_cols; i++) {
		if (e->col[i] == COL_OTHER && cell(&e->in, i)[0] != '\0')
			return row_err(e, i,
			               "'%s': a field of another "
			               "layout, not of %s",
			               cell(&e->in, i), e->l->name);
		if (e->col[i] >= 0 && parse_cell(e, i) < 0)
			return -1;
	}
	return 0;
}

/* ---- packets ---------------------------------------------------------- */

static bool same_value(struct tp_value a, struct tp_value b)
{
	return (isnan(a.v) && isnan(b.v)) || a.v == b.v;
}

/* The current row's packet time: its time less its record offset. */
static double row_packet_time(const struct enc *e, uint32_t k)
{
	const struct tp_records *rs = &e->l->records;
	double t = e->row[e->time_slot].v, off;

	if (e->offset_j < 0)
		return t - (double)k * rs->every_s;
	off = e->row[e->l->n_fields + (size_t)e->offset_j].v;
	return isnan(off) ? t : t - off;
}

/* Does the current row continue the packet being assembled? */
static bool same_packet(const struct enc *e)
{
	if (e->l->records.count_field < 0)
		return true;
	if (e->station_slot >= 0 &&
	    !same_value(e->row[e->station_slot], e->head[e->station_slot]))
		return false;
	if (e->seq_slot >= 0 &&
	    !same_value(e->row[e->seq_slot], e->head[e->seq_slot]))
		return false;
	if (e->time_slot < 0 || (e->offset_j >= 0 && !e->offset_col))
		return true;
	return row_packet_time(e, e->n_recs) == e->head[e->time_slot].v;
}

/* The current row starts a packet: its header values. */
static void start_packet(struct enc *e)
{
	memcpy(e->head, e->row, e->l->n_fields * sizeof(e->head[0]));
	if (e->time_slot >= 0 && e->l->has_records)
		e->head[e->time_slot].v = row_packet_time(e, 0);
	e->first_line = e->in.row_line;
	e->n_recs = 0;
}

/* Append the current row's record fields to the packet. */
static void add_record(struct enc *e)
{
	size_t nr = e->l->records.n_fields;
	struct tp_value *rec = e->recs + (size_t)e->n_recs * nr;
	double t;

	memcpy(rec, e->row + e->l->n_fields, nr * sizeof(rec[0]));
	if (e->offset_j >= 0 && !e->offset_col) {
		t = e->time_slot >= 0 ? e->row[e->time_slot].v : NAN;
		rec[e->offset_j].v = isnan(t) ? 0 : t - e->head[e->time_slot].v;
		rec[e->offset_j].flag = TP_FLAG_PASS;
	}
	e->n_recs++;
}

/* Encode, frame and write the packet assembled so far. */
static int flush_packet(struct enc *e)
{
	enum tp_status st;
	size_t len, flen;

	st = tp_encode_packet(e->l, e->head, e->recs, e->n_recs, e->pkt,
	                      sizeof(e->pkt), &len);
	if (st != TP_OK) {
		log_err("encode: %s:%lu: packet not encoded as %s: %s",
		        e->in.name, e->first_line, e->l->name, tp_strerror(st));
		return -1;
	}
	if ((e->framing == TP_FRAMING_WHOLE && e->packets > 0) ||
	    (e->framing == TP_FRAMING_FIXED && len != e->fixed_n)) {
		log_err("encode: %s:%lu: framing %s cannot hold this packet "
		        "(%s; %zu bytes)",
		        e->in.name, e->first_line, tp_framing_name(e->framing),
		        e->framing == TP_FRAMING_WHOLE ? "it holds one packet"
		                                       : "wrong size",
		        len);
		return -1;
	}
	st = tp_frame_encode(e->framing, e->pkt, len, e->framed,
	                     sizeof(e->framed), &flen);
	if (st != TP_OK || fwrite(e->framed, 1, flen, stdout) != flen) {
		log_err("encode: write: stdout: %s",
		        st != TP_OK ? tp_strerror(st) : strerror(errno));
		return -2;
	}
	e->packets++;
	e->n_recs = 0;
	return 0;
}

/* One row: group it into the current packet, flush when complete. */
static int enc_row(struct enc *e)
{
	const struct tp_records *rs = &e->l->records;
	int rc;

	if (!e->l->has_records) {
		start_packet(e);
		return flush_packet(e);
	}
	if (e->n_recs > 0 && !same_packet(e)) {
		rc = flush_packet(e);
		if (rc < 0)
			return rc;
	}
	if (e->n_recs == 0)
		start_packet(e);
	if (e->n_recs >= e->max_recs) {
		log_err("encode: %s:%lu: more rows than one packet of layout "
		        "%s holds (%" PRIu32 " records, from line %lu)",
		        e->in.name, e->in.row_line, e->l->name, e->max_recs,
		        e->first_line);
		return -1;
	}
	add_record(e);
	if (rs->count_field < 0 && e->n_recs == rs->count)
		return flush_packet(e);
	return 0;
}

/* End of input: the last packet, if any. */
static int enc_finish(struct enc *e)
{
	const struct tp_records *rs = &e->l->records;

	if (e->n_recs == 0)
		return 0;
	if (rs->count_field < 0) {
		log_err("encode: %s:%lu: a packet of layout %s needs %" PRIu32
		        " records (rows), the input ends after %" PRIu32,
		        e->in.name, e->first_line, e->l->name, rs->count,
		        e->n_recs);
		return -1;
	}
	return flush_packet(e);
}

/* Records one packet can hold: the fixed count, or what fits. */
static uint32_t max_records(const struct tp_layout *l)
{
	uint64_t hb = tp_layout_header_bits(l), rb, n;
	const struct tp_field *cf;

	if (!l->has_records)
		return 1;
	if (l->records.count_field < 0)
		return l->records.count > 0 ? l->records.count : 1;
	rb = tp_layout_record_bits(l);
	if (rb == 0 || hb >= TP_MAX_PACKET * 8u)
		n = 1;
	else
		n = (TP_MAX_PACKET * 8u - hb) / rb;
	cf = &l->fields[l->records.count_field];
	if (cf->bits < 32 && n > ((uint64_t)1 << cf->bits) - 1)
		n = ((uint64_t)1 << cf->bits) - 1;
	return n > 65535 ? 65535 : (uint32_t)(n > 0 ? n : 1);
}

/* ---- the command ------------------------------------------------------ */

struct enc_opts {
	struct cli_source src;
	const char *layout;
	const char *framing;
	const char *file;
};

static int enc_parse(struct enc_opts *o, int argc, char **argv)
{
	static const struct option opts[] = {
	    {"config", required_argument, NULL, 'c'},
	    {"layout-file", required_argument, NULL, 'l'},
	    {"layout", required_argument, NULL, CLI_OPT_LAYOUT},
	    {"framing", required_argument, NULL, CLI_OPT_FRAMING},
	    {"help", no_argument, NULL, 'h'},
	    {NULL, 0, NULL, 0}};
	int c;

	opterr = 0;
	for (;;) {
		c = getopt_long(argc, argv, ":c:l:h", opts, NULL);
		if (c == -1)
			break;
		if (c == 'c') {
			o->src.config = optarg;
		} else if (c == 'l') {
			if (cli_source_add(&o->src, "encode", optarg) < 0)
				return CLI_EXIT_USAGE;
		} else if (c == CLI_OPT_LAYOUT) {
			o->layout = optarg;
		} else if (c == CLI_OPT_FRAMING) {
			o->framing = optarg;
		} else if (c == 'h') {
			fputs(cmd_encode_usage, stdout);
			return CLI_EXIT_OK;
		} else {
			return cli_bad_option("encode", c, argv);
		}
	}
	if (argc - optind > 1) {
		log_err("encode: one input at most (got '%s' and '%s')",
		        argv[optind], argv[optind + 1]);
		return CLI_EXIT_USAGE;
	}
	o->file = optind < argc ? argv[optind] : "-";
	return -1;
}

/* The layout to encode: --layout NAME, or the only one loaded. */
static const struct tp_layout *pick_layout(const struct config *cfg,
                                           const char *name)
{
	char names[512] = "";
	size_t i, len = 0;

	for (i = 0; i < cfg->n_layouts; i++) {
		if (name != NULL && strcmp(cfg->layouts[i].name, name) == 0)
			return &cfg->layouts[i];
		if (len < sizeof(names))
			len += (size_t)snprintf(
			    names + len, sizeof(names) - len, "%s%s",
			    i ? ", " : "", cfg->layouts[i].name);
	}
	if (name == NULL && cfg->n_layouts == 1)
		return &cfg->layouts[0];
	if (name == NULL)
		log_err("encode: %zu layouts loaded (%s): choose one with "
		        "--layout NAME",
		        cfg->n_layouts, names);
	else
		log_err("encode: --layout %s: not loaded; loaded: %s", name,
		        names);
	return NULL;
}

/* Set up e for its layout and framing; 0, or -1 (usage error). */
static int enc_setup(struct enc *e, const struct enc_opts *o)
{
	size_t j, nr;

	e->framing = TP_FRAMING_COBS;
	if (o->framing != NULL &&
	    (tp_framing_parse(o->framing, &e->framing, &e->fixed_n) != TP_OK ||
	     (e->framing == TP_FRAMING_FIXED && e->fixed_n > TP_MAX_PACKET))) {
		log_err("encode: --framing %s: not a framing; valid: cobs, "
		        "slip, hex, whole, fixed:N (N 1..%d)",
		        o->framing, TP_MAX_PACKET);
		return -1;
	}
	e->l = pick_layout(e->cfg, o->layout);
	if (e->l == NULL)
		return -1;
	e->station_slot = find_role(e->l, TP_ROLE_STATION);
	e->seq_slot = find_role(e->l, TP_ROLE_SEQ);
	e->time_slot = find_role(e->l, TP_ROLE_TIME);
	e->offset_j = -1;
	nr = e->l->has_records ? e->l->records.n_fields : 0;
	for (j = 0; j < nr; j++) {
		if (e->l->records.fields[j].role == TP_ROLE_TIME_OFFSET)
			e->offset_j = (int)j;
	}
	e->max_recs = max_records(e->l);
	e->recs =
	    calloc((size_t)e->max_recs * (nr ? nr : 1), sizeof(e->recs[0]));
	if (e->recs == NULL) {
		log_err("encode: start: %s", strerror(errno));
		return -1;
	}
	return 0;
}

/* Header, then every row; the exit status. */
static int enc_run(struct enc *e)
{
	int r, rc = 0;

	if (enc_header(e) < 0)
		return CLI_EXIT_FAIL;
	for (;;) {
		r = csv_read(&e->in);
		if (r < 0) {
			log_err("encode: %s:%lu: %s", e->in.name,
			        e->in.row_line, e->in.err);
			return CLI_EXIT_FAIL;
		}
		if (r == 0)
			break;
		rc = enc_row_values(e);
		if (rc == 0)
			rc = enc_row(e);
		if (rc < 0)
			return rc == -2 ? CLI_EXIT_USAGE : CLI_EXIT_FAIL;
	}
	rc = enc_finish(e);
	if (rc < 0)
		return rc == -2 ? CLI_EXIT_USAGE : CLI_EXIT_FAIL;
	if (e->warned > ENC_MAX_WARN)
		log_warn("encode: %s: %u values clamped in all", e->in.name,
		         e->warned);
	if (e->packets == 0) {
		log_err("encode: %s: no readings (rows) in the input",
		        e->in.name);
		return CLI_EXIT_FAIL;
	}
	return CLI_EXIT_OK;
}

/* Open the input and run; the exit status. */
static int enc_input(struct enc *e, const char *file)
{
	bool is_stdin = strcmp(file, "-") == 0;
	int rc;

	e->in.name = is_stdin ? "stdin" : file;
	e->in.line = 1;
	e->in.fp = is_stdin ? stdin : fopen(file, "rb");
	if (e->in.fp == NULL) {
		log_err("encode: open: %s: %s", file, strerror(errno));
		return CLI_EXIT_USAGE;
	}
	rc = enc_run(e);
	if (!is_stdin)
		fclose(e->in.fp);
	if (fflush(stdout) != 0) {
		log_err("encode: write: stdout: %s", strerror(errno));
		rc = CLI_EXIT_USAGE;
	}
	return rc;
}

int cmd_encode(int argc, char **argv)
{
	struct enc_opts o;
	struct config *cfg = NULL;
	struct enc *e;
	int rc;

	memset(&o, 0, sizeof(o));
	rc = enc_parse(&o, argc, argv);
	if (rc >= 0)
		return rc;
	if (cli_source_load(&o.src, "encode", &cfg) < 0)
		return CLI_EXIT_USAGE;
	e = calloc(1, sizeof(*e));
	if (e == NULL) {
		log_err("encode: start: %s", strerror(errno));
		config_free(cfg);
		return CLI_EXIT_USAGE;
	}
	e->cfg = cfg;
	rc = enc_setup(e, &o) < 0 ? CLI_EXIT_USAGE : enc_input(e, o.file);
	free(e->recs);
	free(e->names);
	free(e);
	config_free(cfg);
	return rc;
}
