/*
 * progress.h - a one-line progress display on stderr for long runs
 * (report, decode, replay): work done, readings per second, time left.
 *
 * Owns nothing but its struct (no allocation).  Invariants: it draws
 * only when stderr is a terminal (isatty) and TERM is not "dumb", so
 * logs, pipes and service managers never see it; it redraws at most
 * every PROGRESS_EVERY_MS (a few times a second) however often it is
 * updated; progress_end (and progress_clear) leave the line empty, the
 * cursor at its start, so later messages print cleanly.
 *
 * The line: "LABEL: 12.3 of 40.0 MiB (31%), 52 340 readings/s, 0:12
 * left" (bytes), or "LABEL: 1 200 of 5 000 records (24%), ..." (counts).
 * Time left = work left / the average rate since the start, shown once
 * 1 s has passed and some work is done; unknown totals (0) show no share
 * and no time left.
 *
 * Use: progress_start once, progress_update as often as convenient (it
 * is cheap: one clock read), progress_clear before printing a log line
 * while it shows, progress_end at the end.  Time comes from `now_ms`,
 * which tests may replace (NULL: CLOCK_MONOTONIC).
 *
 * Called by cmd_report.c / reportin.c (and, hooked by the lead, decode
 * and replay).
 */
#ifndef TIDEPOST_PROGRESS_H
#define TIDEPOST_PROGRESS_H

#include <stdbool.h>
#include <stdint.h>

#define PROGRESS_EVERY_MS 250
#define PROGRESS_LINE_MAX 160

struct progress {
	bool on;           /* drawing at all */
	bool shown;        /* a line is on screen */
	int fd;            /* stderr */
	const char *label; /* borrowed, e.g. "report: pass 1 of 2" */
	const char *unit;  /* "bytes" or e.g. "records" */
	uint64_t total;    /* 0: unknown */
	uint64_t done, items;
	int64_t start_ms, last_ms;
	int64_t (*now_ms)(void);
};

/* Begin; draws nothing yet.  unit "bytes" formats sizes in KiB/MiB/GiB;
 * any other unit is a count of that name. */
void progress_start(struct progress *p, const char *label, const char *unit,
                    uint64_t total);

/* Same, drawing to fd whatever it is (tests; force_on true). */
void progress_start_fd(struct progress *p, int fd, bool force_on,
                       const char *label, const char *unit, uint64_t total);

/* done: work done so far (bytes or records); items: readings so far. */
void progress_update(struct progress *p, uint64_t done, uint64_t items);

/* Erase the line if shown (before writing a message). */
void progress_clear(struct progress *p);

/* Sum of the sizes of the regular files named (0 when unknown; "-" is
 * stdin), a total for progress_start. */
uint64_t progress_file_bytes(int nfiles, char *const *files);

/* Erase the line; the display is off afterwards. */
void progress_end(struct progress *p);

#endif
