/*
 * layout.c - layout validation, packet decoding and encoding (contract in
 * include/tidepost/layout.h and LAYOUT.md).
 *
 * Every packet byte is read through the bounded cursor of bits.h, within a
 * "field region" computed per packet from its length and the check
 * placement; nothing here trusts a length it has not tested.  Decoding
 * validates the layout first, so a broken layout is TP_ERR_LAYOUT, never a
 * wild read; tp_decode_validated skips the full validation for layouts the
 * caller validated, but keeps the O(1) checks the reads depend on.
 */
#include <float.h>
#include <math.h>
#include <stddef.h>
#include <string.h>

#include "tidepost/layout.h"

#include "bits.h"

#define MAX_BITS    ((uint64_t)TP_MAX_PACKET * 8u)
#define EVERY_MAX_S 31622400u /* 366 days */
#define F32_NAN     0x7fc00000u
#define F64_NAN     UINT64_C(0x7ff8000000000000)

enum group { G_HEADER = 0, G_RECORDS, G_MATCH, G_CHECK, G_LAYOUT };

/* Where the fields and the check value of one packet lie. */
struct region {
	size_t check_at;         /* byte offset of the check value */
	size_t check_len;        /* its size in bytes; 0 without a check */
	size_t cov_from, cov_to; /* bytes covered by the check: [from, to) */
	uint64_t end_bits;       /* fields lie in [0, end_bits) */
};

/* ---- field properties ------------------------------------------------ */

static uint32_t type_bits(enum tp_type t)
{
	static const uint8_t w[] = {
	    [TP_T_U8] = 8,   [TP_T_I8] = 8,   [TP_T_U16] = 16, [TP_T_I16] = 16,
	    [TP_T_U24] = 24, [TP_T_I24] = 24, [TP_T_U32] = 32, [TP_T_I32] = 32,
	    [TP_T_U64] = 64, [TP_T_I64] = 64, [TP_T_F32] = 32, [TP_T_F64] = 64,
	};

	if ((unsigned)t >= sizeof w)
		return 0;
	return w[t];
}

static bool is_float(enum tp_type t)
{
	return t == TP_T_F32 || t == TP_T_F64;
}

/* A byte-aligned integer type: u8 .. i64. */
static bool is_int_type(enum tp_type t)
{
	return t >= TP_T_U8 && t <= TP_T_I64;
}

static inline bool type_signed(enum tp_type t)
{
	return t == TP_T_I8 || t == TP_T_I16 || t == TP_T_I24 ||
	       t == TP_T_I32 || t == TP_T_I64;
}

static inline bool field_signed(const struct tp_field *f)
{
	return type_signed(f->type) || (f->type == TP_T_BITS && f->is_signed);
}

static inline double scale_of(const struct tp_field *f)
{
	return f->scale == 0 ? 1.0 : f->scale;
}

static int64_t unit_of(const struct tp_field *f)
{
	return f->time_unit_s == 0 ? 1 : (int64_t)f->time_unit_s;
}

static inline bool is_missing(const struct tp_field *f, uint64_t raw)
{
	return f->has_missing && ((raw ^ f->missing) & bits_mask(f->bits)) == 0;
}

static size_t check_len(const struct tp_check *c)
{
	switch (c->kind) {
	case TP_CHECK_CRC:
		return ((size_t)c->crc.p.width + 7) / 8;
	case TP_CHECK_SUM8:
	case TP_CHECK_XOR8:
		return 1;
	default:
		return 0;
	}
}

/* ---- geometry -------------------------------------------------------- */

static uint64_t group_bits(const struct tp_field *fs, size_t n)
{
	uint64_t b = 0;
	size_t i;

	for (i = 0; fs && i < n; i++)
		b += fs[i].bits;
	return b;
}

uint64_t tp_layout_header_bits(const struct tp_layout *l)
{
	return l ? group_bits(l->fields, l->n_fields) : 0;
}

uint64_t tp_layout_record_bits(const struct tp_layout *l)
{
	if (!l || !l->has_records)
		return 0;
	return group_bits(l->records.fields, l->records.n_fields);
}

size_t tp_layout_n_values(const struct tp_layout *l)
{
	if (!l)
		return 0;
	return l->n_fields + (l->has_records ? l->records.n_fields : 0);
}

const struct tp_field *tp_layout_field(const struct tp_layout *l, size_t i)
{
	if (!l)
		return NULL;
	if (i < l->n_fields)
		return l->fields ? &l->fields[i] : NULL;
	i -= l->n_fields;
	if (l->has_records && i < l->records.n_fields && l->records.fields)
		return &l->records.fields[i];
	return NULL;
}

/* Does a header skip entry hold the whole check value (positive `at')? */
static bool check_in_skip(const struct tp_layout *l)
{
	uint64_t pos = 0, from, to;
	size_t i;

	if (l->check.kind == TP_CHECK_NONE || l->check.at < 0)
		return false;
	from = (uint64_t)l->check.at * 8;
	to = from + check_len(&l->check) * 8;
	for (i = 0; l->fields && i < l->n_fields; i++) {
		const struct tp_field *f = &l->fields[i];

		if (f->type == TP_T_SKIP && pos <= from && to <= pos + f->bits)
			return true;
		pos += f->bits;
	}
	return false;
}

