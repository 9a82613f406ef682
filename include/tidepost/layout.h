/*
 * layout.h - the packet layout (plain C, fillable statically by firmware)
 * and the bounded decoder/encoder that follows it.
 *
 * A struct tp_layout describes one fixed-format packet (see LAYOUT.md):
 * header fields, an optional group of records repeated a fixed or
 * field-given number of times, match/length tests to choose among layouts,
 * and an optional check value.  Every field is read through one bit
 * cursor: `big` byte order reads bits most-significant first, `little`
 * least-significant first, so byte-aligned multi-byte types come out as
 * ordinary big/little-endian integers and bit fields may cross bytes.
 *
 * Invariants: decoding never reads outside [p, p+len); nothing allocates;
 * nothing prints; no globals.  A zero `scale` means 1 and a zero
 * `time_unit_s` means 1, so designated initialisers stay short.
 *
 * Value indices: in a struct tp_reading, values[i] for i < n_fields is
 * header field i; values[n_fields + j] is record field j.  Role fields
 * carry a number too (station number, seq, Unix time, offset seconds);
 * skip entries carry flag TP_FLAG_NOT_EVALUATED and are never printed.
 *
 * Decoding rules (decoder/layout.c implements them):
 *  - Bit order: `big` packet bit p is bit 7 - p%8 of byte p/8 and a field
 *    reads most-significant bit first; `little` packet bit p is bit p%8 of
 *    byte p/8 and value bit i of a field starting at bit s is bit s + i.
 *    Every type is N bits through that cursor; iN and `signed` bits are
 *    two's complement; f32/f64 are the IEEE 754 bit patterns.
 *  - Value = raw * scale + offset (an offset of 0 is not added, so -0.0
 *    keeps its sign).  raw == missing (bit patterns, masked to the width),
 *    a NaN/infinite float or a non-finite result -> NaN, flag 9; outside
 *    [range_min, range_max] -> the number, flag 4; else flag 1.
 *  - Roles are integer fields without scale, offset, missing or range.
 *    station (unsigned, <= 32 bits), seq (unsigned) and time (signed or
 *    not: time_s = epoch_s + raw * unit) live in the header, at most one
 *    each; time_offset (records only, at most one) gives record time =
 *    packet time + raw * unit, else record k is at packet time +
 *    k * every_s (every_s <= 366 days).  A time that overflows int64 is
 *    TP_ERR_RANGE.  Role slots carry their number with flag 1.
 *  - The count field is an unsigned integer value header field without
 *    scale, offset or missing; its raw value is the record count.
 *  - Field region: fields must lie in [0, len) minus the check: with a
 *    negative check `at` they must end before the check value; with a
 *    positive `at` they must end before it, unless the check value lies
 *    wholly inside a header skip entry.  Bytes after the last field are
 *    ignored unless `length` forbids them.
 *  - tp_decode_packet order: layout valid (TP_ERR_LAYOUT), length (over
 *    TP_MAX_PACKET or outside length_min..length_max: TP_ERR_LENGTH), check
 *    value and cover inside the packet (TP_ERR_SHORT), check value
 *    (TP_ERR_CHECK, nothing decoded), header fields (TP_ERR_SHORT), record
 *    count (count field too big: TP_ERR_COUNT; fixed count not fitting:
 *    TP_ERR_SHORT).  No records: one reading of header values.
 *  - Check value: CRC over covers (default [0, check start)), stored in
 *    ceil(width / 8) bytes in check.order (the config loader sets it to
 *    the layout's order when `order` is absent); sum8/xor8 one byte.
 *    Cover offsets follow `at`: negative counts from the end, 0 and
 *    positive from the start (so a cover cannot say "to the end" of a
 *    variable-length packet when the check is at its start).
 *  - Match: the byte-aligned integer at `at` in the layout's byte order,
 *    sign- or zero-extended, equals `is`; out of bounds -> no match.
 *    length_min..length_max, both 0 = any length; length_max 0 alone = no
 *    upper bound.
 * Encoding is the inverse: raw = round((v - offset) / scale), half away
 * from zero, clamped to the width; floats store (v - offset) / scale
 * clamped to the finite range.  Null (flag 9 or NaN) -> `missing`; a float
 * without `missing` stores a quiet NaN; an integer without it is
 * TP_ERR_RANGE.  A value landing exactly on the missing code is
 * TP_ERR_RANGE, but one clamped onto it steps one code inwards.  Role
 * values are never clamped (TP_ERR_RANGE if they do not fit).  The count
 * field is set to n_records (TP_ERR_RANGE if it does not fit); a fixed
 * count must equal n_records (TP_ERR_ARG).  The packet is zero-padded to
 * length_min, then the check value is computed and placed.
 *
 * Called by the daemon (inputs, decode, encode) and by station firmware.
 */
