/*
 * fileout.h - the `file` output: every accepted reading appended to an
 * NDJSON file (one WIRE.md reading per line), synced like the ring.
 *
 * Owns: the output file's fd and a write buffer of FILEOUT_CHUNK_BYTES;
 * its cursor is the ring's cursor of the output's name.
 *
 * Order, per round (at most FILEOUT_CHUNK_RECORDS readings):
 *   read records after the cursor -> write(2) the lines -> fdatasync ->
 *   only then ring_ack(last seq).  A write or sync error truncates the
 *   file back to its last synced size, is logged (then rate-limited) and
 *   retried after a backoff (1 s doubling to 60 s): nothing is acked.
 *
 * At least once: after a crash (or a failed ack) the lines after the
 * durable cursor are written again, so a line may appear twice (same
 * id); a reader drops duplicates by id.  At open, a last line cut short
 * by a crash (no final newline) is removed before appending, so every
 * line stays one whole JSON object.  The file is created 0640; it is
 * opened O_APPEND and must have no other writer.
 *
 * Called by run.c: fileout_new per `file` output, fileout_kick after each
 * commit, fileout_state for --once, fileout_free.
 */
#ifndef TIDEPOST_FILEOUT_H
#define TIDEPOST_FILEOUT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "config.h"
#include "loop.h"
#include "ring.h"

#define FILEOUT_CHUNK_RECORDS  1000
#define FILEOUT_CHUNK_BYTES    (256 * 1024)
#define FILEOUT_BACKOFF_MAX_MS 60000

enum fileout_state {
	FILEOUT_DRAINED = 0, /* everything accepted is in the file */
	FILEOUT_WRITING,     /* a round is due */
	FILEOUT_BACKOFF      /* the last round failed; retry later */
};

struct fileout;

struct fileout_stat {
	uint64_t written;     /* readings written and acked */
	uint64_t failures;    /* failed rounds */
	uint64_t acked;       /* cursor */
	char last_error[160]; /* "" if none */
};

/* Open the output (the file is created when missing).  0, or -1 with a
 * message in err. */
int fileout_new(const struct cfg_output *o, struct loop *loop,
                struct ring *ring, struct fileout **out, char *err,
                size_t errcap) __attribute__((warn_unused_result));

/* There may be new readings: write them (from the loop, soon). */
void fileout_kick(struct fileout *f);

enum fileout_state fileout_state(const struct fileout *f);
void fileout_stat(const struct fileout *f, struct fileout_stat *st);

/* Close (a round in progress is finished first: it is synchronous).
 * NULL is fine. */
void fileout_free(struct fileout *f);

#endif
