/*
 * test_emitnum.c - the fast writers in emit.c give exactly what the slow,
 * obviously-right ones give.
 *
 * - Numbers: emit_fixed_chars / emit_fixed against the C library's
 *   snprintf("%.*f") (glibc, which converts the exact binary value and
 *   rounds to nearest, ties to even, in the default rounding mode), with
 *   the one documented change (emit.h: a value rounding to zero loses its
 *   minus sign), over hand-picked edge cases and a million values drawn
 *   at random.
 * - Times: emit_time against the C library's gmtime_r over random and
 *   edge seconds of the whole 0000..9999 range.
 * - Readings: emit_json_planned (plans, packet cache, in-place writing)
 *   against emit_json, and cached CSV rows against rows from a fresh
 *   table, over packets that vary every key of the cache, and at every
 *   buffer cap around a line's length.
 * - The decoding half of the same speed work: tp_decode_validated gives
 *   what tp_decode_packet gives on valid layouts (random packets made by
 *   tp_encode_packet, damaged at random), and TP_ERR_LAYOUT for the
 *   structural faults it promises to catch without full validation.
 *
 * The reference is always another implementation (the C library or the
 * uncached writer), never a text typed in from our own output.  Layouts
 * and values are invented; the random generator is xorshift64
 * (G. Marsaglia, "Xorshift RNGs", J. Stat. Software 8(14), 2003) with a
 * fixed seed, so failures repeat.
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
#include <time.h>

#include <cmocka.h>

#include "buf.h"
#include "emit.h"

#define N(a) (sizeof(a) / sizeof((a)[0]))

/* emit.c's exact rounding needs 128-bit integers; without them ties and
 * large values are left to snprintf (emit.h), so fewer are fast. */
#if defined(__SIZEOF_INT128__)
#define EXACT_FAST 1
#else
#define EXACT_FAST 0
#endif

static uint64_t rng_state = UINT64_C(0x9e3779b97f4a7c15);

static uint64_t rnd(void)
{
	rng_state ^= rng_state << 13;
	rng_state ^= rng_state >> 7;
	rng_state ^= rng_state << 17;
	return rng_state;
}

/* A uniform integer in [0, n). */
static uint64_t below(uint64_t n)
{
	return rnd() % n;
}

/* ---- numbers ---------------------------------------------------------- */

/* What emit_fixed must write: "%.*f" without the sign of a zero. */
static void ref_fixed(char *out, size_t cap, double v, int d)
{
	int n = snprintf(out, cap, "%.*f", d, v);

	if (n > 1 && out[0] == '-' &&
	    strspn(out + 1, "0.") == (size_t)(n - 1))
		memmove(out, out + 1, (size_t)n);
}

/* Check one value: the fast form, when it applies, is the reference;
 * emit_fixed always is.  Returns whether the fast form applied. */
static bool check_fixed(double v, int d)
{
	char want[400], got[EMIT_FIXED_MAX + 1];
	size_t n;
	struct buf b;

	ref_fixed(want, sizeof(want), v, d);
	n = emit_fixed_chars(got, v, d);
	if (n > 0) {
		got[n] = '\0';
		if (strcmp(got, want) != 0)
			fail_msg("emit_fixed_chars(%.17g [%a], %d) = %s, "
			         "snprintf %s", v, v, d, got, want);
	}
	buf_init(&b, 1024);
	emit_fixed(&b, v, d);
	if (strcmp(buf_str(&b), isfinite(v) ? want : "null") != 0)
		fail_msg("emit_fixed(%.17g [%a], %d) = %s, snprintf %s", v, v,
		         d, buf_str(&b), want);
	buf_free(&b);
	return n > 0;
}

struct fixed_case {
	double v;
	int d;
	bool fast;          /* the fast form must apply */
	const char *why;
};

