/*
 * test_roundtrip.c - the layout encoder: hand-worked packets, encoder
 * errors, and a property test: random layouts and random values survive
 * encode -> decode (LAYOUT.md: "decode(encode(x)) must give x back to
 * within scale/2"), and encode(decode(p)) gives p back byte for byte.
 *
 * The property test prints its seed first; set TP_SEED=<number> to rerun
 * a failing seed.  All layouts and values are invented test data.  The
 * CRC-16/IBM-3740 value 0x29B1 of "123456789" is the check value of the
 * CRC RevEng catalogue (Greg Cook) [from memory].
 */
#include <float.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "tidepost/layout.h"

#define N_OF(a) (sizeof(a) / sizeof((a)[0]))
#define NUL { NAN, TP_FLAG_MISSING }
#define V(x) { (x), TP_FLAG_PASS }

/* ---- hand-worked packets --------------------------------------------- */

static const struct tp_field reef_hdr[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "seq", .type = TP_T_U16, .bits = 16, .role = TP_ROLE_SEQ },
	/* 946684800 = 2000-01-01T00:00:00Z [from memory]. */
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME,
	  .epoch_s = 946684800, .time_unit_s = 60 },
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.001 },
};
static const struct tp_field reef_rec[] = {
	{ .name = "ph", .bits = 12, .scale = 0.001, .offset = 6.5,
	  .has_missing = true, .missing = 4095 },
	{ .name = "temperature", .bits = 12, .is_signed = true, .scale = 0.01,
	  .offset = 20 },
};
static const struct tp_field digit_f[] = {
	{ .name = "d", .type = TP_T_U8, .bits = 8 },
};
static const struct tp_field u8_f[] = {
	{ .name = "v", .type = TP_T_U8, .bits = 8 } };
static const struct tp_field i8_f[] = {
	{ .name = "v", .type = TP_T_I8, .bits = 8 } };
static const struct tp_field half_f[] = {
	{ .name = "v", .type = TP_T_U8, .bits = 8, .scale = 0.5 } };
static const struct tp_field nib_f[] = {
	{ .name = "v", .bits = 4, .is_signed = true } };
static const struct tp_field miss_f[] = {
	{ .name = "v", .bits = 12, .has_missing = true, .missing = 4095 } };
static const struct tp_field f32_f[] = {
	{ .name = "v", .type = TP_T_F32, .bits = 32 } };
static const struct tp_field stn_f[] = {
	{ .name = "s", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION } };
static const struct tp_field time_f[] = {
	{ .name = "t", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME,
	  .epoch_s = 1000 } };
static const struct tp_field cnt_f[] = { { .name = "n", .bits = 2 } };
static const struct tp_field pair_f[] = {
	{ .name = "a", .bits = 12 }, { .name = "b", .bits = 12 } };
