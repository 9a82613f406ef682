/*
 * test_emit.c - the reading writers: numbers at their field's precision,
 * JSON strings, RFC 3339 times (both ways), ids, CSV cells, and whole
 * readings as JSON lines and CSV rows.  Also the capped buffer they use.
 *
 * Expected texts come from the contracts (WIRE.md: "scale 0.001 -> 3
 * decimals, never 8.011999999", the id form "rf2-1796020500-118-3"), from
 * IEEE 754 arithmetic checked by reading the text back with strtof/strtod,
 * and from Python's datetime module (CPython 3, an independent calendar
 * implementation) for the Unix-time/calendar pairs.  Layout values are
 * invented.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cJSON.h>
#include <cmocka.h>

#include "buf.h"
#include "emit.h"

#define N(a) (sizeof(a) / sizeof((a)[0]))

/* ---- numbers ---------------------------------------------------------- */

struct num_case {
	enum tp_type type;
	uint32_t bits;
	double scale, offset;
	double v;
	const char *want;
	const char *why;
};

static const struct num_case num_cases[] = {
	{ TP_T_U16, 16, 0.001, 0, 8.011999999, "8.012",
	  "WIRE.md: scale 0.001 gives 3 decimals, never 8.011999999" },
	{ TP_T_U16, 16, 0.001, 0, 8012 * 0.001, "8.012",
	  "raw x scale is inexact in binary; printed exactly" },
	{ TP_T_BITS, 12, 0.001, 6.5, 6.5 + 1512 * 0.001, "8.012",
	  "an offset with fewer decimals than the scale keeps 3" },
	{ TP_T_BITS, 12, 0.01, 20, 20 + -659 * 0.01, "13.41",
	  "scale 0.01 with an offset, negative raw (LAYOUT.md example)" },
	{ TP_T_U8, 8, 0.5, 0, 2.5, "2.5", "scale 0.5 needs one decimal" },
	{ TP_T_U8, 8, 0.5, 0, 3.0, "3.0", "scale 0.5 keeps its decimal" },
	{ TP_T_U32, 32, 1, 0, 4294967295.0, "4294967295",
	  "scale 1: an integer, no decimal point, full u32 range" },
	{ TP_T_I16, 16, 0.01, 0, -150 * 0.01, "-1.50",
	  "negative values keep the scale's decimals" },
	{ TP_T_I16, 16, 0.001, 0, -0.0004, "0.000",
	  "a negative rounding to zero is written without a minus" },
	{ TP_T_U8, 8, 1, 0.25, 3.25, "3.25",
	  "the offset's decimals count when it has more than the scale" },
	{ TP_T_I32, 32, 1, -40, -40 + 17.0, "-23",
	  "negative integer offset, decimals 0" },
	{ TP_T_U16, 16, 0.001, 0, NAN, "null",
	  "NaN cannot be written in JSON" },
	{ TP_T_F32, 32, 1, 0, (double)0.1f, "0.100000001",
	  "IEEE 754 binary32 nearest 0.1 is 0.100000001490116... [9 digits]" },
	{ TP_T_F32, 32, 1, 0, (double)1.5f, "1.5",
	  "%.9g drops trailing zeros of an exact float" },
	{ TP_T_F32, 32, 1, 0, INFINITY, "null",
	  "Inf cannot be written in JSON" },
	{ TP_T_F64, 64, 1, 0, 0.1, "0.1", "shortest form: 15 digits suffice" },
	{ TP_T_F64, 64, 1, 0, 1.0 / 3.0, "0.3333333333333333",
	  "needs 16 digits to read back" },
	{ TP_T_F64, 64, 1, 0, 0.1 + 0.2, "0.30000000000000004",
	  "needs 17 digits (the classic 0.1 + 0.2)" },
	{ TP_T_F64, 64, 1, 0, -0.0, "0", "negative zero is written as 0" },
};

static void numbers_follow_their_field(void **state)
{
	struct buf b;
	struct tp_field f;
	size_t i;

	(void)state;
	buf_init(&b, 256);
	for (i = 0; i < N(num_cases); i++) {
		const struct num_case *c = &num_cases[i];

		memset(&f, 0, sizeof(f));
		f.name = "x";
		f.type = c->type;
		f.bits = c->bits;
		f.is_signed = c->type == TP_T_I16 || c->type == TP_T_I32;
		f.scale = c->scale;
		f.offset = c->offset;
		buf_reset(&b);
		emit_number(&b, &f, c->v);
		assert_false(buf_failed(&b));
		if (strcmp(buf_str(&b), c->want) != 0)
			fail_msg("case %zu (%s): got %s, want %s", i, c->why,
			         buf_str(&b), c->want);
	}
	buf_free(&b);
}

