/*
 * input.h - the daemon's inputs: where packets come from.  Four kinds,
 * all in the one thread and the one poll loop (loop.h):
 *
 *   serial  a serial port through libserialport (input_serial.c)
 *   tcp     a TCP connection to a host:port streaming packets
 *           (input_tcp.c)
 *   spool   a folder where a gateway drops message files, one packet
 *           per file (input_spool.c); also the replay folder
 *   stdin   standard input, for pipelines and tests (input_stdin.c)
 *
 * Stream inputs (serial, tcp, stdin) cut packets out of the bytes with a
 * framer (frame.h) of the input's framing and hand each to ingest_packet;
 * spool files are read whole (framing `whole` by default).
 *
 * Owns: each input's fds, timers, framer and buffers.  Borrows the loop,
 * the ingest and the config entry (which must outlive the input: the run
 * loop frees inputs before the config they came from).
 *
 * Invariants:
 *   - nothing an input does is "accepted" before ingest_commit returned:
 *     a spool file is moved to `done` (or deleted) only from
 *     input_committed(in, true) after the commit that holds its readings;
 *   - when the ring is full (or failed) stream inputs stop reading for
 *     INPUT_PAUSE_MS (so a serial line's flow control can push back) and
 *     count what they had to refuse; spool files stay where they are and
 *     are tried again after INPUT_RETRY_MS;
 *   - a lost device or connection is logged once, reopened with backoff
 *     (reconnect_s doubling up to INPUT_BACKOFF_MAX_S); no busy loop.
 *
 * Called by run.c (input_new, input_committed, input_state, input_free)
 * and by `tidepost replay` (spool of the replay folder, once).
 */
#ifndef TIDEPOST_INPUT_H
#define TIDEPOST_INPUT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tidepost/frame.h"
#include "tidepost/layout.h"

#include "config.h"
#include "ingest.h"
#include "loop.h"

#define INPUT_PAUSE_MS 1000 /* stream pause when the ring is full */
#define INPUT_RETRY_MS 2000 /* spool retry when the ring is full */
#define INPUT_QUIET_MS                                                         \
	1000                   /* --once: a stream ends after this             \
	                        * long without data */
#define INPUT_BACKOFF_MAX_S 60 /* reconnect backoff cap */
#define INPUT_READ_BYTES    4096
#define SPOOL_FILE_MAX      (64 * 1024) /* bytes; larger files are rejected */
#define SPOOL_NAME_MAX      128         /* [A-Za-z0-9._-], no leading dot */
#define SPOOL_BATCH         64          /* files per loop iteration */

/* What every input is given. */
struct input_ctx {
	struct loop *loop;
	struct ingest *ing;
	const struct config *cfg;
	bool once; /* --once: read what is there, then end */
};

enum input_state {
	INPUT_BUSY = 0, /* reading, or has more to read */
	INPUT_IDLE,     /* nothing more now (--once: finished) */
	INPUT_BLOCKED   /* has data waiting for ring space */
};

struct input;

/* Start an input of ci's kind.  Returns 0, or -1 with a message in err
 * (the run loop refuses a config whose input cannot start, e.g. a spool
 * folder that cannot be opened; a serial device or TCP peer that is not
 * there yet is not an error: it is retried). */
int input_new(const struct cfg_input *ci, const struct input_ctx *ctx,
              struct input **out, char *err, size_t errcap)
    __attribute__((warn_unused_result));

/* The replay folder (`tidepost replay` hands files to a running daemon
 * here): a spool whose files are deleted once committed and whose
 * framing is the file name's last suffix (.cobs .slip .hex .whole
 * .fixed-N).  The folder is created (0700) when missing. */
int input_replay_new(const char *dir, const struct input_ctx *ctx,
                     struct input **out, char *err, size_t errcap)
    __attribute__((warn_unused_result));

/* ingest committed (ok) or failed to commit (!ok) what was staged. */
void input_committed(struct input *in, bool ok);

enum input_state input_state(const struct input *in);
const char *input_name(const struct input *in);

/* Stop and free (fds closed, timers disarmed).  NULL is fine. */
void input_free(struct input *in);

/* ---- for the input_*.c files ---- */

struct input_ops {
	void (*committed)(struct input *in, bool ok); /* NULL: nothing */
	enum input_state (*state)(const struct input *in);
	void (*free)(struct input *in);
};

struct input {
	const struct input_ops *ops;
	const struct cfg_input *ci;
	struct input_ctx ctx;
	struct ingest_src src;
	const char *name;
};

/* Set up the common part.  0, or -1 (out of memory). */
int input_base_init(struct input *in, const struct input_ops *ops,
                    const struct cfg_input *ci, const struct input_ctx *ctx)
    __attribute__((warn_unused_result));
void input_base_fini(struct input *in);

/* At most one log line per period: the first event, then a summary. */
struct ratelog {
	int64_t last_ms;
	uint64_t held; /* events not logged since */
	bool any;
};

/* May an event be logged now?  *held gets the events held back before
 * it (to say "and N more"). */
bool ratelog_allow(struct ratelog *r, int64_t now_ms, int64_t period_ms,
                   uint64_t *held);

/* The framer side of a stream input. */
struct stream {
	struct tp_framer fr;
	uint64_t frames, broken, rejected, refused;
	struct ratelog bad_log;
	uint8_t frame[TP_MAX_PACKET];
};

int stream_init(struct stream *s, const struct cfg_input *ci)
    __attribute__((warn_unused_result));

/* Push n bytes through the framer; every packet to ingest.  Returns true
 * when the ring refused something (full or failed): pause reading. */
bool stream_feed(struct input *in, struct stream *s, const uint8_t *p,
                 size_t n);

/* End of the byte stream (EOF, device lost): a last frame, if any. */
bool stream_finish(struct input *in, struct stream *s);

/* Reconnect delay after `fails` failures in a row: base doubling up to
 * INPUT_BACKOFF_MAX_S (never below base). */
uint32_t input_backoff_s(uint32_t base_s, uint32_t fails);

/* A name safe to log: printable ASCII kept, other bytes as \xNN, at
 * most 200 bytes of output (then "..."). */
void input_escape_name(const char *name, char *out, size_t cap);

/* The kinds (input_new dispatches to them). */
int input_serial_new(const struct cfg_input *ci, const struct input_ctx *ctx,
                     struct input **out, char *err, size_t errcap);
int input_tcp_new(const struct cfg_input *ci, const struct input_ctx *ctx,
                  struct input **out, char *err, size_t errcap);
int input_spool_new(const struct cfg_input *ci, const struct input_ctx *ctx,
                    bool replay, struct input **out, char *err, size_t errcap);
int input_stdin_new(const struct cfg_input *ci, const struct input_ctx *ctx,
                    struct input **out, char *err, size_t errcap);

#endif
