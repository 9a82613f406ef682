/*
 * test_layout.c - the layout decoder: the bit cursor in both orders,
 * every field type, scale/offset/missing/range flags, roles, records,
 * match and length selection, check values, truncation and hostile
 * packets, and layout validation.
 *
 * Expected values are worked out by hand from the bit-order rules in
 * layout.h (the working is in each row's comment).  CRC check values are
 * the "check" entries of the CRC RevEng catalogue (Greg Cook, "Catalogue
 * of parametrised CRC algorithms") for the ASCII string "123456789"
 * [from memory].  IEEE 754 bit patterns are [from memory] and noted per
 * row.  All packets are invented test data.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "tidepost/layout.h"

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))
#define F(...) { .name = "x", __VA_ARGS__ }

static void want_value(const char *why, size_t slot, struct tp_value got,
                         double want, int flag)
{
	if (got.flag != flag)
		fail_msg("%s: slot %zu: flag %d, want %d", why, slot,
		         got.flag, flag);
	if (isnan(want)) {
		if (!isnan(got.v))
			fail_msg("%s: slot %zu: %.17g, want NaN", why, slot,
			         got.v);
		return;
	}
	if (!(fabs(got.v - want) <= 1e-9 * fmax(1.0, fabs(want))))
		fail_msg("%s: slot %zu: %.17g, want %.17g", why, slot, got.v,
		         want);
}

/* ---- one field at a time ------------------------------------------- */

struct one_row {
	const char *why;
	enum tp_order order;
	uint32_t skip;          /* leading skip_bits (0: none) */
	struct tp_field f;
	uint8_t bytes[9];
	size_t len;
	double v;               /* NAN: expect missing */
	int flag;
};

