/*
 * frame.c - the streaming framer and the framing encoders (see frame.h).
 *
 * One state machine per framing, each fed a byte at a time by
 * tp_frame_push.  Shared invariants:
 *   - state is IN_IDLE between frames; the first byte that belongs to a
 *     frame moves it to IN_FRAME and records its stream offset in start;
 *   - a frame's bytes go through put(), which never writes past cap and
 *     marks the frame `overflow` instead;
 *   - a frame ends only in end_frame(), which decides READY or BROKEN,
 *     updates the counters and frame_start, and returns to IN_IDLE;
 *   - a READY frame's bytes stay in buf until the next push/finish call.
 * Nothing allocates; nothing here reads or writes outside buf[0, cap).
 */
#include <stdint.h>
#include <string.h>

#include "tidepost/frame.h"

enum {
	IN_IDLE = 0,  /* between frames */
	IN_FRAME = 1, /* inside a frame */
	IN_ESC = 2    /* slip: inside a frame, ESC seen */
};

/* RFC 1055 special characters. */
#define SLIP_END     0xC0u
#define SLIP_ESC     0xDBu
#define SLIP_ESC_END 0xDCu
#define SLIP_ESC_ESC 0xDDu

/* Longest fixed:N packet tp_framing_parse accepts. */
#define FIXED_MAX 65536u

enum tp_status tp_frame_init(struct tp_framer *f, enum tp_framing kind,
                             size_t fixed_n, uint8_t *buf, size_t cap)
{
	if (f == NULL || buf == NULL || cap == 0)
		return TP_ERR_ARG;
	if (kind != TP_FRAMING_COBS && kind != TP_FRAMING_SLIP &&
	    kind != TP_FRAMING_HEX && kind != TP_FRAMING_WHOLE &&
	    kind != TP_FRAMING_FIXED)
		return TP_ERR_ARG;
	if (kind == TP_FRAMING_FIXED && (fixed_n == 0 || fixed_n > cap))
		return TP_ERR_ARG;
	*f = (struct tp_framer){.kind = kind, .buf = buf, .cap = cap};
	if (kind == TP_FRAMING_FIXED)
		f->fixed_n = fixed_n;
	return TP_OK;
}

static void begin(struct tp_framer *f)
{
	if (f->state == IN_IDLE) {
		f->state = IN_FRAME;
		f->start = f->offset;
	}
}

static void put(struct tp_framer *f, uint8_t b)
{
	if (f->len < f->cap)
		f->buf[f->len++] = b;
	else
		f->overflow = 1;
}

/* End the current frame; ok = 0 when the framing itself says broken.
 * Between frames there is nothing to end: MORE. */
static enum tp_frame_result end_frame(struct tp_framer *f, int ok)
{
	enum tp_frame_result r;

	if (f->state == IN_IDLE)
		return TP_FRAME_MORE;
	f->frame_start = f->start;
	if (!ok || f->bad || f->overflow) {
		f->broken++;
		f->len = 0;
		r = TP_FRAME_BROKEN;
	} else {
		f->frames++;
		f->ready = 1;
		r = TP_FRAME_READY;
	}
	f->state = IN_IDLE;
	f->code = 0;
	f->left = 0;
	f->nibble = 0;
	f->bad = 0;
	f->overflow = 0;
	return r;
}

/*
 * COBS (Cheshire & Baker 1999).  code is the current block's code byte (0
 * before the first), left its data bytes still to come.  The zero a block
 * stands for is appended only when the next block starts, and only for a
 * code below 0xFF: so the phantom zero after the last block never appears,
 * and the paper form's final "01" after a 0xFF block adds nothing.
 */
static enum tp_frame_result cobs_byte(struct tp_framer *f, uint8_t b)
{
	if (b == 0)
		return end_frame(f, f->left == 0);
	begin(f);
	if (f->left > 0) {
		put(f, b);
		f->left--;
		return TP_FRAME_MORE;
	}
	if (f->code != 0 && f->code < 0xFFu)
		put(f, 0);
	f->code = b;
	f->left = b - 1u;
	return TP_FRAME_MORE;
}