/* Smallest packet (bytes) holding field_bits bits of fields and the check
 * value, before padding to length_min; UINT64_MAX when a positive check
 * offset leaves too little room before it. */
static uint64_t packet_bytes(const struct tp_layout *l, uint64_t field_bits)
{
	uint64_t bytes = (field_bits + 7) / 8;
	uint64_t at = l->check.at >= 0 ? (uint64_t)l->check.at : 0;
	uint64_t end = at + check_len(&l->check);

	if (l->check.kind == TP_CHECK_NONE)
		return bytes;
	if (l->check.at < 0)
		return bytes + (uint64_t)(-(int64_t)l->check.at);
	if (check_in_skip(l))
		return bytes > end ? bytes : end;
	if (field_bits > at * 8)
		return UINT64_MAX;
	return end;
}

/* Bits of the fixed part: header plus fixed-count records. */
static uint64_t fixed_bits(const struct tp_layout *l)
{
	uint64_t b = tp_layout_header_bits(l);

	if (l->has_records && l->records.count_field < 0)
		b += (uint64_t)l->records.count * tp_layout_record_bits(l);
	return b;
}

/* An offset (negative from the end) as a position in a len-byte packet. */
static bool resolve(int32_t at, size_t len, size_t *out)
{
	uint64_t back;

	if (at >= 0) {
		*out = (size_t)at;
		return (size_t)at <= len;
	}
	back = (uint64_t)(-(int64_t)at);
	if (back > len)
		return false;
	*out = len - (size_t)back;
	return true;
}

/* The field region and check placement of a len-byte packet;
 * TP_ERR_SHORT when the check value or its cover lies outside it. */
static enum tp_status find_region(const struct tp_layout *l, size_t len,
                                  struct region *rg)
{
	const struct tp_check *c = &l->check;

	memset(rg, 0, sizeof *rg);
	rg->end_bits = (uint64_t)len * 8;
	if (c->kind == TP_CHECK_NONE)
		return TP_OK;
	rg->check_len = check_len(c);
	if (!resolve(c->at, len, &rg->check_at) ||
	    rg->check_len > len - rg->check_at)
		return TP_ERR_SHORT;
	rg->cov_to = rg->check_at;
	if (c->has_covers && (!resolve(c->covers_from, len, &rg->cov_from) ||
	                      !resolve(c->covers_to, len, &rg->cov_to)))
		return TP_ERR_SHORT;
	if (rg->cov_from > rg->cov_to)
		return TP_ERR_SHORT;
	if (c->at < 0 || !check_in_skip(l))
		rg->end_bits = (uint64_t)rg->check_at * 8;
	return TP_OK;
}

/* ---- validation ------------------------------------------------------ */

static enum tp_status problem(struct tp_layout_problem *pb, int group,
                              int index, const char *what)
{
	if (pb) {
		pb->group = group;
		pb->index = index;
		pb->what = what;
	}
	return TP_ERR_LAYOUT;
}

static const char *width_problem(const struct tp_field *f)
{
	if ((unsigned)f->type > TP_T_SKIP)
		return "unknown field type";
	if (f->type == TP_T_SKIP)
		return f->bits == 0 || f->bits > MAX_BITS
		           ? "skip_bits must be 1..32768"
		           : NULL;
	if (f->type == TP_T_BITS && (f->bits == 0 || f->bits > 64))
		return "bits must be 1..64";
	if (f->type != TP_T_BITS && f->bits != type_bits(f->type))
		return "bits does not match the field type";
	if (f->is_signed && !type_signed(f->type) && f->type != TP_T_BITS)
		return "only bits and iN fields can be signed";
	if (f->has_missing && f->bits < 64 && (f->missing >> f->bits) != 0)
		return "missing does not fit the field width";
	return NULL;
}

static const char *role_problem(const struct tp_field *f, bool in_records)
{
	if (f->role == TP_ROLE_VALUE)
		return NULL;
	if ((unsigned)f->role > TP_ROLE_TIME_OFFSET)
		return "unknown role";
	if (is_float(f->type))
		return "a role field must be an integer";
	if ((f->scale != 0 && f->scale != 1) || f->offset != 0)
		return "a role field takes no scale or offset";
	if (f->has_missing || f->has_range)
		return "a role field takes no missing value or range";
	if (in_records != (f->role == TP_ROLE_TIME_OFFSET))
		return in_records ? "station, seq and time belong in the header"
		                  : "time_offset belongs in the records";
	if (f->role == TP_ROLE_STATION && (field_signed(f) || f->bits > 32))
		return "station must be unsigned and at most 32 bits";
	if (f->role == TP_ROLE_SEQ && field_signed(f))
		return "seq must be unsigned";
	if (f->time_unit_s != 0 && f->time_unit_s != 1 && f->time_unit_s != 60)
		return "time unit must be s (1) or min (60)";
	return NULL;
}

static const char *field_problem(const struct tp_field *f, bool in_records)
{
	const char *w = width_problem(f);

	if (w || f->type == TP_T_SKIP)
		return w;
	if (!f->name)
		return "field has no name";
	if (!isfinite(f->scale) || !isfinite(f->offset))
		return "scale and offset must be finite";
	if (f->has_range && !(f->range_min <= f->range_max))
		return "range min must not exceed range max";
	return role_problem(f, in_records);
}