/* f64 output reads back as the same double, and is the shortest of the
 * 15/16/17-digit forms that does: checked over a spread of values. */
static void shortest_round_trips(void **state)
{
	static const double vs[] = { 8.012, 1e-300, 5e-324,
		                     1.7976931348623157e308, 123456789.125,
		                     -2.5e-7, 3.141592653589793, 27.41,
		                     6.02214076e23 };
	struct buf b;
	char shorter[40];
	size_t i;
	int prec;

	(void)state;
	buf_init(&b, 64);
	for (i = 0; i < N(vs); i++) {
		buf_reset(&b);
		emit_shortest(&b, vs[i]);
		assert_true(strtod(buf_str(&b), NULL) == vs[i]);
		for (prec = 15; prec < 17; prec++) {
			snprintf(shorter, sizeof(shorter), "%.*g", prec, vs[i]);
			if (strtod(shorter, NULL) == vs[i])
				break;
		}
		assert_true(strlen(buf_str(&b)) <= strlen(shorter) ||
		            prec == 17);
	}
	buf_free(&b);
}

/* %.9g is enough for every float to read back (IEEE 754-2008 5.12.2:
 * 9 significant digits round-trip binary32). */
static void float32_round_trips(void **state)
{
	static const float vs[] = { 0.1f, 1.0f / 3.0f, 16777217.0f, 1e-45f,
		                    3.4028235e38f, -27.41f };
	struct buf b;
	size_t i;

	(void)state;
	buf_init(&b, 64);
	for (i = 0; i < N(vs); i++) {
		buf_reset(&b);
		emit_float32(&b, (double)vs[i]);
		assert_true(strtof(buf_str(&b), NULL) == vs[i]);
	}
	buf_free(&b);
}

/* ---- JSON strings ----------------------------------------------------- */

struct str_case {
	const char *in, *want, *why;
};

static const struct str_case json_cases[] = {
	{ "rf2", "\"rf2\"", "plain text is copied" },
	{ "a\"b\\c", "\"a\\\"b\\\\c\"", "quote and backslash are escaped" },
	{ "a\nb\tc", "\"a\\u000ab\\u0009c\"",
	  "control characters are written as \\u00XX (RFC 8259 7)" },
	{ "\x01\x1f\x7f", "\"\\u0001\\u001f\\u007f\"",
	  "first and last C0 control, and DEL" },
	{ "\xc2\xb0" "C", "\"\xc2\xb0" "C\"",
	  "valid UTF-8 (degree sign) kept" },
	{ "\xf0\x9f\x8c\x8a", "\"\xf0\x9f\x8c\x8a\"",
	  "a valid 4-byte sequence (U+1F30A) kept" },
	{ "a\xff", "\"a\\ufffd\"", "0xFF is never UTF-8: U+FFFD" },
	{ "\xc0\xaf", "\"\\ufffd\\ufffd\"",
	  "an overlong encoding is rejected (RFC 3629 10)" },
	{ "\xed\xa0\x80", "\"\\ufffd\\ufffd\\ufffd\"",
	  "an encoded surrogate is not UTF-8 (RFC 3629 3)" },
	{ "\xe2\x82", "\"\\ufffd\\ufffd\"",
	  "a sequence cut short by the end of the string" },
	{ "", "\"\"", "the empty string" },
};

static void json_strings_are_escaped(void **state)
{
	struct buf b;
	size_t i;

	(void)state;
	buf_init(&b, 256);
	for (i = 0; i < N(json_cases); i++) {
		buf_reset(&b);
		emit_json_string(&b, json_cases[i].in);
		if (strcmp(buf_str(&b), json_cases[i].want) != 0)
			fail_msg("case %zu (%s): got %s", i, json_cases[i].why,
			         buf_str(&b));
	}
	buf_free(&b);
}

