/*
 * log.c - see log.h.  Each line is formatted into one local buffer and
 * written with a single fputs so lines from one process never interleave
 * mid-line; an over-long message is cut and marked with "...".
 */
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <syslog.h>

#include "log.h"

#define LOG_LINE_MAX 1024

static enum log_level log_level = LOG_LVL_INFO;
static enum log_sink log_sink = LOG_SINK_STDERR;
static bool log_prefix = false;

void log_set_sink(enum log_sink sink, const char *ident)
{
	if (sink == LOG_SINK_SYSLOG && log_sink != LOG_SINK_SYSLOG)
		openlog(ident != NULL ? ident : "tidepost",
		        LOG_PID | LOG_NDELAY, LOG_DAEMON);
	else if (sink == LOG_SINK_STDERR && log_sink == LOG_SINK_SYSLOG)
		closelog();
	log_sink = sink;
}

void log_set_prefix(bool prefix)
{
	log_prefix = prefix;
}

bool log_under_service_manager(void)
{
	return getenv("JOURNAL_STREAM") != NULL ||
	       getenv("INVOCATION_ID") != NULL;
}

/* The syslog priority of a level. */
static int log_priority(enum log_level lvl)
{
	if (lvl == LOG_LVL_ERR)
		return LOG_ERR;
	return lvl == LOG_LVL_WARN ? LOG_WARNING : LOG_INFO;
}

void log_set_level(enum log_level lvl)
{
	log_level = lvl;
}

static void log_emit(enum log_level lvl, const char *fmt, va_list ap)
    __attribute__((format(printf, 2, 0)));

static void log_emit(enum log_level lvl, const char *fmt, va_list ap)
{
	char line[LOG_LINE_MAX];
	int n, pre = 0;

	if (lvl > log_level)
		return;
	if (log_sink == LOG_SINK_STDERR && log_prefix)
		pre = snprintf(line, sizeof(line), "<%d>", log_priority(lvl));
	n = vsnprintf(line + pre, sizeof(line) - 1 - (size_t)pre, fmt, ap);
	if (n < 0)
		return;
	if ((size_t)n >= sizeof(line) - 1 - (size_t)pre) {
		n = (int)sizeof(line) - 5 - pre;
		memcpy(line + pre + n, "...", 3);
		n += 3;
	}
	n += pre;
	if (log_sink == LOG_SINK_SYSLOG) {
		line[n] = '\0';
		syslog(log_priority(lvl), "%s", line);
		return;
	}
	line[n] = '\n';
	line[n + 1] = '\0';
	fputs(line, stderr);
}

void log_err(const char *fmt, ...)
{
	va_list ap;

	va_start(ap, fmt);
	log_emit(LOG_LVL_ERR, fmt, ap);
	va_end(ap);
}

void log_warn(const char *fmt, ...)
{
	va_list ap;

	va_start(ap, fmt);
	log_emit(LOG_LVL_WARN, fmt, ap);
	va_end(ap);
}

void log_info(const char *fmt, ...)
{
	va_list ap;

	va_start(ap, fmt);
	log_emit(LOG_LVL_INFO, fmt, ap);
	va_end(ap);
}
