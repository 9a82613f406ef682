/*
 * test_frame.c - the streaming framer, the framing encoders, the COBS
 * helpers, framing names, and tp_strerror.
 *
 * Sources of the expected values:
 *  [SCI2]  SCIENCE.md section 2: COBS vectors for both encoder variants
 *          (P = Cheshire & Baker 1999 paper code, W = optimised form),
 *          and the paper's figures 2 and 3 as quoted there.
 *  [RFC]   RFC 1055 (SLIP): END 0xC0, ESC 0xDB, ESC_END 0xDC, ESC_ESC 0xDD.
 *  [SPEC]  LAYOUT.md and frame.h: the rules of our own framings (hex
 *          lines, whole, fixed:N, broken frames, frame_start); expected
 *          results are worked out by hand from those rules.
 * Random payloads and garbage are invented (seeded xorshift); what they
 * must produce follows from how the stream was built, not from the code.
 *
 * Event strings: the run of a stream is written as "R:<hex>@<start>" for
 * each READY frame and "B@<start>" for each BROKEN one, space separated,
 * where <start> is frame_start.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "tidepost/frame.h"
#include "tidepost/status.h"

#define BIG (1u << 20)

static uint64_t rng_state = 0x2545F4914F6CDD1Du;

static uint32_t rnd(void)
{
	rng_state ^= rng_state << 13;
	rng_state ^= rng_state >> 7;
	rng_state ^= rng_state << 17;
	return (uint32_t)(rng_state >> 16);
}

/* ---- helpers ----------------------------------------------------------- */

/*
 * Byte spec: tokens separated by blanks; "3F" one byte, "01-FE" the
 * ascending run 01..FE, "01*254" the byte 01 repeated 254 times.
 */
static size_t spec(const char *s, uint8_t *out, size_t cap)
{
	unsigned long a, b, k;
	size_t n = 0;
	char *end;

	while (*s != '\0') {
		if (*s == ' ') {
			s++;
			continue;
		}
		a = strtoul(s, &end, 16);
		if (end == s || a > 0xFF)
			fail_msg("bad spec at '%s'", s);
		s = end;
		if (*s == '-') {
			b = strtoul(s + 1, &end, 16);
			assert_true(b <= 0xFF && b >= a && n + (b - a) < cap);
			for (k = a; k <= b; k++)
				out[n++] = (uint8_t)k;
		} else if (*s == '*') {
			b = strtoul(s + 1, &end, 10);
			assert_true(n + b <= cap);
			for (k = 0; k < b; k++)
				out[n++] = (uint8_t)a;
		} else {
			assert_true(n < cap);
			out[n++] = (uint8_t)a;
			end = (char *)s;
		}
		s = end;
	}
	return n;
}

static size_t add_hex(char *out, size_t at, size_t cap, const uint8_t *p,
                      size_t n)
{
	size_t i;

	for (i = 0; i < n && at + 3 < cap; i++)
		at += (size_t)snprintf(out + at, cap - at, "%02X", p[i]);
	return at;
}

/* Append one event to ev (length *at). */
static void add_event(char *ev, size_t *at, const struct tp_framer *f,
                      enum tp_frame_result r)
{
	size_t n = *at;

	if (r == TP_FRAME_MORE)
		return;
	if (n > 0)
		n += (size_t)snprintf(ev + n, BIG - n, " ");
	if (r == TP_FRAME_READY) {
		n += (size_t)snprintf(ev + n, BIG - n, "R:");
		n = add_hex(ev, n, BIG, tp_frame_data(f), f->len);
	} else {
		n += (size_t)snprintf(ev + n, BIG - n, "B");
	}
	n += (size_t)snprintf(ev + n, BIG - n, "@%llu",
	                      (unsigned long long)f->frame_start);
	assert_true(n < BIG - 1);
	*at = n;
}

static uint8_t frame_buf[8192];

/*
 * Run a whole stream through a fresh framer in pieces of `chunk` bytes
 * (0: random sizes, zero-length pushes included), then finish.  Writes
 * the events into ev and checks the counters against them.
 */
static void run(enum tp_framing kind, size_t fixed_n, size_t cap,
                const uint8_t *in, size_t n, size_t chunk, char *ev)
{
	struct tp_framer f;
	enum tp_frame_result r;
	size_t at = 0, used, piece, len = 0;
	uint64_t ready = 0, broken = 0;

	assert_true(cap <= sizeof(frame_buf));
	assert_int_equal(tp_frame_init(&f, kind, fixed_n, frame_buf, cap), 0);
	ev[0] = '\0';
	while (at < n) {
		piece = chunk != 0 ? chunk : rnd() % 40u;
		if (piece > n - at)
			piece = n - at;
		r = tp_frame_push(&f, in + at, piece, &used);
		assert_true(used <= piece);
		if (r == TP_FRAME_MORE)
			assert_int_equal(used, piece);
		else
			assert_true(used > 0);
		at += used;
		ready += r == TP_FRAME_READY;
		broken += r == TP_FRAME_BROKEN;
		add_event(ev, &len, &f, r);
	}
	r = tp_frame_finish(&f);
	ready += r == TP_FRAME_READY;
	broken += r == TP_FRAME_BROKEN;
	add_event(ev, &len, &f, r);
	/* a second finish has nothing left to report */
	assert_int_equal(tp_frame_finish(&f), TP_FRAME_MORE);
	assert_int_equal(f.frames, ready);
	assert_int_equal(f.broken, broken);
	assert_int_equal(f.offset, n);
}