/* Whatever bytes a name holds, the string parses as JSON (cJSON). */
static void json_strings_always_parse(void **state)
{
	char in[4];
	struct buf b;
	cJSON *j;
	unsigned x;

	(void)state;
	buf_init(&b, 64);
	for (x = 1; x < 65536; x += 7) {
		in[0] = (char)(x & 0xff);
		in[1] = (char)(x >> 8);
		in[2] = (char)0x80;
		in[3] = '\0';
		if (in[1] == '\0')
			in[1] = 'a';
		buf_reset(&b);
		emit_json_string(&b, in);
		j = cJSON_Parse(buf_str(&b));
		assert_non_null(j);
		assert_true(cJSON_IsString(j));
		cJSON_Delete(j);
	}
	buf_free(&b);
}

/* ---- times ------------------------------------------------------------ */

struct time_case {
	int64_t t;
	const char *text;
	const char *why;
};

/* Pairs from Python: datetime.fromtimestamp(t, timezone.utc). */
static const struct time_case time_cases[] = {
	{ 0, "1970-01-01T00:00:00Z", "the Unix epoch" },
	{ -1, "1969-12-31T23:59:59Z", "before the epoch" },
	{ 951782400, "2000-02-29T00:00:00Z", "a leap day of a /400 year" },
	{ 1709164800, "2024-02-29T00:00:00Z", "an ordinary leap day" },
	{ 1796020500, "2026-11-30T06:35:00Z", "WIRE.md's id time" },
	{ 253402300799, "9999-12-31T23:59:59Z", "the last RFC 3339 second" },
	{ -62135596800, "0001-01-01T00:00:00Z", "the first year 1 second" },
};

static void times_are_rfc3339(void **state)
{
	struct buf b;
	int64_t back;
	size_t i;

	(void)state;
	buf_init(&b, 64);
	for (i = 0; i < N(time_cases); i++) {
		buf_reset(&b);
		emit_time(&b, time_cases[i].t);
		if (strcmp(buf_str(&b), time_cases[i].text) != 0)
			fail_msg("case %zu (%s): got %s", i, time_cases[i].why,
			         buf_str(&b));
		assert_int_equal(emit_parse_time(time_cases[i].text, &back), 0);
		assert_true(back == time_cases[i].t);
	}
	buf_free(&b);
}

/* Times RFC 3339 cannot write are clamped to its first/last second. */
static void times_out_of_range_are_clamped(void **state)
{
	struct buf b;

	(void)state;
	buf_init(&b, 64);
	emit_time(&b, EMIT_TIME_MIN - 1);
	assert_string_equal(buf_str(&b), "0000-01-01T00:00:00Z");
	buf_reset(&b);
	emit_time(&b, INT64_MIN);
	assert_string_equal(buf_str(&b), "0000-01-01T00:00:00Z");
	buf_reset(&b);
	emit_time(&b, INT64_MAX);
	assert_string_equal(buf_str(&b), "9999-12-31T23:59:59Z");
	buf_free(&b);
}

struct parse_case {
	const char *text;
	int rc;
	int64_t t;
	const char *why;
};

static const struct parse_case parse_cases[] = {
	{ "2026-11-30T06:15:00Z", 0, 1796019300, "the WIRE.md example" },
	{ "2026-11-30t06:15:00z", 0, 1796019300,
	  "RFC 3339 5.6 allows lower-case t and z" },
	{ "2026-11-30 06:15:00Z", 0, 1796019300,
	  "RFC 3339 5.6 note: a space for T" },
	{ "2026-11-30T08:15:00+02:00", 0, 1796019300, "a positive offset" },
	{ "2026-11-30T01:45:00-04:30", 0, 1796019300, "a negative offset" },
	{ "2026-11-30T06:15:00.999Z", 0, 1796019300,
	  "fractional seconds are dropped" },
	{ "2024-02-29T12:00:00Z", 0, 1709208000, "a leap day" },
	{ "2026-02-29T00:00:00Z", -1, 0, "2026 is not a leap year" },
	{ "2026-13-01T00:00:00Z", -1, 0, "no month 13" },
	{ "2026-11-31T00:00:00Z", -1, 0, "November has 30 days" },
	{ "2026-11-30T24:00:00Z", -1, 0, "no hour 24" },
	{ "2026-11-30T06:15:00", -1, 0, "the zone is required" },
	{ "2026-11-30T06:15:00Zx", -1, 0, "nothing may follow" },
	{ "2026-11-30T06:15:00.Z", -1, 0, "a fraction needs digits" },
	{ "2026-11-30T06:15:00+2:00", -1, 0, "offset hours have 2 digits" },
	{ "1796019300", -1, 0, "Unix seconds are not RFC 3339" },
	{ "", -1, 0, "empty" },
};

