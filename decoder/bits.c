/*
 * bits.c - the bounded bit cursor (see bits.h for the bit orders and the
 * sticky-error contract).
 */
#include <stddef.h>

#include "bits.h"

static void init(struct bitcur *c, uint64_t limit_bits, enum tp_order order)
{
	c->limit = limit_bits;
	c->pos = 0;
	c->order = order;
	c->failed = false;
}

void bits_reader(struct bitcur *c, const uint8_t *p, uint64_t limit_bits,
                 enum tp_order order)
{
	init(c, p ? limit_bits : 0, order);
	c->rp = p;
	c->wp = NULL;
}

void bits_writer(struct bitcur *c, uint8_t *p, uint64_t limit_bits,
                 enum tp_order order)
{
	init(c, p ? limit_bits : 0, order);
	c->rp = NULL;
	c->wp = p;
}

int64_t bits_sign_extend(uint64_t raw, uint32_t n)
{
	uint64_t m;

	if (n == 0 || n > 64)
		return 0;
	m = bits_mask(n);
	raw &= m;
	if (!((raw >> (n - 1)) & 1))
		return (int64_t)raw;
	/* Negative: -(~raw & m) - 1, computed without overflow even for
	 * INT64_MIN. */
	return -(int64_t)(~raw & m & (UINT64_MAX >> 1)) - 1;
}

/* Can n more bits be used from the current position?  Fails the cursor
 * when not. */
static bool room(struct bitcur *c, uint64_t n, bool width)
{
	if (c->failed)
		return false;
	if ((width && (n == 0 || n > 64)) || n > c->limit - c->pos) {
		c->failed = true;
		return false;
	}
	return true;
}

/* Where the next chunk of at most `want` bits lies inside the current
 * byte: *take bits, shifted left by the return value in the byte. */
static unsigned chunk(const struct bitcur *c, uint32_t want, uint32_t *take)
{
	unsigned off = (unsigned)(c->pos % 8);
	unsigned avail = 8 - off;

	*take = want < avail ? want : avail;
	if (c->order == TP_ORDER_LITTLE)
		return off;
	return avail - *take;
}

/* A field lying within 8 bytes: those bytes as one integer in the
 * cursor's order, then one shift and mask. */
static uint64_t get_word(struct bitcur *c, uint32_t n, unsigned off,
                         unsigned nb)
{
	const uint8_t *q = c->rp + c->pos / 8;
	uint64_t acc = 0;
	unsigned i;

	c->pos += n;
	if (c->order == TP_ORDER_LITTLE) {
		for (i = nb; i-- > 0;)
			acc = (acc << 8) | q[i];
		return (acc >> off) & bits_mask(n);
	}
	for (i = 0; i < nb; i++)
		acc = (acc << 8) | q[i];
	return (acc >> (nb * 8 - off - n)) & bits_mask(n);
}

uint64_t bits_get(struct bitcur *c, uint32_t n)
{
	uint64_t v = 0;
	uint32_t got = 0, take;
	unsigned shift, off;
	uint8_t b;

	if (!room(c, n, true) || !c->rp)
		return 0;
	off = (unsigned)(c->pos % 8);
	if (off + n <= 64) /* the bytes holding bits [pos, pos + n) only */
		return get_word(c, n, off, (off + n + 7) / 8);
	while (got < n) {
		shift = chunk(c, n - got, &take);
		b = (uint8_t)((c->rp[c->pos / 8] >> shift) & bits_mask(take));
		if (c->order == TP_ORDER_LITTLE)
			v |= (uint64_t)b << got;
		else
			v = (v << take) | b;
		got += take;
		c->pos += take;
	}
	return v;
}

void bits_put(struct bitcur *c, uint64_t v, uint32_t n)
{
	uint32_t done = 0, take;
	unsigned shift;
	uint64_t part;
	uint8_t *byte;

	if (!room(c, n, true) || !c->wp)
		return;
	while (done < n) {
		shift = chunk(c, n - done, &take);
		if (c->order == TP_ORDER_LITTLE)
			part = v >> done;
		else
			part = v >> (n - done - take);
		part &= bits_mask(take);
		byte = &c->wp[c->pos / 8];
		*byte = (uint8_t)((*byte & ~(bits_mask(take) << shift)) |
		                  (part << shift));
		done += take;
		c->pos += take;
	}
}

void bits_skip(struct bitcur *c, uint64_t n)
{
	if (room(c, n, false))
		c->pos += n;
}
