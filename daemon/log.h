/*
 * log.h - the daemon's tiny log API: one line per event on stderr.
 *
 * Messages follow `module: action: object: cause`, for example
 * "ring: fdatasync: /var/lib/tidepost/ring: Input/output error".  The
 * caller writes the whole message; the log adds nothing but the final
 * newline (so command output stays easy to read and to grep).  Log once,
 * where the decision is made.  Lines above the current level are dropped
 * (log_set_level); the default keeps everything.
 *
 * Not thread-safe and needs none: tidepost has one thread.
 * Called by every daemon module and command.
 */
#ifndef TIDEPOST_LOG_H
#define TIDEPOST_LOG_H

enum log_level {
	LOG_LVL_ERR = 0,  /* something failed; an action was not done */
	LOG_LVL_WARN,     /* something is wrong but work goes on */
	LOG_LVL_INFO      /* what happened, for the operator */
};

/* Keep lines of level <= lvl (default LOG_LVL_INFO). */
void log_set_level(enum log_level lvl);

void log_err(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
void log_warn(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
void log_info(const char *fmt, ...) __attribute__((format(printf, 1, 2)));

#endif