static const struct fixed_case fixed_cases[] = {
	{ 0.125, 2, true, "exact tie rounds to even: 0.12" },
	{ 0.375, 2, true, "exact tie rounds to even: 0.38" },
	{ 2.5, 0, true, "tie at d = 0 goes down to the even 2" },
	{ 3.5, 0, true, "tie at d = 0 goes up to the even 4" },
	{ -2.5, 0, true, "negative tie keeps its sign: -2" },
	{ 0.5, 0, true, "0.5 rounds to 0" },
	{ -0.5, 0, true, "-0.5 rounds to -0, written 0 (emit.h)" },
	{ -0.0, 3, true, "negative zero has no sign" },
	{ -0.0004, 3, true, "a negative rounding to zero has no sign" },
	{ -0.0005, 3, true, "-0.0005 is below the tie in binary: 0.000"
	  " or -0.001, as the exact value says" },
	{ 8.0115, 3, true, "decimal tie that is not one in binary" },
	{ 8.0125, 3, true, "decimal tie that is not one in binary" },
	{ 1.0 / 3.0, 9, true, "nine decimals of a long fraction" },
	{ 0x1p-1074, 9, true, "smallest subnormal: 0.000000000" },
	{ -0x1p-1074, 0, true, "smallest negative subnormal" },
	{ DBL_MIN, 5, true, "smallest normal" },
	{ 999999999.9999999, 9, true, "just under 10^9 at d = 9" },
	{ 1e9, 9, false, "10^9 at d = 9 is beyond the fast range" },
	{ 999999999999999872.0, 0, true, "largest double under 10^18" },
	{ 1e18, 0, false, "10^18 at d = 0: snprintf" },
	{ 4294967295.0, 0, true, "u32 maximum" },
	{ 4294967295.5, 0, true, "tie just above the double fast path" },
	{ 4294967296.5, 0, true, "tie above 2^32: exact path" },
	{ 1e300, 2, false, "huge values go to snprintf" },
	{ -1e300, 0, false, "huge negative values go to snprintf" },
	{ 0.1 + 0.2, 9, true, "0.30000000000000004 at 9 decimals" },
	{ 12.48, 3, true, "trailing zero is kept: 12.480" },
	{ 27.41, 2, true, "two decimals" },
	{ 1e-10, 9, true, "rounds to zero at 9 decimals" },
	{ 5e-10, 9, true, "just under 0.5e-9 in binary" },
	{ 1.5e-9, 9, true, "near tie at the last decimal" },
	{ NAN, 3, false, "NaN: null, no fast form" },
	{ INFINITY, 3, false, "Inf: null, no fast form" },
	{ 1.5, 10, false, "ten decimals: snprintf" },
	{ 1.5, -1, false, "negative decimals: not the fast form" },
};

static void fixed_edge_cases(void **state)
{
	size_t i;

	(void)state;
	for (i = 0; i < N(fixed_cases); i++) {
		const struct fixed_case *c = &fixed_cases[i];
		char tmp[EMIT_FIXED_MAX];
		bool fast;

		if (c->d < 0) {
			assert_int_equal(emit_fixed_chars(tmp, c->v, c->d),
			                 0);
			continue;
		}
		fast = check_fixed(c->v, c->d);
		if (fast != c->fast && EXACT_FAST)
			fail_msg("case %zu (%s): fast form %s", i, c->why,
			         fast ? "applied" : "did not apply");
	}
}

/* A value the way the decoder makes one: raw * scale + offset. */
static double decoder_like(int *d)
{
	static const double scales[] = { 1, 0.1, 0.01, 0.001, 0.5, 0.25,
		                         0.0001, 1e-6, 1e-9, 0.2 };
	static const int decs[] = { 0, 1, 2, 3, 1, 2, 4, 6, 9, 1 };
	static const double offsets[] = { 0, 6.5, 20, -40, 0.25, -273.15 };
	size_t k = (size_t)below(N(scales));
	int64_t raw = (int64_t)below(1 << 24) - (1 << 23);
	double off = offsets[below(N(offsets))];

	*d = decs[k] > 2 ? decs[k] : 2; /* offsets need up to 2 */
	return (double)raw * scales[k] + off;
}

/* A double from random bits: any sign, exponent and mantissa. */
static double any_double(void)
{
	uint64_t u = rnd();
	double v;

	memcpy(&v, &u, sizeof(v));
	return v;
}

/* Random mantissa, exponent uniform in [-60, 64): mostly in range. */
static double scaled_double(void)
{
	double m = (double)(rnd() >> 11) / 0x1p53;
	double v = ldexp(m, (int)below(124) - 60);

	return rnd() & 1 ? -v : v;
}

/* Near a decimal tie at d decimals: (k + 1/2) / 10^d and its neighbours,
 * where a one-ulp slip in the rounding would show. */
static double near_tie(int d)
{
	double t = ((double)below(UINT64_C(1) << 30) + 0.5) / pow(10, d);

	switch (below(3)) {
	case 0:
		return nextafter(t, INFINITY);
	case 1:
		return nextafter(t, -INFINITY);
	default:
		return t;
	}
}