static char ev1[BIG], ev2[BIG], ev3[BIG], want[BIG];

/* Run in one piece, byte by byte and in random pieces: all must agree. */
static void run_all_ways(enum tp_framing kind, size_t fixed_n, size_t cap,
                         const uint8_t *in, size_t n)
{
	run(kind, fixed_n, cap, in, n, n > 0 ? n : 1, ev1);
	run(kind, fixed_n, cap, in, n, 1, ev2);
	run(kind, fixed_n, cap, in, n, 0, ev3);
	assert_string_equal(ev1, ev2);
	assert_string_equal(ev1, ev3);
}

/* ---- COBS vectors ------------------------------------------------------ */

static const struct {
	const char *in, *p, *w; /* w NULL: same as p */
} cobs_rows[] = {
	/* [SCI2] a lone zero: two empty blocks */
	{ "00", "01 01", NULL },
	/* [SCI2] two zeros */
	{ "00 00", "01 01 01", NULL },
	/* [SCI2] zeros at both ends */
	{ "00 11 00", "01 02 11 01", NULL },
	/* [SCI2] zero in the middle */
	{ "11 22 00 33", "03 11 22 02 33", NULL },
	/* [SCI2] no zero at all */
	{ "11 22 33 44", "05 11 22 33 44", NULL },
	/* [SCI2] trailing zeros */
	{ "11 00 00 00", "02 11 01 01 01", NULL },
	/* [SCI2] the empty packet */
	{ "", "01", NULL },
	/* [SCI2] 254 non-zero bytes: the forms differ by the final 01 */
	{ "01-FE", "FF 01-FE 01", "FF 01-FE" },
	/* [SCI2] a zero then 254 non-zero bytes */
	{ "00 01-FE", "01 FF 01-FE 01", "01 FF 01-FE" },
	/* [SCI2] 255 non-zero bytes: a second block follows the FF one */
	{ "01-FF", "FF 01-FE 02 FF", NULL },
	/* [SCI2] 254 non-zero then a zero */
	{ "02-FF 00", "FF 02-FF 01 01", NULL },
	/* [SCI2] a 253-byte block, zero, one more byte */
	{ "03-FF 00 01", "FE 03-FF 02 01", NULL },
	/* [SCI2] 253 ones: the longest block below FF */
	{ "01*253", "FE 01*253", NULL },
	/* [SCI2] 254 ones */
	{ "01*254", "FF 01*254 01", "FF 01*254" },
	/* [SCI2] 255 ones */
	{ "01*255", "FF 01*254 02 01", NULL },
	/* [SCI2] 508 ones: two full blocks */
	{ "01*508", "FF 01*254 FF 01*254 01", "FF 01*254 FF 01*254" },
	/* [SCI2] Cheshire & Baker figure 2: 679 ones and a zero */
	{ "01*679 00", "FF 01*254 FF 01*254 AC 01*171 01", NULL },
	/* [SCI2] Cheshire & Baker figure 3: an IP header fragment */
	{ "45 00 00 2C 4C 79 00 00 40 06 4F 37",
	  "02 45 01 04 2C 4C 79 01 05 40 06 4F 37", NULL },
};

static uint8_t in_b[4096], p_b[4096], w_b[4096], out_b[4096], tmp_b[4096];

static void check_cobs_form(const uint8_t *in, size_t n, const uint8_t *enc,
                            size_t en)
{
	size_t len;

	/* the one-shot decoder gives the payload back, and needs its room */
	assert_int_equal(tp_cobs_decode(enc, en, out_b, n, &len), TP_OK);
	assert_int_equal(len, n);
	assert_memory_equal(out_b, in, n);
	if (n > 0)
		assert_int_equal(tp_cobs_decode(enc, en, out_b, n - 1, &len),
		                 TP_ERR_SPACE);
	/* the framer, fed the form and its delimiter, too */
	memcpy(tmp_b, enc, en);
	tmp_b[en] = 0;
	run_all_ways(TP_FRAMING_COBS, 0, 4096, tmp_b, en + 1);
	len = (size_t)snprintf(want, BIG, "R:");
	len = add_hex(want, len, BIG, in, n);
	snprintf(want + len, BIG - len, "@0");
	assert_string_equal(ev1, want);
}

