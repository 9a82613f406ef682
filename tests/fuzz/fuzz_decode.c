/*
 * fuzz_decode.c - fuzz target for layout decoding and encoding
 * (decoder/layout.c, decoder/check.c).
 *
 * Four layouts are built statically here, the way station firmware would:
 *   0 "demo"   big-endian, like demo/layouts/quillet-v1.json: 13-byte
 *              header, 4 fixed records of bit fields (12/12s/17/12),
 *              length 42, CRC-16/IBM-3740 at -2;
 *   1 "count"  little-endian, a u8 count field, time in minutes since
 *              2000, records with a time_offset, signed and skipped bits,
 *              CRC-32/ISCSI at -4 stored little-endian;
 *   2 "wide"   big-endian, no records: f32, f64, u24, i24, i64, u64,
 *              (times stay u32: a double cannot carry every int64)
 *              1-bit and 7-bit fields, sum8 check at -1;
 *   3 "bare"   little-endian, no check and no time field (the caller
 *              supplies the time), 3 fixed records of 11- and 13-bit
 *              fields crossing byte edges, an xor8 at -1 covering
 *              [1, -1).
 * Input byte 0: bits 0-1 pick the layout, bit 2 asks the harness to fix
 * up the length and check value so decoding goes deep; the rest is the
 * packet.  Every input also goes through tp_layout_select.
 *
 * Properties: nothing crashes; decoded flags are QARTOD codes, NaN iff
 * flag 9 (for value fields); every record decodes; what decoded encodes
 * back (tp_encode_packet) and decodes again to the same number of records
 * and the same values within scale/2 (LAYOUT.md, Encoding).
 */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "tidepost/check.h"
#include "tidepost/layout.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

#define N_LAYOUTS 4
#define EPOCH_2000 946684800 /* 2000-01-01T00:00:00Z as Unix seconds */

static const struct tp_match demo_match[] = {
	{ .at = 0, .type = TP_T_U8, .is = 3 },
};
static const struct tp_field demo_head[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "seq", .type = TP_T_U16, .bits = 16, .role = TP_ROLE_SEQ },
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME },
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.001,
	  .has_range = true, .range_min = 0, .range_max = 16, .unit = "V" },
	{ .name = "logger_temp", .type = TP_T_I8, .bits = 8,
	  .is_signed = true, .unit = "degC" },
	{ .name = "logger_rh", .type = TP_T_U8, .bits = 8, .unit = "%" },
};
static const struct tp_field demo_rec[] = {
	{ .name = "ph", .type = TP_T_BITS, .bits = 12, .scale = 0.001,
	  .offset = 6.5, .has_missing = true, .missing = 4095,
	  .has_range = true, .range_min = 6.5, .range_max = 9.0 },
	{ .name = "temperature", .type = TP_T_BITS, .bits = 12,
	  .is_signed = true, .scale = 0.01, .offset = 20,
	  .has_missing = true, .missing = 2047, .has_range = true,
	  .range_min = -2, .range_max = 40 },
	{ .name = "conductivity", .type = TP_T_BITS, .bits = 17,
	  .scale = 0.001, .has_missing = true, .missing = 131071 },
	{ .name = "oxygen", .type = TP_T_BITS, .bits = 12, .scale = 0.1,
	  .has_missing = true, .missing = 4095 },
};

static const struct tp_match count_match[] = {
	{ .at = 0, .type = TP_T_U8, .is = 0x42 },
	{ .at = 1, .type = TP_T_U16, .is = 7 },
};
static const struct tp_field count_head[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "seq", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_SEQ },
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME,
	  .epoch_s = EPOCH_2000, .time_unit_s = 60 },
	{ .name = "n", .type = TP_T_U8, .bits = 8 },
	{ .name = "battery", .type = TP_T_I16, .bits = 16, .is_signed = true,
	  .scale = 0.01, .has_range = true, .range_min = 0,
	  .range_max = 20 },
};
static const struct tp_field count_rec[] = {
	{ .name = "dt", .type = TP_T_BITS, .bits = 10,
	  .role = TP_ROLE_TIME_OFFSET, .time_unit_s = 60 },
	{ .name = "temperature", .type = TP_T_BITS, .bits = 13,
	  .is_signed = true, .scale = 0.005, .offset = 15,
	  .has_missing = true, .missing = 0x1000 },
	{ .name = "conductivity", .type = TP_T_U16, .bits = 16,
	  .scale = 0.002 },
	{ .type = TP_T_SKIP, .bits = 3 },
	{ .name = "oxygen", .type = TP_T_BITS, .bits = 10, .scale = 0.5,
	  .has_missing = true, .missing = 1023, .has_range = true,
	  .range_min = 0, .range_max = 450 },
	{ .name = "ph", .type = TP_T_BITS, .bits = 14, .scale = 0.0002,
	  .offset = 7 },
};