#ifndef TIDEPOST_LAYOUT_H
#define TIDEPOST_LAYOUT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tidepost/check.h"
#include "tidepost/status.h"

#define TP_MAX_FIELDS 64  /* per group (header, records) */
#define TP_MAX_VALUES 192 /* header + record + derived values */
#define TP_MAX_MATCH  8
#define TP_MAX_PACKET 4096 /* bytes; longer packets are rejected */

/* QARTOD flags (IOOS 2020, Manual for Real-Time Oceanographic Data
 * Quality Control Flags v1.2). */
enum tp_flag {
	TP_FLAG_PASS = 1,
	TP_FLAG_NOT_EVALUATED = 2,
	TP_FLAG_SUSPECT = 3,
	TP_FLAG_FAIL = 4,
	TP_FLAG_MISSING = 9
};

enum tp_type {
	TP_T_BITS = 0, /* `bits: N`, 1..64, optionally signed */
	TP_T_U8,
	TP_T_I8,
	TP_T_U16,
	TP_T_I16,
	TP_T_U24,
	TP_T_I24,
	TP_T_U32,
	TP_T_I32,
	TP_T_U64,
	TP_T_I64,
	TP_T_F32,
	TP_T_F64,
	TP_T_SKIP /* `skip_bits: N`: N bits ignored */
};

enum tp_role {
	TP_ROLE_VALUE = 0,
	TP_ROLE_STATION,
	TP_ROLE_SEQ,
	TP_ROLE_TIME,       /* header: seconds (or minutes) since epoch */
	TP_ROLE_TIME_OFFSET /* records: seconds (or minutes) from packet time */
};

enum tp_order { TP_ORDER_BIG = 0, TP_ORDER_LITTLE };

enum tp_check_kind {
	TP_CHECK_NONE = 0,
	TP_CHECK_CRC,
	TP_CHECK_SUM8,
	TP_CHECK_XOR8
};

struct tp_field {
	const char *name; /* NULL only for skip entries */
	enum tp_type type;
	uint32_t bits;  /* width; set for every type (u16 -> 16, ...) */
	bool is_signed; /* two's complement (implied by iN types) */
	enum tp_role role;
	double scale; /* value = raw * scale + offset; 0 means 1 */
	double offset;
	bool has_missing;
	uint64_t missing; /* raw bit pattern meaning "no reading" */
	bool has_range;
	double range_min, range_max; /* sensor span: outside -> flag 4 */
	const char *unit;            /* canonical UDUNITS spelling or NULL */
	const char *standard_name;   /* CF standard name or NULL */
	int64_t epoch_s;             /* TP_ROLE_TIME: epoch as Unix seconds */
	uint32_t time_unit_s; /* time roles: 1 (s) or 60 (min); 0 means 1 */
};

struct tp_match {
	int32_t at;        /* byte offset; negative counts from the end */
	enum tp_type type; /* a byte-aligned integer type */
	int64_t is;        /* compared after sign/zero extension */
};

struct tp_check {
	enum tp_check_kind kind;
	struct tp_crc crc; /* kind == TP_CHECK_CRC; built by tp_crc_init */
	int32_t at;        /* byte offset; negative counts from the end */
	bool has_covers;   /* else: covers every byte before `at` */
	int32_t covers_from, covers_to; /* [from, to); negative from the end */
	enum tp_order order; /* byte order of the stored check value */
};

struct tp_records {
	const struct tp_field *fields;
	size_t n_fields;
	uint32_t count;   /* fixed count, when count_field < 0 */
	int count_field;  /* index of a header field holding the count */
	uint32_t every_s; /* record k time = packet time + k * every_s */
};

struct tp_layout {
	const char *name;
	enum tp_order order;
	const struct tp_match *match;
	size_t n_match;
	uint32_t length_min, length_max; /* bytes; 0,0 = any length */
	struct tp_check check;
	const struct tp_field *fields; /* header fields */
	size_t n_fields;
	bool has_records;
	struct tp_records records;
};

struct tp_value {
	double v;     /* NaN when flag == TP_FLAG_MISSING */
	uint8_t flag; /* enum tp_flag */
};

/* A decoded packet: header values and where the records are. */
struct tp_packet {
	const struct tp_layout *layout;
	const uint8_t *data;
	size_t len;
	bool has_station, has_seq, has_time;
	uint32_t station;
	uint64_t seq;
	int64_t time_s;       /* packet time (Unix s); if !has_time the caller
	                         sets it (receive time) before decoding records */
	uint32_t n_records;   /* 1 when the layout has no records */
	uint64_t records_bit; /* bit offset of record 0 */
	uint64_t record_bits; /* size of one record in bits */
	struct tp_value header[TP_MAX_FIELDS];
};