/* An exact binary tie at d decimals: v * 10^d = n + 1/2 exactly. */
static double exact_tie(int d)
{
	double v = ldexp((double)(2 * below(1 << 20) + 1), -(d + 1));

	return rnd() & 1 ? -v : v;
}

/* A million values of five kinds; the fast form must apply to most of
 * them, and agree with snprintf on every one. */
static void fixed_matches_snprintf(void **state)
{
	long i, fast = 0, total = 1000000;
	double v;
	int d;

	(void)state;
	for (i = 0; i < total; i++) {
		d = (int)below(11); /* 0..9 fast (emit.h), 10 not */
		switch (i % 5) {
		case 0:
			v = decoder_like(&d);
			break;
		case 1:
			v = any_double();
			break;
		case 2:
			v = scaled_double();
			break;
		case 3:
			v = near_tie(d);
			break;
		default:
			v = exact_tie(d);
			break;
		}
		fast += check_fixed(v, d);
	}
	/* kinds 0, 3, 4 are in range but for d = 10, kind 2 mostly (without
	 * 128-bit integers only kind 0 and part of kind 2 are fast) */
	if (fast < (EXACT_FAST ? total / 2 : total / 8))
		fail_msg("fast form applied to only %ld of %ld", fast, total);
}

/* ---- times ------------------------------------------------------------ */

static void check_time(int64_t t)
{
	char want[64];
	struct tm tm;
	time_t tt;
	int64_t c = t < EMIT_TIME_MIN ? EMIT_TIME_MIN :
	            t > EMIT_TIME_MAX ? EMIT_TIME_MAX : t;
	struct buf b;

	tt = (time_t)c;
	assert_non_null(gmtime_r(&tt, &tm));
	snprintf(want, sizeof(want), "%04d-%02d-%02dT%02d:%02d:%02dZ",
	         tm.tm_year + 1900, tm.tm_mon + 1, tm.tm_mday, tm.tm_hour,
	         tm.tm_min, tm.tm_sec);
	buf_init(&b, 64);
	emit_time(&b, t);
	if (strcmp(buf_str(&b), want) != 0)
		fail_msg("emit_time(%lld) = %s, gmtime_r %s", (long long)t,
		         buf_str(&b), want);
	buf_free(&b);
}

static void times_match_gmtime(void **state)
{
	static const int64_t edges[] = {
		0, -1, 86399, 86400, -86400, -86401, 951782400, /* 2000-02-29 */
		951868800, 4107542399, 4107542400, /* 2100-02-28/03-01 */
		EMIT_TIME_MIN, EMIT_TIME_MIN - 1, EMIT_TIME_MAX,
		EMIT_TIME_MAX + 1, INT64_MIN, INT64_MAX,
		-2208988800, /* 1900-01-01 */ -62135596800, /* 0001-01-01 */
	};
	size_t i;

	(void)state;
	if (sizeof(time_t) < 8)
		skip();
	for (i = 0; i < N(edges); i++)
		check_time(edges[i]);
	for (i = 0; i < 100000; i++)
		check_time(EMIT_TIME_MIN +
		           (int64_t)below((uint64_t)(EMIT_TIME_MAX -
		                                     EMIT_TIME_MIN + 1)));
}

/* ---- whole readings --------------------------------------------------- */

/* Invented layouts covering every number form, skips, roles, names that
 * need JSON escaping or CSV quoting, and values beyond the fast range. */
static const struct tp_field a_head[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "seq", .type = TP_T_U16, .bits = 16, .role = TP_ROLE_SEQ },
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME },
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.001 },
	{ .type = TP_T_SKIP, .bits = 8 },
	{ .name = "tilt\"deg", .type = TP_T_F32, .bits = 32 },
};

static const struct tp_field a_rec[] = {
	{ .name = "ph", .type = TP_T_BITS, .bits = 12, .scale = 0.001,
	  .offset = 6.5, .has_missing = true, .missing = 4095 },
	{ .name = "temperature", .type = TP_T_BITS, .bits = 12,
	  .is_signed = true, .scale = 0.01, .offset = 20 },
	{ .type = TP_T_SKIP, .bits = 4 },
	{ .name = "big,count", .type = TP_T_I64, .bits = 64 },
	{ .name = "dbl", .type = TP_T_F64, .bits = 64 },
	{ .name = "nano", .type = TP_T_U32, .bits = 32, .scale = 1e-9 },
};