static enum tp_status check_group(const struct tp_field *fs, size_t n,
                                  int group, struct tp_layout_problem *pb)
{
	bool seen[TP_ROLE_TIME_OFFSET + 1] = {false};
	const char *what;
	size_t i;

	if (n > TP_MAX_FIELDS)
		return problem(pb, group, -1, "more than TP_MAX_FIELDS fields");
	if (n && !fs)
		return problem(pb, group, -1, "fields missing");
	for (i = 0; i < n; i++) {
		what = field_problem(&fs[i], group == G_RECORDS);
		if (what)
			return problem(pb, group, (int)i, what);
		if (fs[i].type == TP_T_SKIP || fs[i].role == TP_ROLE_VALUE)
			continue;
		if (seen[fs[i].role])
			return problem(pb, group, (int)i, "role given twice");
		seen[fs[i].role] = true;
	}
	return TP_OK;
}

static bool count_field_ok(const struct tp_field *f)
{
	return (f->type == TP_T_BITS || is_int_type(f->type)) &&
	       !field_signed(f) && f->role == TP_ROLE_VALUE &&
	       (f->scale == 0 || f->scale == 1) && f->offset == 0 &&
	       !f->has_missing;
}

static enum tp_status check_records(const struct tp_layout *l,
                                    struct tp_layout_problem *pb)
{
	const struct tp_records *r = &l->records;
	enum tp_status st;

	if (!l->has_records)
		return l->n_fields
		           ? TP_OK
		           : problem(pb, G_LAYOUT, -1, "layout has no fields");
	if (r->n_fields == 0)
		return problem(pb, G_RECORDS, -1, "records have no fields");
	st = check_group(r->fields, r->n_fields, G_RECORDS, pb);
	if (st != TP_OK)
		return st;
	if (r->every_s > EVERY_MAX_S)
		return problem(pb, G_RECORDS, -1, "every_s over 366 days");
	if (r->count_field < 0)
		return TP_OK;
	if ((size_t)r->count_field >= l->n_fields)
		return problem(pb, G_RECORDS, -1,
		               "count field is not a header field");
	if (!count_field_ok(&l->fields[r->count_field]))
		return problem(pb, G_HEADER, r->count_field,
		               "count field must be an unsigned integer value "
		               "without scale, offset or missing");
	return TP_OK;
}

/* Does value `is` fit the integer type t? */
static bool fits_type(int64_t is, enum tp_type t)
{
	uint32_t n = type_bits(t);

	if (type_signed(t))
		return n == 64 || (is >= -((int64_t)1 << (n - 1)) &&
		                   is < ((int64_t)1 << (n - 1)));
	return is >= 0 && (n == 64 || (uint64_t)is <= bits_mask(n));
}

static bool offset_ok(int32_t at)
{
	return at >= -TP_MAX_PACKET && at <= TP_MAX_PACKET;
}

static enum tp_status check_match(const struct tp_layout *l,
                                  struct tp_layout_problem *pb)
{
	const struct tp_match *m;
	size_t i;

	if (l->n_match > TP_MAX_MATCH)
		return problem(pb, G_MATCH, -1, "more than TP_MAX_MATCH tests");
	if (l->n_match && !l->match)
		return problem(pb, G_MATCH, -1, "match tests missing");
	for (i = 0; i < l->n_match; i++) {
		m = &l->match[i];
		if (!is_int_type(m->type))
			return problem(pb, G_MATCH, (int)i,
			               "match type must be u8 .. i64");
		if (!offset_ok(m->at))
			return problem(pb, G_MATCH, (int)i,
			               "match offset beyond TP_MAX_PACKET");
		if (!fits_type(m->is, m->type))
			return problem(pb, G_MATCH, (int)i,
			               "match value does not fit its type");
	}
	if (l->length_max && l->length_min > l->length_max)
		return problem(pb, G_LAYOUT, -1, "length min exceeds max");
	if (l->length_min > TP_MAX_PACKET)
		return problem(pb, G_LAYOUT, -1,
		               "length min over TP_MAX_PACKET");
	return TP_OK;
}

/* Do [a, a+n) and [from, to) overlap, all offsets counted from the same
 * end of the packet? */
static bool overlaps(int64_t a, int64_t n, int64_t from, int64_t to)
{
	return a < to && from < a + n;
}

static enum tp_status check_covers(const struct tp_check *c,
                                   struct tp_layout_problem *pb)
{
	int64_t at = c->at, from = c->covers_from, to = c->covers_to;

	if (!c->has_covers)
		return TP_OK;
	if (!offset_ok(c->covers_from) || !offset_ok(c->covers_to))
		return problem(pb, G_CHECK, -1, "covers beyond TP_MAX_PACKET");
	if ((from < 0) == (to < 0) && from > to)
		return problem(pb, G_CHECK, -1, "covers from is after to");
	if ((at < 0) == (from < 0) && (at < 0) == (to < 0) &&
	    overlaps(at, (int64_t)check_len(c), from, to))
		return problem(pb, G_CHECK, -1,
		               "covers include the check value itself");
	return TP_OK;
}

static enum tp_status check_check(const struct tp_layout *l,
                                  struct tp_layout_problem *pb)
{
	const struct tp_check *c = &l->check;
	uint64_t at = c->at >= 0 ? (uint64_t)c->at * 8 : 0;

