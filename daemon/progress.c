/*
 * progress.c - the progress line on stderr; see progress.h.
 */
#include "fdio.h"
#include "progress.h"

#include <errno.h>
#include <stdio.h>
#include <sys/stat.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

static int64_t mono_ms(void)
{
	struct timespec ts;

	if (clock_gettime(CLOCK_MONOTONIC, &ts) != 0)
		return 0;
	return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

void progress_start_fd(struct progress *p, int fd, bool force_on,
                       const char *label, const char *unit, uint64_t total)
{
	memset(p, 0, sizeof(*p));
	p->fd = fd;
	p->on = force_on;
	p->label = label;
	p->unit = unit != NULL ? unit : "bytes";
	p->total = total;
	p->now_ms = mono_ms;
	p->start_ms = p->now_ms();
	p->last_ms = p->start_ms;
}

void progress_start(struct progress *p, const char *label, const char *unit,
                    uint64_t total)
{
	const char *term = getenv("TERM");
	bool tty = isatty(STDERR_FILENO) == 1 &&
	           (term == NULL || strcmp(term, "dumb") != 0);

	progress_start_fd(p, STDERR_FILENO, tty, label, unit, total);
}

/* n with a thin group separator every three digits ("52 340"). */
static void grouped(char *out, size_t cap, uint64_t n)
{
	char digits[24];
	size_t len, i, o = 0;

	len = (size_t)snprintf(digits, sizeof(digits), "%llu",
	                       (unsigned long long)n);
	for (i = 0; i < len && o + 2 < cap; i++) {
		if (i > 0 && (len - i) % 3 == 0)
			out[o++] = ' ';
		out[o++] = digits[i];
	}
	out[o] = '\0';
}

static void amount(char *out, size_t cap, uint64_t n, bool bytes)
{
	if (!bytes)
		grouped(out, cap, n);
	else if (n < 1024 * 1024)
		snprintf(out, cap, "%.1f KiB", (double)n / 1024);
	else if (n < 1024ull * 1024 * 1024)
		snprintf(out, cap, "%.1f MiB", (double)n / (1024 * 1024));
	else
		snprintf(out, cap, "%.2f GiB",
		         (double)n / (1024.0 * 1024 * 1024));
}

/* "of 40.0 MiB (31%)" and ", 0:12 left", or nothing when unknown. */
static void share_and_left(const struct progress *p, double secs, char *share,
                           size_t scap, char *left, size_t lcap)
{
	char tot[32];
	double rest;
	long s;

	share[0] = left[0] = '\0';
	if (p->total == 0)
		return;
	amount(tot, sizeof(tot), p->total, strcmp(p->unit, "bytes") == 0);
	snprintf(
	    share, scap, " of %s (%u%%)", tot,
	    (unsigned)(p->done >= p->total ? 100 : p->done * 100 / p->total));
	if (secs < 1 || p->done == 0 || p->done >= p->total)
		return;
	rest = secs * (double)(p->total - p->done) / (double)p->done;
	s = (long)(rest + 0.5);
	if (s >= 3600)
		snprintf(left, lcap, ", %ld:%02ld:%02ld left", s / 3600,
		         s / 60 % 60, s % 60);
	else
		snprintf(left, lcap, ", %ld:%02ld left", s / 60, s % 60);
}

static void draw(struct progress *p, int64_t now)
{
	char line[PROGRESS_LINE_MAX], done[32], share[64], left[32], rate[32];
	double secs = (double)(now - p->start_ms) / 1000.0;
	bool bytes = strcmp(p->unit, "bytes") == 0;
	int n;

	amount(done, sizeof(done), p->done, bytes);
	share_and_left(p, secs, share, sizeof(share), left, sizeof(left));
	grouped(rate, sizeof(rate),
	        secs > 0 ? (uint64_t)((double)p->items / secs) : 0);
	n = snprintf(line, sizeof(line),
	             "\r%s: %s%s%s%s, %s readings/s%s"
	             "\033[K",
	             p->label, done, bytes ? "" : " ", bytes ? "" : p->unit,
	             share, rate, left);
	if (n < 0)
		return;
	if ((size_t)n >= sizeof(line))
		n = (int)sizeof(line) - 1;
	if (fdio_write_all(p->fd, line, (size_t)n) != 0)
		p->on = false; /* a display that cannot be written: stop it */
	p->shown = true;
}

void progress_update(struct progress *p, uint64_t done, uint64_t items)
{
	int64_t now;

	if (!p->on)
		return;
	p->done = done;
	p->items = items;
	now = p->now_ms();
	if (now - p->last_ms < PROGRESS_EVERY_MS)
		return;
	p->last_ms = now;
	draw(p, now);
}

void progress_clear(struct progress *p)
{
	if (!p->on || !p->shown)
		return;
	if (fdio_write_all(p->fd, "\r\033[K", 4) != 0)
		p->on = false; /* a display that cannot be written: stop it */
	p->shown = false;
}

void progress_end(struct progress *p)
{
	progress_clear(p);
	p->on = false;
}

uint64_t progress_file_bytes(int nfiles, char *const *files)
{
	uint64_t total = 0;
	struct stat sb;
	int i;

	for (i = 0; i < nfiles; i++)
		if (strcmp(files[i], "-") != 0 && stat(files[i], &sb) == 0 &&
		    S_ISREG(sb.st_mode))
			total += (uint64_t)sb.st_size;
	return total;
}