static const struct tp_layout lay_a = {
	.name = "la\\yout-a",
	.fields = a_head,
	.n_fields = N(a_head),
	.has_records = true,
	.records = { .fields = a_rec, .n_fields = N(a_rec), .count = 4,
	             .count_field = -1, .every_s = 900 },
};

/* Only integer forms (the in-place JSON path), no seq, no records. */
static const struct tp_field b_head[] = {
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.01 },
	{ .name = "wind", .type = TP_T_U8, .bits = 8 },
	{ .name = "ph", .type = TP_T_BITS, .bits = 12, .scale = 0.001,
	  .offset = 6.5 },
};

static const struct tp_layout lay_b = {
	.name = "b",
	.fields = b_head,
	.n_fields = N(b_head),
};

/* A random value for field f: in range, beyond it, null or NaN. */
static struct tp_value rand_value(const struct tp_field *f)
{
	struct tp_value v = { 0, 1 };
	double sc = f->scale == 0 ? 1 : f->scale;

	switch (below(10)) {
	case 0:
		return (struct tp_value){ NAN, 9 };
	case 1:
		return (struct tp_value){ NAN, 1 }; /* not finite: null */
	case 2:
		v.v = any_double();
		break;
	default:
		v.v = (double)((int64_t)below(1 << 20) - (1 << 19)) * sc +
		      f->offset;
		break;
	}
	if (f->type == TP_T_F32)
		v.v = (double)(float)v.v;
	v.flag = (uint8_t)(below(4) + 1);
	return v;
}

/* One packet's worth of state the cache is keyed by, changed at random
 * between records so that hits and misses both happen. */
struct scene {
	const struct tp_layout *l;
	const char *station;
	struct tp_packet pk;
	struct tp_reading r;
	int64_t received;
};

#define TEN "0123456789"

static const char *const stations[] = {
	"rf2", "r,f", "q\"x", "\xc3\xa9t\xc3\xa9", "bad\xff", "7", "",
	TEN TEN TEN TEN TEN TEN TEN TEN TEN TEN TEN TEN TEN TEN TEN, /* long:
	                                                  no packet cache */
};

/* Change the scene: new packet (most keys), or one key alone. */
static void scene_step(struct scene *s, const struct tp_layout *const *ls,
                       size_t nl)
{
	size_t i, nv;

	switch (below(8)) {
	case 0: /* a new packet */
		s->l = ls[below(nl)];
		s->pk.layout = s->l;
		s->pk.has_seq = below(4) != 0;
		s->pk.seq = below(70000);
		s->pk.time_s = (int64_t)below(4000000000u);
		for (i = 0; i < s->l->n_fields; i++)
			s->r.values[i] = rand_value(&s->l->fields[i]);
		s->r.record = 0;
		break;
	case 1: /* the same seq and time, one header value changed */
		i = (size_t)below(s->l->n_fields);
		s->r.values[i] = rand_value(&s->l->fields[i]);
		break;
	case 2:
		s->station = stations[below(N(stations))];
		break;
	case 3:
		s->received = (int64_t)below(4000000000u);
		break;
	default: /* the next record of the packet */
		s->r.record++;
		break;
	}
	nv = tp_layout_n_values(s->l);
	for (i = s->l->n_fields; i < nv; i++)
		s->r.values[i] = rand_value(tp_layout_field(s->l, i));
	s->r.n_values = below(10) == 0 ? (size_t)below(nv + 1) : nv;
	s->r.time_s = s->pk.time_s + 900 * (int64_t)s->r.record;
}

static struct emit_reading scene_reading(const struct scene *s)
{
	return (struct emit_reading){ s->station, &s->pk, &s->r, s->received };
}