static const struct one_row one_rows[] = {
	/* big: bits 4..11 are the low nibble of 0xAB (B) then the high
	 * nibble of 0xCD (C), most significant first -> 0xBC. */
	{ "big 8 bits across a byte", TP_ORDER_BIG, 4, F(.bits = 8),
	  { 0xAB, 0xCD }, 2, 0xBC, 1 },
	/* little: value bits 0..3 are packet bits 4..7 (high nibble of
	 * 0xAB = A), value bits 4..7 are packet bits 8..11 (low nibble of
	 * 0xCD = D) -> 0xDA. */
	{ "little 8 bits across a byte", TP_ORDER_LITTLE, 4, F(.bits = 8),
	  { 0xAB, 0xCD }, 2, 0xDA, 1 },
	/* big: the first 12 bits of 12 34 are 0x123. */
	{ "big 12 bits at 0", TP_ORDER_BIG, 0, F(.bits = 12),
	  { 0x12, 0x34 }, 2, 0x123, 1 },
	/* little: byte 0x12 is value bits 0..7, low nibble of 0x34 (4) is
	 * value bits 8..11 -> 0x412. */
	{ "little 12 bits at 0", TP_ORDER_LITTLE, 0, F(.bits = 12),
	  { 0x12, 0x34 }, 2, 0x412, 1 },
	/* big: bits 12..23 of 12 34 56 are 0x456. */
	{ "big 12 bits at 12", TP_ORDER_BIG, 12, F(.bits = 12),
	  { 0x12, 0x34, 0x56 }, 3, 0x456, 1 },
	/* little: high nibble of 0x34 (3) is value bits 0..3, 0x56 is
	 * value bits 4..11 -> 0x563. */
	{ "little 12 bits at 12", TP_ORDER_LITTLE, 12, F(.bits = 12),
	  { 0x12, 0x34, 0x56 }, 3, 0x563, 1 },
	/* big: packet bits 6,7 of 0x01 are 0,1; bit 8 is the top bit of
	 * 0x80, 1 -> 0b011. */
	{ "big 3 bits across a byte", TP_ORDER_BIG, 6, F(.bits = 3),
	  { 0x01, 0x80 }, 2, 3, 1 },
	/* little: bit 6 of 0x40 is 1 (value bit 0), bit 7 is 0, bit 0 of
	 * 0x01 is 1 (value bit 2) -> 0b101. */
	{ "little 3 bits across a byte", TP_ORDER_LITTLE, 6, F(.bits = 3),
	  { 0x40, 0x01 }, 2, 5, 1 },
	/* big reads bit 7 of byte 0 first. */
	{ "big first bit is the top bit", TP_ORDER_BIG, 0, F(.bits = 1),
	  { 0x80 }, 1, 1, 1 },
	/* little reads bit 0 of byte 0 first. */
	{ "little first bit is the low bit", TP_ORDER_LITTLE, 0,
	  F(.bits = 1), { 0x80 }, 1, 0, 1 },
	/* little: packet bit 7 is bit 7 of byte 0. */
	{ "little bit 7", TP_ORDER_LITTLE, 7, F(.bits = 1), { 0x80 }, 1, 1, 1 },
	/* 0xFFF as 12-bit two's complement is -1. */
	{ "signed 12 bits, -1", TP_ORDER_BIG, 0,
	  F(.bits = 12, .is_signed = true), { 0xFF, 0xF0 }, 2, -1, 1 },
	/* 0x800 is the most negative 12-bit number. */
	{ "signed 12 bits, min", TP_ORDER_BIG, 0,
	  F(.bits = 12, .is_signed = true), { 0x80, 0x00 }, 2, -2048, 1 },
	/* 0x7FF is the largest: the sign bit alone decides. */
	{ "signed 12 bits, max", TP_ORDER_BIG, 0,
	  F(.bits = 12, .is_signed = true), { 0x7F, 0xF0 }, 2, 2047, 1 },
	/* little: low nibble 0x8 of 0x08 is -8 in 4 bits. */
	{ "little signed nibble", TP_ORDER_LITTLE, 0,
	  F(.bits = 4, .is_signed = true), { 0x08 }, 1, -8, 1 },
	/* little: 0x00 then low nibble 8 -> 0x800 -> -2048: the sign bit
	 * is in the second byte. */
	{ "little signed 12, sign in byte 1", TP_ORDER_LITTLE, 0,
	  F(.bits = 12, .is_signed = true), { 0x00, 0x08 }, 2, -2048, 1 },
	/* big: bits 4..11 of 0F F0 are 0xFF -> -1 as signed 8 bits. */
	{ "big signed across a byte", TP_ORDER_BIG, 4,
	  F(.bits = 8, .is_signed = true), { 0x0F, 0xF0 }, 2, -1, 1 },
	/* Byte-aligned types come out as ordinary big/little integers. */
	{ "u16 big", TP_ORDER_BIG, 0, F(.type = TP_T_U16, .bits = 16),
	  { 0x12, 0x34 }, 2, 0x1234, 1 },
	{ "u16 little", TP_ORDER_LITTLE, 0, F(.type = TP_T_U16, .bits = 16),
	  { 0x12, 0x34 }, 2, 0x3412, 1 },
	{ "u24 big", TP_ORDER_BIG, 0, F(.type = TP_T_U24, .bits = 24),
	  { 0x01, 0x02, 0x03 }, 3, 0x010203, 1 },
	{ "u24 little", TP_ORDER_LITTLE, 0, F(.type = TP_T_U24, .bits = 24),
	  { 0x01, 0x02, 0x03 }, 3, 0x030201, 1 },
	/* FF FF FE is -2 in 24-bit two's complement. */
	{ "i24 big", TP_ORDER_BIG, 0, F(.type = TP_T_I24, .bits = 24),
	  { 0xFF, 0xFF, 0xFE }, 3, -2, 1 },
	{ "i24 little", TP_ORDER_LITTLE, 0, F(.type = TP_T_I24, .bits = 24),
	  { 0xFE, 0xFF, 0xFF }, 3, -2, 1 },
	{ "i24 min", TP_ORDER_BIG, 0, F(.type = TP_T_I24, .bits = 24),
	  { 0x80, 0x00, 0x00 }, 3, -8388608, 1 },
	{ "i16 min", TP_ORDER_BIG, 0, F(.type = TP_T_I16, .bits = 16),
	  { 0x80, 0x00 }, 2, -32768, 1 },
	/* iN is signed without is_signed set. */
	{ "i8 implies signed", TP_ORDER_BIG, 0, F(.type = TP_T_I8, .bits = 8),
	  { 0x80 }, 1, -128, 1 },
	{ "u8 max", TP_ORDER_BIG, 0, F(.type = TP_T_U8, .bits = 8),
	  { 0xFF }, 1, 255, 1 },
	{ "u32 little", TP_ORDER_LITTLE, 0, F(.type = TP_T_U32, .bits = 32),
	  { 0x78, 0x56, 0x34, 0x12 }, 4, 0x12345678, 1 },
	{ "i32 -1", TP_ORDER_BIG, 0, F(.type = TP_T_I32, .bits = 32),
	  { 0xFF, 0xFF, 0xFF, 0xFF }, 4, -1, 1 },
	/* A u16 need not be byte-aligned: bits 4..19 of 01 23 45. */
	{ "u16 big at bit 4", TP_ORDER_BIG, 4, F(.type = TP_T_U16, .bits = 16),
	  { 0x01, 0x23, 0x45 }, 3, 0x1234, 1 },
	/* little at bit 4: high nibble of 0x10 (1) -> bits 0..3, 0x32 ->
	 * bits 4..11, low nibble of 0x54 (4) -> bits 12..15 -> 0x4321. */
	{ "u16 little at bit 4", TP_ORDER_LITTLE, 4,
	  F(.type = TP_T_U16, .bits = 16), { 0x10, 0x32, 0x54 }, 3, 0x4321, 1 },
	/* 2^64 - 1 becomes the double 2^64 (nearest). */
	{ "u64 max", TP_ORDER_BIG, 0, F(.type = TP_T_U64, .bits = 64),
	  { 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF }, 8,
	  18446744073709551616.0, 1 },
	{ "i64 min", TP_ORDER_BIG, 0, F(.type = TP_T_I64, .bits = 64),
	  { 0x80, 0, 0, 0, 0, 0, 0, 0 }, 8, -9223372036854775808.0, 1 },
	{ "i64 little -2", TP_ORDER_LITTLE, 0, F(.type = TP_T_I64, .bits = 64),
	  { 0xFE, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF }, 8, -2, 1 },
	{ "bits 64 signed -1", TP_ORDER_BIG, 0,
	  F(.bits = 64, .is_signed = true),
	  { 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF }, 8, -1, 1 },
	/* 33 bits: the top bit of 80 00 00 00 00 is value bit 32. */
	{ "bits 33", TP_ORDER_BIG, 0, F(.bits = 33),
	  { 0x80, 0, 0, 0, 0 }, 5, 4294967296.0, 1 },
	/* IEEE 754 binary32 1.0 is 0x3F800000 [from memory]. */
	{ "f32 big 1.0", TP_ORDER_BIG, 0, F(.type = TP_T_F32, .bits = 32),
	  { 0x3F, 0x80, 0, 0 }, 4, 1.0, 1 },
	{ "f32 little 1.0", TP_ORDER_LITTLE, 0,
	  F(.type = TP_T_F32, .bits = 32), { 0, 0, 0x80, 0x3F }, 4, 1.0, 1 },
	/* binary32 pi is 0x40490FDB = 3.14159274101257324 [from memory];
	 * the sign bit makes it negative. */
	{ "f32 -pi", TP_ORDER_BIG, 0, F(.type = TP_T_F32, .bits = 32),
	  { 0xC0, 0x49, 0x0F, 0xDB }, 4, -3.14159274101257324, 1 },
	/* binary64 pi is 0x400921FB54442D18 [from memory]. */
	{ "f64 big pi", TP_ORDER_BIG, 0, F(.type = TP_T_F64, .bits = 64),
	  { 0x40, 0x09, 0x21, 0xFB, 0x54, 0x44, 0x2D, 0x18 }, 8,
	  3.141592653589793, 1 },
	{ "f64 little pi", TP_ORDER_LITTLE, 0,
	  F(.type = TP_T_F64, .bits = 64),
	  { 0x18, 0x2D, 0x44, 0x54, 0xFB, 0x21, 0x09, 0x40 }, 8,
	  3.141592653589793, 1 },
	/* 0x7FC00000 is a binary32 quiet NaN [from memory]: missing. */
	{ "f32 NaN is missing", TP_ORDER_BIG, 0,
	  F(.type = TP_T_F32, .bits = 32), { 0x7F, 0xC0, 0, 0 }, 4, NAN, 9 },
	/* 0x7F800000 is binary32 +infinity [from memory]: missing. */
	{ "f32 infinity is missing", TP_ORDER_BIG, 0,
	  F(.type = TP_T_F32, .bits = 32), { 0x7F, 0x80, 0, 0 }, 4, NAN, 9 },
	/* -9999.0 as binary64 is 0xC0C3878000000000 (9999 = 0x270F =
	 * 1.0x70F/0x1000 * 2^13, exponent 1036 = 0x40C): a finite missing
	 * pattern. */
	{ "f64 missing pattern", TP_ORDER_BIG, 0,
	  F(.type = TP_T_F64, .bits = 64, .has_missing = true,
	    .missing = UINT64_C(0xC0C3878000000000)),
	  { 0xC0, 0xC3, 0x87, 0x80, 0, 0, 0, 0 }, 8, NAN, 9 },
	/* Floats take scale and offset too: 1.0 * 2 + 1. */
	{ "f32 scale and offset", TP_ORDER_BIG, 0,
	  F(.type = TP_T_F32, .bits = 32, .scale = 2, .offset = 1),
	  { 0x3F, 0x80, 0, 0 }, 4, 3.0, 1 },
	/* 1.0 outside [2, 5] fails the gross range test. */
	{ "f32 out of range", TP_ORDER_BIG, 0,
	  F(.type = TP_T_F32, .bits = 32, .has_range = true, .range_min = 2,
	    .range_max = 5), { 0x3F, 0x80, 0, 0 }, 4, 1.0, 4 },
	/* pH as in LAYOUT.md: raw 0x5E8 = 1512 -> 6.5 + 1.512. */
	{ "pH scale and offset", TP_ORDER_BIG, 0,
	  F(.bits = 12, .scale = 0.001, .offset = 6.5, .has_missing = true,
	    .missing = 4095, .has_range = true, .range_min = 6.5,
	    .range_max = 9.0), { 0x5E, 0x80 }, 2, 8.012, 1 },
	/* raw 0xFFF is the missing code. */
	{ "pH missing", TP_ORDER_BIG, 0,
	  F(.bits = 12, .scale = 0.001, .offset = 6.5, .has_missing = true,
	    .missing = 4095), { 0xFF, 0xF0 }, 2, NAN, 9 },
	/* raw 0xA28 = 2600 -> 9.1 > 9.0: keeps its number, flag 4. */
	{ "pH above range", TP_ORDER_BIG, 0,
	  F(.bits = 12, .scale = 0.001, .offset = 6.5, .has_range = true,
	    .range_min = 6.5, .range_max = 9.0), { 0xA2, 0x80 }, 2, 9.1, 4 },
	/* raw 0 -> 6.5, the range minimum itself passes. */
	{ "pH at range min", TP_ORDER_BIG, 0,
	  F(.bits = 12, .scale = 0.001, .offset = 6.5, .has_range = true,
	    .range_min = 6.5, .range_max = 9.0), { 0x00, 0x00 }, 2, 6.5, 1 },
	/* raw 0x9C3 = 2499 -> 8.999 just inside. */
	{ "pH just inside", TP_ORDER_BIG, 0,
	  F(.bits = 12, .scale = 0.001, .offset = 6.5, .has_range = true,
	    .range_min = 6.5, .range_max = 9.0), { 0x9C, 0x30 }, 2, 8.999, 1 },
	/* raw 0x9C5 = 2501 -> 9.001 just outside. */
	{ "pH just outside", TP_ORDER_BIG, 0,
	  F(.bits = 12, .scale = 0.001, .offset = 6.5, .has_range = true,
	    .range_min = 6.5, .range_max = 9.0), { 0x9C, 0x50 }, 2, 9.001, 4 },
	/* raw 0xED4 = -300 (12-bit) -> 20 - 3.00. */
	{ "temperature negative raw", TP_ORDER_BIG, 0,
	  F(.bits = 12, .is_signed = true, .scale = 0.01, .offset = 20),
	  { 0xED, 0x40 }, 2, 17.0, 1 },
	/* raw 0x2E5 = 741 -> 27.41. */
	{ "temperature positive raw", TP_ORDER_BIG, 0,
	  F(.bits = 12, .is_signed = true, .scale = 0.01, .offset = 20),
	  { 0x2E, 0x50 }, 2, 27.41, 1 },
	/* raw 0xF37 = 3895 = -201 + 4096 -> -2.01 < -2: flag 4. */
	{ "temperature below range", TP_ORDER_BIG, 0,
	  F(.bits = 12, .is_signed = true, .scale = 0.01,
	    .has_range = true, .range_min = -2, .range_max = 40),
	  { 0xF3, 0x70 }, 2, -2.01, 4 },
	/* Exactly the range maximum (40, exact in binary) passes. */
	{ "at range max", TP_ORDER_BIG, 0,
	  F(.type = TP_T_U8, .bits = 8, .has_range = true, .range_min = -2,
	    .range_max = 40), { 40 }, 1, 40, 1 },
	/* One above it fails. */
	{ "above range max", TP_ORDER_BIG, 0,
	  F(.type = TP_T_U8, .bits = 8, .has_range = true, .range_min = -2,
	    .range_max = 40), { 41 }, 1, 41, 4 },
	/* missing compares bit patterns: 0x800 on a signed field. */
	{ "signed missing pattern", TP_ORDER_BIG, 0,
	  F(.bits = 12, .is_signed = true, .has_missing = true,
	    .missing = 0x800), { 0x80, 0x00 }, 2, NAN, 9 },
	/* battery u16 0x30C0 = 12480 mV -> 12.48 V. */
	{ "battery", TP_ORDER_BIG, 0,
	  F(.type = TP_T_U16, .bits = 16, .scale = 0.001),
	  { 0x30, 0xC0 }, 2, 12.48, 1 },
	/* A negative scale: 10 - 4 * 0.5. */
	{ "negative scale", TP_ORDER_BIG, 0,
	  F(.type = TP_T_U8, .bits = 8, .scale = -0.5, .offset = 10),
	  { 0x04 }, 1, 8.0, 1 },
	/* A huge scale turning a finite raw into infinity: missing. */
	{ "overflow to infinity", TP_ORDER_BIG, 0,
	  F(.type = TP_T_F64, .bits = 64, .scale = 1e300),
	  { 0x7F, 0xEF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF }, 8, NAN, 9 },
};

