/*
 * check.h - check values: a table-driven CRC engine for any Rocksoft-model
 * parameters (width 8..32), the named catalogue CRCs, sum8 and xor8.
 *
 * Parameter names and check values follow the CRC RevEng catalogue
 * ("Catalogue of parametrised CRC algorithms", Greg Cook); the built-in
 * table holds every catalogue entry of width 8..32.  Names and aliases are
 * exactly the catalogue's, compared case-insensitively.  Beware the
 * catalogue's own aliases: "CRC-16/CCITT" and "CRC-CCITT" are CRC-16/KERMIT
 * (reflected, init 0), not CRC-16/IBM-3740 ("CRC-16/CCITT-FALSE"); "CRC-16"
 * is CRC-16/ARC.  A bare "CCITT" is no catalogue name and is not accepted.
 *
 * struct tp_crc holds its 256-entry table; build it once with tp_crc_init
 * (the config loader does, at load time) and compute as often as needed.
 * Widths that are not a multiple of 8 (CRC-10, CRC-11, CRC-24, CRC-31, ...)
 * work like the others: the value is the low `width` bits of the result.
 * Nothing allocates; struct tp_crc may be copied or kept in static storage.
 */
#ifndef TIDEPOST_CHECK_H
#define TIDEPOST_CHECK_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tidepost/status.h"

struct tp_crc_params {
	const char *name; /* catalogue name, or NULL when given by parameters */
	uint8_t width;    /* 8..32 */
	uint32_t poly;    /* normal (MSB-first) form, without the top bit */
	uint32_t init;
	bool refin;
	bool refout;
	uint32_t xorout;
	uint32_t check; /* catalogue check value of "123456789" (0: unknown) */
};

struct tp_crc {
	struct tp_crc_params p;
	uint32_t table[256];
	/* Optional: three more tables from tp_crc_slices, in the caller's
	 * memory, to take four bytes a step ("slicing by 4"); NULL (what
	 * tp_crc_init sets): one byte a step.  The same results either
	 * way. */
	const uint32_t (*slice)[256];
};

/* The three tables that let tp_crc_update take four bytes a step, for
 * c (built by tp_crc_init); set c->slice = out to use them. */
void tp_crc_slices(const struct tp_crc *c, uint32_t out[3][256]);

/* Find a named catalogue CRC (case-insensitive, aliases accepted).
 * Returns NULL if unknown. */
const struct tp_crc_params *tp_crc_find(const char *name);

/* The catalogue table, for listing valid names: *n gets its length. */
const struct tp_crc_params *tp_crc_catalogue(size_t *n);

/* Validate p and build the table.  TP_ERR_ARG unless: width 8..32;
 * poly, init and xorout fit the width; poly is odd (normal form always has
 * the x^0 term; an even value is usually a reflected poly written by
 * mistake, e.g. 0x8408 for 0x1021); and, when p->check is non-zero, the
 * CRC of "123456789" equals it.  c->p is a copy of *p (name not copied). */
enum tp_status tp_crc_init(struct tp_crc *c, const struct tp_crc_params *p);

/* CRC of n bytes (full computation: init, refin/out, xorout). */
uint32_t tp_crc_compute(const struct tp_crc *c, const void *data, size_t n);

/* Incremental form: reg = tp_crc_start(c); reg = tp_crc_update(c, reg, ..);
 * value = tp_crc_final(c, reg).  reg is in the engine's internal form
 * (reflected when refin); only tp_crc_final's result is the CRC. */
uint32_t tp_crc_start(const struct tp_crc *c);
uint32_t tp_crc_update(const struct tp_crc *c, uint32_t reg, const void *data,
                       size_t n);
uint32_t tp_crc_final(const struct tp_crc *c, uint32_t reg);

/* Modulo-256 sum and XOR of n bytes. */
uint8_t tp_sum8(const void *data, size_t n);
uint8_t tp_xor8(const void *data, size_t n);

#endif
