/*
 * reportin.h - the inputs of `tidepost report`, read as a stream: NDJSON
 * readings files, the ring file, and archived packets.  One pass either
 * scans (finds the time range of the readings a report would keep) or
 * feeds a struct report.
 *
 * Owns: its read buffers, one line buffer capped at REPORTIN_LINE_MAX,
 * and in the packet path one struct process (QC and derived values).
 * Memory does not depend on the input size.  Borrows the config, the
 * report and the progress display.
 *
 * The three inputs (the README states these choices):
 * - readings (NDJSON, WIRE.md): the `file` output or `tidepost decode`
 *   output; one reading object a line, or a batch object
 *   {"readings": [...], "quantities": {...}} as the HTTP output sends
 *   (its quantities give units).  A value without a flag counts as flag
 *   2 (not evaluated), a null one as 9.  Blank lines are skipped; a line
 *   that is not a reading is counted and the first REPORTIN_LOG_MAX are
 *   logged with file and line.
 * - the ring (--ring): opened with ring_open(path, 0) (never created),
 *   every record still kept read in seq order.  The ring keeps readings
 *   only until every output has acknowledged them, so this shows the
 *   backlog, not the history.  While `tidepost run` holds the ring's
 *   lock it cannot be opened: the message says so and names the
 *   config's `file` outputs to report from instead.
 * - packets (message files or captured streams, as `tidepost decode`
 *   reads them): framing --framing, else whole for *.sbd / *.bin, else
 *   cobs; received time = the file's modification time.  Each reading
 *   goes through process.h (QC flags and derived values, as the daemon
 *   makes them), so this path needs the config.  Corrections of an
 *   earlier reading's flag (the spike test's late judgement) are not
 *   applied: that reading was counted already.
 *
 * Called by cmd_report.c.
 */
#ifndef TIDEPOST_REPORTIN_H
#define TIDEPOST_REPORTIN_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tidepost/frame.h"

#include "config.h"
#include "progress.h"
#include "report.h"

#define REPORTIN_LINE_MAX (1024 * 1024)
#define REPORTIN_LOG_MAX  5

struct reportin_scan {
	const char *only_station; /* NULL: all */
	bool has_from, has_to;
	int64_t from, to;
	bool any; /* a reading passed the filters */
	int64_t tmin, tmax;
	uint64_t readings;
};

struct reportin_counts {
	uint64_t bad_lines;  /* NDJSON lines / ring records */
	uint64_t bad_frames; /* frames no layout decodes */
	uint64_t unreadable; /* inputs that could not be read */
};

struct reportin;

/* A reader over cfg (may be NULL: readings inputs only).  r NULL: a
 * scan pass (filters and results in *scan).  pg may be NULL.  framing:
 * has_framing false for the default by file name.  NULL when out of
 * memory. */
struct reportin *reportin_new(const struct config *cfg, struct report *r,
                              struct reportin_scan *scan, struct progress *pg,
                              bool has_framing, enum tp_framing framing,
                              size_t fixed_n);
void reportin_free(struct reportin *in);

/* Read one input.  0, or -1 when it could not be opened or read (logged
 * and counted; the caller goes on with the others). */
int reportin_readings(struct reportin *in, const char *path)
    __attribute__((warn_unused_result));
int reportin_packets(struct reportin *in, const char *path)
    __attribute__((warn_unused_result));
int reportin_ring(struct reportin *in, const char *path)
    __attribute__((warn_unused_result));

/* Work done so far in this pass (bytes or ring records). */
uint64_t reportin_done(const struct reportin *in);

const struct reportin_counts *reportin_counts(const struct reportin *in);

#endif
