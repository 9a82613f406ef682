/*
 * ring.h - the ring file: a fixed-size, preallocated, crash-safe queue of
 * accepted readings on disk, with one durable cursor per output.
 *
 * Owns the ring file and everything in it.  Invariants:
 *   - a record counts as accepted only after its bytes were written and
 *     fdatasync returned 0 (ring_commit returns its seq only then);
 *   - seqs start at 1, grow by one per record and are never reused, not
 *     even after a full drain, a crash or damage;
 *   - a record's space is reused only after a header naming a tail past
 *     it is durable (written and synced), i.e. after every output's ack
 *     that frees it is durable; a full ring refuses, never overwrites;
 *   - after any failed write or sync the ring is "failed": it refuses all
 *     writes until ring_recover() (or a new ring_open) succeeds, and
 *     nothing since the last good sync is reported accepted;
 *   - every byte of I/O goes through a struct ringio_ops (ringio.h).
 * Called by the daemon's run loop (inputs append + commit, outputs read
 * and ack), by `tidepost ring` (stat, verify), and by the ring tests.
 *
 * The file (all integers little-endian; docs/ring.md has the long form):
 *
 *   0        4096      8192                                      size
 *   +---------+---------+----------------------------------------+
 *   | slot 0  | slot 1  | data area: records, back to back, wrap |
 *   +---------+---------+----------------------------------------+
 *
 *   header slot (each alone in its 4 KiB block; the rest is zero):
 *     0 magic "TPRH"  4 version u16 (1)  6 slot u16 (0/1)  8 gen u64
 *    16 file size u64  24 data start u64 (8192)  32 next_seq u64
 *    40 tail seq u64   48 tail offset u64   56 tail lap u32
 *    60 head lap u32 (hint)  64 head offset u64 (hint)  72 n outputs u32
 *    76 flags u32 (0)  80 outputs[8] { name[32] (NUL-padded), acked u64 }
 *   400 crc32c u32 of bytes 0..399
 *
 *   record (aligned to 8 bytes; never crosses the end of the data area):
 *     0 magic "TPRC"  4 type u8  5 flags u8 (0)  6 len u16  8 lap u32
 *    12 seq u64  20 crc32c u32 of bytes 0..19 + payload  24 payload[len]
 *     then zero padding to a multiple of 8 (not covered by the CRC)
 *   types: 1 DATA (payload = one reading, 1..RING_PAYLOAD_MAX bytes);
 *          2 WRAP (len 0, seq = the next record's seq): continue at the
 *            data start with lap + 1 (also implied when fewer than 24
 *            bytes are left before the end);
 *          3 GAP (len 0, seq = the next record's seq, > expected): seqs
 *            jump, written once after recovery found damage, so seqs
 *            vouched for by the header are never handed out again.
 *   A record is valid only if magic, type, flags, len bounds, lap (the
 *   lap expected at that place), seq (previous + 1) and CRC all hold.
 *
 * CRC-32C is the CRC RevEng catalogue's CRC-32/ISCSI (see ring.c).
 *
 * Choices (also in docs/ring.md):
 *   - the tail is the oldest record some output still needs: min over
 *     outputs of acked + 1.  With no outputs the tail does not move: the
 *     ring keeps everything until an output exists and acknowledges.
 *   - an output that is new (ring_outputs) starts at the tail: it gets
 *     every record the ring still holds.  A removed output's cursor is
 *     dropped, which may free space.
 *   - an ack names the last seq the output has fully delivered; acks
 *     never move back (EINVAL) and never pass the last accepted seq.
 *   - ring_open first drops the file's clean cached pages (so a failed
 *     sync of an earlier process cannot fool the scan), and always ends
 *     by zeroing the torn remainder after the head, writing a fresh
 *     header (gen + 1) and syncing it.  Records are never rewritten in
 *     place: a torn rewrite could destroy data that was durable.
 */
#ifndef TIDEPOST_RING_H
#define TIDEPOST_RING_H

#include <stddef.h>
#include <stdint.h>

#include "ringio.h"

#define RING_PAYLOAD_MAX 4072u /* record of 4096 bytes at most */
#define RING_OUTPUTS_MAX 8u
#define RING_NAME_MAX    31u    /* output name bytes, without NUL */
#define RING_SIZE_MIN    40960u /* 2 slots + 32 KiB of data */
#define RING_BLOCK       4096u  /* sizes are multiples of this */

struct ring;

/* Results of ring_append (callers must branch on them). */
enum ring_rc {
	RING_OK = 0,
	RING_FULL,       /* no room without overwriting unacknowledged
	                  * records: refused and counted, nothing lost */
	RING_BATCH_FULL, /* the commit batch is full: ring_commit, then
	                  * append again (not counted as a refusal) */
	RING_ERR,        /* bad argument or failed ring: see errno */
};

struct ring_output_stat {
	char name[RING_NAME_MAX + 1];
	uint64_t acked;  /* last acknowledged seq (0: none) */
	uint64_t unsent; /* accepted records after acked */
};