/* Both encoder variants produce the published bytes; both decode. */
static void cobs_vectors(void **state)
{
	size_t i, n, pn, wn, len;

	(void)state;
	for (i = 0; i < sizeof(cobs_rows) / sizeof(cobs_rows[0]); i++) {
		n = spec(cobs_rows[i].in, in_b, sizeof(in_b));
		pn = spec(cobs_rows[i].p, p_b, sizeof(p_b));
		wn = spec(cobs_rows[i].w ? cobs_rows[i].w : cobs_rows[i].p,
		          w_b, sizeof(w_b));
		assert_int_equal(tp_cobs_encode(in_b, n, 1, out_b, 4096, &len),
		                 TP_OK);
		assert_int_equal(len, pn);
		assert_memory_equal(out_b, p_b, pn);
		/* exactly enough room is enough; one byte less is not */
		assert_int_equal(tp_cobs_encode(in_b, n, 1, out_b, pn, &len),
		                 TP_OK);
		assert_int_equal(tp_cobs_encode(in_b, n, 1, out_b, pn - 1,
		                                &len), TP_ERR_SPACE);
		assert_int_equal(tp_cobs_encode(in_b, n, 0, out_b, 4096, &len),
		                 TP_OK);
		assert_int_equal(len, wn);
		assert_memory_equal(out_b, w_b, wn);
		/* the documented buffer size covers both forms */
		assert_true(pn <= n + n / 254 + 1);
		check_cobs_form(in_b, n, w_b, wn);
		check_cobs_form(in_b, n, p_b, pn);
	}
}

/* Block sequences the one-shot decoder must refuse. */
static void cobs_decode_errors(void **state)
{
	static const struct {
		const char *enc;
		enum tp_status want;
	} r[] = {
		/* no code byte at all */
		{ "", TP_ERR_FRAME },
		/* block says 4 data bytes, 2 came */
		{ "05 11 22", TP_ERR_FRAME },
		/* a full block cut short */
		{ "FF 01*253", TP_ERR_FRAME },
		/* a zero is a delimiter, never inside an encoding */
		{ "02 00 11", TP_ERR_FRAME },
		/* a well-formed one for contrast */
		{ "02 11 01", TP_OK },
	};
	uint8_t enc[512], out[512];
	size_t i, n, len;

	(void)state;
	for (i = 0; i < sizeof(r) / sizeof(r[0]); i++) {
		n = spec(r[i].enc, enc, sizeof(enc));
		assert_int_equal(tp_cobs_decode(enc, n, out, sizeof(out),
		                                &len), r[i].want);
	}
	assert_int_equal(tp_cobs_decode(NULL, 1, out, 4, &len), TP_ERR_ARG);
}

/* ---- stream rows ------------------------------------------------------- */

