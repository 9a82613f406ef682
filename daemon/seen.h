/*
 * seen.h - the set of reading ids the daemon has accepted, kept on disk,
 * so that a reading that comes again (a station re-sending a packet, an
 * archive replayed after an outage, a spool file retried after a partial
 * commit) is recognised and not relayed twice.
 *
 * Owns: two files in the state folder, seen.0 and seen.1, and two
 * in-memory open-addressing tables of 64-bit id hashes (one per file).
 * Each file is an 16-byte header (magic "TPSN", version u32 1,
 * generation u64, little-endian) followed by 8-byte little-endian
 * hashes, appended.  The file with the higher generation is the current
 * one; when it holds gen_cap ids, the older file is started again with
 * generation + 1 and becomes current.  So the set remembers the last
 * gen_cap to 2 * gen_cap ids; older ones are forgotten.
 *
 * Invariants:
 *   - an id is written to the file only after the ring commit that
 *     accepted its reading returned (seen_commit is called after
 *     ring_commit): a crash in between can only cause a duplicate,
 *     never a loss;
 *   - staged ids are visible to seen_has at once (a packet twice in one
 *     batch is caught) and are forgotten by seen_abort when the commit
 *     fails;
 *   - a damaged or missing file is only a smaller set (more duplicates
 *     possible), never an error that stops the daemon.
 *
 * Hash: 64-bit FNV-1a (Fowler, Noll, Vo; the FNV-1a 64-bit offset basis
 * 14695981039346656037 and prime 1099511628211, [from memory]) of the id
 * text.  Two different ids colliding has probability about n^2 / 2^65 for
 * n remembered ids (about 1e-10 for 64 Ki): then one reading would be
 * dropped as a duplicate.
 *
 * Called by ingest.c (every reading) and cmd_replay.c (through ingest).
 */
#ifndef TIDEPOST_SEEN_H
#define TIDEPOST_SEEN_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#define SEEN_GEN_IDS_DEFAULT (1u << 15) /* remembers 32 Ki .. 64 Ki ids */
#define SEEN_PENDING_MAX     4096u      /* staged ids between commits */

struct seen;

/* Open (creating when missing) the set in folder dir.  gen_cap: ids per
 * generation (0: SEEN_GEN_IDS_DEFAULT).  dir NULL: a set in memory only
 * (tests, replay into a throwaway ring).  -1 with errno and a message
 * ("seen: open: PATH: cause") on failure. */
int seen_open(const char *dir, size_t gen_cap, struct seen **out, char *err,
              size_t errcap) __attribute__((warn_unused_result));

/* Close and free (pending ids are dropped: their commit was never
 * confirmed).  NULL is fine. */
void seen_close(struct seen *s);

uint64_t seen_hash(const char *id, size_t n);

/* Is h in the set (staged ids included)? */
bool seen_has(const struct seen *s, uint64_t h);

/* Add h, pending until seen_commit.  -1 (ENOSPC) when SEEN_PENDING_MAX
 * ids are pending: commit first. */
int seen_stage(struct seen *s, uint64_t h) __attribute__((warn_unused_result));

/* Can one more id be staged before the next seen_commit? */
bool seen_room(const struct seen *s);

size_t seen_pending(const struct seen *s);

/* The ring commit returned: append the pending ids to the file and
 * fdatasync.  -1 with errno if the file could not be written (the ids
 * stay in memory; only a restart can forget them). */
int seen_commit(struct seen *s) __attribute__((warn_unused_result));

/* The ring commit failed: forget the pending ids. */
void seen_abort(struct seen *s);

/* Ids remembered (both generations). */
size_t seen_count(const struct seen *s);

#endif