static void one_field_values(void **state)
{
	const struct one_row *r;
	struct tp_packet pk;
	enum tp_status st;
	size_t i;

	(void)state;
	for (i = 0; i < N_OF(one_rows); i++) {
		r = &one_rows[i];
		struct tp_field fs[2] = {
			{ .type = TP_T_SKIP, .bits = r->skip }, r->f };
		struct tp_layout l = {
			.name = "one", .order = r->order,
			.fields = r->skip ? fs : fs + 1,
			.n_fields = r->skip ? 2 : 1 };

		st = tp_decode_packet(&l, r->bytes, r->len, &pk);
		if (st != TP_OK)
			fail_msg("%s: status %s", r->why, tp_strerror(st));
		want_value(r->why, l.n_fields - 1,
		             pk.header[l.n_fields - 1], r->v, r->flag);
		if (r->skip)
			want_value(r->why, 0, pk.header[0], NAN, 2);
	}
}

/* ---- roles ----------------------------------------------------------- */

static const struct tp_field role_fields[] = {
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "seq", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_SEQ },
	/* 2000-01-01T00:00:00Z is Unix 946684800 [from memory]. */
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME,
	  .epoch_s = 946684800, .time_unit_s = 60 },
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.001 },
};

struct role_row {
	const char *why;
	enum tp_order order;
	uint8_t bytes[12];
};

static const struct role_row role_rows[] = {
	/* station 0x0102 = 258, seq 0x76 = 118, 16 minutes after the
	 * epoch = 946684800 + 960, battery 12480 mV. */
	{ "roles big", TP_ORDER_BIG,
	  { 0x01, 0x02, 0, 0, 0, 0x76, 0, 0, 0, 0x10, 0x30, 0xC0 } },
	/* The same numbers little-endian. */
	{ "roles little", TP_ORDER_LITTLE,
	  { 0x02, 0x01, 0x76, 0, 0, 0, 0x10, 0, 0, 0, 0xC0, 0x30 } },
};

static void roles_fill_packet(void **state)
{
	const struct role_row *r;
	struct tp_packet pk;
	struct tp_reading rd;
	size_t i;

	(void)state;
	for (i = 0; i < N_OF(role_rows); i++) {
		r = &role_rows[i];
		struct tp_layout l = { .name = "roles", .order = r->order,
		                       .fields = role_fields, .n_fields = 4 };

		assert_int_equal(tp_decode_packet(&l, r->bytes, 12, &pk),
		                 TP_OK);
		assert_true(pk.has_station && pk.has_seq && pk.has_time);
		assert_int_equal(pk.station, 258);
		assert_int_equal(pk.seq, 118);
		assert_int_equal(pk.time_s, 946685760);
		assert_int_equal(pk.n_records, 1);
		assert_int_equal(tp_decode_record(&pk, 0, &rd), TP_OK);
		assert_int_equal(rd.n_values, 4);
		assert_int_equal(rd.time_s, 946685760);
		want_value(r->why, 0, rd.values[0], 258, 1);
		want_value(r->why, 1, rd.values[1], 118, 1);
		want_value(r->why, 2, rd.values[2], 946685760, 1);
		want_value(r->why, 3, rd.values[3], 12.48, 1);
	}
}

/* 64-bit roles are exact: seq UINT64_MAX, time INT64_MIN (epoch 0). */
static void roles_64_bits(void **state)
{
	static const struct tp_field fs[] = {
		{ .name = "seq", .type = TP_T_U64, .bits = 64,
		  .role = TP_ROLE_SEQ },
		{ .name = "t", .type = TP_T_I64, .bits = 64,
		  .role = TP_ROLE_TIME },
	};
	static const uint8_t p[16] = { 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF,
	                               0xFF, 0xFF, 0x80 };
	struct tp_layout l = { .name = "r64", .fields = fs, .n_fields = 2 };
	struct tp_field shifted[2] = { fs[0], fs[1] };
	struct tp_packet pk;
	struct tp_reading rd;

	(void)state;
	assert_int_equal(tp_decode_packet(&l, p, 16, &pk), TP_OK);
	assert_true(pk.seq == UINT64_MAX);
	assert_true(pk.time_s == INT64_MIN);
	assert_int_equal(tp_decode_record(&pk, 0, &rd), TP_OK);
	assert_true(rd.time_s == INT64_MIN);
	/* An epoch one second before that overflows int64: refused. */
	shifted[1].epoch_s = -1;
	l.fields = shifted;
	assert_int_equal(tp_decode_packet(&l, p, 16, &pk), TP_ERR_RANGE);
}

/* Without a time field the caller's receive time is the packet time. */
static void no_time_field(void **state)
{
	static const struct tp_field fs[] = {
		{ .name = "v", .type = TP_T_U8, .bits = 8 } };
	static const struct tp_field rf[] = {
		{ .name = "w", .type = TP_T_U8, .bits = 8 } };
	static const uint8_t p[] = { 7, 1, 2 };
	struct tp_layout l = { .name = "nt", .fields = fs, .n_fields = 1,
	                       .has_records = true,
	                       .records = { .fields = rf, .n_fields = 1,
	                                    .count = 2, .count_field = -1,
	                                    .every_s = 600 } };
	struct tp_packet pk;
	struct tp_reading rd;

	(void)state;
	assert_int_equal(tp_decode_packet(&l, p, 3, &pk), TP_OK);
	assert_false(pk.has_time);
	pk.time_s = 1700000000;
	assert_int_equal(tp_decode_record(&pk, 1, &rd), TP_OK);
	assert_int_equal(rd.time_s, 1700000600);
	want_value("header value in reading", 0, rd.values[0], 7, 1);
	want_value("record value", 1, rd.values[1], 2, 1);
}

/* time_offset in records replaces k * every_s; every_s applies when
 * there is none. */
static void record_times(void **state)
{
	static const struct tp_field hf[] = {
		{ .name = "t", .type = TP_T_U32, .bits = 32,
		  .role = TP_ROLE_TIME } };
	static const struct tp_field off_f[] = {
		{ .name = "off", .type = TP_T_U8, .bits = 8,
		  .role = TP_ROLE_TIME_OFFSET, .time_unit_s = 60 },
		{ .name = "v", .type = TP_T_U8, .bits = 8 } };
	/* time 0x3E8 = 1000; record 0 offset 5 min, value 7; record 1
	 * offset 10 min, value 8. */
	static const uint8_t p[] = { 0, 0, 0x03, 0xE8, 5, 7, 10, 8 };
	struct tp_layout l = { .name = "rt", .fields = hf, .n_fields = 1,
	                       .has_records = true,
	                       .records = { .fields = off_f, .n_fields = 2,
	                                    .count = 2, .count_field = -1,
	                                    .every_s = 900 } };
	struct tp_packet pk;
	struct tp_reading rd;
	uint32_t k;

	(void)state;
	assert_int_equal(tp_decode_packet(&l, p, sizeof p, &pk), TP_OK);
	assert_int_equal(tp_decode_record(&pk, 0, &rd), TP_OK);
	assert_int_equal(rd.time_s, 1300);
	want_value("offset slot", 1, rd.values[1], 300, 1);
	want_value("value slot", 2, rd.values[2], 7, 1);
	assert_int_equal(tp_decode_record(&pk, 1, &rd), TP_OK);
	assert_int_equal(rd.time_s, 1600);
	assert_int_equal(rd.record, 1);
	want_value("value slot", 2, rd.values[2], 8, 1);
	/* Now only the value field: k * 900 s apart. */
	l.records.fields = off_f + 1;
	l.records.n_fields = 1;
	l.records.count = 3;
	assert_int_equal(tp_decode_packet(&l, p, 7, &pk), TP_OK);
	for (k = 0; k < 3; k++) {
		assert_int_equal(tp_decode_record(&pk, k, &rd), TP_OK);
		assert_int_equal(rd.time_s, 1000 + 900 * (int64_t)k);
	}
	assert_int_equal(tp_decode_record(&pk, 3, &rd), TP_ERR_ARG);
}