/* The planned JSON line equals emit_json's, over 40,000 readings. */
static void planned_json_matches(void **state)
{
	static const struct tp_layout *const ls[] = { &lay_a, &lay_b };
	struct emit_plans ps;
	struct emit_reading er;
	struct scene s;
	struct buf want, got;
	int i;

	(void)state;
	memset(&s, 0, sizeof(s));
	s.l = &lay_a;
	s.pk.layout = &lay_a;
	s.station = "rf2";
	assert_int_equal(emit_plans_init(&ps, ls, N(ls)), 0);
	buf_init(&want, 1 << 16);
	buf_init(&got, 1 << 16);
	for (i = 0; i < 40000; i++) {
		scene_step(&s, ls, N(ls));
		er = scene_reading(&s);
		buf_reset(&want);
		buf_reset(&got);
		buf_adds(&got, "x"); /* not at the start of the buffer */
		emit_json(&want, &er);
		emit_json_planned(&got, &ps, &er);
		assert_false(buf_failed(&want));
		assert_false(buf_failed(&got));
		if (strcmp(buf_str(&got) + 1, buf_str(&want)) != 0)
			fail_msg("reading %d:\n planned %s emit_json %s", i,
			         buf_str(&got) + 1, buf_str(&want));
	}
	buf_free(&want);
	buf_free(&got);
	emit_plans_free(&ps);
	emit_plans_free(NULL);
}

/*
 * Derived values through the plans: emit_json_planned_sci equals
 * emit_json_sci over many readings, with more derived lists than the
 * writer keeps keys for (EMIT_SCI_KEYS), names needing escapes, decimals
 * outside the fast range, slots past the reading's end, and a list
 * changed in place (same address, other names and decimals), which must
 * not be written with its old keys.  The names are invented.
 */
#define SCI_LISTS (EMIT_SCI_KEYS + 3)

static void sci_lists(struct tp_derived_info (*d)[3], size_t nv)
{
	static const char *const names[] = { "salinity", "o\"2",
		                             "pco2", "omega,ar", "x" };
	size_t i, j;

	for (i = 0; i < SCI_LISTS; i++) {
		for (j = 0; j < 3; j++) {
			d[i][j] = (struct tp_derived_info){ 0 };
			d[i][j].name = names[(i + j) % N(names)];
			d[i][j].decimals = (int)((i * 3 + j) % 12); /* 10, 11:
			                                              slow */
			d[i][j].slot = nv + j + (i == 2 && j == 2 ? 5 : 0);
		}
	}
}

static void planned_sci_matches(void **state)
{
	static const struct tp_layout *const ls[] = { &lay_a, &lay_b };
	static struct tp_derived_info d[SCI_LISTS][3];
	struct emit_plans ps;
	struct emit_reading er;
	struct emit_sci sc;
	struct scene s;
	struct buf want, got;
	size_t nv, j;
	int i;

	(void)state;
	memset(&s, 0, sizeof(s));
	s.l = &lay_b;
	s.pk.layout = &lay_b;
	s.station = "rf2";
	assert_int_equal(emit_plans_init(&ps, ls, N(ls)), 0);
	buf_init(&want, 1 << 16);
	buf_init(&got, 1 << 16);
	for (i = 0; i < 40000; i++) {
		scene_step(&s, ls, N(ls));
		nv = tp_layout_n_values(s.l);
		sci_lists(d, nv);
		if (i % 1000 >= 500) /* the same lists, rebuilt differently */
			for (j = 0; j < 3; j++) {
				d[i % SCI_LISTS][j].name = "re\tnamed";
				d[i % SCI_LISTS][j].decimals = (int)j;
			}
		memset(&sc, 0, sizeof(sc));
		sc.derived = d[below(SCI_LISTS)];
		sc.n_derived = (size_t)below(4);
		if (s.r.n_values == nv) { /* a full reading carries them */
			for (j = 0; j < 3; j++) {
				s.r.values[nv + j] = rand_value(&b_head[0]);
				if (below(3) == 0)
					s.r.values[nv + j].v = any_double();
			}
			s.r.n_values = nv + 3;
		}
		er = scene_reading(&s);
		buf_reset(&want);
		buf_reset(&got);
		buf_adds(&got, "x");
		emit_json_sci(&want, &er, &sc);
		emit_json_planned_sci(&got, &ps, &er, &sc);
		assert_false(buf_failed(&got));
		if (strcmp(buf_str(&got) + 1, buf_str(&want)) != 0)
			fail_msg("reading %d:\n planned %s emit_json %s", i,
			         buf_str(&got) + 1, buf_str(&want));
	}
	buf_free(&want);
	buf_free(&got);
	emit_plans_free(&ps);
}