static void times_parse(void **state)
{
	int64_t t;
	size_t i;
	int rc;

	(void)state;
	for (i = 0; i < N(parse_cases); i++) {
		t = 0;
		rc = emit_parse_time(parse_cases[i].text, &t);
		if (rc != parse_cases[i].rc ||
		    (rc == 0 && t != parse_cases[i].t))
			fail_msg("case %zu (%s): rc %d t %lld", i,
			         parse_cases[i].why, rc, (long long)t);
	}
}

/* emit_time and emit_parse_time are inverses over the whole range. */
static void times_round_trip(void **state)
{
	struct buf b;
	int64_t t, back;

	(void)state;
	buf_init(&b, 64);
	for (t = EMIT_TIME_MIN; t < EMIT_TIME_MAX - 86400 * 373LL;
	     t += 86400 * 373LL + 3607) {
		buf_reset(&b);
		emit_time(&b, t);
		assert_int_equal(emit_parse_time(buf_str(&b), &back), 0);
		assert_true(back == t);
	}
	buf_free(&b);
}

/* ---- ids and CSV cells ------------------------------------------------ */

static void ids_have_the_wire_form(void **state)
{
	struct buf b;

	(void)state;
	buf_init(&b, 64);
	emit_id(&b, "rf2", 1796020500, 118, 3);
	assert_string_equal(buf_str(&b), "rf2-1796020500-118-3");
	buf_reset(&b);
	emit_id(&b, "12", 0, 0, 0);
	assert_string_equal(buf_str(&b), "12-0-0-0");
	buf_reset(&b);
	emit_id(&b, "rf2", 1796020500, UINT64_MAX, UINT32_MAX);
	assert_string_equal(buf_str(&b),
	                    "rf2-1796020500-18446744073709551615-4294967295");
	buf_free(&b);
}

static const struct str_case csv_cases[] = {
	{ "rf2", "rf2", "plain text is not quoted" },
	{ "a,b", "\"a,b\"", "a comma needs quotes (RFC 4180 2.6)" },
	{ "say \"hi\"", "\"say \"\"hi\"\"\"",
	  "quotes are doubled inside quotes (RFC 4180 2.7)" },
	{ "a\r\nb", "\"a\r\nb\"", "CR and LF need quotes (RFC 4180 2.6)" },
	{ "\"", "\"\"\"\"", "a lone quote" },
	{ " x ", " x ", "spaces are part of a field (RFC 4180 2.4)" },
	{ "", "", "an empty cell" },
};

static void csv_cells_are_quoted(void **state)
{
	struct buf b;
	size_t i;

	(void)state;
	buf_init(&b, 64);
	for (i = 0; i < N(csv_cases); i++) {
		buf_reset(&b);
		buf_adds(&b, "pre,");
		emit_csv_cell(&b, csv_cases[i].in, strlen(csv_cases[i].in));
		if (strcmp(buf_str(&b) + 4, csv_cases[i].want) != 0 ||
		    strncmp(buf_str(&b), "pre,", 4) != 0)
			fail_msg("case %zu (%s): got %s", i, csv_cases[i].why,
			         buf_str(&b));
	}
	buf_free(&b);
}

/* ---- whole readings --------------------------------------------------- */

/* An invented layout after LAYOUT.md's reef-v2 example. */
static const struct tp_field reef_head[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "seq", .type = TP_T_U16, .bits = 16, .role = TP_ROLE_SEQ },
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME },
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.001 },
};

static const struct tp_field reef_rec[] = {
	{ .name = "ph", .type = TP_T_BITS, .bits = 12, .scale = 0.001,
	  .offset = 6.5, .has_missing = true, .missing = 4095 },
	{ .type = TP_T_SKIP, .bits = 4 },
	{ .name = "temperature", .type = TP_T_BITS, .bits = 12,
	  .is_signed = true, .scale = 0.01, .offset = 20 },
	{ .name = "a,b", .type = TP_T_F32, .bits = 32 },
};

