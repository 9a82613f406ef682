/*
 * frame.h - cutting packets out of a byte stream, and framing them again.
 *
 * A struct tp_framer owns no memory: the caller gives it a buffer of `cap`
 * bytes that holds the frame being assembled.  Bytes may be pushed one at a
 * time or in any chunks; the framer is resumable and never stops the stream.
 * A broken frame (bad stuffing, over-long frame, odd hex) is counted in
 * `broken`, dropped, and the framer resynchronises at the next delimiter.
 *
 * Framings follow LAYOUT.md: cobs (Cheshire & Baker 1999, 0x00 delimiter),
 * slip (RFC 1055), hex (one packet per text line), whole (the whole input is
 * one packet; ends at tp_frame_finish), fixed:N (every N bytes).
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
	TP_FRAME_MORE = 0,   /* everything pushed was consumed; no frame yet */
	TP_FRAME_READY = 1,  /* a frame is ready: tp_frame_data()/len */
	TP_FRAME_BROKEN = 2  /* a broken frame was dropped (counted) */
};

struct tp_framer {
	enum tp_framing kind;
	size_t fixed_n;      /* TP_FRAMING_FIXED: packet size in bytes */
	uint8_t *buf;        /* caller's buffer; holds the frame */
	size_t cap;          /* bytes available in buf */
	size_t len;          /* bytes of the current frame in buf */
	/* decoder state (private) */
	int state;
	unsigned code;       /* COBS: current block code */
	unsigned left;       /* COBS: data bytes left in block */
	unsigned nibble;     /* HEX: pending high nibble + 1, or 0 */
	int overflow;        /* current frame exceeded cap: drop at end */
	int bad;             /* current frame is broken: drop at end */
	int ready;           /* a READY frame is held until the next push */
	/* counters and positions */
	uint64_t offset;      /* stream bytes consumed so far */
	uint64_t frame_start; /* stream offset of the current/last frame */
	uint64_t frames;      /* frames delivered */
	uint64_t broken;      /* broken frames dropped */
};

/*
 * Set up f.  For TP_FRAMING_FIXED, fixed_n is the packet size (1..cap).
 * buf/cap is the frame buffer; a frame longer than cap is broken.
 */
enum tp_status tp_frame_init(struct tp_framer *f, enum tp_framing kind,
                             size_t fixed_n, uint8_t *buf, size_t cap);

/*
 * Push up to n bytes.  *used is set to the bytes consumed (<= n).  Returns
 * TP_FRAME_READY when a frame is complete (consumption stops right after
 * its delimiter; call again with the rest), TP_FRAME_BROKEN when a broken
 * frame was dropped, TP_FRAME_MORE when all n bytes were consumed.
 * The ready frame stays valid until the next push/finish call.
 */
enum tp_frame_result tp_frame_push(struct tp_framer *f, const uint8_t *in,
                                   size_t n, size_t *used);

/*
 * End of stream: a pending frame is completed if the framing allows it
 * (whole; hex line without newline; cobs/slip without final delimiter are
 * delivered too when non-empty and well formed), else counted as broken.
 */
enum tp_frame_result tp_frame_finish(struct tp_framer *f);

static inline const uint8_t *tp_frame_data(const struct tp_framer *f)
{
	return f->buf;
}

/*
 * Frame one packet into out (cap bytes), with its delimiter.  COBS uses the
 * paper form (Cheshire & Baker 1999 variant P); hex ends with "\n".
 * Bound for the output: tp_frame_bound(kind, n).
 */
enum tp_status tp_frame_encode(enum tp_framing kind, const uint8_t *in,
                               size_t n, uint8_t *out, size_t cap,
                               size_t *out_len);

/* Largest encoded size of an n-byte packet in this framing. */
size_t tp_frame_bound(enum tp_framing kind, size_t n);

/*
 * Parse a framing name ("cobs", "slip", "hex", "whole", "fixed:N").
 * Returns TP_OK and sets *kind (and *fixed_n for fixed), else TP_ERR_ARG.
 */
enum tp_status tp_framing_parse(const char *name, enum tp_framing *kind,
                                size_t *fixed_n);

/* The name of a framing ("cobs", ...; "fixed" for fixed:N). */
const char *tp_framing_name(enum tp_framing kind);

/* COBS helpers, also used by tests.  Encoding never includes the 0x00
 * delimiter.  `paper` selects variant P (final 01 after a 254-byte run). */
enum tp_status tp_cobs_encode(const uint8_t *in, size_t n, int paper,
                              uint8_t *out, size_t cap, size_t *out_len);
/* Decode one COBS block sequence (no delimiter); accepts both variants. */
enum tp_status tp_cobs_decode(const uint8_t *in, size_t n, uint8_t *out,
                              size_t cap, size_t *out_len);

#endif