/* ---- record counts --------------------------------------------------- */

static const struct tp_field count_hdr[] = {
	{ .name = "n", .type = TP_T_U8, .bits = 8 } };
static const struct tp_field count_rec[] = {
	{ .name = "v", .bits = 12 } };
static const struct tp_field fixed_hdr[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 } };
static const struct tp_field fixed_rec[] = {
	{ .name = "v", .bits = 4 } };

struct count_row {
	const char *why;
	bool fixed;             /* fixed count 2 of 4-bit little records */
	uint8_t bytes[4];
	size_t len;
	enum tp_status st;
	uint32_t n;
	double v0, v1;          /* records 0 and 1 when present */
};

static const struct count_row count_rows[] = {
	/* count 2, 12-bit records 0x123 and 0x456 (big). */
	{ "count field 2", false, { 2, 0x12, 0x34, 0x56 }, 4, TP_OK, 2,
	  0x123, 0x456 },
	/* 3 x 12 bits need 36 bits, 24 are there. */
	{ "count too big", false, { 3, 0x12, 0x34, 0x56 }, 4, TP_ERR_COUNT, 0,
	  0, 0 },
	/* 255 records never fit. */
	{ "count 255", false, { 255 }, 1, TP_ERR_COUNT, 0, 0, 0 },
	/* A count of zero gives zero readings. */
	{ "count 0", false, { 0 }, 1, TP_OK, 0, 0, 0 },
	/* Trailing bytes after the last record are allowed. */
	{ "count 1, trailing", false, { 1, 0x12, 0x34, 0x56 }, 4, TP_OK, 1,
	  0x123, 0 },
	/* Not even the header. */
	{ "empty packet", false, { 0 }, 0, TP_ERR_SHORT, 0, 0, 0 },
	/* fixed count 2, little: low nibble 1 first, then high nibble 2. */
	{ "fixed count", true, { 9, 0x21 }, 2, TP_OK, 2, 1, 2 },
	/* fixed records missing: the packet is too short. */
	{ "fixed count short", true, { 9 }, 1, TP_ERR_SHORT, 0, 0, 0 },
};

static void record_counts(void **state)
{
	const struct count_row *r;
	struct tp_packet pk;
	struct tp_reading rd;
	enum tp_status st;
	size_t i;

	(void)state;
	for (i = 0; i < N_OF(count_rows); i++) {
		r = &count_rows[i];
		struct tp_layout l = {
			.name = "c", .fields = r->fixed ? fixed_hdr : count_hdr,
			.n_fields = 1, .has_records = true,
			.order = r->fixed ? TP_ORDER_LITTLE : TP_ORDER_BIG,
			.records = { .fields = r->fixed ? fixed_rec : count_rec,
			             .n_fields = 1, .count = 2,
			             .count_field = r->fixed ? -1 : 0 } };

		st = tp_decode_packet(&l, r->bytes, r->len, &pk);
		if (st != r->st)
			fail_msg("%s: %s, want %s", r->why, tp_strerror(st),
			         tp_strerror(r->st));
		if (st != TP_OK)
			continue;
		assert_int_equal(pk.n_records, r->n);
		if (r->n > 0) {
			assert_int_equal(tp_decode_record(&pk, 0, &rd), TP_OK);
			want_value(r->why, 1, rd.values[1], r->v0, 1);
		}
		if (r->n > 1) {
			assert_int_equal(tp_decode_record(&pk, 1, &rd), TP_OK);
			want_value(r->why, 1, rd.values[1], r->v1, 1);
		}
		assert_int_equal(tp_decode_record(&pk, r->n, &rd), TP_ERR_ARG);
	}
}

/* Without records a packet is one reading of header values. */
static void no_records_one_reading(void **state)
{
	static const uint8_t p[] = { 5 };
	struct tp_layout l = { .name = "h", .fields = fixed_hdr,
	                       .n_fields = 1 };
	struct tp_packet pk;
	struct tp_reading rd;

	(void)state;
	assert_int_equal(tp_decode_packet(&l, p, 1, &pk), TP_OK);
	assert_int_equal(pk.n_records, 1);
	assert_int_equal(pk.record_bits, 0);
	assert_int_equal(tp_decode_record(&pk, 0, &rd), TP_OK);
	assert_int_equal(rd.n_values, 1);
	want_value("header only", 0, rd.values[0], 5, 1);
	assert_int_equal(tp_decode_record(&pk, 1, &rd), TP_ERR_ARG);
	assert_int_equal(tp_decode_record(NULL, 0, &rd), TP_ERR_ARG);
	assert_int_equal(tp_decode_packet(&l, NULL, 1, &pk), TP_ERR_ARG);
}

/* ---- match and length ------------------------------------------------ */

static const struct tp_field sel_f[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 } };
static const struct tp_match sel_ma[] = { { 0, TP_T_U8, 1 } };
static const struct tp_match sel_mb[] = { { 0, TP_T_U8, 2 },
                                          { -2, TP_T_U16, 0xBEEF } };
static const struct tp_match sel_mc[] = { { 1, TP_T_I8, -1 } };
/* a: kind 1, exactly 4 bytes; b: kind 2 and little-endian 0xBEEF in the
 * last two bytes; c: byte 1 is -1, 3..5 bytes. */
static const struct tp_layout sel_a = {
	.name = "a", .match = sel_ma, .n_match = 1, .length_min = 4,
	.length_max = 4, .fields = sel_f, .n_fields = 1 };
static const struct tp_layout sel_b = {
	.name = "b", .order = TP_ORDER_LITTLE, .match = sel_mb, .n_match = 2,
	.fields = sel_f, .n_fields = 1 };
static const struct tp_layout sel_c = {
	.name = "c", .match = sel_mc, .n_match = 1, .length_min = 3,
	.length_max = 5, .fields = sel_f, .n_fields = 1 };

struct sel_row {
	const char *why;
	uint8_t bytes[6];
	size_t len;
	int want;
};

static const struct sel_row sel_rows[] = {
	{ "a by kind and length", { 1, 0, 0, 0 }, 4, 0 },
	/* c accepts too, but a comes first. */
	{ "first layout wins", { 1, 0xFF, 0, 0 }, 4, 0 },
	/* a refuses 3 bytes; c's signed test sees 0xFF as -1. */
	{ "c by signed byte", { 1, 0xFF, 0 }, 3, 2 },
	/* little-endian EF BE reads 0xBEEF. */
	{ "b by tail word", { 2, 9, 0xEF, 0xBE }, 4, 1 },
	/* BE EF reads 0xEFBE in little order: b refuses, c too. */
	{ "b wrong byte order", { 2, 9, 0xBE, 0xEF }, 4, -1 },
	{ "b before c", { 2, 0xFF, 0xEF, 0xBE }, 4, 1 },
	/* b's test at -2 is out of bounds in a 1-byte packet. */
	{ "match out of bounds", { 2 }, 1, -1 },
	{ "empty packet", { 0 }, 0, -1 },
	/* 6 bytes: a wants 4, c at most 5, b's tail is 0. */
	{ "too long for all", { 1, 0xFF, 0, 0, 0, 0 }, 6, -1 },
};

static void select_layouts(void **state)
{
	const struct tp_layout *ls[] = { &sel_a, &sel_b, &sel_c };
	const struct sel_row *r;
	int got;
	size_t i;

	(void)state;
	for (i = 0; i < N_OF(sel_rows); i++) {
		r = &sel_rows[i];
		got = tp_layout_select(ls, 3, r->bytes, r->len);
		if (got != r->want)
			fail_msg("%s: layout %d, want %d", r->why, got,
			         r->want);
	}
	assert_false(tp_layout_accepts(NULL, sel_rows[0].bytes, 4));
	assert_int_equal(tp_layout_select(NULL, 3, sel_rows[0].bytes, 4), -1);
}