static const struct {
	enum tp_framing kind;
	size_t fixed_n, cap;
	const char *bytes; /* byte spec, or NULL when text is used */
	const char *text;
	const char *want;
} rows[] = {
	/* cobs [SCI2]+[SPEC]: idle 00s are skipped; start is the code byte */
	{ TP_FRAMING_COBS, 0, 64, "00 00 03 11 22 02 33 00", NULL,
	  "R:11220033@2" },
	/* cobs: block runs past the delimiter -> broken, next one fine */
	{ TP_FRAMING_COBS, 0, 64, "05 11 22 00 02 33 00", NULL,
	  "B@0 R:33@4" },
	/* cobs: "01 00" is the empty packet, delivered with len 0 */
	{ TP_FRAMING_COBS, 0, 64, "01 00", NULL, "R:@0" },
	/* cobs: stream ends inside a block -> broken at finish */
	{ TP_FRAMING_COBS, 0, 64, "02 11", NULL, "B@0" },
	/* cobs: complete blocks but no delimiter -> still a truncation */
	{ TP_FRAMING_COBS, 0, 64, "03 11 22", NULL, "B@0" },
	/* cobs: 5 bytes with cap 4 -> broken; resync at the 00 */
	{ TP_FRAMING_COBS, 0, 4, "06 01 02 03 04 05 00 02 09 00", NULL,
	  "B@0 R:09@7" },
	/* cobs: exactly cap bytes fit */
	{ TP_FRAMING_COBS, 0, 4, "05 01 02 03 04 00", NULL,
	  "R:01020304@0" },
	/* cobs: the implied zero counts toward cap (01 02 00 03 04) */
	{ TP_FRAMING_COBS, 0, 4, "03 01 02 03 03 04 00", NULL, "B@0" },
	/* cobs: a very long frame is counted once */
	{ TP_FRAMING_COBS, 0, 16, "01*100 00 02 41 00", NULL,
	  "B@0 R:41@101" },
	/* cobs: frames back to back with no idle byte between */
	{ TP_FRAMING_COBS, 0, 64, "02 41 00 02 42 00", NULL,
	  "R:41@0 R:42@3" },
	/* cobs: only idle fill -> nothing, nothing counted */
	{ TP_FRAMING_COBS, 0, 64, "00 00 00", NULL, "" },
	/* slip [RFC]: a leading END flushes noise; start after it */
	{ TP_FRAMING_SLIP, 0, 64, "C0 41 42 C0", NULL, "R:4142@1" },
	/* slip [RFC]: ESC ESC_END is C0 and ESC ESC_ESC is DB in the data */
	{ TP_FRAMING_SLIP, 0, 64, "41 DB DC 42 DB DD C0", NULL,
	  "R:41C042DB@0" },
	/* slip: empty frames between ENDs are ignored */
	{ TP_FRAMING_SLIP, 0, 64, "C0 C0 41 C0 C0", NULL, "R:41@2" },
	/* slip: ESC then an ordinary byte -> broken, next frame fine */
	{ TP_FRAMING_SLIP, 0, 64, "41 DB 42 C0 43 44 C0", NULL,
	  "B@0 R:4344@4" },
	/* slip: ESC then END -> broken (END still ends the frame) */
	{ TP_FRAMING_SLIP, 0, 64, "41 DB C0 43 C0", NULL, "B@0 R:43@3" },
	/* slip: ESC ESC is no escape either */
	{ TP_FRAMING_SLIP, 0, 64, "DB DB C0", NULL, "B@0" },
	/* slip: a frame holding only an escaped END */
	{ TP_FRAMING_SLIP, 0, 64, "DB DC C0", NULL, "R:C0@0" },
	/* slip: DC and DD without ESC are plain data */
	{ TP_FRAMING_SLIP, 0, 64, "DC DD C0", NULL, "R:DCDD@0" },
	/* slip: a raw END inside data splits it in two */
	{ TP_FRAMING_SLIP, 0, 64, "41 C0 42 C0", NULL, "R:41@0 R:42@2" },
	/* slip: unterminated frame at end of stream -> broken */
	{ TP_FRAMING_SLIP, 0, 64, "41 42", NULL, "B@0" },
	/* slip: stream ends right after ESC -> broken */
	{ TP_FRAMING_SLIP, 0, 64, "41 DB", NULL, "B@0" },
	/* slip: 3 bytes with cap 2 -> broken, resync */
	{ TP_FRAMING_SLIP, 0, 2, "41 42 43 C0 44 C0", NULL, "B@0 R:44@4" },
	/* hex [SPEC]: mixed case digits */
	{ TP_FRAMING_HEX, 0, 64, NULL, "0a1B\n", "R:0A1B@0" },
	/* hex: blanks anywhere; CRLF; start is the first non-blank */
	{ TP_FRAMING_HEX, 0, 64, NULL, "  0A 1b\t2C \r\n", "R:0A1B2C@2" },
	/* hex: empty and blank-only lines are ignored */
	{ TP_FRAMING_HEX, 0, 64, NULL, "\n\n\r\n \t\n", "" },
	/* hex: odd digit count -> broken */
	{ TP_FRAMING_HEX, 0, 64, NULL, "abc\n12\n", "B@0 R:12@4" },
	/* hex: bad chars; last line without newline is delivered */
	{ TP_FRAMING_HEX, 0, 64, NULL, "zz12\nAB", "B@0 R:AB@5" },
	/* hex: a bad char mid-line breaks the whole line */
	{ TP_FRAMING_HEX, 0, 64, NULL, "12G4\n34\n", "B@0 R:34@5" },
	/* hex: CR alone ends a line; two odd lines */
	{ TP_FRAMING_HEX, 0, 64, NULL, "1\r2\n", "B@0 B@2" },
	/* hex: CRLF lines; the LF after CR is an empty line */
	{ TP_FRAMING_HEX, 0, 64, NULL, "AB\r\nCD\r\n", "R:AB@0 R:CD@4" },
	/* hex: CR-only line ends */
	{ TP_FRAMING_HEX, 0, 64, NULL, "AB\rCD\r", "R:AB@0 R:CD@3" },
	/* hex: a blank between the two digits of a byte is ignored */
	{ TP_FRAMING_HEX, 0, 64, NULL, "A B\n", "R:AB@0" },
	/* hex: blanks do not hide an odd count */
	{ TP_FRAMING_HEX, 0, 64, NULL, "A BC\n", "B@0" },
	/* hex: 5 bytes with cap 4 -> broken */
	{ TP_FRAMING_HEX, 0, 4, NULL, "0102030405\n0102\n",
	  "B@0 R:0102@11" },
	/* hex: an odd last line without newline -> broken at finish */
	{ TP_FRAMING_HEX, 0, 64, NULL, "12\n3", "R:12@0 B@3" },
	/* hex: every digit, both cases */
	{ TP_FRAMING_HEX, 0, 64, NULL, "0123456789abcdefABCDEF\n",
	  "R:0123456789ABCDEFABCDEF@0" },
	/* hex: no 0x prefix */
	{ TP_FRAMING_HEX, 0, 64, NULL, "0x12\n", "B@0" },
	/* hex: a control byte is a bad char */
	{ TP_FRAMING_HEX, 0, 64, NULL, "12\x01" "34\n", "B@0" },
	/* whole [SPEC]: empty input gives nothing */
	{ TP_FRAMING_WHOLE, 0, 8, "", NULL, "" },
	/* whole: everything is one packet, zeros included */
	{ TP_FRAMING_WHOLE, 0, 8, "61 00 00 62", NULL, "R:61000062@0" },
	/* whole: exactly cap */
	{ TP_FRAMING_WHOLE, 0, 8, "01*8", NULL, "R:0101010101010101@0" },
	/* whole: over cap -> broken */
	{ TP_FRAMING_WHOLE, 0, 8, "01*9", NULL, "B@0" },
	/* fixed:3 [SPEC]: two records and a partial tail (broken) */
	{ TP_FRAMING_FIXED, 3, 8, "61 62 63 64 65 66 67 68", NULL,
	  "R:616263@0 R:646566@3 B@6" },
	/* fixed:3: exactly one record */
	{ TP_FRAMING_FIXED, 3, 8, "61 62 63", NULL, "R:616263@0" },
	/* fixed:3: nothing */
	{ TP_FRAMING_FIXED, 3, 8, "", NULL, "" },
	/* fixed:1: every byte, any value */
	{ TP_FRAMING_FIXED, 1, 8, "00 FF", NULL, "R:00@0 R:FF@1" },
};