	if (c->kind == TP_CHECK_NONE)
		return TP_OK;
	if ((unsigned)c->kind > TP_CHECK_XOR8)
		return problem(pb, G_CHECK, -1, "unknown check kind");
	if (c->kind == TP_CHECK_CRC &&
	    (c->crc.p.width < 8 || c->crc.p.width > 32))
		return problem(pb, G_CHECK, -1, "CRC width must be 8..32");
	if ((unsigned)c->order > TP_ORDER_LITTLE)
		return problem(pb, G_CHECK, -1, "unknown check byte order");
	if (!offset_ok(c->at))
		return problem(pb, G_CHECK, -1,
		               "check offset beyond TP_MAX_PACKET");
	if (c->at < 0 && (uint64_t)(-(int64_t)c->at) < check_len(c))
		return problem(pb, G_CHECK, -1,
		               "check value runs past the end of the packet");
	if (c->at >= 0 && !check_in_skip(l) && at < tp_layout_header_bits(l))
		return problem(pb, G_CHECK, -1,
		               "check value overlaps the header fields");
	if (c->at >= 0 && !check_in_skip(l) && at < fixed_bits(l))
		return problem(pb, G_CHECK, -1,
		               "check value overlaps the record fields");
	return check_covers(c, pb);
}

enum tp_status tp_layout_validate(const struct tp_layout *l,
                                  struct tp_layout_problem *pb)
{
	enum tp_status st;
	uint64_t need;

	if (!l) {
		problem(pb, G_LAYOUT, -1, "no layout");
		return TP_ERR_ARG;
	}
	if (!l->name)
		return problem(pb, G_LAYOUT, -1, "layout has no name");
	if ((unsigned)l->order > TP_ORDER_LITTLE)
		return problem(pb, G_LAYOUT, -1,
		               "byte order must be big or little");
	st = check_group(l->fields, l->n_fields, G_HEADER, pb);
	if (st == TP_OK)
		st = check_records(l, pb);
	if (st == TP_OK)
		st = check_match(l, pb);
	if (st == TP_OK)
		st = check_check(l, pb);
	if (st != TP_OK)
		return st;
	if (fixed_bits(l) == 0 &&
	    !(l->has_records && l->records.count_field >= 0))
		return problem(pb, G_LAYOUT, -1, "layout holds no fields");
	need = packet_bytes(l, fixed_bits(l));
	if (need > TP_MAX_PACKET)
		return problem(pb, G_LAYOUT, -1,
		               "fixed fields do not fit TP_MAX_PACKET");
	if (l->length_max && need > l->length_max)
		return problem(pb, G_LAYOUT, -1,
		               "fixed fields do not fit length max");
	return TP_OK;
}

/* ---- printing precision ---------------------------------------------- */

/*
 * Smallest d in 0..9 with x * 10^d an integer to within
 * 1e-9 * max(1, |x * 10^d|); 9 if none.  A nonzero x is never given a d
 * at which it would print as 0 (so 1e-9 gets 9, not 0).
 */
static int decimals_of(double x)
{
	double p = 1, y;
	int d;

	for (d = 0; d < 9; d++) {
		y = x * p;
		if (fabs(y - round(y)) <= 1e-9 * fmax(1.0, fabs(y)) &&
		    (x == 0 || round(y) != 0))
			return d;
		p *= 10;
	}
	return 9;
}

int tp_field_decimals(const struct tp_field *f)
{
	int a, b;

	if (!f || is_float(f->type))
		return -1;
	a = decimals_of(scale_of(f));
	b = decimals_of(f->offset);
	return a > b ? a : b;
}

/* ---- match and length ------------------------------------------------ */

static bool length_ok(const struct tp_layout *l, size_t len)
{
	if (l->length_min == 0 && l->length_max == 0)
		return true;
	return len >= l->length_min &&
	       (l->length_max == 0 || len <= l->length_max);
}

static bool match_one(const struct tp_layout *l, const struct tp_match *m,
                      const uint8_t *p, size_t len)
{
	struct bitcur c;
	uint32_t n = type_bits(m->type);
	size_t at;
	uint64_t raw;

	if (!is_int_type(m->type) || !resolve(m->at, len, &at) ||
	    n / 8 > len - at)
		return false;
	bits_reader(&c, p, (uint64_t)len * 8, l->order);
	bits_skip(&c, (uint64_t)at * 8);
	raw = bits_get(&c, n);
	if (bits_failed(&c))
		return false;
	if (type_signed(m->type))
		return bits_sign_extend(raw, n) == m->is;
	return m->is >= 0 && raw == (uint64_t)m->is;
}

bool tp_layout_accepts(const struct tp_layout *l, const uint8_t *p, size_t len)
{
	size_t i;

	if (!l || (!p && len) || l->n_match > TP_MAX_MATCH ||
	    (l->n_match && !l->match))
		return false;
	if (!length_ok(l, len))
		return false;
	for (i = 0; i < l->n_match; i++)
		if (!match_one(l, &l->match[i], p, len))
			return false;
	return true;
}