static const struct tp_layout reef = {
	.name = "reef-v2",
	.fields = reef_head,
	.n_fields = N(reef_head),
	.has_records = true,
	.records = { .fields = reef_rec, .n_fields = N(reef_rec), .count = 4,
	             .count_field = -1, .every_s = 900 },
};

/* A second layout sharing one value name, to test the CSV union. */
static const struct tp_field tiny_head[] = {
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.01 },
	{ .name = "wind", .type = TP_T_U8, .bits = 8 },
};

static const struct tp_layout tiny = {
	.name = "tiny",
	.fields = tiny_head,
	.n_fields = N(tiny_head),
};

static const struct tp_layout other = {
	.name = "other",
	.fields = tiny_head,
	.n_fields = N(tiny_head),
};

static void reef_reading(struct tp_packet *pk, struct tp_reading *r)
{
	memset(pk, 0, sizeof(*pk));
	memset(r, 0, sizeof(*r));
	pk->layout = &reef;
	pk->has_station = pk->has_seq = pk->has_time = true;
	pk->station = 7;
	pk->seq = 118;
	pk->time_s = 1796020500;
	pk->n_records = 4;
	r->record = 3;
	r->time_s = 1796020500 + 3 * 900;
	r->n_values = 9;
	r->values[0] = (struct tp_value){ 2, 1 };
	r->values[1] = (struct tp_value){ 7, 1 };
	r->values[2] = (struct tp_value){ 118, 1 };
	r->values[3] = (struct tp_value){ 1796020500, 1 };
	r->values[4] = (struct tp_value){ 12480 * 0.001, 1 };
	r->values[5] = (struct tp_value){ NAN, 9 };
	r->values[6] = (struct tp_value){ NAN, 2 };
	r->values[7] = (struct tp_value){ 20 + 741 * 0.01, 4 };
	r->values[8] = (struct tp_value){ (double)0.1f, 3 };
}

/* The JSON line has WIRE.md's keys in order, role fields and skips left
 * out of values, null with flag 9, and parses with cJSON. */
static void json_reading_matches_wire(void **state)
{
	static const char want[] =
		"{\"id\":\"rf2-1796020500-118-3\",\"station\":\"rf2\","
		"\"seq\":118,\"layout\":\"reef-v2\","
		"\"time\":\"2026-11-30T07:20:00Z\","
		"\"received\":\"1970-01-01T00:00:00Z\","
		"\"values\":{\"kind\":2,\"battery\":12.480,\"ph\":null,"
		"\"temperature\":27.41,\"a,b\":0.100000001},"
		"\"flags\":{\"kind\":1,\"battery\":1,\"ph\":9,"
		"\"temperature\":4,\"a,b\":3}}\n";
	struct emit_reading er;
	struct tp_packet pk;
	struct tp_reading r;
	struct buf b;
	cJSON *j;

	(void)state;
	reef_reading(&pk, &r);
	er = (struct emit_reading){ "rf2", &pk, &r, 0 };
	buf_init(&b, 4096);
	emit_json(&b, &er);
	assert_false(buf_failed(&b));
	assert_string_equal(buf_str(&b), want);
	j = cJSON_Parse(buf_str(&b));
	assert_non_null(j);
	assert_true(cJSON_IsNull(cJSON_GetObjectItem(
		cJSON_GetObjectItem(j, "values"), "ph")));
	cJSON_Delete(j);
	/* no seq field: seq null, id uses 0 */
	pk.has_seq = false;
	buf_reset(&b);
	emit_json(&b, &er);
	assert_non_null(strstr(buf_str(&b), "\"rf2-1796020500-0-3\""));
	assert_non_null(strstr(buf_str(&b), "\"seq\":null,"));
	buf_free(&b);
}

/* CSV: the union of value names in order of first appearance; a column
 * a layout lacks is empty; null is an empty cell with flag 9. */