/* Each row gives the events worked out by hand, fed any way. */
static void stream_rows(void **state)
{
	static uint8_t in[4096];
	size_t i, n;

	(void)state;
	for (i = 0; i < sizeof(rows) / sizeof(rows[0]); i++) {
		if (rows[i].bytes != NULL) {
			n = spec(rows[i].bytes, in, sizeof(in));
		} else {
			n = strlen(rows[i].text);
			memcpy(in, rows[i].text, n);
		}
		run_all_ways(rows[i].kind, rows[i].fixed_n, rows[i].cap, in,
		             n);
		if (strcmp(ev1, rows[i].want) != 0)
			fail_msg("row %zu (%s): got \"%s\", want \"%s\"", i,
			         tp_framing_name(rows[i].kind), ev1,
			         rows[i].want);
	}
}

/* A READY frame stays until the next call, then is released. */
static void ready_frame_lifetime(void **state)
{
	static const uint8_t s[] = { 0x02, 0x41, 0x00, 0x02, 0x42, 0x00 };
	struct tp_framer f;
	uint8_t buf[16];
	size_t used;

	(void)state;
	assert_int_equal(tp_frame_init(&f, TP_FRAMING_COBS, 0, buf, 16), 0);
	/* consumption stops right after the first delimiter */
	assert_int_equal(tp_frame_push(&f, s, 6, &used), TP_FRAME_READY);
	assert_int_equal(used, 3);
	assert_int_equal(f.len, 1);
	assert_int_equal(tp_frame_data(&f)[0], 0x41);
	assert_int_equal(tp_frame_push(&f, s + 3, 3, &used), TP_FRAME_READY);
	assert_int_equal(used, 3);
	assert_int_equal(tp_frame_data(&f)[0], 0x42);
	/* finishing releases the frame and finds nothing pending */
	assert_int_equal(tp_frame_finish(&f), TP_FRAME_MORE);
	assert_int_equal(f.len, 0);
	assert_int_equal(f.frames, 2);
	/* a zero-length push is harmless */
	assert_int_equal(tp_frame_push(&f, s, 0, &used), TP_FRAME_MORE);
	assert_int_equal(used, 0);
	/* NULL input is discarded, never spins a caller's loop */
	assert_int_equal(tp_frame_push(&f, NULL, 5, &used), TP_FRAME_MORE);
	assert_int_equal(used, 5);
	assert_int_equal(tp_frame_push(NULL, s, 5, &used), TP_FRAME_MORE);
	assert_int_equal(used, 5);
	assert_int_equal(tp_frame_finish(NULL), TP_FRAME_MORE);
}

/* Bad framer set-ups are refused. */
static void init_errors(void **state)
{
	struct tp_framer f;
	uint8_t buf[8];

	(void)state;
	/* no framer, no buffer, no room */
	assert_int_equal(tp_frame_init(NULL, TP_FRAMING_COBS, 0, buf, 8),
	                 TP_ERR_ARG);
	assert_int_equal(tp_frame_init(&f, TP_FRAMING_COBS, 0, NULL, 8),
	                 TP_ERR_ARG);
	assert_int_equal(tp_frame_init(&f, TP_FRAMING_COBS, 0, buf, 0),
	                 TP_ERR_ARG);
	/* fixed:0, and a record larger than the buffer */
	assert_int_equal(tp_frame_init(&f, TP_FRAMING_FIXED, 0, buf, 8),
	                 TP_ERR_ARG);
	assert_int_equal(tp_frame_init(&f, TP_FRAMING_FIXED, 9, buf, 8),
	                 TP_ERR_ARG);
	assert_int_equal(tp_frame_init(&f, TP_FRAMING_FIXED, 8, buf, 8),
	                 TP_OK);
	/* a value outside the enum */
	assert_int_equal(tp_frame_init(&f, (enum tp_framing)42, 0, buf, 8),
	                 TP_ERR_ARG);
}

/* ---- random streams ---------------------------------------------------- */

static uint8_t stream[200000];

/* A random byte, often one that means something to the framing. */
static uint8_t biased(enum tp_framing kind)
{
	static const uint8_t special[] = { 0x00, 0xC0, 0xDB, 0xDC, 0xDD,
	                                   '\n', '\r', ' ', '\t', 0x01,
	                                   0xFF };
	static const char hexc[] = "0123456789abcdefABCDEF";
	uint32_t r = rnd() % 16u;

	if (r < 3)
		return special[rnd() % sizeof(special)];
	if (kind == TP_FRAMING_HEX && r < 14)
		return (uint8_t)hexc[rnd() % (sizeof(hexc) - 1)];
	return (uint8_t)rnd();
}

