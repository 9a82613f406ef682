/*
 * frame.h - cutting packets out of a byte stream, and framing them again.
 *
 * A struct tp_framer owns no memory: the caller gives it a buffer of `cap`
 * bytes that holds the frame being assembled.  Bytes may be pushed one at a
 * time or in any chunks; the framer is resumable and never stops the stream.
 * A broken frame (bad stuffing, over-long frame, odd hex) is counted in
 * `broken`, dropped, and the framer resynchronises at the next delimiter.
 *
 * Framings follow LAYOUT.md:
 *  - cobs: Cheshire & Baker 1999, each frame ends with 0x00, decoded as the
 *    bytes arrive.  Both encoder forms are accepted (the paper's, with a
 *    final 01 block after a 254-byte run, and the optimised one without):
 *    the implicit zero after a block is appended only if its code is below
 *    0xFF and another block follows.  Consecutive 0x00 are idle fill and
 *    are ignored; "01 00" is a well-formed empty packet and is delivered
 *    with len 0.  A block running past the delimiter is broken.
 *  - slip: RFC 1055 (END 0xC0, ESC 0xDB, ESC_END 0xDC, ESC_ESC 0xDD); ESC
 *    followed by anything else is broken; empty frames are ignored.
 *  - hex: one packet per line; CR and/or LF end a line; spaces and tabs are
 *    ignored anywhere; empty lines are ignored; digits in either case; an
 *    odd digit count or any other character breaks the line (the rest of
 *    it is skipped).
 *  - whole: everything up to tp_frame_finish is one packet (none if empty).
 *  - fixed:N: every N bytes are one packet.
 * A frame longer than `cap` is broken (counted once when it ends).
 *
 * Positions: `offset` counts stream bytes consumed; after READY or BROKEN,
 * `frame_start` is the stream offset of the first byte of that frame (for
 * hex the first non-blank byte of the line; idle delimiters are not part
 * of a frame), so a caller can say where a rejected packet was.
 *
 * Called by the daemon's inputs and by `tidepost decode`/`encode`.
 */
#ifndef TIDEPOST_FRAME_H
#define TIDEPOST_FRAME_H

#include <stddef.h>
#include <stdint.h>

#include "tidepost/status.h"

enum tp_framing {
	TP_FRAMING_COBS = 0,
	TP_FRAMING_SLIP,
	TP_FRAMING_HEX,
	TP_FRAMING_WHOLE,
	TP_FRAMING_FIXED
};

/* Results of tp_frame_push / tp_frame_finish. */
enum tp_frame_result {
	TP_FRAME_MORE = 0,  /* everything pushed was consumed; no frame yet */
	TP_FRAME_READY = 1, /* a frame is ready: tp_frame_data()/len */
	TP_FRAME_BROKEN = 2 /* a broken frame was dropped (counted) */
};

struct tp_framer {
	enum tp_framing kind;
	size_t fixed_n; /* TP_FRAMING_FIXED: packet size in bytes */
	uint8_t *buf;   /* caller's buffer; holds the frame */
	size_t cap;     /* bytes available in buf */
	size_t len;     /* bytes of the current frame in buf */
	/* decoder state (private) */
	int state;
	unsigned code;   /* COBS: current block code */
	unsigned left;   /* COBS: data bytes left in block */
	unsigned nibble; /* HEX: pending high nibble + 1, or 0 */
	int overflow;    /* current frame exceeded cap: drop at end */
	int bad;         /* current frame is broken: drop at end */
	int ready;       /* a READY frame is held until the next push */
	uint64_t start;  /* stream offset of the frame being assembled */
	/* counters and positions */
	uint64_t offset;      /* stream bytes consumed so far */
	uint64_t frame_start; /* first byte of the last frame READY/BROKEN */
	uint64_t frames;      /* frames delivered */
	uint64_t broken;      /* broken frames dropped */
};

/*
 * Set up f.  For TP_FRAMING_FIXED, fixed_n is the packet size (1..cap).
 * buf/cap is the frame buffer; a frame longer than cap is broken.
 * TP_ERR_ARG if f or buf is NULL, cap is 0, kind is unknown or fixed_n is
 * outside 1..cap.  fixed_n is ignored for the other framings.
 */