static const struct tp_field digits9[] = {
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
static const struct tp_field skip_digits9[] = {
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

enum shape {
	S_REEF, S_U8, S_I8, S_HALF, S_NIB, S_MISS, S_F32, S_STATION, S_TIME,
	S_PAD4, S_COUNT2, S_PAIR_LITTLE, S_CRC_BIG, S_CRC_LITTLE, S_SUM8,
	S_CRC_AT9_PAD, S_CRC_IN_SKIP, S_FIXED2
};

static void shape_layout(enum shape s, struct tp_layout *l)
{
	memset(l, 0, sizeof *l);
	l->name = "enc";
	l->fields = u8_f;
	l->n_fields = 1;
	l->records.count_field = -1;
	switch (s) {
	case S_REEF:
		l->fields = reef_hdr;
		l->n_fields = N_OF(reef_hdr);
		l->has_records = true;
		l->records.fields = reef_rec;
		l->records.n_fields = 2;
		l->records.count = 2;
		break;
	case S_U8: break;
	case S_I8: l->fields = i8_f; break;
	case S_HALF: l->fields = half_f; break;
	case S_NIB: l->fields = nib_f; break;
	case S_MISS: l->fields = miss_f; break;
	case S_F32: l->fields = f32_f; break;
	case S_STATION: l->fields = stn_f; break;
	case S_TIME: l->fields = time_f; break;
	case S_PAD4: l->length_min = 4; break;
	case S_COUNT2:
		l->fields = cnt_f;
		l->has_records = true;
		l->records.fields = digit_f;
		l->records.n_fields = 1;
		l->records.count_field = 0;
		break;
	case S_PAIR_LITTLE:
		l->order = TP_ORDER_LITTLE;
		l->fields = pair_f;
		l->n_fields = 2;
		break;
	case S_FIXED2:
		l->has_records = true;
		l->records.fields = digit_f;
		l->records.n_fields = 1;
		l->records.count = 2;
		break;
	default:
		l->fields = s == S_CRC_IN_SKIP ? skip_digits9 : digits9;
		l->n_fields = s == S_CRC_IN_SKIP ? 10 : 9;
		l->check.kind = s == S_SUM8 ? TP_CHECK_SUM8 : TP_CHECK_CRC;
		l->check.at = s == S_CRC_AT9_PAD ? 9 : s == S_CRC_IN_SKIP ? 0 :
		              s == S_SUM8 ? -1 : -2;
		l->check.order = s == S_CRC_LITTLE ? TP_ORDER_LITTLE :
		                 TP_ORDER_BIG;
		l->check.has_covers = s == S_CRC_IN_SKIP;
		l->check.covers_from = 2;
		l->check.covers_to = 11;
		l->length_min = s == S_CRC_AT9_PAD ? 12 : 0;
		assert_int_equal(tp_crc_init(&l->check.crc,
		                 tp_crc_find("CRC-16/IBM-3740")), TP_OK);
	}
}

#define DIG9 V(0x31), V(0x32), V(0x33), V(0x34), V(0x35), V(0x36), \
             V(0x37), V(0x38), V(0x39)
#define D9 0x31, 0x32, 0x33, 0x34, 0x35, 0x36, 0x37, 0x38, 0x39

struct enc_row {
	const char *why;
	enum shape shape;
	struct tp_value h[10];
	struct tp_value r[4];
	uint32_t n;
	size_t cap;
	enum tp_status st;
	uint8_t bytes[20];
	size_t len;
};

static const struct enc_row enc_rows[] = {
	/* LAYOUT.md's example: kind 2, station 258, seq 118, 16 min after
	 * 2000-01-01, 12480 mV; pH raw 1512 = 0x5E8 and temperature raw
	 * 741 = 0x2E5 -> 5E 82 E5; pH null = 0xFFF and raw -300 = 0xED4 ->
	 * FF FE D4. */
	{ "reef example", S_REEF,
	  { V(2), V(258), V(118), V(946685760), V(12.48) },
	  { V(8.012), V(27.41), NUL, V(17.0) }, 2, 64, TP_OK,
	  { 0x02, 0x01, 0x02, 0x00, 0x76, 0x00, 0x00, 0x00, 0x10, 0x30, 0xC0,
	    0x5E, 0x82, 0xE5, 0xFF, 0xFE, 0xD4 }, 17 },
	/* little bits: a = 0x5E8 fills byte 0 (E8) and the low nibble of
	 * byte 1 (5); b = 0x2E5 puts its low nibble 5 in the high nibble of
	 * byte 1 and 2E in byte 2. */
	{ "little 12-bit pair", S_PAIR_LITTLE, { V(0x5E8), V(0x2E5) }, { V(0) },
	  0, 8, TP_OK, { 0xE8, 0x55, 0x2E }, 3 },
	{ "u8 clamps high", S_U8, { V(300) }, { V(0) }, 0, 8, TP_OK,
	  { 0xFF }, 1 },
	{ "u8 clamps low", S_U8, { V(-5) }, { V(0) }, 0, 8, TP_OK,
	  { 0x00 }, 1 },
	{ "i8 clamps low", S_I8, { V(-200) }, { V(0) }, 0, 8, TP_OK,
	  { 0x80 }, 1 },
	/* 9 does not fit 4 signed bits: 7, in the top nibble (big). */
	{ "signed nibble clamps", S_NIB, { V(9) }, { V(0) }, 0, 8, TP_OK,
	  { 0x70 }, 1 },
	/* 1.25 / 0.5 = 2.5 rounds half away from zero to 3. */
	{ "round half away", S_HALF, { V(1.25) }, { V(0) }, 0, 8, TP_OK,
	  { 0x03 }, 1 },
	/* 5000 clamps to 4095, the missing code: it steps to 4094. */
	{ "clamp avoids missing", S_MISS, { V(5000) }, { V(0) }, 0, 8, TP_OK,
	  { 0xFF, 0xE0 }, 2 },
	/* exactly the missing code is not a value. */
	{ "value equals missing", S_MISS, { V(4095) }, { V(0) }, 0, 8,
	  TP_ERR_RANGE, { 0 }, 0 },
	{ "null becomes missing", S_MISS, { NUL }, { V(0) }, 0, 8, TP_OK,
	  { 0xFF, 0xF0 }, 2 },
	{ "null without missing", S_U8, { NUL }, { V(0) }, 0, 8, TP_ERR_RANGE,
	  { 0 }, 0 },
	/* a NaN value with flag 1 is null too. */
	{ "NaN is null", S_U8, { { NAN, 1 } }, { V(0) }, 0, 8, TP_ERR_RANGE,
	  { 0 }, 0 },
	/* a float field without missing stores a quiet NaN. */
	{ "f32 null is NaN", S_F32, { NUL }, { V(0) }, 0, 8, TP_OK,
	  { 0x7F, 0xC0, 0x00, 0x00 }, 4 },
	/* 0x3F800000 is binary32 1.0 [from memory]. */
	{ "f32 one", S_F32, { V(1.0) }, { V(0) }, 0, 8, TP_OK,
	  { 0x3F, 0x80, 0x00, 0x00 }, 4 },
	/* role values are never clamped. */
	{ "station too big", S_STATION, { V(70000) }, { V(0) }, 0, 8,
	  TP_ERR_RANGE, { 0 }, 0 },
	{ "station 258", S_STATION, { V(258) }, { V(0) }, 0, 8, TP_OK,
	  { 0x01, 0x02 }, 2 },
	{ "time before a u32 epoch", S_TIME, { V(999) }, { V(0) }, 0, 8,
	  TP_ERR_RANGE, { 0 }, 0 },
	{ "time 1000 + 0x0102", S_TIME, { V(1258) }, { V(0) }, 0, 8, TP_OK,
	  { 0, 0, 0x01, 0x02 }, 4 },
	{ "pad to length_min", S_PAD4, { V(7) }, { V(0) }, 0, 8, TP_OK,
	  { 7, 0, 0, 0 }, 4 },
	{ "buffer too small", S_PAD4, { V(7) }, { V(0) }, 0, 3, TP_ERR_SPACE,
	  { 0 }, 0 },
	/* the count field (2 bits) is set from n_records = 3: 11, then the
	 * records shifted by 2 bits: 0x41 0x42 0x43. */
	{ "count field written", S_COUNT2, { V(0) }, { V(0x41), V(0x42),
	  V(0x43) }, 3, 8, TP_OK, { 0xD0, 0x50, 0x90, 0xC0 }, 4 },
	{ "count field too narrow", S_COUNT2, { V(0) }, { V(1), V(2), V(3),
	  V(4) }, 4, 8, TP_ERR_RANGE, { 0 }, 0 },
	{ "fixed count mismatch", S_FIXED2, { V(0) }, { V(1) }, 1, 8,
	  TP_ERR_ARG, { 0 }, 0 },
	{ "fixed count", S_FIXED2, { V(9) }, { V(1), V(2) }, 2, 8, TP_OK,
	  { 9, 1, 2 }, 3 },
	/* CRC-16/IBM-3740 of "123456789" is 0x29B1 [RevEng catalogue]. */
	{ "CRC at -2 big", S_CRC_BIG, { DIG9 }, { V(0) }, 0, 16, TP_OK,
	  { D9, 0x29, 0xB1 }, 11 },
	{ "CRC at -2 little", S_CRC_LITTLE, { DIG9 }, { V(0) }, 0, 16, TP_OK,
	  { D9, 0xB1, 0x29 }, 11 },
	/* 0x31 + .. + 0x39 = 0x1DD. */
	{ "sum8 at -1", S_SUM8, { DIG9 }, { V(0) }, 0, 16, TP_OK,
	  { D9, 0xDD }, 10 },
	/* at 9, padded to 12: the pad byte follows the check. */
	{ "CRC at 9, padded", S_CRC_AT9_PAD, { DIG9 }, { V(0) }, 0, 16, TP_OK,
	  { D9, 0x29, 0xB1, 0x00 }, 12 },
	{ "CRC in a skip", S_CRC_IN_SKIP, { V(0), DIG9 }, { V(0) }, 0, 16,
	  TP_OK, { 0x29, 0xB1, D9 }, 11 },
};

static void encode_rows(void **state)
{
	const struct enc_row *r;
	struct tp_layout l;
	uint8_t out[64];
	enum tp_status st;
	size_t i, len, b;

	(void)state;
	for (i = 0; i < N_OF(enc_rows); i++) {
		r = &enc_rows[i];
		shape_layout(r->shape, &l);
		memset(out, 0xAA, sizeof out);
		st = tp_encode_packet(&l, r->h, r->r, r->n, out, r->cap, &len);
		if (st != r->st)
			fail_msg("%s: %s, want %s", r->why, tp_strerror(st),
			         tp_strerror(r->st));
		if (st != TP_OK)
			continue;
		if (len != r->len)
			fail_msg("%s: %zu bytes, want %zu", r->why, len,
			         r->len);
		for (b = 0; b < len; b++)
			if (out[b] != r->bytes[b])
				fail_msg("%s: byte %zu is %02X, want %02X",
				         r->why, b, out[b], r->bytes[b]);
	}
}

/* ---- the property test ----------------------------------------------- */

#define MAX_H 12
#define MAX_R 8
#define MAX_K 6

enum want { W_SKIP, W_NULL, W_INT, W_F32, W_F64, W_EXACT, W_COUNT };

struct expect {
	enum want w;
	double v;               /* the value given to the encoder */
	double tol;
	bool wide;              /* |raw| > 2^40: not exact in re-encoding */
};

struct rcase {
	struct tp_field h[MAX_H], r[MAX_R];
	struct tp_layout l;
	struct tp_value hv[MAX_H], rv[MAX_R * MAX_K];
	struct expect he[MAX_H], re[MAX_R * MAX_K];
	uint32_t n_records;
	bool has_time;
	int offset_field;       /* record field with time_offset, or -1 */
	bool wide;              /* some expect.wide is set */
};

struct rng {
	uint64_t s;
};

/* splitmix64 (Steele, Lea & Flood 2014; constants from the paper's
 * public reference implementation [from memory]). */
static uint64_t next(struct rng *g)
{
	uint64_t z = (g->s += UINT64_C(0x9E3779B97F4A7C15));

	z = (z ^ (z >> 30)) * UINT64_C(0xBF58476D1CE4E5B9);
	z = (z ^ (z >> 27)) * UINT64_C(0x94D049BB133111EB);
	return z ^ (z >> 31);
}

static uint64_t below(struct rng *g, uint64_t n)
{
	return n ? next(g) % n : 0;
}

static double uniform(struct rng *g)
{
	return (double)(next(g) >> 11) * 0x1p-53;
}

static uint64_t mask(uint32_t n)
{
	return n >= 64 ? UINT64_MAX : ((uint64_t)1 << n) - 1;
}

static bool sgn(const struct tp_field *f)
{
	return f->is_signed || f->type == TP_T_I8 || f->type == TP_T_I16 ||
	       f->type == TP_T_I24 || f->type == TP_T_I32 ||
	       f->type == TP_T_I64;
}

static bool is_f(const struct tp_field *f)
{
	return f->type == TP_T_F32 || f->type == TP_T_F64;
}

/* The test's own two's complement reading of an n-bit pattern. */
static double raw_value(const struct tp_field *f, uint64_t raw)
{
	uint64_t top = (uint64_t)1 << (f->bits - 1);

	raw &= mask(f->bits);
	if (!sgn(f) || !(raw & top))
		return (double)raw;
	return -(double)((~raw & mask(f->bits)) + 1);
}

static const enum tp_type int_types[] = {
	TP_T_U8, TP_T_I8, TP_T_U16, TP_T_I16, TP_T_U24, TP_T_I24, TP_T_U32,
	TP_T_I32, TP_T_U64, TP_T_I64 };
static const uint32_t int_bits[] = { 8, 8, 16, 16, 24, 24, 32, 32, 64, 64 };
static const double scales[] = { 0, 1, 0.001, 0.01, 0.1, 0.5, 2, -0.25,
                                 1e-6, 10, 0.0625 };
static const double offsets[] = { 0, 0, 6.5, -20, 1000.25, 0.125 };
static const double pow2_scales[] = { 0, 1, 0.5, 2, 0.25 };

static void int_field(struct rng *g, struct tp_field *f)
{
	size_t t;

	if (below(g, 2)) {
		f->type = TP_T_BITS;
		f->bits = 1 + (uint32_t)below(g, 64);
		f->is_signed = below(g, 2);
	} else {
		t = (size_t)below(g, N_OF(int_types));
		f->type = int_types[t];
		f->bits = int_bits[t];
	}
	f->scale = scales[below(g, N_OF(scales))];
	if (below(g, 4) == 0)
		f->scale = (0.5 + uniform(g)) *
		           pow(10, (double)below(g, 5) - 3);
	f->offset = offsets[below(g, N_OF(offsets))];
	if (below(g, 3) == 0) {
		f->has_missing = true;
		/* wide fields keep missing at all-ones, away from the
		 * float rounding of huge raws (see value_of_raw). */
		f->missing = f->bits > 40 ? mask(f->bits) :
		             next(g) & mask(f->bits);
	}
}

static void float_field(struct rng *g, struct tp_field *f)
{
	float m = -9999.0f;
	uint32_t u;

	f->type = below(g, 2) ? TP_T_F32 : TP_T_F64;
	f->bits = f->type == TP_T_F32 ? 32 : 64;
	f->scale = pow2_scales[below(g, N_OF(pow2_scales))];
	if (below(g, 3) == 0) {
		f->has_missing = true;
		memcpy(&u, &m, sizeof u);
		f->missing = f->type == TP_T_F32 ? u : mask(64);
	}
}

/* A value field: integer, float or (1 in 10) a skip entry. */
static void value_field(struct rng *g, struct tp_field *f, const char *name)
{
	double span;

	memset(f, 0, sizeof *f);
	f->name = name;
	if (below(g, 10) == 0) {
		f->type = TP_T_SKIP;
		f->bits = 1 + (uint32_t)below(g, 40);
		f->name = NULL;
		return;
	}
	if (below(g, 5) == 0)
		float_field(g, f);
	else
		int_field(g, f);
	if (below(g, 3) == 0) {
		span = is_f(f) ? 1e6 : ldexp(fabs(f->scale ? f->scale : 1),
		                              (int)f->bits);
		f->has_range = true;
		f->range_min = f->offset - span * uniform(g) * 0.5;
		f->range_max = f->offset + span * uniform(g) * 0.5;
	}
}

static const enum tp_type station_types[] = { TP_T_U8, TP_T_U16, TP_T_U32,
                                              TP_T_BITS };
static const enum tp_type seq_types[] = { TP_T_U16, TP_T_U32, TP_T_U64,
                                          TP_T_BITS };

static uint32_t width_of(struct rng *g, enum tp_type t, uint32_t max_bits)
{
	switch (t) {
	case TP_T_U8: return 8;
	case TP_T_U16: return 16;
	case TP_T_U32: return 32;
	case TP_T_U64: return 64;
	default: return 1 + (uint32_t)below(g, max_bits);
	}
}

/* Station and seq roles: unsigned, values exact in a double. */
static void id_field(struct rng *g, struct tp_field *f, enum tp_role role,
                     struct tp_value *v, struct expect *e)
{
	memset(f, 0, sizeof *f);
	f->role = role;
	if (role == TP_ROLE_STATION) {
		f->name = "station";
		f->type = station_types[below(g, N_OF(station_types))];
		f->bits = width_of(g, f->type, 32);
	} else {
		f->name = "seq";
		f->type = seq_types[below(g, N_OF(seq_types))];
		f->bits = width_of(g, f->type, 64);
	}
	e->w = W_EXACT;
	e->v = (double)(next(g) & mask(f->bits) & mask(53));
	*v = (struct tp_value){ e->v, TP_FLAG_PASS };
}

/* A time role: four shapes of epoch, unit and width. */
static void time_field(struct rng *g, struct tp_field *f, struct tp_value *v,
                       struct expect *e)
{
	int64_t raw;

	memset(f, 0, sizeof *f);
	f->name = "time";
	f->role = TP_ROLE_TIME;
	switch (below(g, 4)) {
	case 0:
		f->type = TP_T_U32;
		f->bits = 32;
		raw = (int64_t)(next(g) & mask(32));
		break;
	case 1:
		/* minutes since 2000-01-01T00:00:00Z (946684800). */
		f->type = TP_T_U32;
		f->bits = 32;
		f->epoch_s = 946684800;
		f->time_unit_s = 60;
		raw = (int64_t)(next(g) & mask(32));
		break;
	case 2:
		f->type = TP_T_BITS;
		f->bits = 40;
		f->is_signed = true;
		f->epoch_s = 1700000000;
		raw = (int64_t)raw_value(f, next(g));
		break;
	default:
		f->type = TP_T_I64;
		f->bits = 64;
		f->time_unit_s = 60;
		raw = (int64_t)(next(g) & mask(40)) - ((int64_t)1 << 39);
	}
	e->w = W_EXACT;
	e->v = (double)(f->epoch_s + raw * (f->time_unit_s ? 60 : 1));
	*v = (struct tp_value){ e->v, TP_FLAG_PASS };
}

static void offset_field(struct rng *g, struct tp_field *f)
{
	memset(f, 0, sizeof *f);
	f->name = "offset";
	f->role = TP_ROLE_TIME_OFFSET;
	f->type = TP_T_BITS;
	f->bits = 4 + (uint32_t)below(g, 13);
	f->is_signed = below(g, 2);
	f->time_unit_s = below(g, 2) ? 60 : 1;
}

static void offset_value(struct rng *g, const struct tp_field *f,
                         struct tp_value *v, struct expect *e)
{
	e->w = W_EXACT;
	e->v = raw_value(f, next(g)) * f->time_unit_s;
	*v = (struct tp_value){ e->v, TP_FLAG_PASS };
}

/* A raw pattern of an integer field that is not its missing code. */
static uint64_t some_raw(struct rng *g, const struct tp_field *f)
{
	uint64_t m = mask(f->bits), raw = 0;
	int tries;

	for (tries = 0; tries < 32; tries++) {
		switch (below(g, 6)) {
		case 0: raw = 0; break;
		case 1: raw = m; break;
		case 2: raw = sgn(f) ? (uint64_t)1 << (f->bits - 1) : 1 & m;
			break;
		case 3: raw = sgn(f) ? m >> 1 : m - 1; break;
		default: raw = next(g) & (m >> below(g, f->bits)); break;
		}
		/* Unsigned wide fields keep their missing code (all ones)
		 * out of reach of double rounding: stay 2^(bits-38) below
		 * it. */
		if (f->has_missing && f->bits > 40 && !sgn(f) &&
		    raw > m - (m >> 38))
			raw = m >> 1;
		if (!f->has_missing || ((raw ^ f->missing) & m) != 0)
			return raw;
	}
	return (raw ^ 1) & m;
}

/* A float value: exact (f64 always; f32 half the time) or needing f32
 * rounding; *tol is the allowed error. */
static double float_value(struct rng *g, const struct tp_field *f,
                          double *tol)
{
	double sc = f->scale ? f->scale : 1, v;
	float x;

	*tol = 0;
	if (f->type == TP_T_F64) {
		v = ldexp((double)(next(g) >> 11), (int)below(g, 600) - 353);
		if (below(g, 8) == 0)
			v = 0;
	} else if (below(g, 2)) {
		x = (float)ldexp((double)(next(g) >> 40),
		                 (int)below(g, 160) - 104);
		v = (double)x * sc;
	} else {
		v = ldexp(0.5 + uniform(g), (int)below(g, 160) - 80) * sc;
		*tol = fabs(v) * 0x1p-24;
	}
	return below(g, 2) ? -v : v;
}

/* A value for a value field, and what must come back. */
static void some_value(struct rng *g, const struct tp_field *f,
                       struct tp_value *v, struct expect *e)
{
	double sc = f->scale ? f->scale : 1;

	if (f->type == TP_T_SKIP) {
		e->w = W_SKIP;
		*v = (struct tp_value){ NAN, TP_FLAG_NOT_EVALUATED };
		return;
	}
	if ((f->has_missing || is_f(f)) && below(g, 7) == 0) {
		e->w = W_NULL;
		*v = (struct tp_value){ NAN, TP_FLAG_MISSING };
		return;
	}
	if (is_f(f)) {
		e->w = f->type == TP_T_F32 ? W_F32 : W_F64;
		e->v = float_value(g, f, &e->tol);
	} else {
		e->w = W_INT;
		e->v = raw_value(f, some_raw(g, f));
		e->wide = fabs(e->v) > 0x1p40;
		e->v = e->v * sc + f->offset + (uniform(g) - 0.5) * 0.9 * sc;
		e->tol = 0.5 * fabs(sc) * (1 + 1e-9) +
		         16 * DBL_EPSILON * (fabs(e->v) + fabs(f->offset));
	}
	*v = (struct tp_value){ e->v, TP_FLAG_PASS };
}

static const char *const crc_names[] = {
	"CRC-8/SMBUS", "CRC-12/UMTS", "CRC-16/IBM-3740", "CRC-16/KERMIT",
	"CRC-24/OPENPGP", "CRC-32/ISO-HDLC", "CRC-32/ISCSI" };

/* None, sum8, xor8 or a CRC; at the end (maybe with a byte after it and
 * a cover skipping byte 0) or, for fixed layouts, after the fields. */
static void choose_check(struct rng *g, struct rcase *c)
{
	struct tp_check *k = &c->l.check;
	bool fixed = !c->l.has_records || c->l.records.count_field < 0;
	uint64_t bits;
	size_t nb = 1;

	switch (below(g, 6)) {
	case 0:
	case 1:
		return;
	case 2:
		k->kind = TP_CHECK_SUM8;
		break;
	case 3:
		k->kind = TP_CHECK_XOR8;
		break;
	default:
		k->kind = TP_CHECK_CRC;
		assert_int_equal(tp_crc_init(&k->crc, tp_crc_find(
		        crc_names[below(g, N_OF(crc_names))])), TP_OK);
		nb = (k->crc.p.width + 7u) / 8u;
	}
	k->order = below(g, 2) ? TP_ORDER_LITTLE : TP_ORDER_BIG;
	if (fixed && below(g, 3) == 0) {
		bits = tp_layout_header_bits(&c->l) + (c->l.has_records ?
		       c->l.records.count * tp_layout_record_bits(&c->l) : 0);
		k->at = (int32_t)((bits + 7) / 8 + below(g, 3));
		return;
	}
	k->at = -(int32_t)(nb + below(g, 2));
	if (below(g, 3) == 0) {
		k->has_covers = true;
		k->covers_from = 1;
		k->covers_to = k->at;
	}
}

static void swap_header(struct rcase *c, size_t a, size_t b)
{
	struct tp_field f = c->h[a];
	struct tp_value v = c->hv[a];
	struct expect e = c->he[a];

	c->h[a] = c->h[b];
	c->hv[a] = c->hv[b];
	c->he[a] = c->he[b];
	c->h[b] = f;
	c->hv[b] = v;
	c->he[b] = e;
	if (c->l.records.count_field == (int)a)
		c->l.records.count_field = (int)b;
	else if (c->l.records.count_field == (int)b)
		c->l.records.count_field = (int)a;
}

static void gen_records(struct rng *g, struct rcase *c)
{
	struct tp_records *rs = &c->l.records;
	size_t nr = 1 + (size_t)below(g, MAX_R - 2), j, k;

	c->l.has_records = true;
	rs->fields = c->r;
	rs->n_fields = nr;
	rs->every_s = (uint32_t)below(g, 3600);
	if (below(g, 3) == 0)
		c->offset_field = (int)below(g, nr);
	for (j = 0; j < nr; j++)
		if ((int)j == c->offset_field)
			offset_field(g, &c->r[j]);
		else
			value_field(g, &c->r[j], "r");
	for (k = 0; k < c->n_records; k++)
		for (j = 0; j < nr; j++) {
			if ((int)j == c->offset_field)
				offset_value(g, &c->r[j], &c->rv[k * nr + j],
				             &c->re[k * nr + j]);
			else
				some_value(g, &c->r[j], &c->rv[k * nr + j],
				           &c->re[k * nr + j]);
		}
}

/* A count field (u8 or 3..8 bits) and a record count it can hold. */
static void gen_count(struct rng *g, struct rcase *c, size_t at)
{
	struct tp_field *f = &c->h[at];
	uint64_t most;

	memset(f, 0, sizeof *f);
	f->name = "count";
	f->type = below(g, 2) ? TP_T_U8 : TP_T_BITS;
	f->bits = f->type == TP_T_U8 ? 8 : 3 + (uint32_t)below(g, 6);
	most = mask(f->bits) < MAX_K ? mask(f->bits) : MAX_K;
	c->n_records = (uint32_t)below(g, most + 1);
	c->l.records.count_field = (int)at;
	c->he[at].w = W_COUNT;
	c->hv[at] = (struct tp_value){ 12345, TP_FLAG_PASS }; /* ignored */
}

static void gen_case(struct rng *g, struct rcase *c)
{
	size_t nh = 0, i, nv = (size_t)below(g, 7);

	memset(c, 0, sizeof *c);
	c->offset_field = -1;
	c->l.name = "random";
	c->l.order = below(g, 2) ? TP_ORDER_LITTLE : TP_ORDER_BIG;
	c->l.records.count_field = -1;
	for (i = 0; i < nv; i++, nh++) {
		value_field(g, &c->h[nh], "h");
		some_value(g, &c->h[nh], &c->hv[nh], &c->he[nh]);
	}
	if (below(g, 5) < 2) {
		id_field(g, &c->h[nh], TP_ROLE_STATION, &c->hv[nh], &c->he[nh]);
		nh++;
	}
	if (below(g, 5) < 2) {
		id_field(g, &c->h[nh], TP_ROLE_SEQ, &c->hv[nh], &c->he[nh]);
		nh++;
	}
	c->has_time = below(g, 2);
	if (c->has_time) {
		time_field(g, &c->h[nh], &c->hv[nh], &c->he[nh]);
		nh++;
	}
	if (below(g, 5) < 3 || nh == 0) {
		if (below(g, 2))
			gen_count(g, c, nh++);
		else /* at least one record when there is no header */
			c->n_records = c->l.records.count = (nh == 0) +
			        (uint32_t)below(g, MAX_K - 1 - (nh == 0));
		gen_records(g, c);
	}
	for (i = nh; i > 1; i--)
		swap_header(c, i - 1, (size_t)below(g, i));
	c->l.fields = c->h;
	c->l.n_fields = nh;
	choose_check(g, c);
	if (below(g, 4) == 0)
		c->l.length_min = (uint32_t)below(g, 40);
	for (i = 0; i < nh; i++)
		c->wide |= c->he[i].wide;
	for (i = 0; i < c->n_records * c->l.records.n_fields; i++)
		c->wide |= c->re[i].wide;
}

/* What the random cases covered: each must be seen at least once. */
struct coverage {
	unsigned little, count_field, fixed_records, offsets, crc, sum8, xor8,
	         check_after, covers, padded, f32, f64, wide, nulls, fails,
	         skips, records_0, station, seq, time;
};

static struct coverage seen;
static uint64_t g_seed;
static int g_case;
static const struct rcase *g_current;

static void dump_case(const struct rcase *c);

static void compare(const struct tp_field *f, const struct expect *e,
                    struct tp_value got, uint32_t n_records,
                    const char *what, size_t slot)
{
	bool bad = false, out, in;

	seen.f32 += e->w == W_F32;
	seen.f64 += e->w == W_F64;
	seen.nulls += e->w == W_NULL;
	seen.skips += e->w == W_SKIP;
	seen.fails += got.flag == TP_FLAG_FAIL;
	switch (e->w) {
	case W_SKIP:
		bad = got.flag != TP_FLAG_NOT_EVALUATED || !isnan(got.v);
		break;
	case W_NULL:
		bad = got.flag != TP_FLAG_MISSING || !isnan(got.v);
		break;
	case W_EXACT:
		bad = got.flag != TP_FLAG_PASS || got.v != e->v;
		break;
	case W_COUNT:
		bad = got.flag != TP_FLAG_PASS || got.v != n_records;
		break;
	default:
		bad = !(fabs(got.v - e->v) <= e->tol);
		out = f->has_range && (e->v < f->range_min - e->tol ||
		                       e->v > f->range_max + e->tol);
		in = !f->has_range || (e->v >= f->range_min + e->tol &&
		                       e->v <= f->range_max - e->tol);
		if ((out && got.flag != TP_FLAG_FAIL) ||
		    (in && got.flag != TP_FLAG_PASS) ||
		    (got.flag != TP_FLAG_PASS && got.flag != TP_FLAG_FAIL))
			bad = true;
	}
	if (bad)
		dump_case(g_current);
	if (bad)
		fail_msg("seed %llu case %d: %s slot %zu (type %d, %u bits, "
		         "scale %g, offset %g): got %.17g flag %d, want %.17g "
		         "(kind %d, tol %g)", (unsigned long long)g_seed,
		         g_case, what, slot, f->type, f->bits, f->scale,
		         f->offset, got.v, got.flag, e->v, e->w, e->tol);
}

/* Compare reading k with what went in. */
static void check_reading(const struct rcase *c, const struct tp_packet *pk,
                          uint32_t k, struct tp_reading *rd)
{
	size_t nh = c->l.n_fields, nr = c->l.records.n_fields, i;
	int64_t want_t = pk->time_s + (int64_t)k * c->l.records.every_s;

	assert_int_equal(tp_decode_record(pk, k, rd), TP_OK);
	assert_int_equal(rd->n_values, nh + (c->l.has_records ? nr : 0));
	for (i = 0; i < nh; i++)
		compare(&c->h[i], &c->he[i], rd->values[i], c->n_records,
		        "header", i);
	for (i = 0; c->l.has_records && i < nr; i++)
		compare(&c->r[i], &c->re[k * nr + i], rd->values[nh + i],
		        c->n_records, "record", i);
	if (c->offset_field >= 0)
		want_t = pk->time_s +
		         (int64_t)c->re[k * nr + (size_t)c->offset_field].v;
	if (rd->time_s != want_t)
		fail_msg("seed %llu case %d: record %u time %lld, want %lld",
		         (unsigned long long)g_seed, g_case, k,
		         (long long)rd->time_s, (long long)want_t);
}

/* encode(decode(p)) == p when no integer is too wide for exact doubles. */
static void check_reencode(const struct rcase *c, const struct tp_packet *pk,
                           const uint8_t *p, size_t len)
{
	static struct tp_value rv[MAX_R * MAX_K];
	static struct tp_reading rd;
	static uint8_t again[TP_MAX_PACKET];
	size_t nh = c->l.n_fields, nr = c->l.records.n_fields, j, len2;
	uint32_t k;

	for (k = 0; c->l.has_records && k < pk->n_records; k++) {
		assert_int_equal(tp_decode_record(pk, k, &rd), TP_OK);
		for (j = 0; j < nr; j++)
			rv[k * nr + j] = rd.values[nh + j];
	}
	assert_int_equal(tp_encode_packet(&c->l, pk->header, rv,
	                                  c->n_records, again, sizeof again,
	                                  &len2), TP_OK);
	if (len2 != len || memcmp(again, p, len) != 0)
		dump_case(c);
	if (len2 != len || memcmp(again, p, len) != 0)
		fail_msg("seed %llu case %d: re-encoding differs",
		         (unsigned long long)g_seed, g_case);
}

static void count_case(const struct rcase *c)
{
	const struct tp_layout *l = &c->l;
	size_t i;

	seen.little += l->order == TP_ORDER_LITTLE;
	seen.count_field += l->has_records && l->records.count_field >= 0;
	seen.fixed_records += l->has_records && l->records.count_field < 0;
	seen.records_0 += l->has_records && c->n_records == 0;
	seen.offsets += c->offset_field >= 0;
	seen.crc += l->check.kind == TP_CHECK_CRC;
	seen.sum8 += l->check.kind == TP_CHECK_SUM8;
	seen.xor8 += l->check.kind == TP_CHECK_XOR8;
	seen.check_after += l->check.kind != TP_CHECK_NONE && l->check.at >= 0;
	seen.covers += l->check.kind != TP_CHECK_NONE && l->check.has_covers;
	seen.padded += l->length_min > 0;
	seen.wide += c->wide;
	for (i = 0; i < l->n_fields; i++) {
		seen.station += l->fields[i].role == TP_ROLE_STATION;
		seen.seq += l->fields[i].role == TP_ROLE_SEQ;
		seen.time += l->fields[i].role == TP_ROLE_TIME;
	}
}

/* Print a failing case so it can be read without a debugger. */
static void dump_case(const struct rcase *c)
{
	const struct tp_field *f;
	size_t i, nh = c->l.n_fields, nr = c->l.records.n_fields;

	print_message("layout: order %d, check %d at %d, length_min %u, "
	              "records %d x %u (count field %d)\n", c->l.order,
	              c->l.check.kind, c->l.check.at, c->l.length_min,
	              c->l.has_records, c->n_records,
	              c->l.records.count_field);
	for (i = 0; i < nh + (c->l.has_records ? nr : 0); i++) {
		f = tp_layout_field(&c->l, i);
		print_message("  field %zu: type %d bits %u signed %d role %d "
		              "scale %g offset %g missing %d/%llx\n", i,
		              f->type, f->bits, f->is_signed, f->role,
		              f->scale, f->offset, f->has_missing,
		              (unsigned long long)f->missing);
	}
	for (i = 0; i < nh; i++)
		print_message("  header %zu: %.17g flag %d\n", i, c->hv[i].v,
		              c->hv[i].flag);
	for (i = 0; c->l.has_records && i < c->n_records * nr; i++)
		print_message("  record %zu field %zu: %.17g flag %d\n",
		              i / nr, i % nr, c->rv[i].v, c->rv[i].flag);
}

static void run_case(uint64_t seed, int n)
{
	static struct rcase c;
	static struct tp_packet pk;
	static struct tp_reading rd;
	static uint8_t out[TP_MAX_PACKET];
	struct rng g = { seed ^ ((uint64_t)n * UINT64_C(0xD1B54A32D192ED03)) };
	struct tp_layout_problem pb = { 0, 0, NULL };
	enum tp_status st;
	uint32_t k;
	size_t len;

	g_case = n;
	g_current = &c;
	gen_case(&g, &c);
	count_case(&c);
	if (tp_layout_validate(&c.l, &pb) != TP_OK)
		fail_msg("seed %llu case %d: layout refused: %d/%d %s",
		         (unsigned long long)seed, n, pb.group, pb.index,
		         pb.what);
	st = tp_encode_packet(&c.l, c.hv, c.rv, c.n_records, out, sizeof out,
	                      &len);
	if (st != TP_OK)
		dump_case(&c);
	if (st != TP_OK)
		fail_msg("seed %llu case %d: encode: %s",
		         (unsigned long long)seed, n, tp_strerror(st));
	st = tp_decode_packet(&c.l, out, len, &pk);
	if (st != TP_OK)
		dump_case(&c);
	if (st != TP_OK)
		fail_msg("seed %llu case %d: decode: %s",
		         (unsigned long long)seed, n, tp_strerror(st));
	assert_int_equal(pk.has_time, c.has_time);
	if (!c.has_time)
		pk.time_s = 1234567890;
	assert_int_equal(pk.n_records, c.l.has_records ? c.n_records : 1);
	for (k = 0; k < pk.n_records; k++)
		check_reading(&c, &pk, k, &rd);
	if (!c.wide)
		check_reencode(&c, &pk, out, len);
}

static void property_roundtrip(void **state)
{
	const char *env = getenv("TP_SEED");
	int n;

	(void)state;
	g_seed = env && *env ? strtoull(env, NULL, 0) : UINT64_C(20261130);
	printf("roundtrip: seed %llu (set TP_SEED to override)\n",
	       (unsigned long long)g_seed);
	memset(&seen, 0, sizeof seen);
	for (n = 0; n < 6000; n++)
		run_case(g_seed, n);
	printf("roundtrip: 6000 cases: %u little, %u count field, %u fixed, "
	       "%u empty, %u time_offset, %u crc, %u sum8, %u xor8, "
	       "%u check after fields, %u covers, %u padded, %u wide, "
	       "%u f32, %u f64, %u nulls, %u flag 4, %u skips\n",
	       seen.little, seen.count_field, seen.fixed_records,
	       seen.records_0, seen.offsets, seen.crc, seen.sum8, seen.xor8,
	       seen.check_after, seen.covers, seen.padded, seen.wide,
	       seen.f32, seen.f64, seen.nulls, seen.fails, seen.skips);
	assert_true(seen.little && seen.count_field && seen.fixed_records &&
	            seen.records_0 && seen.offsets && seen.crc && seen.sum8 &&
	            seen.xor8 && seen.check_after && seen.covers &&
	            seen.padded && seen.wide && seen.f32 && seen.f64 &&
	            seen.nulls && seen.fails && seen.skips && seen.station &&
	            seen.seq && seen.time);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(encode_rows),
		cmocka_unit_test(property_roundtrip),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