int tp_layout_select(const struct tp_layout *const *ls, size_t n,
                     const uint8_t *p, size_t len)
{
	size_t i;

	for (i = 0; ls && i < n && i < (size_t)INT32_MAX; i++)
		if (ls[i] && tp_layout_accepts(ls[i], p, len))
			return (int)i;
	return -1;
}

/* ---- check value ----------------------------------------------------- */

static uint32_t check_compute(const struct tp_check *c, const uint8_t *p,
                              const struct region *rg)
{
	const uint8_t *q = p + rg->cov_from;
	size_t n = rg->cov_to - rg->cov_from;

	switch (c->kind) {
	case TP_CHECK_CRC:
		return tp_crc_compute(&c->crc, q, n);
	case TP_CHECK_SUM8:
		return tp_sum8(q, n);
	case TP_CHECK_XOR8:
		return tp_xor8(q, n);
	default:
		return 0;
	}
}

enum tp_status tp_check_verify(const struct tp_layout *l, const uint8_t *p,
                               size_t len)
{
	struct region rg;
	struct bitcur c;
	enum tp_status st;
	uint64_t stored;

	if (!l || (!p && len))
		return TP_ERR_ARG;
	if (l->check.kind == TP_CHECK_NONE)
		return TP_OK;
	if ((unsigned)l->check.kind > TP_CHECK_XOR8)
		return TP_ERR_LAYOUT;
	st = find_region(l, len, &rg);
	if (st != TP_OK)
		return st;
	bits_reader(&c, p, (uint64_t)len * 8, l->check.order);
	bits_skip(&c, (uint64_t)rg.check_at * 8);
	stored = bits_get(&c, (uint32_t)rg.check_len * 8);
	if (bits_failed(&c))
		return TP_ERR_SHORT;
	return stored == check_compute(&l->check, p, &rg) ? TP_OK
	                                                  : TP_ERR_CHECK;
}

/* ---- decoding -------------------------------------------------------- */

static inline struct tp_value mkvalue(double v, enum tp_flag flag)
{
	struct tp_value out;

	out.v = v;
	out.flag = (uint8_t)flag;
	return out;
}

/* The raw bits as a number, before scale and offset. */
static inline double raw_number(const struct tp_field *f, uint64_t raw)
{
	uint32_t u32;
	float f32;
	double f64;

	switch (f->type) {
	case TP_T_F32:
		u32 = (uint32_t)raw;
		memcpy(&f32, &u32, sizeof f32);
		return (double)f32;
	case TP_T_F64:
		memcpy(&f64, &raw, sizeof f64);
		return f64;
	default:
		if (field_signed(f))
			return (double)bits_sign_extend(raw, f->bits);
		return (double)raw;
	}
}

/* A value field's number and flag: missing or non-finite -> NaN flag 9;
 * outside range -> flag 4 (QARTOD gross range); else flag 1. */
static inline struct tp_value value_of(const struct tp_field *f, uint64_t raw)
{
	double x;

	if (is_missing(f, raw))
		return mkvalue(NAN, TP_FLAG_MISSING);
	x = raw_number(f, raw) * scale_of(f);
	if (f->offset != 0)
		x += f->offset; /* (-0.0 + 0.0 would lose the sign of zero) */
	if (!isfinite(x))
		return mkvalue(NAN, TP_FLAG_MISSING);
	if (f->has_range && (x < f->range_min || x > f->range_max))
		return mkvalue(x, TP_FLAG_FAIL);
	return mkvalue(x, TP_FLAG_PASS);
}

/* a + b, or false on int64 overflow. */
static bool time_add(int64_t a, int64_t b, int64_t *out)
{
	if ((b > 0 && a > INT64_MAX - b) || (b < 0 && a < INT64_MIN - b))
		return false;
	*out = a + b;
	return true;
}

/* Seconds given by a time role field (raw x unit), or false if that
 * does not fit in int64. */
static bool role_seconds(const struct tp_field *f, uint64_t raw, int64_t *out)
{
	int64_t unit = unit_of(f), n;

	if (field_signed(f))
		n = bits_sign_extend(raw, f->bits);
	else if (raw > (uint64_t)INT64_MAX)
		return false;
	else
		n = (int64_t)raw;
	if (n > INT64_MAX / unit || n < INT64_MIN / unit)
		return false;
	*out = n * unit;
	return true;
}

static enum tp_status header_slot(struct tp_packet *pk,
                                  const struct tp_field *f, uint64_t raw,
                                  struct tp_value *slot)
{
	int64_t t;

	switch (f->role) {
	case TP_ROLE_STATION:
		pk->has_station = true;
		pk->station = (uint32_t)raw;
		*slot = mkvalue((double)raw, TP_FLAG_PASS);
		return TP_OK;
	case TP_ROLE_SEQ:
		pk->has_seq = true;
		pk->seq = raw;
		*slot = mkvalue((double)raw, TP_FLAG_PASS);
		return TP_OK;
	case TP_ROLE_TIME:
		if (!role_seconds(f, raw, &t) ||
		    !time_add(f->epoch_s, t, &pk->time_s))
			return TP_ERR_RANGE;
		pk->has_time = true;
		*slot = mkvalue((double)pk->time_s, TP_FLAG_PASS);
		return TP_OK;
	default:
		*slot = value_of(f, raw);
		return TP_OK;
	}
}