struct match_row {
	const char *why;
	enum tp_order order;
	struct tp_match m;
	uint8_t bytes[8];
	size_t len;
	bool want;
};

static const struct match_row match_rows[] = {
	{ "i16 negative big", TP_ORDER_BIG, { 0, TP_T_I16, -2 },
	  { 0xFF, 0xFE }, 2, true },
	/* the same bytes read unsigned are 65534, not -2. */
	{ "u16 is not sign-extended", TP_ORDER_BIG, { 0, TP_T_U16, -2 },
	  { 0xFF, 0xFE }, 2, false },
	{ "u16 65534", TP_ORDER_BIG, { 0, TP_T_U16, 65534 },
	  { 0xFF, 0xFE }, 2, true },
	{ "u24 little at 1", TP_ORDER_LITTLE, { 1, TP_T_U24, 0x030201 },
	  { 9, 1, 2, 3 }, 4, true },
	{ "u8 at -1", TP_ORDER_BIG, { -1, TP_T_U8, 3 }, { 9, 1, 2, 3 }, 4,
	  true },
	/* 4 bytes of a u32 do not fit from offset 1 of 4. */
	{ "u32 past the end", TP_ORDER_BIG, { 1, TP_T_U32, 0 },
	  { 0, 0, 0, 0 }, 4, false },
	{ "at before the start", TP_ORDER_BIG, { -5, TP_T_U8, 0 },
	  { 0, 0, 0, 0 }, 4, false },
	{ "u64 INT64_MAX", TP_ORDER_BIG, { 0, TP_T_U64, INT64_MAX },
	  { 0x7F, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF }, 8, true },
	/* 2^64-1 unsigned is not -1. */
	{ "u64 max is not -1", TP_ORDER_BIG, { 0, TP_T_U64, 0 },
	  { 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF }, 8, false },
	{ "i64 -1", TP_ORDER_BIG, { 0, TP_T_I64, -1 },
	  { 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF }, 8, true },
};

static void match_tests(void **state)
{
	const struct match_row *r;
	size_t i;

	(void)state;
	for (i = 0; i < N_OF(match_rows); i++) {
		r = &match_rows[i];
		struct tp_layout l = { .name = "m", .order = r->order,
		                       .match = &r->m, .n_match = 1,
		                       .fields = sel_f, .n_fields = 1 };

		if (tp_layout_accepts(&l, r->bytes, r->len) != r->want)
			fail_msg("%s: accepts is %d", r->why, !r->want);
	}
}

/* Length tests in tp_decode_packet: TP_ERR_LENGTH before anything. */
static void length_rules(void **state)
{
	static uint8_t big[TP_MAX_PACKET + 1];
	struct tp_layout l = { .name = "len", .fields = sel_f, .n_fields = 1,
	                       .length_min = 2, .length_max = 3 };
	struct tp_packet pk;

	(void)state;
	assert_int_equal(tp_decode_packet(&l, big, 1, &pk), TP_ERR_LENGTH);
	assert_int_equal(tp_decode_packet(&l, big, 2, &pk), TP_OK);
	assert_int_equal(tp_decode_packet(&l, big, 4, &pk), TP_ERR_LENGTH);
	/* length_max 0 means no upper bound (only TP_MAX_PACKET). */
	l.length_max = 0;
	assert_int_equal(tp_decode_packet(&l, big, TP_MAX_PACKET, &pk), TP_OK);
	assert_int_equal(tp_decode_packet(&l, big, TP_MAX_PACKET + 1, &pk),
	                 TP_ERR_LENGTH);
}

/* ---- check values ---------------------------------------------------- */

static const struct tp_field digits[] = {
	{ .name = "d0", .type = TP_T_U8, .bits = 8 },
	{ .name = "d1", .type = TP_T_U8, .bits = 8 },
	{ .name = "d2", .type = TP_T_U8, .bits = 8 },
	{ .name = "d3", .type = TP_T_U8, .bits = 8 },
	{ .name = "d4", .type = TP_T_U8, .bits = 8 },
	{ .name = "d5", .type = TP_T_U8, .bits = 8 },
	{ .name = "d6", .type = TP_T_U8, .bits = 8 },
	{ .name = "d7", .type = TP_T_U8, .bits = 8 },
	{ .name = "d8", .type = TP_T_U8, .bits = 8 },
};

/* A 16-bit skip, then the nine digits: a check can sit in the skip. */
static const struct tp_field skip_digits[] = {
	{ .type = TP_T_SKIP, .bits = 16 },
	{ .name = "d0", .type = TP_T_U8, .bits = 8 },
	{ .name = "d1", .type = TP_T_U8, .bits = 8 },
	{ .name = "d2", .type = TP_T_U8, .bits = 8 },
	{ .name = "d3", .type = TP_T_U8, .bits = 8 },
	{ .name = "d4", .type = TP_T_U8, .bits = 8 },
	{ .name = "d5", .type = TP_T_U8, .bits = 8 },
	{ .name = "d6", .type = TP_T_U8, .bits = 8 },
	{ .name = "d7", .type = TP_T_U8, .bits = 8 },
	{ .name = "d8", .type = TP_T_U8, .bits = 8 },
};

#define D9 '1', '2', '3', '4', '5', '6', '7', '8', '9'

struct check_row {
	const char *why;
	enum tp_check_kind kind;
	const char *crc;        /* catalogue name for TP_CHECK_CRC */
	int32_t at;
	enum tp_order order;
	bool skip_first;        /* use skip_digits */
	bool has_covers;
	int32_t from, to;
	uint8_t bytes[16];
	size_t len;
	enum tp_status st;
};