static void csv_reading_rows(void **state)
{
	static const struct tp_layout *const ls[] = { &reef, &tiny };
	struct emit_reading er;
	struct emit_csv c;
	struct tp_packet pk;
	struct tp_reading r;
	struct buf b;

	(void)state;
	assert_int_equal(emit_csv_init(&c, ls, 2), 0);
	buf_init(&b, 4096);
	emit_csv_header(&b, &c);
	assert_string_equal(buf_str(&b),
	                    "id,station,time,seq,kind,kind_flag,battery,"
	                    "battery_flag,ph,ph_flag,temperature,"
	                    "temperature_flag,\"a,b\",\"a,b_flag\",wind,"
	                    "wind_flag\r\n");
	reef_reading(&pk, &r);
	er = (struct emit_reading){ "r,f", &pk, &r, 0 };
	buf_reset(&b);
	emit_csv_row(&b, &c, &er);
	assert_string_equal(buf_str(&b),
	                    "\"r,f-1796020500-118-3\",\"r,f\","
	                    "2026-11-30T07:20:00Z,118,2,1,12.480,1,,9,"
	                    "27.41,4,0.100000001,3,,\r\n");
	/* the second layout fills only its own columns */
	pk.layout = &tiny;
	r.record = 0;
	r.time_s = pk.time_s;
	r.n_values = 2;
	r.values[0] = (struct tp_value){ 1250 * 0.01, 1 };
	r.values[1] = (struct tp_value){ 3, 1 };
	buf_reset(&b);
	emit_csv_row(&b, &c, &er);
	assert_string_equal(buf_str(&b),
	                    "\"r,f-1796020500-118-0\",\"r,f\","
	                    "2026-11-30T06:35:00Z,118,,,12.50,1,,,,,,,3,1\r\n");
	/* a layout the table was not built for is refused */
	pk.layout = &other;
	buf_reset(&b);
	emit_csv_row(&b, &c, &er);
	assert_true(buf_failed(&b));
	buf_free(&b);
	emit_csv_free(&c);
	emit_csv_free(NULL);
}

/* ---- the buffer ------------------------------------------------------- */

/* Appends past the cap fail whole and stick until reset. */
static void buf_cap_is_sticky(void **state)
{
	struct buf b;

	(void)state;
	buf_init(&b, 8);
	buf_adds(&b, "12345");
	assert_false(buf_failed(&b));
	buf_adds(&b, "6789");
	assert_true(buf_failed(&b));
	assert_string_equal(buf_str(&b), "12345");
	buf_addc(&b, 'x');
	assert_string_equal(buf_str(&b), "12345");
	buf_reset(&b);
	buf_printf(&b, "%d-%s", 1234, "5678"); /* 9 bytes: one too many */
	assert_true(buf_failed(&b));
	assert_string_equal(buf_str(&b), "");
	buf_reset(&b);
	buf_printf(&b, "%d-%s", 1234, "567"); /* exactly the cap */
	assert_false(buf_failed(&b));
	buf_reset(&b);
	buf_printf(&b, "%d-%s", 12, "3456");
	assert_false(buf_failed(&b));
	assert_string_equal(buf_str(&b), "12-3456");
	assert_true(b.size <= b.max + 1);
	buf_free(&b);
	buf_free(NULL);
}

/* buf_printf grows past its first allocation in one go. */
static void buf_printf_grows(void **state)
{
	char big[3000];
	struct buf b;

	(void)state;
	memset(big, 'z', sizeof(big) - 1);
	big[sizeof(big) - 1] = '\0';
	buf_init(&b, 1 << 20);
	buf_adds(&b, "a");
	buf_printf(&b, "<%s>", big);
	assert_false(buf_failed(&b));
	assert_int_equal(b.len, 1 + 2 + sizeof(big) - 1);
	assert_int_equal(buf_str(&b)[b.len - 1], '>');
	buf_free(&b);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(numbers_follow_their_field),
		cmocka_unit_test(shortest_round_trips),
		cmocka_unit_test(float32_round_trips),
		cmocka_unit_test(json_strings_are_escaped),
		cmocka_unit_test(json_strings_always_parse),
		cmocka_unit_test(times_are_rfc3339),
		cmocka_unit_test(times_out_of_range_are_clamped),
		cmocka_unit_test(times_parse),
		cmocka_unit_test(times_round_trip),
		cmocka_unit_test(ids_have_the_wire_form),
		cmocka_unit_test(csv_cells_are_quoted),
		cmocka_unit_test(json_reading_matches_wire),
		cmocka_unit_test(csv_reading_rows),
		cmocka_unit_test(buf_cap_is_sticky),
		cmocka_unit_test(buf_printf_grows),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