/* Header fields into pk->header; *count_raw gets the count field. */
static enum tp_status decode_header(const struct tp_layout *l,
                                    struct tp_packet *pk, uint64_t end_bits,
                                    uint64_t *count_raw)
{
	const struct tp_field *f;
	struct bitcur c;
	enum tp_status st;
	uint64_t raw;
	size_t i;

	bits_reader(&c, pk->data, end_bits, l->order);
	for (i = 0; i < l->n_fields; i++) {
		f = &l->fields[i];
		if (f->type == TP_T_SKIP) {
			bits_skip(&c, f->bits);
			pk->header[i] = mkvalue(NAN, TP_FLAG_NOT_EVALUATED);
			continue;
		}
		raw = bits_get_fast(&c, f->bits);
		if (bits_failed(&c))
			return TP_ERR_SHORT;
		if (l->has_records && (int)i == l->records.count_field)
			*count_raw = raw;
		st = header_slot(pk, f, raw, &pk->header[i]);
		if (st != TP_OK)
			return st;
	}
	if (bits_failed(&c))
		return TP_ERR_SHORT;
	pk->records_bit = c.pos;
	return TP_OK;
}

/* How many records follow the header within the region. */
static enum tp_status find_records(const struct tp_layout *l,
                                   struct tp_packet *pk, uint64_t end_bits,
                                   uint64_t count_raw)
{
	uint64_t rb = tp_layout_record_bits(l);
	uint64_t fit;

	if (!l->has_records) {
		pk->n_records = 1;
		pk->record_bits = 0;
		return TP_OK;
	}
	pk->record_bits = rb;
	fit = (end_bits - pk->records_bit) / rb;
	if (l->records.count_field < 0) {
		if (l->records.count > fit)
			return TP_ERR_SHORT;
		pk->n_records = l->records.count;
		return TP_OK;
	}
	if (count_raw > fit)
		return TP_ERR_COUNT;
	pk->n_records = (uint32_t)count_raw;
	return TP_OK;
}

/*
 * What decoding itself relies on to stay inside its arrays and the
 * packet, whatever else is wrong with the layout: field counts under
 * TP_MAX_FIELDS with their arrays present, a known check kind of a
 * width whose value fits the cursor, a count field inside the header,
 * records of at least one bit (find_records divides by their size).
 */
static bool decodable(const struct tp_layout *l)
{
	const struct tp_records *r = &l->records;

	if (l->n_fields > TP_MAX_FIELDS || (l->n_fields && !l->fields))
		return false;
	if ((unsigned)l->check.kind > TP_CHECK_XOR8 ||
	    (l->check.kind == TP_CHECK_CRC &&
	     (l->check.crc.p.width < 8 || l->check.crc.p.width > 32)))
		return false;
	if (!l->has_records)
		return true;
	return r->n_fields > 0 && r->n_fields <= TP_MAX_FIELDS &&
	       r->fields != NULL && r->count_field < (int)l->n_fields &&
	       tp_layout_record_bits(l) > 0;
}

static enum tp_status decode_packet(const struct tp_layout *l, const uint8_t *p,
                                    size_t len, struct tp_packet *pk,
                                    bool validate)
{
	struct region rg;
	enum tp_status st;
	uint64_t count_raw = 0;

	if (!l || !pk || (!p && len))
		return TP_ERR_ARG;
	memset(pk, 0, sizeof *pk);
	pk->layout = l;
	pk->data = p;
	pk->len = len;
	if (validate ? tp_layout_validate(l, NULL) != TP_OK : !decodable(l))
		return TP_ERR_LAYOUT;
	if (len > TP_MAX_PACKET || !length_ok(l, len))
		return TP_ERR_LENGTH;
	st = find_region(l, len, &rg);
	if (st == TP_OK)
		st = tp_check_verify(l, p, len);
	if (st == TP_OK)
		st = decode_header(l, pk, rg.end_bits, &count_raw);
	if (st == TP_OK)
		st = find_records(l, pk, rg.end_bits, count_raw);
	if (st != TP_OK)
		pk->n_records = 0;
	return st;
}

enum tp_status tp_decode_packet(const struct tp_layout *l, const uint8_t *p,
                                size_t len, struct tp_packet *pk)
{
	return decode_packet(l, p, len, pk, true);
}

enum tp_status tp_decode_validated(const struct tp_layout *l, const uint8_t *p,
                                   size_t len, struct tp_packet *pk)
{
	return decode_packet(l, p, len, pk, false);
}

/* Record k's fields into r->values[n_fields ..] and its time. */
static enum tp_status decode_fields(const struct tp_packet *pk, uint32_t k,
                                    struct tp_reading *r)
{
	const struct tp_layout *l = pk->layout;
	const struct tp_field *f;
	struct tp_value *slot;
	struct bitcur c;
	uint64_t raw = (uint64_t)k * l->records.every_s;
	int64_t off;
	size_t j;