static const struct check_row check_rows[] = {
	/* CRC-16/IBM-3740 check 0x29B1 [RevEng catalogue]. */
	{ "IBM-3740 big at -2", TP_CHECK_CRC, "CRC-16/IBM-3740", -2,
	  TP_ORDER_BIG, false, false, 0, 0, { D9, 0x29, 0xB1 }, 11, TP_OK },
	{ "IBM-3740 little at -2", TP_CHECK_CRC, "CRC-16/IBM-3740", -2,
	  TP_ORDER_LITTLE, false, false, 0, 0, { D9, 0xB1, 0x29 }, 11, TP_OK },
	/* The right value in the wrong byte order fails. */
	{ "IBM-3740 swapped", TP_CHECK_CRC, "CRC-16/IBM-3740", -2,
	  TP_ORDER_BIG, false, false, 0, 0, { D9, 0xB1, 0x29 }, 11,
	  TP_ERR_CHECK },
	/* One corrupted data byte fails. */
	{ "IBM-3740 corrupted", TP_CHECK_CRC, "CRC-16/IBM-3740", -2,
	  TP_ORDER_BIG, false, false, 0, 0,
	  { '1', '2', '3', '4', '5', '6', '7', '8', '0', 0x29, 0xB1 }, 11,
	  TP_ERR_CHECK },
	/* CRC-16/XMODEM check 0x31C3 [RevEng catalogue]. */
	{ "XMODEM", TP_CHECK_CRC, "CRC-16/XMODEM", -2, TP_ORDER_BIG, false,
	  false, 0, 0, { D9, 0x31, 0xC3 }, 11, TP_OK },
	/* CRC-16/KERMIT check 0x2189 [RevEng catalogue]. */
	{ "KERMIT", TP_CHECK_CRC, "CRC-16/KERMIT", -2, TP_ORDER_BIG, false,
	  false, 0, 0, { D9, 0x21, 0x89 }, 11, TP_OK },
	/* CRC-16/MODBUS check 0x4B37 [RevEng catalogue], low byte first. */
	{ "MODBUS little", TP_CHECK_CRC, "CRC-16/MODBUS", -2, TP_ORDER_LITTLE,
	  false, false, 0, 0, { D9, 0x37, 0x4B }, 11, TP_OK },
	/* CRC-32/ISO-HDLC check 0xCBF43926 [RevEng catalogue]. */
	{ "ISO-HDLC at -4", TP_CHECK_CRC, "CRC-32/ISO-HDLC", -4, TP_ORDER_BIG,
	  false, false, 0, 0, { D9, 0xCB, 0xF4, 0x39, 0x26 }, 13, TP_OK },
	/* CRC-32/ISCSI check 0xE3069283 [RevEng catalogue]. */
	{ "ISCSI little", TP_CHECK_CRC, "CRC-32/ISCSI", -4, TP_ORDER_LITTLE,
	  false, false, 0, 0, { D9, 0x83, 0x92, 0x06, 0xE3 }, 13, TP_OK },
	/* CRC-8/SMBUS check 0xF4 [RevEng catalogue]. */
	{ "SMBUS at -1", TP_CHECK_CRC, "CRC-8/SMBUS", -1, TP_ORDER_BIG, false,
	  false, 0, 0, { D9, 0xF4 }, 10, TP_OK },
	/* sum of 0x31..0x39 = 477 = 0x1DD -> 0xDD (hand-computed). */
	{ "sum8", TP_CHECK_SUM8, NULL, -1, TP_ORDER_BIG, false, false, 0, 0,
	  { D9, 0xDD }, 10, TP_OK },
	{ "sum8 bad", TP_CHECK_SUM8, NULL, -1, TP_ORDER_BIG, false, false, 0, 0,
	  { D9, 0xDE }, 10, TP_ERR_CHECK },
	/* 0x31 ^ 0x32 ^ .. ^ 0x39 = 0x31 (hand-computed pairwise). */
	{ "xor8", TP_CHECK_XOR8, NULL, -1, TP_ORDER_BIG, false, false, 0, 0,
	  { D9, 0x31 }, 10, TP_OK },
	/* covers [1, -2): byte 0 ('Z') is outside the CRC. */
	{ "covers skip byte 0", TP_CHECK_CRC, "CRC-16/IBM-3740", -2,
	  TP_ORDER_BIG, false, true, 1, -2, { 'Z', D9, 0x29, 0xB1 }, 12,
	  TP_OK },
	/* The same packet with the default cover fails. */
	{ "default covers byte 0", TP_CHECK_CRC, "CRC-16/IBM-3740", -2,
	  TP_ORDER_BIG, false, false, 0, 0, { 'Z', D9, 0x29, 0xB1 }, 12,
	  TP_ERR_CHECK },
	/* A check at 0 inside a leading 16-bit skip, covering [2, 11). */
	{ "check in a skip", TP_CHECK_CRC, "CRC-16/IBM-3740", 0, TP_ORDER_BIG,
	  true, true, 2, 11, { 0x29, 0xB1, D9 }, 11, TP_OK },
	/* A check at 9, right after the fields. */
	{ "check after fields", TP_CHECK_CRC, "CRC-16/IBM-3740", 9,
	  TP_ORDER_BIG, false, false, 0, 0, { D9, 0x29, 0xB1 }, 11, TP_OK },
	/* ... with a trailing byte, which is allowed. */
	{ "check then trailing byte", TP_CHECK_CRC, "CRC-16/IBM-3740", 9,
	  TP_ORDER_BIG, false, false, 0, 0, { D9, 0x29, 0xB1, 0 }, 12, TP_OK },
	/* A check at -4 of 2 bytes: two bytes follow it. */
	{ "check at -4, 16 bits", TP_CHECK_CRC, "CRC-16/IBM-3740", -4,
	  TP_ORDER_BIG, false, false, 0, 0, { D9, 0x29, 0xB1, 0, 0 }, 13,
	  TP_OK },
	/* No room for the check value at all. */
	{ "no room for the check", TP_CHECK_CRC, "CRC-16/IBM-3740", -2,
	  TP_ORDER_BIG, false, false, 0, 0, { 0 }, 1, TP_ERR_SHORT },
	/* The check fits but the fields do not fit before it. */
	{ "fields before the check", TP_CHECK_SUM8, NULL, -1, TP_ORDER_BIG,
	  false, false, 0, 0, { '1', '2', 0x63 }, 3, TP_ERR_SHORT },
};

static void check_values(void **state)
{
	const struct check_row *r;
	struct tp_packet pk;
	enum tp_status st;
	size_t i;

	(void)state;
	for (i = 0; i < N_OF(check_rows); i++) {
		r = &check_rows[i];
		struct tp_layout l = {
			.name = "chk",
			.fields = r->skip_first ? skip_digits : digits,
			.n_fields = r->skip_first ? 10 : 9,
			.check = { .kind = r->kind, .at = r->at,
			           .order = r->order,
			           .has_covers = r->has_covers,
			           .covers_from = r->from,
			           .covers_to = r->to } };

		if (r->crc)
			assert_int_equal(tp_crc_init(&l.check.crc,
			                 tp_crc_find(r->crc)), TP_OK);
		assert_int_equal(tp_layout_validate(&l, NULL), TP_OK);
		st = tp_decode_packet(&l, r->bytes, r->len, &pk);
		if (st != r->st)
			fail_msg("%s: %s, want %s", r->why, tp_strerror(st),
			         tp_strerror(r->st));
		if (st == TP_OK)
			want_value(r->why, 0, pk.header[r->skip_first],
			             r->bytes[r->skip_first ? 2 : 0], 1);
	}
}

/* A check at a positive offset ends the field region: records of a
 * count-field layout must lie before it. */
static void positive_check_bounds_records(void **state)
{
	static const struct tp_field hf[] = {
		{ .name = "n", .type = TP_T_U8, .bits = 8 },
		{ .name = "kind", .type = TP_T_U8, .bits = 8 } };
	static const struct tp_field rf[] = {
		{ .name = "v", .type = TP_T_U8, .bits = 8 } };
	/* n = 1, kind 5, record 7, sum8 of 01 05 07 = 0x0D at 3. */
	static const uint8_t fits[] = { 1, 5, 7, 0x0D };
	/* n = 1, kind 5, sum8 of 01 05 = 0x06 at 2, then a byte that
	 * must not be read as the record. */
	static const uint8_t past[] = { 1, 5, 0x06, 7 };
	struct tp_layout l = { .name = "pc", .fields = hf, .n_fields = 2,
	                       .has_records = true,
	                       .records = { .fields = rf, .n_fields = 1,
	                                    .count_field = 0 },
	                       .check = { .kind = TP_CHECK_SUM8, .at = 3 } };
	struct tp_packet pk;
	struct tp_reading rd;

	(void)state;
	assert_int_equal(tp_decode_packet(&l, fits, 4, &pk), TP_OK);
	assert_int_equal(tp_decode_record(&pk, 0, &rd), TP_OK);
	want_value("record before the check", 2, rd.values[2], 7, 1);
	l.check.at = 2;
	assert_int_equal(tp_decode_packet(&l, past, 4, &pk), TP_ERR_COUNT);
}

/* ---- truncation and hostile bytes ------------------------------------ */

static const struct tp_field trunc_hdr[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "n", .bits = 5 },
	{ .type = TP_T_SKIP, .bits = 3 },
};
static const struct tp_field trunc_rec[] = {
	{ .name = "t", .bits = 12, .is_signed = true, .scale = 0.01,
	  .offset = 20 },
	{ .name = "q", .bits = 7 },
};

static void trunc_layout(struct tp_layout *l, enum tp_check_kind kind,
                         enum tp_order order)
{
	memset(l, 0, sizeof *l);
	l->name = "trunc";
	l->order = order;
	l->fields = trunc_hdr;
	l->n_fields = N_OF(trunc_hdr);
	l->has_records = true;
	l->records.fields = trunc_rec;
	l->records.n_fields = N_OF(trunc_rec);
	l->records.count_field = 2;
	l->check.kind = kind;
	l->check.at = -2;
	l->check.order = order;
	if (kind == TP_CHECK_CRC)
		assert_int_equal(tp_crc_init(&l->check.crc,
		                 tp_crc_find("CRC-16/MODBUS")), TP_OK);
}

/* Every proper prefix of a valid packet (with and without a check, both
 * orders) is rejected; each prefix lives in an exactly sized heap block
 * so a sanitizer build catches any read past it. */
static void every_truncation_rejected(void **state)
{
	struct tp_value hv[4] = { { 3, 1 }, { 77, 1 }, { 0, 1 }, { 0, 2 } };
	struct tp_value rv[10];
	uint8_t pkt[64], *copy;
	struct tp_layout l;
	struct tp_packet pk;
	size_t len, cut, i;
	int variant;

	(void)state;
	for (i = 0; i < 10; i++)
		rv[i] = (struct tp_value){ i % 2 ? (double)i : 20.5 + i, 1 };
	for (variant = 0; variant < 4; variant++) {
		trunc_layout(&l, variant & 1 ? TP_CHECK_CRC : TP_CHECK_NONE,
		             variant & 2 ? TP_ORDER_LITTLE : TP_ORDER_BIG);
		assert_int_equal(tp_encode_packet(&l, hv, rv, 5, pkt,
		                                  sizeof pkt, &len), TP_OK);
		assert_int_equal(tp_decode_packet(&l, pkt, len, &pk), TP_OK);
		assert_int_equal(pk.n_records, 5);
		for (cut = 0; cut < len; cut++) {
			copy = cut ? malloc(cut) : NULL;
			if (cut)
				memcpy(copy, pkt, cut);
			if (tp_decode_packet(&l, copy, cut, &pk) == TP_OK)
				fail_msg("variant %d: prefix of %zu bytes "
				         "accepted", variant, cut);
			free(copy);
		}
	}
}