/* SLIP (RFC 1055). */
static enum tp_frame_result slip_byte(struct tp_framer *f, uint8_t b)
{
	if (b == SLIP_END)
		return end_frame(f, f->state != IN_ESC);
	begin(f);
	if (f->state == IN_ESC) {
		f->state = IN_FRAME;
		if (b == SLIP_ESC_END)
			put(f, SLIP_END);
		else if (b == SLIP_ESC_ESC)
			put(f, SLIP_ESC);
		else
			f->bad = 1;
	} else if (b == SLIP_ESC) {
		f->state = IN_ESC;
	} else {
		put(f, b);
	}
	return TP_FRAME_MORE;
}

static int hex_value(uint8_t c)
{
	if (c >= '0' && c <= '9')
		return c - '0';
	if (c >= 'a' && c <= 'f')
		return c - 'a' + 10;
	if (c >= 'A' && c <= 'F')
		return c - 'A' + 10;
	return -1;
}

/* Hex lines.  nibble is the pending high digit + 1, or 0. */
static enum tp_frame_result hex_byte(struct tp_framer *f, uint8_t b)
{
	int v;

	if (b == '\r' || b == '\n')
		return end_frame(f, f->nibble == 0);
	if (b == ' ' || b == '\t')
		return TP_FRAME_MORE;
	begin(f);
	if (f->bad)
		return TP_FRAME_MORE;
	v = hex_value(b);
	if (v < 0) {
		f->bad = 1;
	} else if (f->nibble == 0) {
		f->nibble = (unsigned)v + 1u;
	} else {
		put(f, (uint8_t)(((f->nibble - 1u) << 4) | (unsigned)v));
		f->nibble = 0;
	}
	return TP_FRAME_MORE;
}

static enum tp_frame_result step(struct tp_framer *f, uint8_t b)
{
	switch (f->kind) {
	case TP_FRAMING_COBS:
		return cobs_byte(f, b);
	case TP_FRAMING_SLIP:
		return slip_byte(f, b);
	case TP_FRAMING_HEX:
		return hex_byte(f, b);
	case TP_FRAMING_WHOLE:
		begin(f);
		put(f, b);
		return TP_FRAME_MORE;
	case TP_FRAMING_FIXED:
		begin(f);
		put(f, b);
		if (f->len == f->fixed_n)
			return end_frame(f, 1);
		return TP_FRAME_MORE;
	}
	return TP_FRAME_MORE;
}

/*
 * COBS fast path: inside a block (left > 0) every byte up to the block's
 * end or the next 0x00 is plain data, so a run of them is copied at once,
 * exactly as cobs_byte would put() them one by one (what does not fit cap
 * marks the frame overflow).  Returns the bytes consumed (0: none here).
 */
static size_t cobs_run(struct tp_framer *f, const uint8_t *in, size_t n)
{
	size_t m = n < f->left ? n : f->left, c;
	const uint8_t *z = memchr(in, 0, m);

	if (z != NULL)
		m = (size_t)(z - in);
	c = f->cap - f->len < m ? f->cap - f->len : m;
	memcpy(f->buf + f->len, in, c);
	f->len += c;
	if (c < m)
		f->overflow = 1;
	f->left -= (unsigned)m;
	return m;
}

/* Forget the frame handed out by the previous call, if any. */
static void release(struct tp_framer *f)
{
	if (f->ready) {
		f->ready = 0;
		f->len = 0;
	}
}

enum tp_frame_result tp_frame_push(struct tp_framer *f, const uint8_t *in,
                                   size_t n, size_t *used)
{
	enum tp_frame_result r = TP_FRAME_MORE;
	size_t i = 0, k;

	if (f == NULL || (in == NULL && n > 0)) {
		if (used != NULL)
			*used = n;
		return TP_FRAME_MORE;
	}
	release(f);
	while (i < n && r == TP_FRAME_MORE) {
		if (f->kind == TP_FRAMING_COBS && f->left > 0) {
			k = cobs_run(f, in + i, n - i);
			i += k;
			f->offset += k;
			if (k > 0)
				continue;
		}
		r = step(f, in[i]);
		i++;
		f->offset++;
	}
	if (used != NULL)
		*used = i;
	return r;
}