/* Cached CSV rows equal rows written by a fresh table (cold cache). */
static void cached_csv_matches(void **state)
{
	static const struct tp_layout *const ls[] = { &lay_a, &lay_b };
	struct emit_csv warm, cold;
	struct emit_reading er;
	struct scene s;
	struct buf want, got;
	int i;

	(void)state;
	memset(&s, 0, sizeof(s));
	s.l = &lay_b;
	s.pk.layout = &lay_b;
	s.station = "rf2";
	assert_int_equal(emit_csv_init(&warm, ls, N(ls)), 0);
	buf_init(&want, 1 << 16);
	buf_init(&got, 1 << 16);
	for (i = 0; i < 20000; i++) {
		scene_step(&s, ls, N(ls));
		er = scene_reading(&s);
		assert_int_equal(emit_csv_init(&cold, ls, N(ls)), 0);
		buf_reset(&want);
		buf_reset(&got);
		emit_csv_row(&want, &cold, &er);
		emit_csv_row(&got, &warm, &er);
		emit_csv_free(&cold);
		assert_false(buf_failed(&got));
		if (strcmp(buf_str(&got), buf_str(&want)) != 0)
			fail_msg("row %d:\n cached %s fresh  %s", i,
			         buf_str(&got), buf_str(&want));
	}
	buf_free(&want);
	buf_free(&got);
	emit_csv_free(&warm);
}

/* CSV rows with derived columns: a warm table (packet cache, derived
 * column map) writes what a fresh one writes, over lists that change,
 * move and are rebuilt in place as in planned_sci_matches. */
static void cached_csv_sci_matches(void **state)
{
	static const struct tp_layout *const ls[] = { &lay_a, &lay_b };
	static const char *const dn[] = { "salinity", "o\"2", "pco2",
		                          "omega,ar", "x", "re\tnamed",
		                          "never" };
	static struct tp_derived_info d[SCI_LISTS][3];
	struct emit_csv warm, cold;
	struct emit_reading er;
	struct emit_sci sc;
	struct scene s;
	struct buf want, got;
	size_t nv, j;
	int i;

	(void)state;
	memset(&s, 0, sizeof(s));
	s.l = &lay_b;
	s.pk.layout = &lay_b;
	s.station = "rf2";
	assert_int_equal(emit_csv_init(&warm, ls, N(ls)), 0);
	assert_int_equal(emit_csv_science(&warm, dn, N(dn), NULL, 0), 0);
	buf_init(&want, 1 << 16);
	buf_init(&got, 1 << 16);
	for (i = 0; i < 10000; i++) {
		scene_step(&s, ls, N(ls));
		nv = tp_layout_n_values(s.l);
		sci_lists(d, nv);
		if (i % 1000 >= 500)
			for (j = 0; j < 3; j++)
				d[i % SCI_LISTS][j].name = "re\tnamed";
		memset(&sc, 0, sizeof(sc));
		sc.derived = d[below(SCI_LISTS)];
		sc.n_derived = (size_t)below(4);
		if (s.r.n_values == nv) {
			for (j = 0; j < 3; j++)
				s.r.values[nv + j] = rand_value(&b_head[0]);
			s.r.n_values = nv + 3;
		}
		er = scene_reading(&s);
		assert_int_equal(emit_csv_init(&cold, ls, N(ls)), 0);
		assert_int_equal(emit_csv_science(&cold, dn, N(dn), NULL, 0),
		                 0);
		buf_reset(&want);
		buf_reset(&got);
		emit_csv_row_sci(&want, &cold, &er, &sc);
		emit_csv_row_sci(&got, &warm, &er, &sc);
		emit_csv_free(&cold);
		assert_false(buf_failed(&got));
		if (strcmp(buf_str(&got), buf_str(&want)) != 0)
			fail_msg("row %d:\n cached %s fresh  %s", i,
			         buf_str(&got), buf_str(&want));
	}
	buf_free(&want);
	buf_free(&got);
	emit_csv_free(&warm);
}

/* At every cap around a line's length, the planned writer fails exactly
 * when emit_json does, and writes the same when it does not. */
