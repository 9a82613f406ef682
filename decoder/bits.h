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

bool bits_failed(const struct bitcur *c);

/* The low n bits set (n >= 64: all 64). */
uint64_t bits_mask(uint32_t n);

/* The n-bit two's complement pattern raw as a signed number (n 1..64). */
int64_t bits_sign_extend(uint64_t raw, uint32_t n);

#endif