/* Any split of any stream gives the same events. */
static void split_independence(void **state)
{
	static const enum tp_framing kinds[] = {
		TP_FRAMING_COBS, TP_FRAMING_SLIP, TP_FRAMING_HEX,
		TP_FRAMING_WHOLE, TP_FRAMING_FIXED
	};
	size_t k, t, i, n;

	(void)state;
	for (k = 0; k < sizeof(kinds) / sizeof(kinds[0]); k++) {
		for (t = 0; t < 40; t++) {
			n = rnd() % 3000u;
			for (i = 0; i < n; i++)
				stream[i] = biased(kinds[k]);
			/* small cap so over-long frames happen too */
			run_all_ways(kinds[k], 1 + t % 7, 8 + t * 4, stream, n);
		}
	}
}

/* Random payload with the bytes framings care about well represented. */
static size_t payload(uint8_t *p, size_t max_n, enum tp_framing kind)
{
	static const size_t edges[] = { 1, 2, 253, 254, 255, 508, 509 };
	size_t n, i;

	n = rnd() % 2u ? edges[rnd() % 7u] : 1 + rnd() % max_n;
	if (n > max_n)
		n = max_n;
	for (i = 0; i < n; i++)
		p[i] = rnd() % 3u ? biased(TP_FRAMING_WHOLE) : 0x01;
	(void)kind;
	return n;
}

static size_t put_event(char *w, size_t at, const uint8_t *p, size_t n,
                        size_t start, int ok)
{
	if (at > 0)
		at += (size_t)snprintf(w + at, BIG - at, " ");
	if (!ok)
		return at + (size_t)snprintf(w + at, BIG - at, "B@%zu", start);
	at += (size_t)snprintf(w + at, BIG - at, "R:");
	at = add_hex(w, at, BIG, p, n);
	return at + (size_t)snprintf(w + at, BIG - at, "@%zu", start);
}

/* Garbage that is sure to be a broken frame in this framing, ended by
 * the framing's delimiter. */
static size_t bad_garbage(enum tp_framing kind, uint8_t *g)
{
	size_t n = 0, k = rnd() % 40u, i;

	if (kind == TP_FRAMING_COBS) {
		g[n++] = 0xFF; /* a full block that never completes */
		for (i = 0; i < k; i++)
			g[n++] = (uint8_t)(1 + rnd() % 255u);
		g[n++] = 0x00;
	} else if (kind == TP_FRAMING_SLIP) {
		for (i = 0; i < k; i++)
			g[n++] = (uint8_t)(rnd() % 0xC0u);
		g[n++] = 0xDB; /* bad escape */
		g[n++] = 0x41;
		g[n++] = 0xC0;
	} else {
		for (i = 0; i < k; i++)
			g[n++] = (uint8_t)('g' + rnd() % 20u);
		g[n++] = 'z';
		g[n++] = '\n';
	}
	return n;
}

/* Valid frames between broken garbage: every frame recovered, every
 * garbage chunk counted broken once, with the right offsets. */
static void resync_exact(void **state)
{
	static const enum tp_framing kinds[] = {
		TP_FRAMING_COBS, TP_FRAMING_SLIP, TP_FRAMING_HEX
	};
	static uint8_t p[600];
	size_t k, t, n, pn, en, at, wl;

	(void)state;
	for (k = 0; k < 3; k++) {
		at = 0;
		wl = 0;
		want[0] = '\0';
		for (t = 0; t < 30; t++) {
			n = bad_garbage(kinds[k], stream + at);
			wl = put_event(want, wl, NULL, 0, at, 0);
			at += n;
			pn = payload(p, sizeof(p), kinds[k]);
			assert_int_equal(tp_frame_encode(kinds[k], p, pn,
			        stream + at, sizeof(stream) - at, &en), TP_OK);
			wl = put_event(want, wl, p, pn, at, 1);
			at += en;
		}
		run_all_ways(kinds[k], 0, 600, stream, at);
		assert_string_equal(ev1, want);
	}
}

/* Random garbage (which may even look like frames) between valid frames
 * sent with a leading delimiter: every valid frame is still recovered in
 * order, at its own offset. */
static void resync_random_garbage(void **state)
{
	static const enum tp_framing kinds[] = {
		TP_FRAMING_COBS, TP_FRAMING_SLIP, TP_FRAMING_HEX
	};
	static const uint8_t lead[] = { 0x00, 0xC0, '\n' };
	static char tok[30][1400];
	static uint8_t p[600];
	size_t k, t, i, g, pn, en, at;
	const char *from;

	(void)state;
	for (k = 0; k < 3; k++) {
		at = 0;
		for (t = 0; t < 30; t++) {
			g = rnd() % 50u;
			for (i = 0; i < g; i++)
				stream[at++] = biased(kinds[k]);
			stream[at++] = lead[k];
			pn = payload(p, sizeof(p), kinds[k]);
			assert_int_equal(tp_frame_encode(kinds[k], p, pn,
			        stream + at, sizeof(stream) - at, &en), TP_OK);
			/* " R:<hex>@<at> " matches this one event only */
			tok[t][0] = ' ';
			i = put_event(tok[t] + 1, 0, p, pn, at, 1);
			tok[t][i + 1] = ' ';
			tok[t][i + 2] = '\0';
			at += en;
		}
		ev1[0] = ' ';
		run(kinds[k], 0, 600, stream, at, 1, ev1 + 1);
		i = strlen(ev1);
		ev1[i] = ' ';
		ev1[i + 1] = '\0';
		from = ev1;
		for (t = 0; t < 30; t++) {
			from = strstr(from, tok[t]);
			if (from == NULL)
				fail_msg("%s: frame %zu lost",
				         tp_framing_name(kinds[k]), t);
			from += strlen(tok[t]) - 1;
		}
	}
}

