/*
 * status.h - the daemon's status file and metrics file: what `tidepost
 * status` shows and what a monitoring system scrapes, without a socket.
 *
 * Owns two loop timers (the periodic rewrite every cfg status.every_s,
 * and a "soon" write after a change, at most one a second) and the
 * buffers.  Borrows everything it reports on (watch, ring, ingest,
 * outputs, alert delivery); each may be NULL.  On every periodic tick it
 * first hands the outputs' and the ring's figures to the watchdog
 * (watch_outputs, watch_ring), then writes.
 *
 * Status file (JSON, STATUS_FORMAT 1): tidepost_status, version, pid,
 * proc_start (field 22 of /proc/self/stat: with pid it names this process
 * even after the pid is reused), started, written (RFC 3339) and
 * written_s, every_s, state ("running", "stopped" once status_free ran),
 * config, then stations[], outputs[], ring{}, ingest{}, alerts[] (each as
 * alert_json) and delivery{}.  Metrics file: the Prometheus text
 * exposition format 0.0.4 ("# HELP", "# TYPE", name{label="v"} value),
 * metric names of our own prefixed tidepost_.
 *
 * Both files are replaced as a whole (temp file in the same folder, then
 * rename), so a reader never sees half a file.  They are not fsync'd:
 * they are rewritten within every_s and losing one to a power cut costs
 * nothing (the SD card is spared a sync every few seconds).  The
 * watchdog's state file uses the durable variant of the same function.
 *
 * Called by run.c (status_new, status_free; watch_ctx.changed =
 * status_changed), by cmd_status.c (STATUS_FORMAT) and by the tests.
 */
#ifndef TIDEPOST_DSTATUS_H
#define TIDEPOST_DSTATUS_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "buf.h"
#include "clock.h"
#include "config.h"
#include "loop.h"

#define STATUS_FORMAT  1
#define STATUS_MAX     (4 * 1024 * 1024) /* bytes of either file, at most */
#define STATUS_SOON_MS 1000              /* writes after changes, at most 1/s */

struct watch;
struct ring;
struct ingest;
struct post;
struct alert;
struct status;

struct status_ctx {
	const struct config *cfg;  /* must outlive the status */
	struct loop *loop;         /* NULL: write only when told */
	const struct clock *clock; /* NULL: clock_system() */
	struct watch *watch;
	struct ring *ring;
	const struct ingest *ingest;
	struct post *const *posts; /* the http outputs, n_posts */
	size_t n_posts;
	const struct alert *alert;
};

/* Set up and write the first files.  0 and *out, or -1 with a message in
 * err (out of memory).  A failed write is logged, not fatal. */
int status_new(const struct status_ctx *ctx, struct status **out, char *err,
               size_t errcap) __attribute__((warn_unused_result));

/* Something changed (arg is the status): write within STATUS_SOON_MS. */
void status_changed(void *arg);

/* The periodic work now: feed the watchdog, write both files.  0, or -1
 * when a file could not be written (logged). */
int status_tick(struct status *st);

/* The two documents (tests, and `status` reads the first). */
void status_json(struct status *st, struct buf *b);
void status_metrics(struct status *st, struct buf *b);

/* Free; with stopping, first write a last file with state "stopped"
 * (a reload rebuilds the status without that).  NULL is fine. */
void status_free(struct status *st, bool stopping);

/* Replace the file at path with data: a temp file next to it (O_EXCL,
 * mode 0644, O_CLOEXEC), written whole, renamed over path; with durable,
 * fsync'd before the rename and the folder fsync'd after.  0, or -1 with
 * a message "write: PATH: cause" in err; the temp file never remains. */
int status_replace_file(const char *path, const char *data, size_t len,
                        bool durable, char *err, size_t errcap)
    __attribute__((warn_unused_result));

/* Field 22 (starttime, clock ticks after boot) of /proc/PID/stat; 0 if
 * unknown.  pid 0: this process. */
uint64_t status_proc_start(int pid);

#endif
