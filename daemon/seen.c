/*
 * seen.c - the persistent set of accepted reading ids; see seen.h.
 *
 * Tables use linear probing over a power-of-two array of hashes; 0 is an
 * empty slot and 1 a slot freed by seen_abort (a tombstone), so real
 * hashes below 2 are moved up by 2.  Each table has room for four times
 * gen_cap entries, so it is never more than half full.
 */
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fdio.h"
#include "seen.h"

#define SEEN_MAGIC   "TPSN"
#define SEEN_VERSION 1u
#define SEEN_HEAD    16u
#define EMPTY        0u
#define TOMB         1u
#define READ_CHUNK   4096u

struct table {
	uint64_t *slot;
	size_t mask; /* slots - 1 */
	size_t n;    /* ids held */
	size_t used; /* slots not empty (ids + tombstones) */
};

struct seen {
	char *dir; /* NULL: memory only */
	size_t gen_cap;
	struct table t[2]; /* by file index */
	uint64_t gen[2];   /* generation of each file (0: none) */
	int cur;           /* index of the current file / table */
	int fd;            /* the current file, or -1 */
	uint64_t pend[SEEN_PENDING_MAX];
	size_t n_pend;
};

uint64_t seen_hash(const char *id, size_t n)
{
	uint64_t h = 14695981039346656037ull;
	size_t i;

	for (i = 0; i < n; i++) {
		h ^= (unsigned char)id[i];
		h *= 1099511628211ull;
	}
	return h < 2 ? h + 2 : h;
}

static int table_init(struct table *t, size_t gen_cap)
{
	size_t slots = 16;

	while (slots < gen_cap * 4)
		slots <<= 1;
	t->slot = calloc(slots, sizeof(*t->slot));
	t->mask = slots - 1;
	t->n = 0;
	t->used = 0;
	return t->slot != NULL ? 0 : -1;
}

static void table_clear(struct table *t)
{
	memset(t->slot, 0, (t->mask + 1) * sizeof(*t->slot));
	t->n = 0;
	t->used = 0;
}

static bool table_has(const struct table *t, uint64_t h)
{
	size_t i = (size_t)(h ^ (h >> 29)) & t->mask;

	while (t->slot[i] != EMPTY) {
		if (t->slot[i] == h)
			return true;
		i = (i + 1) & t->mask;
	}
	return false;
}

/* Insert h (not present).  The table is kept at most half full by the
 * callers, so an empty slot always exists. */
static void table_put(struct table *t, uint64_t h)
{
	size_t i = (size_t)(h ^ (h >> 29)) & t->mask;

	while (t->slot[i] != EMPTY)
		i = (i + 1) & t->mask;
	t->slot[i] = h;
	t->n++;
	t->used++;
}

static bool table_roomy(const struct table *t)
{
	return t->used < (t->mask + 1) / 2;
}

static void table_del(struct table *t, uint64_t h)
{
	size_t i = (size_t)(h ^ (h >> 29)) & t->mask;

	while (t->slot[i] != EMPTY) {
		if (t->slot[i] == h) {
			t->slot[i] = TOMB;
			t->n--;
			return;
		}
		i = (i + 1) & t->mask;
	}
}

static void put_le64(unsigned char *p, uint64_t v)
{
	int i;

	for (i = 0; i < 8; i++)
		p[i] = (unsigned char)(v >> (8 * i));
}

static uint64_t get_le64(const unsigned char *p)
{
	uint64_t v = 0;
	int i;

	for (i = 7; i >= 0; i--)
		v = (v << 8) | p[i];
	return v;
}

static void file_path(const struct seen *s, int i, char *out, size_t cap)
{
	snprintf(out, cap, "%s/seen.%d", s->dir, i);
}

/* Read file i into table i; its generation into s->gen[i] (0 when it is
 * missing or its header is not ours).  Returns the file size kept (whole
 * entries), or 0. */
static off_t load_file(struct seen *s, int i)
{
	unsigned char b[READ_CHUNK];
	char path[4096];
	off_t kept = 0;
	ssize_t n;
	size_t k;
	int fd;

	file_path(s, i, path, sizeof(path));
	fd = open(path, O_RDONLY | O_CLOEXEC | O_NOFOLLOW);
	if (fd < 0)
		return 0;
	n = read(fd, b, SEEN_HEAD);
	if (n == (ssize_t)SEEN_HEAD && memcmp(b, SEEN_MAGIC, 4) == 0 &&
	    b[4] == SEEN_VERSION && b[5] == 0 && b[6] == 0 && b[7] == 0) {
		s->gen[i] = get_le64(b + 8);
		kept = SEEN_HEAD;
	}
	while (kept > 0 && (n = read(fd, b, sizeof(b))) > 0) {
		for (k = 0; k + 8 <= (size_t)n; k += 8) {
			uint64_t h = get_le64(b + k);

			if (h >= 2 && !table_has(&s->t[i], h) &&
			    table_roomy(&s->t[i]))
				table_put(&s->t[i], h);
		}
		kept += (off_t)k;
		if (k != (size_t)n)
			break; /* a torn last entry: dropped */
	}
	close(fd);
	return kept;
}