/* ---- encoding ---------------------------------------------------------- */

/* Known encodings from the standards. */
static void encode_examples(void **state)
{
	static const struct {
		enum tp_framing kind;
		const char *in, *out;
	} r[] = {
		/* [RFC] END and ESC escaped, END appended */
		{ TP_FRAMING_SLIP, "C0 DB 41", "DB DC DB DD 41 C0" },
		/* [RFC] ESC_END/ESC_ESC values alone are not escaped */
		{ TP_FRAMING_SLIP, "DC DD", "DC DD C0" },
		/* [SPEC] upper-case hex and a newline */
		{ TP_FRAMING_HEX, "0A FF 5c", "30 41 46 46 35 43 0A" },
		/* [SCI2] paper form plus the 00 delimiter */
		{ TP_FRAMING_COBS, "11 22 00 33", "03 11 22 02 33 00" },
		/* [SCI2] paper form keeps the final 01 after 254 bytes */
		{ TP_FRAMING_COBS, "01-FE", "FF 01-FE 01 00" },
		/* [SCI2] the empty packet */
		{ TP_FRAMING_COBS, "", "01 00" },
		/* [SPEC] whole and fixed copy the bytes */
		{ TP_FRAMING_WHOLE, "00 C0 0A", "00 C0 0A" },
		{ TP_FRAMING_FIXED, "00 C0 0A", "00 C0 0A" },
	};
	uint8_t in[600], out[600], ex[600];
	size_t i, n, en, len;

	(void)state;
	for (i = 0; i < sizeof(r) / sizeof(r[0]); i++) {
		n = spec(r[i].in, in, sizeof(in));
		en = spec(r[i].out, ex, sizeof(ex));
		assert_int_equal(tp_frame_encode(r[i].kind, in, n, out,
		                                 sizeof(out), &len), TP_OK);
		assert_int_equal(len, en);
		assert_memory_equal(out, ex, en);
		assert_true(len <= tp_frame_bound(r[i].kind, n));
		/* one byte short of room is refused */
		assert_int_equal(tp_frame_encode(r[i].kind, in, n, out, en - 1,
		                                 &len), TP_ERR_SPACE);
	}
	/* fixed has no empty record; bad kind and NULLs are refused */
	assert_int_equal(tp_frame_encode(TP_FRAMING_FIXED, in, 0, out, 8,
	                                 &len), TP_ERR_ARG);
	assert_int_equal(tp_frame_encode((enum tp_framing)9, in, 1, out, 8,
	                                 &len), TP_ERR_ARG);
	assert_int_equal(tp_frame_encode(TP_FRAMING_COBS, NULL, 1, out, 8,
	                                 &len), TP_ERR_ARG);
	/* bounds: worst cases worked out from the encodings */
	assert_int_equal(tp_frame_bound(TP_FRAMING_COBS, 254), 257);
	assert_int_equal(tp_frame_bound(TP_FRAMING_SLIP, 10), 21);
	assert_int_equal(tp_frame_bound(TP_FRAMING_HEX, 10), 21);
	assert_int_equal(tp_frame_bound(TP_FRAMING_WHOLE, 10), 10);
	assert_int_equal(tp_frame_bound(TP_FRAMING_SLIP, SIZE_MAX / 2),
	                 SIZE_MAX);
	assert_int_equal(tp_frame_bound(TP_FRAMING_COBS, SIZE_MAX), SIZE_MAX);
}

/* encode -> decode gives the payload back in every framing. */
static void round_trip(void **state)
{
	static const enum tp_framing kinds[] = {
		TP_FRAMING_COBS, TP_FRAMING_SLIP, TP_FRAMING_HEX,
		TP_FRAMING_WHOLE, TP_FRAMING_FIXED
	};
	static uint8_t p[700], enc[2000];
	size_t k, t, n, en, len;

	(void)state;
	for (k = 0; k < 5; k++) {
		for (t = 0; t < 60; t++) {
			n = payload(p, sizeof(p), kinds[k]);
			assert_int_equal(tp_frame_encode(kinds[k], p, n, enc,
			                 tp_frame_bound(kinds[k], n), &en), TP_OK);
			assert_true(en <= tp_frame_bound(kinds[k], n));
			run_all_ways(kinds[k], n, 1024, enc, en);
			len = put_event(want, 0, p, n, 0, 1);
			assert_true(len > 0);
			assert_string_equal(ev1, want);
		}
	}
	/* the empty packet: cobs keeps it, the others have nothing to send */
	assert_int_equal(tp_frame_encode(TP_FRAMING_COBS, p, 0, enc, 8, &en),
	                 TP_OK);
	run_all_ways(TP_FRAMING_COBS, 0, 8, enc, en);
	assert_string_equal(ev1, "R:@0");
	assert_int_equal(tp_frame_encode(TP_FRAMING_SLIP, p, 0, enc, 8, &en),
	                 TP_OK);
	run_all_ways(TP_FRAMING_SLIP, 0, 8, enc, en);
	assert_string_equal(ev1, "");
}