static void planned_json_caps(void **state)
{
	static const struct tp_layout *const ls[] = { &lay_a, &lay_b };
	struct emit_plans ps;
	struct emit_reading er;
	struct scene s;
	struct buf full, want, got;
	size_t cap;
	int i;

	(void)state;
	memset(&s, 0, sizeof(s));
	s.l = &lay_b;
	s.pk.layout = &lay_b;
	s.station = "rf2";
	assert_int_equal(emit_plans_init(&ps, ls, N(ls)), 0);
	buf_init(&full, 1 << 16);
	for (i = 0; i < 60; i++) {
		scene_step(&s, ls, N(ls));
		er = scene_reading(&s);
		buf_reset(&full);
		emit_json(&full, &er);
		for (cap = 0; cap <= full.len + 80; cap++) {
			buf_init(&want, cap);
			buf_init(&got, cap);
			emit_json(&want, &er);
			emit_json_planned(&got, &ps, &er);
			assert_int_equal(buf_failed(&got), buf_failed(&want));
			assert_int_equal(buf_failed(&got), full.len > cap);
			if (!buf_failed(&got))
				assert_string_equal(buf_str(&got),
				                    buf_str(&want));
			buf_free(&want);
			buf_free(&got);
		}
	}
	buf_free(&full);
	emit_plans_free(&ps);
}

/* A reading of a layout the plans were not built for: emit_json. */
static void unplanned_layout_falls_back(void **state)
{
	static const struct tp_layout *const ls[] = { &lay_b };
	struct emit_plans ps;
	struct emit_reading er;
	struct scene s;
	struct buf want, got;

	(void)state;
	memset(&s, 0, sizeof(s));
	s.l = &lay_a;
	s.pk.layout = &lay_a;
	s.station = "rf2";
	s.r.n_values = tp_layout_n_values(&lay_a);
	er = scene_reading(&s);
	assert_int_equal(emit_plans_init(&ps, ls, N(ls)), 0);
	buf_init(&want, 4096);
	buf_init(&got, 4096);
	emit_json(&want, &er);
	emit_json_planned(&got, &ps, &er);
	assert_string_equal(buf_str(&got), buf_str(&want));
	buf_free(&want);
	buf_free(&got);
	emit_plans_free(&ps);
}

/* ---- decoding without per-packet validation ------------------------- */

/* The demo-like layout of the benchmark (invented): header, 4 records of
 * 12/12/17/12 bits, CRC-16/IBM-3740 in the last two bytes. */
static const struct tp_field d_head[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "seq", .type = TP_T_U16, .bits = 16, .role = TP_ROLE_SEQ },
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME },
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.001 },
};

static const struct tp_field d_rec[] = {
	{ .name = "ph", .type = TP_T_BITS, .bits = 12, .scale = 0.001,
	  .offset = 6.5, .has_missing = true, .missing = 4095 },
	{ .name = "temperature", .type = TP_T_BITS, .bits = 12,
	  .is_signed = true, .scale = 0.01, .offset = 20 },
	{ .name = "conductivity", .type = TP_T_BITS, .bits = 17,
	  .scale = 0.001 },
	{ .name = "oxygen", .type = TP_T_BITS, .bits = 12, .scale = 0.1 },
};

static void demo_layout(struct tp_layout *l, enum tp_order order)
{
	memset(l, 0, sizeof(*l));
	l->name = "demo";
	l->order = order;
	l->fields = d_head;
	l->n_fields = N(d_head);
	l->has_records = true;
	l->records = (struct tp_records){ .fields = d_rec,
		                          .n_fields = N(d_rec), .count = 4,
		                          .count_field = -1, .every_s = 900 };
	l->check.kind = TP_CHECK_CRC;
	l->check.at = -2;
	l->check.order = order;
	assert_int_equal(tp_crc_init(&l->check.crc,
	                             tp_crc_find("CRC-16/IBM-3740")), TP_OK);
	assert_int_equal(tp_layout_validate(l, NULL), TP_OK);
}

/* Value slots equal bit for bit (v and flag; not the padding after
 * flag, which a struct copy need not keep: at -O0 it differs). */
static void same_values(const struct tp_value *a, const struct tp_value *b,
                        size_t n)
{
	size_t i;

	for (i = 0; i < n; i++) {
		assert_memory_equal(&a[i].v, &b[i].v, sizeof(a[i].v));
		assert_int_equal(a[i].flag, b[i].flag);
	}
}

