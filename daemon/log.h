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

#include <stdbool.h>

enum log_level {
	LOG_LVL_ERR = 0, /* something failed; an action was not done */
	LOG_LVL_WARN,    /* something is wrong but work goes on */
	LOG_LVL_INFO     /* what happened, for the operator */
};

/* Keep lines of level <= lvl (default LOG_LVL_INFO). */
void log_set_level(enum log_level lvl);

/*
 * Where lines go (added for the daemon; the default is stderr without
 * prefixes, as for every command).  LOG_SINK_SYSLOG sends each line to
 * syslog(3) with `ident` (LOG_PID, facility LOG_DAEMON; ERR -> LOG_ERR,
 * WARN -> LOG_WARNING, INFO -> LOG_INFO).  With `prefix` on, stderr lines
 * start with the syslog priority in angle brackets ("<3>", "<4>", "<6>"),
 * which journald and other service managers read as the line's level.
 */
enum log_sink { LOG_SINK_STDERR = 0, LOG_SINK_SYSLOG };

void log_set_sink(enum log_sink sink, const char *ident);
void log_set_prefix(bool prefix);

/* Is a service manager collecting our stderr (JOURNAL_STREAM or
 * INVOCATION_ID in the environment)? */
bool log_under_service_manager(void);

void log_err(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
void log_warn(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
void log_info(const char *fmt, ...) __attribute__((format(printf, 1, 2)));

#endif
