/*
 * log.c - see log.h.  Each line is formatted into one local buffer and
 * written with a single fputs so lines from one process never interleave
 * mid-line; an over-long message is cut and marked with "...".
 */
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "log.h"

#define LOG_LINE_MAX 1024

static enum log_level log_level = LOG_LVL_INFO;

void log_set_level(enum log_level lvl)
{
	log_level = lvl;
}

static void log_emit(enum log_level lvl, const char *fmt, va_list ap)
	__attribute__((format(printf, 2, 0)));

static void log_emit(enum log_level lvl, const char *fmt, va_list ap)
{
	char line[LOG_LINE_MAX];
	int n;

	if (lvl > log_level)
		return;
	n = vsnprintf(line, sizeof(line) - 1, fmt, ap);
	if (n < 0)
		return;
	if ((size_t)n >= sizeof(line) - 1) {
		n = (int)sizeof(line) - 5;
		memcpy(line + n, "...", 3);
		n += 3;
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