/* Both decoders on one packet: same status, same packet, same records. */
static void decode_both(const struct tp_layout *l, const uint8_t *p,
                        size_t len)
{
	static struct tp_packet a, b;
	static struct tp_reading ra, rb;
	enum tp_status sa = tp_decode_packet(l, p, len, &a);
	enum tp_status sb = tp_decode_validated(l, p, len, &b);
	uint32_t k;

	assert_int_equal(sa, sb);
	assert_int_equal(a.n_records, b.n_records);
	assert_memory_equal(&a, &b, offsetof(struct tp_packet, header));
	same_values(a.header, b.header, l->n_fields);
	for (k = 0; k < a.n_records; k++) {
		memset(&ra, 0, sizeof(ra));
		memset(&rb, 0, sizeof(rb));
		assert_int_equal(tp_decode_record(&a, k, &ra),
		                 tp_decode_record(&b, k, &rb));
		assert_int_equal(ra.record, rb.record);
		assert_int_equal(ra.time_s, rb.time_s);
		assert_int_equal(ra.n_values, rb.n_values);
		same_values(ra.values, rb.values, ra.n_values);
	}
}

/* Random valid packets in both byte orders, some damaged (a flipped
 * bit: bad check; cut short or padded: length errors). */
static void validated_decode_matches(void **state)
{
	static struct tp_layout l;
	struct tp_value head[N(d_head)], rec[4 * N(d_rec)];
	uint8_t p[64];
	size_t i, len;
	int n;

	(void)state;
	for (n = 0; n < 20000; n++) {
		demo_layout(&l, n % 2 ? TP_ORDER_LITTLE : TP_ORDER_BIG);
		for (i = 0; i < N(head); i++)
			head[i] = (struct tp_value){ (double)below(60000), 1 };
		for (i = 0; i < N(rec); i++)
			rec[i] = (struct tp_value){ (double)below(4000) * 0.01,
			                            1 };
		assert_int_equal(tp_encode_packet(&l, head, rec, 4, p,
		                                  sizeof(p), &len), TP_OK);
		if (n % 4 == 1)
			p[below(len)] ^= (uint8_t)(1u << below(8));
		if (n % 4 == 2)
			len = (size_t)below(len + 8);
		decode_both(&l, p, len);
	}
}

struct broken_case {
	void (*make)(struct tp_layout *l);
	const char *why;
};

static void b_many(struct tp_layout *l) { l->n_fields = TP_MAX_FIELDS + 1; }
static void b_nofields(struct tp_layout *l) { l->fields = NULL; }
static void b_norec(struct tp_layout *l) { l->records.fields = NULL; }
static void b_zerorec(struct tp_layout *l) { l->records.n_fields = 0; }
static void b_count(struct tp_layout *l) { l->records.count_field = 5; }
static void b_kind(struct tp_layout *l) { l->check.kind = 9; }
static void b_width(struct tp_layout *l) { l->check.crc.p.width = 40; }

static void b_zerobits(struct tp_layout *l)
{
	static const struct tp_field z[] = {
		{ .name = "z", .type = TP_T_BITS, .bits = 0 },
	};

	l->records.fields = z;
	l->records.n_fields = 1;
}

static const struct broken_case broken_cases[] = {
	{ b_many, "more header fields than pk->header holds" },
	{ b_nofields, "header fields missing" },
	{ b_norec, "record fields missing" },
	{ b_zerorec, "records without fields" },
	{ b_count, "count field outside the header" },
	{ b_kind, "unknown check kind" },
	{ b_width, "CRC wider than the cursor reads" },
	{ b_zerobits, "records of zero bits (a division by zero)" },
};

/* Structural faults are TP_ERR_LAYOUT without full validation too. */
static void validated_decode_refuses_broken(void **state)
{
	static struct tp_layout l;
	static struct tp_packet pk;
	uint8_t p[64] = { 0 };
	size_t i;

	(void)state;
	for (i = 0; i < N(broken_cases); i++) {
		demo_layout(&l, TP_ORDER_BIG);
		broken_cases[i].make(&l);
		if (tp_decode_validated(&l, p, 42, &pk) != TP_ERR_LAYOUT)
			fail_msg("case %zu (%s): not TP_ERR_LAYOUT", i,
			         broken_cases[i].why);
		assert_int_equal(pk.n_records, 0);
	}
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(fixed_edge_cases),
		cmocka_unit_test(fixed_matches_snprintf),
		cmocka_unit_test(times_match_gmtime),
		cmocka_unit_test(planned_json_matches),
		cmocka_unit_test(planned_sci_matches),
		cmocka_unit_test(cached_csv_matches),
		cmocka_unit_test(cached_csv_sci_matches),
		cmocka_unit_test(planned_json_caps),
		cmocka_unit_test(unplanned_layout_falls_back),
		cmocka_unit_test(validated_decode_matches),
		cmocka_unit_test(validated_decode_refuses_broken),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