enum tp_frame_result tp_frame_finish(struct tp_framer *f)
{
	if (f == NULL)
		return TP_FRAME_MORE;
	release(f);
	switch (f->kind) {
	case TP_FRAMING_HEX:
		return end_frame(f, f->nibble == 0);
	case TP_FRAMING_WHOLE:
		return end_frame(f, 1);
	case TP_FRAMING_COBS:
	case TP_FRAMING_SLIP:
	case TP_FRAMING_FIXED:
		break;
	}
	return end_frame(f, 0);
}

/* ---- encoding ---------------------------------------------------------- */

/* A bounded output cursor: writes past cap are dropped and remembered. */
struct sink {
	uint8_t *out;
	size_t cap;
	size_t len;
	int full;
};

static void emit(struct sink *s, uint8_t b)
{
	if (s->len < s->cap)
		s->out[s->len++] = b;
	else
		s->full = 1;
}

/*
 * COBS encoding (Cheshire & Baker 1999): blocks of up to 254 data bytes
 * behind a code byte = data bytes + 1; code 0xFF is a full block with no
 * zero after it.  code_at is where the open block's code byte goes.
 */
enum tp_status tp_cobs_encode(const uint8_t *in, size_t n, int paper,
                              uint8_t *out, size_t cap, size_t *out_len)
{
	size_t i, pos = 1, code_at = 0;
	unsigned code = 1;

	if ((in == NULL && n > 0) || out == NULL || out_len == NULL)
		return TP_ERR_ARG;
	if (cap == 0)
		return TP_ERR_SPACE;
	for (i = 0; i < n; i++) {
		if (in[i] != 0) {
			if (pos >= cap)
				return TP_ERR_SPACE;
			out[pos++] = in[i];
			if (++code < 0xFFu)
				continue;
			if (!paper && i + 1 == n)
				break; /* form W: no block after the last */
		}
		out[code_at] = (uint8_t)code;
		if (pos >= cap)
			return TP_ERR_SPACE;
		code_at = pos++;
		code = 1;
	}
	out[code_at] = (uint8_t)code;
	*out_len = pos;
	return TP_OK;
}

enum tp_status tp_cobs_decode(const uint8_t *in, size_t n, uint8_t *out,
                              size_t cap, size_t *out_len)
{
	struct tp_framer f = {
	    .kind = TP_FRAMING_COBS, .buf = out, .cap = out == NULL ? 0 : cap};
	size_t i;

	if ((in == NULL && n > 0) || out_len == NULL)
		return TP_ERR_ARG;
	if (n == 0)
		return TP_ERR_FRAME;
	for (i = 0; i < n; i++) {
		if (in[i] == 0)
			return TP_ERR_FRAME;
		(void)cobs_byte(&f, in[i]);
	}
	if (f.left > 0)
		return TP_ERR_FRAME;
	if (f.overflow)
		return TP_ERR_SPACE;
	*out_len = f.len;
	return TP_OK;
}

static void encode_slip(struct sink *s, const uint8_t *in, size_t n)
{
	size_t i;

	for (i = 0; i < n; i++) {
		if (in[i] == SLIP_END) {
			emit(s, SLIP_ESC);
			emit(s, SLIP_ESC_END);
		} else if (in[i] == SLIP_ESC) {
			emit(s, SLIP_ESC);
			emit(s, SLIP_ESC_ESC);
		} else {
			emit(s, in[i]);
		}
	}
	emit(s, SLIP_END);
}

static void encode_hex(struct sink *s, const uint8_t *in, size_t n)
{
	static const char digits[] = "0123456789ABCDEF";
	size_t i;

	for (i = 0; i < n; i++) {
		emit(s, (uint8_t)digits[in[i] >> 4]);
		emit(s, (uint8_t)digits[in[i] & 0x0Fu]);
	}
	emit(s, '\n');
}

static enum tp_status encode_cobs(struct sink *s, const uint8_t *in, size_t n)
{
	enum tp_status st;

	st = tp_cobs_encode(in, n, 1, s->out, s->cap, &s->len);
	if (st != TP_OK)
		return st;
	emit(s, 0);
	return TP_OK;
}