struct ring_stat {
	uint64_t size_bytes;         /* whole file */
	uint64_t data_bytes;         /* data area */
	uint64_t used_bytes;         /* data area held by kept records */
	uint64_t oldest_seq;         /* first kept record (== next_seq: none) */
	uint64_t newest_seq;         /* last accepted (0: none yet) */
	uint64_t next_seq;           /* seq the next ring_append gets */
	uint64_t staged;             /* appended, not yet committed */
	uint64_t records;            /* kept records */
	uint64_t refused;            /* appends refused as full, this open */
	uint64_t generation;         /* of the last durable header */
	uint64_t tail_off, head_off; /* file offsets of oldest kept record
	                              * and of the next record to write */
	uint64_t recovered_lost;     /* records the header vouched for but
	                              * recovery found damaged (normally 0) */
	uint64_t recovery_us;        /* time ring_open spent recovering */
	int failed;                  /* errno of the failure, 0 if healthy */
	size_t n_outputs;
	struct ring_output_stat outputs[RING_OUTPUTS_MAX];
};

struct ring_verify_report {
	uint64_t records;     /* valid records checked */
	uint64_t problems;    /* problems found */
	int slot_ok[2];       /* header slot valid? */
	uint64_t slot_gen[2]; /* generation when valid */
	char first[160];      /* the first problem, "" if none */
};

/* Sequential reader, e.g. for one output from its cursor.  Plain data;
 * stays usable across commits and acks, until its seq is freed. */
struct ring_iter {
	uint64_t seq; /* next seq to return */
	uint64_t off; /* its place, when known */
	uint32_t lap;
	int known;
};

/* Open the ring at path, creating it when missing, and recover it.
 * size_bytes: a multiple of RING_BLOCK >= RING_SIZE_MIN; an existing file
 * must have this size (it is never resized or re-initialised); 0 opens an
 * existing file of any size and never creates.  ops: NULL for the real
 * POSIX calls.  On failure returns -1 with errno and a complete message
 * ("ring: open: PATH: cause") in errbuf (errcap bytes). */
int ring_open(const char *path, uint64_t size_bytes,
              const struct ringio_ops *ops, struct ring **out, char *errbuf,
              size_t errcap) __attribute__((warn_unused_result));

/* Discard staged records (not accepted), write a last header when the
 * ring is healthy, close and free.  Returns -1 (errno) if that last sync
 * failed; the ring is freed either way.  NULL is fine. */
int ring_close(struct ring *r);

/* Declare the configured outputs (at most RING_OUTPUTS_MAX, names of 1..
 * RING_NAME_MAX bytes, unique).  New ones start at the tail, missing ones
 * are dropped; the change is made durable before returning 0. */
int ring_outputs(struct ring *r, const char *const *names, size_t n)
    __attribute__((warn_unused_result));

/* Stage one record (len 1..RING_PAYLOAD_MAX).  No I/O; not accepted
 * until ring_commit returns 0. */
enum ring_rc ring_append(struct ring *r, const void *payload, size_t len)
    __attribute__((warn_unused_result));

/* Write the staged records and fdatasync (one sync per batch); only then
 * are they accepted.  *last_seq gets the last accepted seq (0: none yet).
 * On failure the staged records are not accepted and the ring is failed:
 * -1 with errno. */
int ring_commit(struct ring *r, uint64_t *last_seq)
    __attribute__((warn_unused_result));

/* Copy the payload of accepted record seq into buf (cap bytes); *len gets
 * its length.  -1 with errno: ENOENT (freed or not accepted), EMSGSIZE
 * (cap too small; *len is the size needed), EBADMSG (damaged), EIO. */
int ring_read(struct ring *r, uint64_t seq, void *buf, size_t cap, size_t *len)
    __attribute__((warn_unused_result));

/* Start a reader at the record after after_seq (e.g. an output's
 * cursor).  ring_iter_next: 1 and the record, 0 at the end of accepted
 * records, -1 with errno (ENOENT once the reader's seq was freed). */
void ring_iter_init(struct ring_iter *it, uint64_t after_seq);
int ring_iter_next(struct ring *r, struct ring_iter *it, void *buf, size_t cap,
                   size_t *len, uint64_t *seq)
    __attribute__((warn_unused_result));

/* The output's last acknowledged seq.  -1 ENOENT if unknown. */
int ring_cursor_get(const struct ring *r, const char *output, uint64_t *seq)
    __attribute__((warn_unused_result));

/* The output has delivered everything up to seq: write the header to the
 * other slot (gen + 1) and fdatasync; 0 only once durable.  Space freed
 * by it is reused only after that.  -1 with errno: ENOENT (unknown
 * output), EINVAL (seq behind the cursor or past the last accepted), or
 * the I/O error (the ring is then failed). */
int ring_ack(struct ring *r, const char *output, uint64_t seq)
    __attribute__((warn_unused_result));

void ring_stat(const struct ring *r, struct ring_stat *st);

/* Check both header slots and every kept record.  Returns the number of
 * problems (0: clean) or -1 with errno on an I/O error. */
int ring_verify(struct ring *r, struct ring_verify_report *rep)
    __attribute__((warn_unused_result));

/* After a failure: re-read the file, keep only what was durable (records
 * up to the last good commit, cursors of the last good header), zero the
 * rest, write a new header and sync.  0: healthy again. */
int ring_recover(struct ring *r, char *errbuf, size_t errcap)
    __attribute__((warn_unused_result));

/*
 * TEST-ONLY MUTATION SWITCH - never set outside the mutation test.
 * When nonzero, ring_commit reports records accepted right after pwrite
 * and issues their fdatasync only at the start of the next commit: the
 * "ack before sync" bug the crash simulator must catch.  Off (0) by
 * default; nothing in the daemon sets it.
 */
extern int ring_test_ack_before_sync;

#endif