/* Random bytes never crash the decoder; whatever decodes yields all its
 * records.  (Invented data: a fixed xorshift stream.) */
static void hostile_bytes(void **state)
{
	uint64_t x = 0x9E3779B97F4A7C15u;
	struct tp_layout l;
	struct tp_packet pk;
	struct tp_reading rd;
	uint8_t *p;
	size_t len, i, n_ok = 0;
	uint32_t k;
	int round;

	(void)state;
	trunc_layout(&l, TP_CHECK_NONE, TP_ORDER_BIG);
	for (round = 0; round < 3000; round++) {
		x ^= x << 13;
		x ^= x >> 7;
		x ^= x << 17;
		len = (size_t)(x % 40);
		p = malloc(len ? len : 1);
		for (i = 0; i < len; i++)
			p[i] = (uint8_t)(x >> (8 * (i % 8))) ^ (uint8_t)i;
		if (tp_decode_packet(&l, p, len, &pk) == TP_OK) {
			n_ok++;
			for (k = 0; k < pk.n_records; k++)
				assert_int_equal(tp_decode_record(&pk, k, &rd),
				                 TP_OK);
		}
		free(p);
	}
	assert_true(n_ok > 0);
}

/* ---- validation ------------------------------------------------------ */

struct vfix {
	struct tp_field h[5];
	struct tp_field r[3];
	struct tp_match m[TP_MAX_MATCH + 1];
	struct tp_layout l;
};

/* A valid layout: kind, station, seq, time, a 4-bit count; records of
 * pH, temperature and a time offset; a match; CRC-16 at -2. */
static void vbase(struct vfix *x)
{
	static const struct tp_field h[5] = {
		{ .name = "kind", .type = TP_T_U8, .bits = 8 },
		{ .name = "station", .type = TP_T_U16, .bits = 16,
		  .role = TP_ROLE_STATION },
		{ .name = "seq", .type = TP_T_U16, .bits = 16,
		  .role = TP_ROLE_SEQ },
		{ .name = "time", .type = TP_T_U32, .bits = 32,
		  .role = TP_ROLE_TIME },
		{ .name = "n", .bits = 4 },
	};
	static const struct tp_field r[3] = {
		{ .name = "ph", .bits = 12, .scale = 0.001, .offset = 6.5,
		  .has_missing = true, .missing = 4095, .has_range = true,
		  .range_min = 6.5, .range_max = 9 },
		{ .name = "temp", .bits = 12, .is_signed = true,
		  .scale = 0.01 },
		{ .name = "off", .type = TP_T_U8, .bits = 8,
		  .role = TP_ROLE_TIME_OFFSET },
	};

	memset(x, 0, sizeof *x);
	memcpy(x->h, h, sizeof h);
	memcpy(x->r, r, sizeof r);
	x->m[0] = (struct tp_match){ 0, TP_T_U8, 2 };
	x->l.name = "base";
	x->l.match = x->m;
	x->l.n_match = 1;
	x->l.fields = x->h;
	x->l.n_fields = 5;
	x->l.has_records = true;
	x->l.records.fields = x->r;
	x->l.records.n_fields = 3;
	x->l.records.count_field = 4;
	x->l.records.every_s = 900;
	x->l.check.kind = TP_CHECK_CRC;
	x->l.check.at = -2;
	assert_int_equal(tp_crc_init(&x->l.check.crc,
	                             tp_crc_find("CRC-16/IBM-3740")), TP_OK);
}

static void m_none(struct vfix *x) { (void)x; }
static void m_u8_16(struct vfix *x) { x->h[0].bits = 16; }
static void m_bits0(struct vfix *x) { x->h[4].bits = 0; }
static void m_bits65(struct vfix *x) { x->r[0].bits = 65; }
static void m_noname(struct vfix *x) { x->h[0].name = NULL; }
static void m_u8_signed(struct vfix *x) { x->h[0].is_signed = true; }
static void m_badtype(struct vfix *x) { x->h[0].type = (enum tp_type)99; }
static void m_skip0(struct vfix *x)
{
	x->h[0] = (struct tp_field){ .type = TP_T_SKIP, .bits = 0 };
}
static void m_two_stations(struct vfix *x)
{
	x->h[2].role = TP_ROLE_STATION;
}
static void m_offset_in_header(struct vfix *x)
{
	x->h[3].role = TP_ROLE_TIME_OFFSET;
}
static void m_station_in_records(struct vfix *x)
{
	x->r[2].role = TP_ROLE_STATION;
}
static void m_float_role(struct vfix *x)
{
	x->h[3].type = TP_T_F32;
}
static void m_role_scale(struct vfix *x) { x->h[1].scale = 2; }
static void m_role_missing(struct vfix *x) { x->h[2].has_missing = true; }
static void m_station_64(struct vfix *x)
{
	x->h[1].type = TP_T_U64;
	x->h[1].bits = 64;
}
static void m_seq_signed(struct vfix *x) { x->h[2].type = TP_T_I16; }
static void m_unit30(struct vfix *x) { x->h[3].time_unit_s = 30; }
static void m_count_role(struct vfix *x) { x->l.records.count_field = 1; }
static void m_count_far(struct vfix *x) { x->l.records.count_field = 5; }
static void m_count_signed(struct vfix *x) { x->h[4].is_signed = true; }
static void m_count_scale(struct vfix *x) { x->h[4].scale = 0.5; }
static void m_every(struct vfix *x) { x->l.records.every_s = 40000000; }
static void m_no_rec_fields(struct vfix *x) { x->l.records.n_fields = 0; }
static void m_too_many(struct vfix *x) { x->l.n_fields = TP_MAX_FIELDS + 1; }
static void m_match_float(struct vfix *x) { x->m[0].type = TP_T_F32; }
static void m_match_bits(struct vfix *x) { x->m[0].type = TP_T_BITS; }
static void m_match_big(struct vfix *x) { x->m[0].is = 300; }
static void m_match_many(struct vfix *x) { x->l.n_match = TP_MAX_MATCH + 1; }
static void m_length(struct vfix *x)
{
	x->l.length_min = 10;
	x->l.length_max = 5;
}
static void m_crc_width(struct vfix *x) { x->l.check.crc.p.width = 0; }
static void m_check_minus1(struct vfix *x) { x->l.check.at = -1; }
static void m_check_in_header(struct vfix *x) { x->l.check.at = 1; }
static void m_check_self(struct vfix *x)
{
	x->l.check.has_covers = true;
	x->l.check.covers_from = -4;
	x->l.check.covers_to = -1;
}
static void m_covers_order(struct vfix *x)
{
	x->l.check.has_covers = true;
	x->l.check.covers_from = 5;
	x->l.check.covers_to = 2;
}
static void m_range(struct vfix *x) { x->r[0].range_min = 10; }
static void m_range_nan(struct vfix *x) { x->r[0].range_max = NAN; }
static void m_missing_wide(struct vfix *x) { x->r[0].missing = 4096; }
static void m_scale_nan(struct vfix *x) { x->r[1].scale = NAN; }
static void m_fixed_huge(struct vfix *x)
{
	x->l.records.count_field = -1;
	x->l.records.count = 40000;
}
static void m_length_max(struct vfix *x) { x->l.length_max = 8; }
static void m_noname_layout(struct vfix *x) { x->l.name = NULL; }
static void m_no_fields(struct vfix *x)
{
	x->l.n_fields = 0;
	x->l.has_records = false;
}
static void m_zero_records(struct vfix *x)
{
	x->l.n_fields = 0;
	x->l.records.count_field = -1;
	x->l.records.count = 0;
}
static void m_fixed_check_overlap(struct vfix *x)
{
	x->l.records.count_field = -1;
	x->l.records.count = 2;
	x->l.check.at = 12;
}

struct vrow {
	const char *why;
	void (*mutate)(struct vfix *);
	enum tp_status st;
	int group, index;
};