enum tp_status tp_frame_encode(enum tp_framing kind, const uint8_t *in,
                               size_t n, uint8_t *out, size_t cap,
                               size_t *out_len)
{
	struct sink s = {.out = out, .cap = cap};
	enum tp_status st = TP_OK;
	size_t i;

	if ((in == NULL && n > 0) || out == NULL || out_len == NULL)
		return TP_ERR_ARG;
	switch (kind) {
	case TP_FRAMING_COBS:
		st = encode_cobs(&s, in, n);
		break;
	case TP_FRAMING_SLIP:
		encode_slip(&s, in, n);
		break;
	case TP_FRAMING_HEX:
		encode_hex(&s, in, n);
		break;
	case TP_FRAMING_FIXED:
		if (n == 0)
			return TP_ERR_ARG;
		/* fall through */
	case TP_FRAMING_WHOLE:
		for (i = 0; i < n; i++)
			emit(&s, in[i]);
		break;
	default:
		return TP_ERR_ARG;
	}
	if (st == TP_OK && s.full)
		st = TP_ERR_SPACE;
	if (st == TP_OK)
		*out_len = s.len;
	return st;
}

size_t tp_frame_bound(enum tp_framing kind, size_t n)
{
	switch (kind) {
	case TP_FRAMING_COBS:
		if (n > SIZE_MAX - n / 254u - 2u)
			return SIZE_MAX;
		return n + n / 254u + 2u;
	case TP_FRAMING_SLIP:
	case TP_FRAMING_HEX:
		if (n > (SIZE_MAX - 1u) / 2u)
			return SIZE_MAX;
		return 2u * n + 1u;
	case TP_FRAMING_WHOLE:
	case TP_FRAMING_FIXED:
		return n;
	}
	return 0;
}

/* ---- names ------------------------------------------------------------- */

/* clang-format off */
static const struct {
	const char *name;
	enum tp_framing kind;
} names[] = {
	{ "cobs", TP_FRAMING_COBS },
	{ "slip", TP_FRAMING_SLIP },
	{ "hex", TP_FRAMING_HEX },
	{ "whole", TP_FRAMING_WHOLE },
	{ "fixed", TP_FRAMING_FIXED },
};
/* clang-format on */

#define NAMES_N (sizeof(names) / sizeof(names[0]))

static unsigned char lower(unsigned char c)
{
	return (c >= 'A' && c <= 'Z') ? (unsigned char)(c - 'A' + 'a') : c;
}

/* If s starts with word (case-insensitively), the rest of s; else NULL. */
static const char *skip_word(const char *s, const char *word)
{
	for (; *word != '\0'; s++, word++)
		if (lower((unsigned char)*s) != (unsigned char)*word)
			return NULL;
	return s;
}

/* Strict decimal 1..FIXED_MAX: digits only, no leading zero. */
static enum tp_status parse_count(const char *s, size_t *out)
{
	unsigned long v = 0;
	int digits = 0;

	if (*s < '1' || *s > '9')
		return TP_ERR_ARG;
	for (; *s >= '0' && *s <= '9'; s++) {
		if (++digits > 5)
			return TP_ERR_ARG;
		v = v * 10u + (unsigned long)(*s - '0');
	}
	if (*s != '\0' || v > FIXED_MAX)
		return TP_ERR_ARG;
	*out = (size_t)v;
	return TP_OK;
}

enum tp_status tp_framing_parse(const char *name, enum tp_framing *kind,
                                size_t *fixed_n)
{
	const char *rest;
	size_t i, n = 0;

	if (name == NULL || kind == NULL)
		return TP_ERR_ARG;
	for (i = 0; i < NAMES_N; i++) {
		rest = skip_word(name, names[i].name);
		if (rest == NULL)
			continue;
		if (names[i].kind != TP_FRAMING_FIXED) {
			if (*rest != '\0')
				continue;
		} else if (*rest != ':' || fixed_n == NULL ||
		           parse_count(rest + 1, &n) != TP_OK) {
			return TP_ERR_ARG;
		}
		*kind = names[i].kind;
		if (fixed_n != NULL)
			*fixed_n = n;
		return TP_OK;
	}
	return TP_ERR_ARG;
}

const char *tp_framing_name(enum tp_framing kind)
{
	size_t i;

	for (i = 0; i < NAMES_N; i++)
		if (names[i].kind == kind)
			return names[i].name;
	return "unknown";
}
