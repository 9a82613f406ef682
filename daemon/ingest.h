/*
 * ingest.h - from a packet to accepted readings in the ring: choose the
 * layout among the input's layouts, check and decode, turn each reading
 * into its WIRE.md JSON object, drop readings whose id was accepted
 * before (seen.h), and stage the rest in the ring; then, once per loop
 * iteration that staged anything, one ring_commit (group commit: one
 * fdatasync per batch).
 *
 * Owns: the decode buffers (one packet, one reading, one JSON text), the
 * counters, the "logged once" set of unknown station numbers.  Borrows
 * the config, the ring and the seen set (they must outlive it or be
 * replaced with ingest_set_config).
 *
 * Invariants:
 *   - a reading counts as accepted only when ring_commit returned 0;
 *     nothing is acknowledged, moved or reported delivered before that
 *     (the commit listener is called after the commit, with its result);
 *   - a full ring refuses (INGEST_FULL, readings counted in `refused`),
 *     it never overwrites; RING_BATCH_FULL is handled here (commit, then
 *     append again) and never reaches the caller;
 *   - the ids of the readings of a commit are written to the seen set
 *     only after that commit returned (seen.h).
 *
 * Choices: a reading's `received` is the time the input gives (stream
 * inputs: now; spool and replay: the file's modification time); a packet
 * without a time field takes it as its time (and so in its id).  A station
 * number that is not in the config is written as its number in text and
 * logged once.  A reading whose JSON is longer than RING_PAYLOAD_MAX
 * bytes is rejected (counted as undecodable).  QC flags are the
 * decoder's (range -> 4, missing -> 9); the QC and derive stages plug in
 * before the JSON is written (ingest_reading).
 *
 * Called by the inputs (ingest_packet), by run.c (ingest_commit after
 * each loop iteration) and by `tidepost replay`.
 */
#ifndef TIDEPOST_INGEST_H
#define TIDEPOST_INGEST_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tidepost/layout.h"

#include "clock.h"
#include "config.h"
#include "ring.h"
#include "seen.h"

struct ingest;

/* What an input tells ingest about itself. */
struct ingest_src {
	const char *name;                       /* input name, for logs */
	const struct tp_layout *const *layouts; /* the input's layouts */
	size_t n_layouts;
	const struct tp_layout **own; /* private: allocated list */
};

enum ingest_rc {
	INGEST_OK = 0,   /* every reading staged or a known duplicate */
	INGEST_REJECTED, /* the packet is not valid: res->reason says why */
	INGEST_FULL,     /* the ring is full: the rest was refused */
	INGEST_DOWN      /* the ring failed: nothing more is accepted */
};

struct ingest_result {
	uint32_t staged;     /* readings staged now (accepted at commit) */
	uint32_t duplicates; /* readings whose id was accepted before */
	uint32_t refused;    /* readings refused (ring full or failed) */
	char reason[160];    /* INGEST_REJECTED: what was wrong */
};

struct ingest_stats {
	uint64_t packets;     /* valid packets */
	uint64_t accepted;    /* readings committed to the ring */
	uint64_t duplicates;  /* readings dropped as already accepted */
	uint64_t refused;     /* readings refused: ring full or failed */
	uint64_t lost_commit; /* staged readings a failed commit dropped */
	uint64_t unknown;     /* packets no layout accepts */
	uint64_t bad_check;   /* packets whose check value is wrong */
	uint64_t undecodable; /* packets or readings that do not decode */
	uint64_t commits;     /* successful ring commits that wrote data */
	uint64_t last_seq;    /* last accepted ring seq */
};

/* Called after every ingest_commit: ok and the number of readings it
 * made accepted (0 when nothing was staged or !ok).  With ok, everything
 * handed to ingest_packet so far is settled: accepted, a duplicate of an
 * accepted reading, or refused (the caller saw INGEST_FULL/DOWN). */
typedef void (*ingest_listener_fn)(void *arg, bool ok, uint64_t n);

/* A new ingest over cfg, ring and seen (seen may be NULL: no duplicate
 * check).  clock: for rate-limited logs.  NULL when out of memory. */
struct ingest *ingest_new(const struct config *cfg, struct ring *ring,
                          struct seen *seen, const struct clock *clock);
void ingest_free(struct ingest *ing);

void ingest_set_config(struct ingest *ing, const struct config *cfg);
void ingest_set_listener(struct ingest *ing, ingest_listener_fn fn, void *arg);

/* The layouts of input ci (all of cfg's when it names none).  0, or -1
 * when out of memory.  Free with ingest_src_free. */
int ingest_src_init(struct ingest_src *src, const struct config *cfg,
                    const struct cfg_input *ci)
    __attribute__((warn_unused_result));
void ingest_src_free(struct ingest_src *src);

/* One packet (len bytes at p) received at received_s (Unix seconds).
 * May commit on its own when a batch is full (the listener runs). */
enum ingest_rc ingest_packet(struct ingest *ing, const struct ingest_src *src,
                             const uint8_t *p, size_t len, int64_t received_s,
                             struct ingest_result *res);

/* Commit what is staged.  0 (also when nothing was staged), or -1 when
 * the ring failed (logged here; the staged readings are not accepted). */
int ingest_commit(struct ingest *ing) __attribute__((warn_unused_result));

/* Readings staged since the last commit. */
size_t ingest_staged(const struct ingest *ing);

const struct ingest_stats *ingest_stats(const struct ingest *ing);

#endif