static int sync_dir(const char *dir)
{
	int fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
	int rc;

	if (fd < 0)
		return -1;
	rc = fsync(fd);
	close(fd);
	return rc;
}

/* Start file i afresh with generation gen and make it current. */
static int start_file(struct seen *s, int i, uint64_t gen)
{
	unsigned char h[SEEN_HEAD] = {'T', 'P', 'S', 'N', SEEN_VERSION};
	char path[4096];
	int fd;

	file_path(s, i, path, sizeof(path));
	fd = open(path,
	          O_WRONLY | O_CREAT | O_TRUNC | O_APPEND | O_CLOEXEC |
	              O_NOFOLLOW,
	          0600);
	if (fd < 0)
		return -1;
	put_le64(h + 8, gen);
	if (fdio_write_all(fd, h, sizeof(h)) != 0 || fdatasync(fd) != 0 ||
	    sync_dir(s->dir) != 0) {
		close(fd);
		return -1;
	}
	if (s->fd >= 0)
		close(s->fd);
	s->fd = fd;
	s->gen[i] = gen;
	s->cur = i;
	table_clear(&s->t[i]);
	return 0;
}

/* Open the current file for appending at its last whole entry. */
static int reopen_current(struct seen *s, off_t kept)
{
	char path[4096];
	int fd;

	file_path(s, s->cur, path, sizeof(path));
	fd = open(path, O_WRONLY | O_APPEND | O_CLOEXEC | O_NOFOLLOW);
	if (fd < 0)
		return -1;
	if (ftruncate(fd, kept) != 0) {
		close(fd);
		return -1;
	}
	s->fd = fd;
	return 0;
}

static int load(struct seen *s)
{
	off_t kept[2];
	uint64_t g;

	kept[0] = load_file(s, 0);
	kept[1] = load_file(s, 1);
	s->cur = s->gen[1] > s->gen[0];
	if (s->gen[s->cur] == 0 || kept[s->cur] == 0) {
		g = s->gen[!s->cur] + 1;
		return start_file(s, s->cur, g);
	}
	if (s->t[s->cur].n >= s->gen_cap)
		return start_file(s, !s->cur, s->gen[s->cur] + 1);
	return reopen_current(s, kept[s->cur]);
}

int seen_open(const char *dir, size_t gen_cap, struct seen **out, char *err,
              size_t errcap)
{
	struct seen *s = calloc(1, sizeof(*s));
	int saved;

	*out = NULL;
	if (s == NULL)
		goto out_err;
	s->fd = -1;
	s->gen_cap = gen_cap ? gen_cap : SEEN_GEN_IDS_DEFAULT;
	if (table_init(&s->t[0], s->gen_cap) != 0 ||
	    table_init(&s->t[1], s->gen_cap) != 0)
		goto out_err;
	if (dir != NULL) {
		s->dir = strdup(dir);
		if (s->dir == NULL || load(s) != 0)
			goto out_err;
	}
	*out = s;
	return 0;
out_err:
	saved = errno;
	snprintf(err, errcap, "seen: open: %s/seen.N: %s", dir ? dir : "-",
	         strerror(saved));
	seen_close(s);
	errno = saved;
	return -1;
}

void seen_close(struct seen *s)
{
	if (s == NULL)
		return;
	/* pending ids of a commit that was not confirmed are not written */
	s->n_pend = 0;
	if (s->fd >= 0)
		close(s->fd);
	free(s->t[0].slot);
	free(s->t[1].slot);
	free(s->dir);
	free(s);
}

bool seen_has(const struct seen *s, uint64_t h)
{
	return table_has(&s->t[0], h) || table_has(&s->t[1], h);
}

int seen_stage(struct seen *s, uint64_t h)
{
	if (!seen_room(s)) {
		errno = ENOSPC;
		return -1;
	}
	s->pend[s->n_pend++] = h;
	table_put(&s->t[s->cur], h);
	return 0;
}

bool seen_room(const struct seen *s)
{
	return s->n_pend < SEEN_PENDING_MAX && table_roomy(&s->t[s->cur]);
}

size_t seen_pending(const struct seen *s)
{
	return s->n_pend;
}

void seen_abort(struct seen *s)
{
	while (s->n_pend > 0)
		table_del(&s->t[s->cur], s->pend[--s->n_pend]);
}

static int append_pending(struct seen *s)
{
	unsigned char b[SEEN_PENDING_MAX * 8];
	size_t i;

	for (i = 0; i < s->n_pend; i++)
		put_le64(b + 8 * i, s->pend[i]);
	if (fdio_write_all(s->fd, b, 8 * s->n_pend) != 0)
		return -1;
	return fdatasync(s->fd);
}

int seen_commit(struct seen *s)
{
	int rc = 0;

	if (s->n_pend == 0)
		return 0;
	if (s->fd >= 0)
		rc = append_pending(s);
	s->n_pend = 0;
	if (rc == 0 && s->t[s->cur].n >= s->gen_cap) {
		if (s->dir == NULL) {
			table_clear(&s->t[!s->cur]);
			s->cur = !s->cur;
		} else {
			rc = start_file(s, !s->cur, s->gen[s->cur] + 1);
		}
	}
	return rc;
}

size_t seen_count(const struct seen *s)
{
	return s->t[0].n + s->t[1].n;
}
