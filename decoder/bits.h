/*
 * bits.h - the bounded bit cursor under the layout decoder and encoder
 * (private to decoder/; not installed).
 *
 * A cursor walks a byte buffer bit by bit within a limit of `limit` bits
 * set at init.  Bit order follows enum tp_order:
 *   big:    packet bit p is bit 7 - p%8 of byte p/8 (most significant
 *           first), and a field's first bit is its most significant one;
 *   little: packet bit p is bit p%8 of byte p/8, and value bit i of a
 *           field starting at packet bit s is packet bit s + i.
 * So byte-aligned 16/32/64-bit fields are ordinary big-/little-endian
 * integers, and bit fields may cross byte boundaries.
 *
 * Invariants: a cursor never touches a byte at or past limit/8 (rounded
 * up); the first error sticks: once a read, write or skip would pass the
 * limit (or asks for a width outside 1..64) the cursor is failed, reads
 * return 0, writes and skips do nothing, and the position stays put.
 * Callers test bits_failed() once after a group of fields.
 *
 * Called by decoder/layout.c only.
 */
#ifndef TIDEPOST_BITS_H
#define TIDEPOST_BITS_H

#include <stdbool.h>
#include <stdint.h>

#include "tidepost/layout.h"

struct bitcur {
	const uint8_t *rp;      /* reader: bytes read, NULL for a writer */
	uint8_t *wp;            /* writer: bytes written, NULL for a reader */
	uint64_t limit;         /* bits available: [0, limit) */
	uint64_t pos;           /* next bit */
	enum tp_order order;
	bool failed;
};

/* A reader over the first limit_bits bits of p (p holds at least
 * ceil(limit_bits / 8) bytes). */
void bits_reader(struct bitcur *c, const uint8_t *p, uint64_t limit_bits,
                 enum tp_order order);

/* A writer over the first limit_bits bits of p.  Writes replace exactly
 * the bits they cover; other bits of a shared byte are kept. */
void bits_writer(struct bitcur *c, uint8_t *p, uint64_t limit_bits,
                 enum tp_order order);

/* Read an n-bit field (n in 1..64) as an unsigned bit pattern. */
uint64_t bits_get(struct bitcur *c, uint32_t n);

/* Write the low n bits of v (n in 1..64). */
void bits_put(struct bitcur *c, uint64_t v, uint32_t n);

/* Move forward n bits (any n; fails past the limit). */
void bits_skip(struct bitcur *c, uint64_t n);

static inline bool bits_failed(const struct bitcur *c)
{
	return c->failed;
}

/* The low n bits set (n >= 64: all 64). */
static inline uint64_t bits_mask(uint32_t n)
{
	if (n >= 64)
		return UINT64_MAX;
	return ((uint64_t)1 << n) - 1;
}

/* The n-bit two's complement pattern raw as a signed number (n 1..64). */
int64_t bits_sign_extend(uint64_t raw, uint32_t n);

/*
 * bits_get with its common case inline: a field of n bits that lies in
 * the 8 bytes from the cursor's byte, all of them inside the limit
 * (bytes [0, ceil(limit / 8))), is read with one 8-byte load in the
 * cursor's order and two shifts.  Anything else goes to bits_get, so the
 * result, the position and the sticky error are always bits_get's.
 */
static inline uint64_t bits_get_fast(struct bitcur *c, uint32_t n)
{
	uint64_t byte = c->pos / 8, acc;
	unsigned off = (unsigned)(c->pos % 8);
	const uint8_t *q;

	if (c->failed || !c->rp || n == 0 || n > 64 - off ||
	    n > c->limit - c->pos || byte + 8 > (c->limit + 7) / 8)
		return bits_get(c, n);
	q = c->rp + byte;
	c->pos += n;
	if (c->order == TP_ORDER_LITTLE) {
		acc = (uint64_t)q[0] | (uint64_t)q[1] << 8 |
		      (uint64_t)q[2] << 16 | (uint64_t)q[3] << 24 |
		      (uint64_t)q[4] << 32 | (uint64_t)q[5] << 40 |
		      (uint64_t)q[6] << 48 | (uint64_t)q[7] << 56;
		return (acc >> off) & bits_mask(n);
	}
	acc = (uint64_t)q[0] << 56 | (uint64_t)q[1] << 48 |
	      (uint64_t)q[2] << 40 | (uint64_t)q[3] << 32 |
	      (uint64_t)q[4] << 24 | (uint64_t)q[5] << 16 |
	      (uint64_t)q[6] << 8 | (uint64_t)q[7];
	return (acc << off) >> (64 - n);
}

#endif