static const struct vrow vrows[] = {
	{ "the base layout is valid", m_none, TP_OK, 0, 0 },
	{ "u8 with 16 bits", m_u8_16, TP_ERR_LAYOUT, 0, 0 },
	{ "bits 0", m_bits0, TP_ERR_LAYOUT, 0, 4 },
	{ "bits 65", m_bits65, TP_ERR_LAYOUT, 1, 0 },
	{ "value field without a name", m_noname, TP_ERR_LAYOUT, 0, 0 },
	{ "signed u8", m_u8_signed, TP_ERR_LAYOUT, 0, 0 },
	{ "unknown type", m_badtype, TP_ERR_LAYOUT, 0, 0 },
	{ "skip of 0 bits", m_skip0, TP_ERR_LAYOUT, 0, 0 },
	{ "two station roles", m_two_stations, TP_ERR_LAYOUT, 0, 2 },
	{ "time_offset in the header", m_offset_in_header, TP_ERR_LAYOUT,
	  0, 3 },
	{ "station in records", m_station_in_records, TP_ERR_LAYOUT, 1, 2 },
	/* bits stays 32, so only the role rule can object. */
	{ "float time role", m_float_role, TP_ERR_LAYOUT, 0, 3 },
	{ "scale on a role", m_role_scale, TP_ERR_LAYOUT, 0, 1 },
	{ "missing on a role", m_role_missing, TP_ERR_LAYOUT, 0, 2 },
	{ "station wider than 32 bits", m_station_64, TP_ERR_LAYOUT, 0, 1 },
	{ "signed seq", m_seq_signed, TP_ERR_LAYOUT, 0, 2 },
	{ "time unit 30 s", m_unit30, TP_ERR_LAYOUT, 0, 3 },
	{ "count field is the station", m_count_role, TP_ERR_LAYOUT, 0, 1 },
	{ "count field past the header", m_count_far, TP_ERR_LAYOUT, 1, -1 },
	{ "signed count field", m_count_signed, TP_ERR_LAYOUT, 0, 4 },
	{ "scaled count field", m_count_scale, TP_ERR_LAYOUT, 0, 4 },
	{ "every_s over a year", m_every, TP_ERR_LAYOUT, 1, -1 },
	{ "records without fields", m_no_rec_fields, TP_ERR_LAYOUT, 1, -1 },
	{ "too many header fields", m_too_many, TP_ERR_LAYOUT, 0, -1 },
	{ "match on a float", m_match_float, TP_ERR_LAYOUT, 2, 0 },
	{ "match on bits", m_match_bits, TP_ERR_LAYOUT, 2, 0 },
	{ "match value 300 for u8", m_match_big, TP_ERR_LAYOUT, 2, 0 },
	{ "too many match tests", m_match_many, TP_ERR_LAYOUT, 2, -1 },
	{ "length min > max", m_length, TP_ERR_LAYOUT, 4, -1 },
	{ "CRC not initialised", m_crc_width, TP_ERR_LAYOUT, 3, -1 },
	{ "16-bit check at -1", m_check_minus1, TP_ERR_LAYOUT, 3, -1 },
	{ "check inside the header", m_check_in_header, TP_ERR_LAYOUT, 3, -1 },
	{ "covers include the check", m_check_self, TP_ERR_LAYOUT, 3, -1 },
	{ "covers from after to", m_covers_order, TP_ERR_LAYOUT, 3, -1 },
	{ "range min > max", m_range, TP_ERR_LAYOUT, 1, 0 },
	{ "range max NaN", m_range_nan, TP_ERR_LAYOUT, 1, 0 },
	{ "missing wider than 12 bits", m_missing_wide, TP_ERR_LAYOUT, 1, 0 },
	{ "scale NaN", m_scale_nan, TP_ERR_LAYOUT, 1, 1 },
	/* 40000 x 32-bit records exceed TP_MAX_PACKET. */
	{ "fixed records too big", m_fixed_huge, TP_ERR_LAYOUT, 4, -1 },
	/* header 76 bits = 10 bytes + 2 check bytes > 8. */
	{ "fields beyond length max", m_length_max, TP_ERR_LAYOUT, 4, -1 },
	{ "layout without a name", m_noname_layout, TP_ERR_LAYOUT, 4, -1 },
	{ "no fields at all", m_no_fields, TP_ERR_LAYOUT, 4, -1 },
	/* no header and zero fixed records: a packet of nothing. */
	{ "zero records, no header", m_zero_records, TP_ERR_LAYOUT, 4, -1 },
	/* header 76 bits + 2 x 32 bits of records end at byte 18; a check
	 * at 12 overlaps the records. */
	{ "positive check over records", m_fixed_check_overlap,
	  TP_ERR_LAYOUT, 3, -1 },
};

static void validation(void **state)
{
	struct tp_layout_problem pb;
	const struct vrow *r;
	struct tp_packet pk;
	enum tp_status st;
	uint8_t p[32] = { 2 };
	struct vfix x;
	size_t i;

	(void)state;
	for (i = 0; i < N_OF(vrows); i++) {
		r = &vrows[i];
		vbase(&x);
		r->mutate(&x);
		memset(&pb, 0, sizeof pb);
		st = tp_layout_validate(&x.l, &pb);
		if (st != r->st)
			fail_msg("%s: %s (%s)", r->why, tp_strerror(st),
			         pb.what ? pb.what : "-");
		if (st == TP_OK)
			continue;
		if (pb.group != r->group || pb.index != r->index || !pb.what)
			fail_msg("%s: problem at %d/%d (%s), want %d/%d",
			         r->why, pb.group, pb.index,
			         pb.what ? pb.what : "-", r->group, r->index);
		/* The decoder refuses a broken layout too. */
		assert_int_equal(tp_decode_packet(&x.l, p, sizeof p, &pk),
		                 TP_ERR_LAYOUT);
	}
	assert_int_equal(tp_layout_validate(NULL, &pb), TP_ERR_ARG);
}

/* ---- decimals -------------------------------------------------------- */

struct dec_row {
	const char *why;
	struct tp_field f;
	int want;
};

static const struct dec_row dec_rows[] = {
	/* 0.001 is not exact in binary: the tolerance finds 3. */
	{ "scale 0.001", F(.bits = 12, .scale = 0.001), 3 },
	{ "scale 0.01, offset 20", F(.bits = 12, .scale = 0.01, .offset = 20),
	  2 },
	{ "scale 0 means 1", F(.bits = 8), 0 },
	{ "scale 0.5", F(.bits = 8, .scale = 0.5), 1 },
	/* the offset needs more decimals than the scale. */
	{ "offset 0.25", F(.bits = 8, .scale = 0.1, .offset = 0.25), 2 },
	{ "scale 1/3 never ends", F(.bits = 8, .scale = 1.0 / 3.0), 9 },
	/* 1e-9 is within 1e-9 of 0, but a nonzero scale never prints
	 * with 0 decimals when that would round it to 0. */
	{ "scale 1e-9", F(.bits = 8, .scale = 1e-9), 9 },
	{ "scale 1e-6", F(.bits = 8, .scale = 1e-6), 6 },
	{ "scale 2.5e-5", F(.bits = 8, .scale = 2.5e-5), 6 },
	{ "large scale 1000", F(.bits = 8, .scale = 1000), 0 },
	{ "f32 prints round-trip", F(.type = TP_T_F32, .bits = 32,
	                             .scale = 0.1), -1 },
	{ "f64 prints round-trip", F(.type = TP_T_F64, .bits = 64), -1 },
};

static void decimals(void **state)
{
	size_t i;
	int got;

	(void)state;
	for (i = 0; i < N_OF(dec_rows); i++) {
		got = tp_field_decimals(&dec_rows[i].f);
		if (got != dec_rows[i].want)
			fail_msg("%s: %d, want %d", dec_rows[i].why, got,
			         dec_rows[i].want);
	}
}

/* Slot lookup and sizes. */
static void geometry(void **state)
{
	struct vfix x;

	(void)state;
	vbase(&x);
	assert_int_equal(tp_layout_header_bits(&x.l), 8 + 16 + 16 + 32 + 4);
	assert_int_equal(tp_layout_record_bits(&x.l), 12 + 12 + 8);
	assert_int_equal(tp_layout_n_values(&x.l), 8);
	assert_ptr_equal(tp_layout_field(&x.l, 4), &x.h[4]);
	assert_ptr_equal(tp_layout_field(&x.l, 5), &x.r[0]);
	assert_null(tp_layout_field(&x.l, 8));
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(one_field_values),
		cmocka_unit_test(roles_fill_packet),
		cmocka_unit_test(roles_64_bits),
		cmocka_unit_test(no_time_field),
		cmocka_unit_test(record_times),
		cmocka_unit_test(record_counts),
		cmocka_unit_test(no_records_one_reading),
		cmocka_unit_test(select_layouts),
		cmocka_unit_test(match_tests),
		cmocka_unit_test(length_rules),
		cmocka_unit_test(check_values),
		cmocka_unit_test(positive_check_bounds_records),
		cmocka_unit_test(every_truncation_rejected),
		cmocka_unit_test(hostile_bytes),
		cmocka_unit_test(validation),
		cmocka_unit_test(decimals),
		cmocka_unit_test(geometry),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