	if (raw > (uint64_t)INT64_MAX)
		return TP_ERR_RANGE;
	off = (int64_t)raw;
	bits_reader(&c, pk->data, (uint64_t)pk->len * 8, l->order);
	bits_skip(&c, pk->records_bit);
	bits_skip(&c, k * pk->record_bits);
	for (j = 0; j < l->records.n_fields; j++) {
		f = &l->records.fields[j];
		slot = &r->values[l->n_fields + j];
		if (f->type == TP_T_SKIP) {
			bits_skip(&c, f->bits);
			*slot = mkvalue(NAN, TP_FLAG_NOT_EVALUATED);
			continue;
		}
		raw = bits_get_fast(&c, f->bits);
		if (f->role != TP_ROLE_TIME_OFFSET) {
			*slot = value_of(f, raw);
			continue;
		}
		if (!role_seconds(f, raw, &off))
			return TP_ERR_RANGE;
		*slot = mkvalue((double)off, TP_FLAG_PASS);
	}
	if (bits_failed(&c))
		return TP_ERR_SHORT;
	return time_add(pk->time_s, off, &r->time_s) ? TP_OK : TP_ERR_RANGE;
}

enum tp_status tp_decode_record(const struct tp_packet *pk, uint32_t k,
                                struct tp_reading *r)
{
	const struct tp_layout *l;

	if (!pk || !r || !pk->layout || k >= pk->n_records ||
	    (!pk->data && pk->len))
		return TP_ERR_ARG;
	l = pk->layout;
	if (l->n_fields > TP_MAX_FIELDS || (l->n_fields && !l->fields) ||
	    (l->has_records &&
	     (l->records.n_fields > TP_MAX_FIELDS || !l->records.fields)))
		return TP_ERR_ARG;
	if (pk->record_bits &&
	    k > (UINT64_MAX - pk->records_bit) / pk->record_bits)
		return TP_ERR_ARG;
	memcpy(r->values, pk->header, l->n_fields * sizeof r->values[0]);
	r->record = k;
	r->n_values = tp_layout_n_values(l);
	r->time_s = pk->time_s;
	if (!l->has_records)
		return k == 0 ? TP_OK : TP_ERR_ARG;
	return decode_fields(pk, k, r);
}

/* ---- encoding -------------------------------------------------------- */

/*
 * The n-bit pattern of the integer r (already rounded), clamped to the
 * field's signed or unsigned range.  Returns 0 when r fits, -1 when it was
 * clamped up to the minimum, +1 when clamped down to the maximum.
 */
static int int_pattern(const struct tp_field *f, double r, uint64_t *raw)
{
	uint32_t n = f->bits;
	double half = ldexp(1.0, (int)n - 1);

	if (field_signed(f)) {
		if (!(r >= -half)) {
			*raw = (uint64_t)1 << (n - 1);
			return -1;
		}
		if (r >= half) {
			*raw = bits_mask(n - 1);
			return 1;
		}
		*raw = (uint64_t)(int64_t)r & bits_mask(n);
		return 0;
	}
	if (!(r >= 0)) {
		*raw = 0;
		return -1;
	}
	if (r >= 2 * half) {
		*raw = bits_mask(n);
		return 1;
	}
	*raw = (uint64_t)r;
	return 0;
}

/* The raw pattern of a null value: `missing`, else NaN for floats. */
static enum tp_status null_raw(const struct tp_field *f, uint64_t *raw)
{
	if (f->has_missing)
		*raw = f->missing & bits_mask(f->bits);
	else if (f->type == TP_T_F32)
		*raw = F32_NAN;
	else if (f->type == TP_T_F64)
		*raw = F64_NAN;
	else
		return TP_ERR_RANGE;
	return TP_OK;
}

/* IEEE 754 pattern of x as the field's float type, clamped to finite. */
static uint64_t float_pattern(const struct tp_field *f, double x)
{
	uint32_t u32;
	uint64_t u64;
	float f32;

	if (f->type == TP_T_F64) {
		x = fmin(fmax(x, -DBL_MAX), DBL_MAX);
		memcpy(&u64, &x, sizeof u64);
		return u64;
	}
	f32 = (float)fmin(fmax(x, -(double)FLT_MAX), (double)FLT_MAX);
	memcpy(&u32, &f32, sizeof u32);
	return u32;
}

/*
 * A value field's raw pattern: round((v - offset) / scale) clamped to the
 * width.  A result that lands on `missing` is TP_ERR_RANGE, unless it got
 * there by clamping: then it steps one code inwards.
 */
static enum tp_status value_raw(const struct tp_field *f, struct tp_value v,
                                uint64_t *raw)
{
	double x;
	int side = 0;

	if (v.flag == TP_FLAG_MISSING || isnan(v.v) ||
	    (is_float(f->type) && !isfinite(v.v)))
		return null_raw(f, raw);
	x = (v.v - f->offset) / scale_of(f);
	if (is_float(f->type))
		*raw = float_pattern(f, x);
	else
		side = int_pattern(f, round(x), raw);
	if (!is_missing(f, *raw))
		return TP_OK;
	if (side == 0)
		return TP_ERR_RANGE;
	*raw = (side < 0 ? *raw + 1 : *raw - 1) & bits_mask(f->bits);
	return TP_OK;
}

/* A role field's raw value, the inverse of decoding; never clamped. */
static enum tp_status role_raw(const struct tp_field *f, struct tp_value v,
                               uint64_t *raw)
{
	double x = v.v;

	if (v.flag == TP_FLAG_MISSING)
		return TP_ERR_RANGE;
	if (f->role == TP_ROLE_TIME)
		x = (v.v - (double)f->epoch_s) / (double)unit_of(f);
	else if (f->role == TP_ROLE_TIME_OFFSET)
		x = v.v / (double)unit_of(f);
	if (!isfinite(x))
		return TP_ERR_RANGE;
	return int_pattern(f, round(x), raw) == 0 ? TP_OK : TP_ERR_RANGE;
}