/* One reading: one record (or the whole packet without records). */
struct tp_reading {
	uint32_t record; /* record index k */
	int64_t time_s;  /* record time, Unix seconds */
	size_t n_values; /* n_fields + records.n_fields (+ derived) */
	struct tp_value values[TP_MAX_VALUES];
};

/* Where a layout problem is: group 0 = header, 1 = records, 2 = match,
 * 3 = check, 4 = the layout as a whole; index within the group or -1. */
struct tp_layout_problem {
	int group;
	int index;
	const char *what; /* static English text */
};

/* Check a layout for internal consistency (widths, roles, count field,
 * check placement, sizes under TP_MAX_*).  On error fills *pb (pb may
 * be NULL) with the first problem found.  Does not check that check.crc
 * was built by tp_crc_init beyond its width. */
enum tp_status tp_layout_validate(const struct tp_layout *l,
                                  struct tp_layout_problem *pb);

/* Fixed bit size of the header fields and of one record. */
uint64_t tp_layout_header_bits(const struct tp_layout *l);
uint64_t tp_layout_record_bits(const struct tp_layout *l);

/* Total number of value slots (header + record fields). */
size_t tp_layout_n_values(const struct tp_layout *l);

/* The field for value slot i, or NULL past the layout's fields. */
const struct tp_field *tp_layout_field(const struct tp_layout *l, size_t i);

/* Decimals a field's numbers are printed with, from scale and offset
 * (scale 0.001 -> 3): max over both of the smallest d in 0..9 with
 * x * 10^d within 1e-9 * max(1, |x * 10^d|) of a nonzero integer (or x 0);
 * 9 if none.  Floats return -1 (print round-trip). */
int tp_field_decimals(const struct tp_field *f);

/* Do the match and length tests of l accept this packet? */
bool tp_layout_accepts(const struct tp_layout *l, const uint8_t *p, size_t len);

/* Index of the first layout that accepts the packet, or -1. */
int tp_layout_select(const struct tp_layout *const *ls, size_t n,
                     const uint8_t *p, size_t len);

/* Name of the layout's check for messages: the catalogue name, "sum8",
 * "xor8", or "CRC" for one given by parameters (never NULL). */
const char *tp_check_name(const struct tp_layout *l);

/* Verify the check value (TP_OK if the layout has none). */
enum tp_status tp_check_verify(const struct tp_layout *l, const uint8_t *p,
                               size_t len);

/*
 * Decode the header: length and check tests, header fields, record count.
 * TP_ERR_CHECK when the check fails (nothing decoded), TP_ERR_SHORT when
 * the fields do not fit, TP_ERR_COUNT when the count field asks for more
 * records than the packet holds; also TP_ERR_LAYOUT (layout fails
 * tp_layout_validate), TP_ERR_LENGTH, TP_ERR_RANGE (time overflows).
 * pk points into p: p must outlive pk.  On error pk->n_records is 0.
 */
enum tp_status tp_decode_packet(const struct tp_layout *l, const uint8_t *p,
                                size_t len, struct tp_packet *pk);

/*
 * tp_decode_packet for a layout the caller has validated: l passed
 * tp_layout_validate and has not changed since (a config loader validates
 * every layout once).  It skips that O(fields) validation per packet.
 * A layout that breaks the promise still cannot make it read outside p or
 * its arrays: field counts over TP_MAX_FIELDS, missing field arrays, an
 * unknown check kind or CRC width, a count field outside the header and
 * records of zero bits are TP_ERR_LAYOUT; other faults decode as the
 * layout says.  Same results as tp_decode_packet for a valid layout.
 */
enum tp_status tp_decode_validated(const struct tp_layout *l, const uint8_t *p,
                                   size_t len, struct tp_packet *pk);

/* Decode record k (< pk->n_records, else TP_ERR_ARG) into r, header
 * values included.  Reads only inside [pk->data, pk->data + pk->len). */
enum tp_status tp_decode_record(const struct tp_packet *pk, uint32_t k,
                                struct tp_reading *r);

/*
 * Encode a packet: header values (l->n_fields slots) and n_records records
 * (row-major, records.n_fields slots each).  raw = round((v - offset) /
 * scale) clamped to the width; flag 9 or NaN -> `missing` (TP_ERR_RANGE if
 * the field has none).  The count field is set to n_records.  The packet
 * is padded with zeros to length_min, and the check value is placed.
 * No framing: see tp_frame_encode.
 */
enum tp_status tp_encode_packet(const struct tp_layout *l,
                                const struct tp_value *header,
                                const struct tp_value *records,
                                uint32_t n_records, uint8_t *out, size_t cap,
                                size_t *out_len);

#endif