static const struct tp_field wide_head[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U8, .bits = 8,
	  .role = TP_ROLE_STATION },
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME },
	{ .name = "pressure", .type = TP_T_F32, .bits = 32, .has_range = true,
	  .range_min = 0, .range_max = 100 },
	{ .name = "depth", .type = TP_T_F64, .bits = 64 },
	{ .name = "counts", .type = TP_T_U24, .bits = 24 },
	{ .name = "tilt", .type = TP_T_I24, .bits = 24, .is_signed = true,
	  .scale = 0.001 },
	{ .name = "big", .type = TP_T_U64, .bits = 64 },
	{ .name = "delta", .type = TP_T_I64, .bits = 64, .is_signed = true,
	  .scale = 0.5, .offset = -3 },
	{ .name = "wet", .type = TP_T_BITS, .bits = 1 },
	{ .name = "mode", .type = TP_T_BITS, .bits = 7, .has_missing = true,
	  .missing = 127 },
};

static const struct tp_field bare_head[] = {
	{ .name = "station", .type = TP_T_U8, .bits = 8,
	  .role = TP_ROLE_STATION },
	{ .name = "battery", .type = TP_T_U8, .bits = 8, .scale = 0.1 },
};
static const struct tp_field bare_rec[] = {
	{ .name = "a", .type = TP_T_BITS, .bits = 11, .scale = 0.25 },
	{ .name = "b", .type = TP_T_BITS, .bits = 13, .is_signed = true,
	  .has_missing = true, .missing = 0x1000 },
	{ .name = "c", .type = TP_T_BITS, .bits = 5 },
};

static struct tp_layout layouts[N_LAYOUTS] = {
	{ .name = "demo", .order = TP_ORDER_BIG, .match = demo_match,
	  .n_match = 1, .length_min = 42, .length_max = 42,
	  .check = { .kind = TP_CHECK_CRC, .at = -2,
	             .order = TP_ORDER_BIG },
	  .fields = demo_head, .n_fields = 7, .has_records = true,
	  .records = { .fields = demo_rec, .n_fields = 4, .count = 4,
	               .count_field = -1, .every_s = 900 } },
	{ .name = "count", .order = TP_ORDER_LITTLE, .match = count_match,
	  .n_match = 2,
	  .check = { .kind = TP_CHECK_CRC, .at = -4,
	             .order = TP_ORDER_LITTLE },
	  .fields = count_head, .n_fields = 6, .has_records = true,
	  .records = { .fields = count_rec, .n_fields = 6,
	               .count_field = 4, .every_s = 600 } },
	{ .name = "wide", .order = TP_ORDER_BIG,
	  .check = { .kind = TP_CHECK_SUM8, .at = -1 },
	  .fields = wide_head, .n_fields = 11 },
	{ .name = "bare", .order = TP_ORDER_LITTLE,
	  .check = { .kind = TP_CHECK_XOR8, .at = -1, .has_covers = true,
	             .covers_from = 1, .covers_to = -1 },
	  .fields = bare_head, .n_fields = 2, .has_records = true,
	  .records = { .fields = bare_rec, .n_fields = 3, .count = 3,
	               .count_field = -1, .every_s = 300 } },
};

static void setup(void)
{
	static int ready;
	struct tp_layout_problem pb;
	size_t i;

	if (ready)
		return;
	if (tp_crc_init(&layouts[0].check.crc,
	                tp_crc_find("CRC-16/IBM-3740")) != TP_OK ||
	    tp_crc_init(&layouts[1].check.crc,
	                tp_crc_find("CRC-32/ISCSI")) != TP_OK)
		abort();
	for (i = 0; i < N_LAYOUTS; i++)
		if (tp_layout_validate(&layouts[i], &pb) != TP_OK)
			abort(); /* a harness bug, not a finding */
	ready = 1;
}

static size_t resolve(int32_t at, size_t len)
{
	return at >= 0 ? (size_t)at : len - (size_t)(-(int64_t)at);
}

static size_t check_bytes(const struct tp_check *c)
{
	return c->kind == TP_CHECK_CRC ? (size_t)c->crc.p.width / 8 : 1;
}

/* Put a valid check value into p (len bytes), as a station would. */
static void fix_check(const struct tp_layout *l, uint8_t *p, size_t len)
{
	const struct tp_check *c = &l->check;
	size_t at, from = 0, to, n = check_bytes(c), i;
	uint32_t v;

	if (c->kind == TP_CHECK_NONE || len < n + 2)
		return;
	at = resolve(c->at, len);
	to = at;
	if (c->has_covers) {
		from = resolve(c->covers_from, len);
		to = resolve(c->covers_to, len);
	}
	if (from > to || to > len)
		return;
	if (c->kind == TP_CHECK_CRC)
		v = tp_crc_compute(&c->crc, p + from, to - from);
	else if (c->kind == TP_CHECK_SUM8)
		v = tp_sum8(p + from, to - from);
	else
		v = tp_xor8(p + from, to - from);
	for (i = 0; i < n; i++) {
		size_t sh = c->order == TP_ORDER_BIG ? n - 1 - i : i;

		p[at + i] = (uint8_t)(v >> (8 * sh));
	}
}

static int is_value(const struct tp_field *f)
{
	return f->type != TP_T_SKIP && f->role == TP_ROLE_VALUE;
}