static enum tp_status put_field(struct bitcur *c, const struct tp_field *f,
                                struct tp_value v)
{
	enum tp_status st;
	uint64_t raw = 0;

	if (f->type == TP_T_SKIP) {
		bits_skip(c, f->bits);
		return TP_OK;
	}
	if (f->role != TP_ROLE_VALUE)
		st = role_raw(f, v, &raw);
	else
		st = value_raw(f, v, &raw);
	if (st == TP_OK)
		bits_put(c, raw, f->bits);
	return st;
}

static enum tp_status put_groups(const struct tp_layout *l,
                                 const struct tp_value *header,
                                 const struct tp_value *records,
                                 uint32_t n_records, struct bitcur *c)
{
	const struct tp_records *rs = &l->records;
	enum tp_status st = TP_OK;
	uint64_t raw;
	size_t i, k;

	for (i = 0; i < l->n_fields && st == TP_OK; i++) {
		if (!l->has_records || (int)i != rs->count_field) {
			st = put_field(c, &l->fields[i], header[i]);
			continue;
		}
		if (int_pattern(&l->fields[i], n_records, &raw) != 0)
			return TP_ERR_RANGE;
		bits_put(c, raw, l->fields[i].bits);
	}
	for (k = 0; l->has_records && k < n_records; k++)
		for (i = 0; i < rs->n_fields && st == TP_OK; i++)
			st = put_field(c, &rs->fields[i],
			               records[k * rs->n_fields + i]);
	return st;
}

/* Packet length for n_records records (padded to length_min). */
static enum tp_status encode_size(const struct tp_layout *l, uint32_t n_records,
                                  size_t *len)
{
	uint64_t bits = tp_layout_header_bits(l), need;

	if (l->has_records) {
		if (l->records.count_field < 0 && n_records != l->records.count)
			return TP_ERR_ARG;
		bits += (uint64_t)n_records * tp_layout_record_bits(l);
	} else if (n_records > 1) {
		return TP_ERR_ARG;
	}
	need = packet_bytes(l, bits);
	if (need == UINT64_MAX)
		return TP_ERR_COUNT;
	if (need < l->length_min)
		need = l->length_min;
	if (need > TP_MAX_PACKET || (l->length_max && need > l->length_max))
		return TP_ERR_LENGTH;
	*len = (size_t)need;
	return TP_OK;
}

/* Compute the check value over the encoded bytes and store it. */
static enum tp_status place_check(const struct tp_layout *l, uint8_t *out,
                                  size_t len)
{
	struct region rg;
	struct bitcur c;
	uint32_t v;

	if (l->check.kind == TP_CHECK_NONE)
		return TP_OK;
	if (find_region(l, len, &rg) != TP_OK)
		return TP_ERR_LAYOUT;
	if (rg.cov_from < rg.cov_to &&
	    rg.cov_from < rg.check_at + rg.check_len && rg.check_at < rg.cov_to)
		return TP_ERR_LAYOUT; /* the check would cover itself */
	v = check_compute(&l->check, out, &rg);
	bits_writer(&c, out, (uint64_t)len * 8, l->check.order);
	bits_skip(&c, (uint64_t)rg.check_at * 8);
	bits_put(&c, v, (uint32_t)rg.check_len * 8);
	return bits_failed(&c) ? TP_ERR_LAYOUT : TP_OK;
}

enum tp_status tp_encode_packet(const struct tp_layout *l,
                                const struct tp_value *header,
                                const struct tp_value *records,
                                uint32_t n_records, uint8_t *out, size_t cap,
                                size_t *out_len)
{
	struct region rg;
	struct bitcur c;
	enum tp_status st;
	size_t len = 0;

	if (!l || !out_len || (!out && cap))
		return TP_ERR_ARG;
	*out_len = 0;
	if (tp_layout_validate(l, NULL) != TP_OK)
		return TP_ERR_LAYOUT;
	if ((l->n_fields && !header) ||
	    (l->has_records && n_records && !records))
		return TP_ERR_ARG;
	st = encode_size(l, n_records, &len);
	if (st != TP_OK)
		return st;
	if (len > cap)
		return TP_ERR_SPACE;
	memset(out, 0, len);
	if (find_region(l, len, &rg) != TP_OK)
		return TP_ERR_LAYOUT;
	bits_writer(&c, out, rg.end_bits, l->order);
	st = put_groups(l, header, records, n_records, &c);
	if (st == TP_OK && bits_failed(&c))
		st = TP_ERR_LAYOUT;
	if (st == TP_OK)
		st = place_check(l, out, len);
	if (st == TP_OK)
		*out_len = len;
	return st;
}

const char *tp_check_name(const struct tp_layout *l)
{
	if (l->check.kind == TP_CHECK_SUM8)
		return "sum8";
	if (l->check.kind == TP_CHECK_XOR8)
		return "xor8";
	if (l->check.crc.p.name != NULL)
		return l->check.crc.p.name;
	return "CRC";
}