enum tp_status tp_frame_init(struct tp_framer *f, enum tp_framing kind,
                             size_t fixed_n, uint8_t *buf, size_t cap);

/*
 * Push up to n bytes.  *used is set to the bytes consumed (<= n).  Returns
 * TP_FRAME_READY when a frame is complete (consumption stops right after
 * its delimiter; call again with the rest), TP_FRAME_BROKEN when a broken
 * frame was dropped, TP_FRAME_MORE when all n bytes were consumed.
 * The ready frame stays valid until the next push/finish call.
 * Given a NULL f or a NULL in with n > 0, nothing is framed, *used = n
 * (the bytes are discarded so a caller's loop cannot spin) and MORE is
 * returned; used may be NULL.
 */
enum tp_frame_result tp_frame_push(struct tp_framer *f, const uint8_t *in,
                                   size_t n, size_t *used);

/*
 * End of stream.  whole: the input so far is delivered (READY), or BROKEN
 * if longer than cap, or MORE if there was none.  hex: a last line without
 * its newline is delivered like any line.  cobs, slip: an unterminated
 * frame is a truncated capture: counted as BROKEN, never delivered.
 * fixed: a partial tail (< N bytes) is counted as BROKEN.  With nothing
 * pending, MORE.  The framer is then ready for a new stream (offset and
 * counters keep counting).
 */
enum tp_frame_result tp_frame_finish(struct tp_framer *f);

static inline const uint8_t *tp_frame_data(const struct tp_framer *f)
{
	return f->buf;
}

/*
 * Frame one packet into out (cap bytes), with its delimiter.  cobs: the
 * paper form (Cheshire & Baker 1999 variant P) then 0x00; slip: escaped
 * bytes then END (no leading END); hex: upper-case digits then "\n";
 * whole, fixed: the bytes as they are.  This call does not know fixed:N's
 * N: the caller checks n == N (n == 0 is refused for fixed).  TP_ERR_SPACE
 * if cap is too small (out is then unspecified).
 * Bound for the output: tp_frame_bound(kind, n).
 */
enum tp_status tp_frame_encode(enum tp_framing kind, const uint8_t *in,
                               size_t n, uint8_t *out, size_t cap,
                               size_t *out_len);

/* Largest encoded size of an n-byte packet in this framing, delimiter
 * included (cobs n + n/254 + 2, slip and hex 2n + 1, whole and fixed n);
 * SIZE_MAX if that does not fit a size_t, 0 for an unknown framing. */
size_t tp_frame_bound(enum tp_framing kind, size_t n);

/*
 * Parse a framing name ("cobs", "slip", "hex", "whole", "fixed:N").
 * Returns TP_OK and sets *kind (and *fixed_n for fixed, 0 for the others
 * when fixed_n is not NULL), else TP_ERR_ARG.  Names are case-insensitive;
 * N is 1..65536 in plain decimal digits (no sign, blank or leading zero).
 */
enum tp_status tp_framing_parse(const char *name, enum tp_framing *kind,
                                size_t *fixed_n);

/* The name of a framing ("cobs", ...; "fixed" for fixed:N; "unknown"
 * for a value outside the enum).  Never NULL. */
const char *tp_framing_name(enum tp_framing kind);

/* COBS helpers, also used by tests.  Encoding never includes the 0x00
 * delimiter.  `paper` selects variant P (final 01 after a 254-byte run),
 * 0 the optimised form W.  TP_ERR_SPACE if the encoding does not fit cap;
 * n + n/254 + 1 bytes always suffice. */
enum tp_status tp_cobs_encode(const uint8_t *in, size_t n, int paper,
                              uint8_t *out, size_t cap, size_t *out_len);
/* Decode one COBS block sequence (no delimiter); accepts both variants.
 * TP_ERR_FRAME if in is empty, holds a 0x00 or ends inside a block;
 * TP_ERR_SPACE if the payload does not fit cap. */
enum tp_status tp_cobs_decode(const uint8_t *in, size_t n, uint8_t *out,
                              size_t cap, size_t *out_len);

#endif