/* ---- names and statuses ------------------------------------------------ */

static void framing_names(void **state)
{
	static const struct {
		const char *s;
		enum tp_status want;
		enum tp_framing kind;
		size_t n;
	} r[] = {
		/* each name */
		{ "cobs", TP_OK, TP_FRAMING_COBS, 0 },
		{ "slip", TP_OK, TP_FRAMING_SLIP, 0 },
		{ "hex", TP_OK, TP_FRAMING_HEX, 0 },
		{ "whole", TP_OK, TP_FRAMING_WHOLE, 0 },
		/* case-insensitive */
		{ "SLIP", TP_OK, TP_FRAMING_SLIP, 0 },
		{ "Fixed:16", TP_OK, TP_FRAMING_FIXED, 16 },
		/* the range ends of fixed:N */
		{ "fixed:1", TP_OK, TP_FRAMING_FIXED, 1 },
		{ "fixed:65536", TP_OK, TP_FRAMING_FIXED, 65536 },
		/* out of range */
		{ "fixed:0", TP_ERR_ARG, 0, 0 },
		{ "fixed:65537", TP_ERR_ARG, 0, 0 },
		{ "fixed:99999999999999999999", TP_ERR_ARG, 0, 0 },
		/* not plain decimal */
		{ "fixed:", TP_ERR_ARG, 0, 0 },
		{ "fixed:-1", TP_ERR_ARG, 0, 0 },
		{ "fixed:+5", TP_ERR_ARG, 0, 0 },
		{ "fixed: 5", TP_ERR_ARG, 0, 0 },
		{ "fixed:5x", TP_ERR_ARG, 0, 0 },
		{ "fixed:012", TP_ERR_ARG, 0, 0 },
		{ "fixed:0x10", TP_ERR_ARG, 0, 0 },
		/* fixed needs its N */
		{ "fixed", TP_ERR_ARG, 0, 0 },
		/* other framings take no argument */
		{ "cobs:5", TP_ERR_ARG, 0, 0 },
		/* near misses */
		{ "cob", TP_ERR_ARG, 0, 0 },
		{ "cobs ", TP_ERR_ARG, 0, 0 },
		{ " hex", TP_ERR_ARG, 0, 0 },
		{ "", TP_ERR_ARG, 0, 0 },
	};
	enum tp_framing kind;
	size_t i, n;

	(void)state;
	for (i = 0; i < sizeof(r) / sizeof(r[0]); i++) {
		n = 777;
		if (tp_framing_parse(r[i].s, &kind, &n) != r[i].want)
			fail_msg("\"%s\" not %s", r[i].s, r[i].want == TP_OK ?
			         "accepted" : "refused");
		if (r[i].want != TP_OK)
			continue;
		assert_int_equal(kind, r[i].kind);
		assert_int_equal(n, r[i].n);
	}
	assert_int_equal(tp_framing_parse(NULL, &kind, &n), TP_ERR_ARG);
	assert_int_equal(tp_framing_parse("cobs", NULL, &n), TP_ERR_ARG);
	/* fixed_n may be NULL except for fixed */
	assert_int_equal(tp_framing_parse("hex", &kind, NULL), TP_OK);
	assert_int_equal(tp_framing_parse("fixed:4", &kind, NULL),
	                 TP_ERR_ARG);
	/* every name parses back to its framing */
	for (i = TP_FRAMING_COBS; i < TP_FRAMING_FIXED; i++) {
		assert_int_equal(tp_framing_parse(tp_framing_name(
		                 (enum tp_framing)i), &kind, &n), TP_OK);
		assert_int_equal(kind, i);
	}
	assert_string_equal(tp_framing_name(TP_FRAMING_FIXED), "fixed");
	assert_string_equal(tp_framing_name((enum tp_framing)99), "unknown");
}

/* Every status has its own non-empty text; unknown codes too. */
static void status_strings(void **state)
{
	int i, j;

	(void)state;
	for (i = 0; i < TP_STATUS_MAX; i++) {
		assert_non_null(tp_strerror((enum tp_status)i));
		assert_true(strlen(tp_strerror((enum tp_status)i)) > 0);
		for (j = 0; j < i; j++)
			assert_string_not_equal(tp_strerror((enum tp_status)i),
			                        tp_strerror((enum tp_status)j));
	}
	assert_non_null(tp_strerror(TP_STATUS_MAX));
	assert_non_null(tp_strerror((enum tp_status)-1));
	assert_non_null(tp_strerror((enum tp_status)1000));
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(cobs_vectors),
		cmocka_unit_test(cobs_decode_errors),
		cmocka_unit_test(stream_rows),
		cmocka_unit_test(ready_frame_lifetime),
		cmocka_unit_test(init_errors),
		cmocka_unit_test(split_independence),
		cmocka_unit_test(resync_exact),
		cmocka_unit_test(resync_random_garbage),
		cmocka_unit_test(encode_examples),
		cmocka_unit_test(round_trip),
		cmocka_unit_test(framing_names),
		cmocka_unit_test(status_strings),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