static void check_value(const struct tp_field *f, struct tp_value v)
{
	if (f == NULL)
		abort();
	if (v.flag != 1 && v.flag != 2 && v.flag != 3 && v.flag != 4 &&
	    v.flag != 9)
		abort();
	if (is_value(f) && (isnan(v.v) != (v.flag == TP_FLAG_MISSING)))
		abort();
}

static int same(const struct tp_field *f, struct tp_value a,
                struct tp_value b)
{
	double scale = f->scale != 0 ? fabs(f->scale) : 1;
	double tol = scale / 2 * (1 + 1e-9) + 1e-12 * fabs(a.v);

	if (f->type == TP_T_SKIP)
		return 1;
	if (isnan(a.v) || isnan(b.v))
		return isnan(a.v) && isnan(b.v) && a.flag == b.flag;
	if (a.v == b.v)
		return a.flag == b.flag;
	return fabs(a.v - b.v) <= tol;
}

struct decoded {
	struct tp_packet pk;
	uint32_t n;
	struct tp_value head[TP_MAX_FIELDS];
	/* records x fields: a record is at least 1 bit, so no more than
	 * TP_MAX_PACKET * 8 / n_fields records; 4096 slots cover these
	 * layouts (checked in decode_all) */
	struct tp_value rec[4096];
};

/* Decode p fully into d; returns 0 when the packet decoded. */
static int decode_all(const struct tp_layout *l, const uint8_t *p,
                      size_t len, struct decoded *d)
{
	static struct tp_reading r;
	size_t nf = l->has_records ? l->records.n_fields : 0, j;
	uint32_t k;

	if (tp_decode_packet(l, p, len, &d->pk) != TP_OK)
		return -1;
	if (!d->pk.has_time)
		d->pk.time_s = 1700000000; /* the caller's receive time */
	d->n = d->pk.n_records;
	if ((uint64_t)d->n * nf > sizeof d->rec / sizeof d->rec[0])
		abort();
	memcpy(d->head, d->pk.header, l->n_fields * sizeof d->head[0]);
	for (j = 0; j < l->n_fields; j++)
		check_value(tp_layout_field(l, j), d->head[j]);
	for (k = 0; k < d->n; k++) {
		if (tp_decode_record(&d->pk, k, &r) != TP_OK)
			return -2; /* e.g. a record time past int64 */
		if (r.n_values != tp_layout_n_values(l) || r.record != k)
			abort();
		for (j = 0; j < nf; j++) {
			check_value(tp_layout_field(l, l->n_fields + j),
			            r.values[l->n_fields + j]);
			d->rec[(size_t)k * nf + j] = r.values[l->n_fields + j];
		}
	}
	return 0;
}

static int any_nan(const struct tp_value *v, size_t n)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (isnan(v[i].v) && v[i].flag != TP_FLAG_NOT_EVALUATED)
			return 1;
	return 0;
}

/* Encode what decoded, decode that again, compare value by value. */
static void round_trip(const struct tp_layout *l, const struct decoded *a)
{
	static struct decoded b;
	static uint8_t out[TP_MAX_PACKET];
	size_t nf = l->has_records ? l->records.n_fields : 0, len = 0, j;
	enum tp_status st;

	st = tp_encode_packet(l, a->head, a->rec, l->has_records ? a->n : 0,
	                      out, sizeof out, &len);
	if (st == TP_ERR_RANGE && (any_nan(a->head, l->n_fields) ||
	                           any_nan(a->rec, (size_t)a->n * nf)))
		return; /* a null in a field with no `missing` */
	if (st != TP_OK)
		abort();
	if (decode_all(l, out, len, &b) != 0 || b.n != a->n)
		abort();
	for (j = 0; j < l->n_fields; j++)
		if (!same(&l->fields[j], a->head[j], b.head[j]))
			abort();
	for (j = 0; j < (size_t)a->n * nf; j++)
		if (!same(&l->records.fields[j % nf], a->rec[j], b.rec[j]))
			abort();
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	static uint8_t pkt[TP_MAX_PACKET];
	static struct decoded d;
	const struct tp_layout *ptrs[N_LAYOUTS];
	const struct tp_layout *l;
	size_t len, i;
	int sel;

	setup();
	if (size < 1 || size - 1 > sizeof pkt)
		return 0;
	for (i = 0; i < N_LAYOUTS; i++)
		ptrs[i] = &layouts[i];
	l = &layouts[data[0] & 3];
	len = size - 1;
	memcpy(pkt, data + 1, len);
	sel = tp_layout_select(ptrs, N_LAYOUTS, pkt, len);
	if (sel >= N_LAYOUTS || (sel >= 0 && !tp_layout_accepts(ptrs[sel],
	                                                       pkt, len)))
		abort();
	if (data[0] & 4) {
		if (l->length_min && len != l->length_min) {
			if (len < l->length_min)
				memset(pkt + len, 0, l->length_min - len);
			len = l->length_min;
		}
		fix_check(l, pkt, len);
	}
	if (decode_all(l, pkt, len, &d) == 0)
		round_trip(l, &d);
	return 0;
}
