/*
 * ringio.c - the ring's I/O table: POSIX calls, retrying helpers, and the
 * memdisk simulator used by the ring tests.  See ringio.h for the model.
 */
#include "ringio.h"

#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <sys/statvfs.h>
#include <unistd.h>

/* ---- POSIX ---- */

static int px_open(void *ctx, const char *path, int flags, mode_t mode)
{
	return open(path, flags | O_CLOEXEC, mode);
}

static ssize_t px_pread(void *ctx, int fd, void *buf, size_t n, uint64_t off)
{
	if (off > (uint64_t)INT64_MAX) {
		errno = EINVAL;
		return -1;
	}
	return pread(fd, buf, n, (off_t)off);
}

static ssize_t px_pwrite(void *ctx, int fd, const void *buf, size_t n,
                         uint64_t off)
{
	if (off > (uint64_t)INT64_MAX) {
		errno = EINVAL;
		return -1;
	}
	return pwrite(fd, buf, n, (off_t)off);
}

static int px_fdatasync(void *ctx, int fd)
{
	return fdatasync(fd);
}

static int px_fsync(void *ctx, int fd)
{
	return fsync(fd);
}

static int px_ftruncate(void *ctx, int fd, uint64_t len)
{
	if (len > (uint64_t)INT64_MAX) {
		errno = EINVAL;
		return -1;
	}
	return ftruncate(fd, (off_t)len);
}

static int px_close(void *ctx, int fd)
{
	return close(fd);
}

static int px_rename(void *ctx, const char *from, const char *to)
{
	return rename(from, to);
}

static int px_unlink(void *ctx, const char *path)
{
	return unlink(path);
}

static int px_size(void *ctx, int fd, uint64_t *len)
{
	struct stat st;

	if (fstat(fd, &st) != 0)
		return -1;
	if (!S_ISREG(st.st_mode)) {
		errno = EINVAL;
		return -1;
	}
	*len = (uint64_t)st.st_size;
	return 0;
}

static int px_lock(void *ctx, int fd)
{
	return flock(fd, LOCK_EX | LOCK_NB);
}

static int px_free_bytes(void *ctx, const char *dir, uint64_t *bytes)
{
	struct statvfs sv;

	if (statvfs(dir, &sv) != 0)
		return -1;
	*bytes = (uint64_t)sv.f_bavail * (uint64_t)sv.f_frsize;
	return 0;
}

static int px_drop_cache(void *ctx, int fd)
{
	int e = posix_fadvise(fd, 0, 0, POSIX_FADV_DONTNEED);

	if (e != 0) {
		errno = e;
		return -1;
	}
	return 0;
}

static const struct ringio_ops posix_ops = {
    .ctx = NULL,
    .open = px_open,
    .pread = px_pread,
    .pwrite = px_pwrite,
    .fdatasync = px_fdatasync,
    .fsync = px_fsync,
    .ftruncate = px_ftruncate,
    .close = px_close,
    .rename = px_rename,
    .unlink = px_unlink,
    .size = px_size,
    .lock = px_lock,
    .free_bytes = px_free_bytes,
    .drop_cache = px_drop_cache,
};

const struct ringio_ops *ringio_posix(void)
{
	return &posix_ops;
}

/* ---- retrying helpers ---- */

bool ringio_in_use(const char *path)
{
	int fd = open(path, O_RDONLY | O_CLOEXEC);
	bool busy = false;

	if (fd < 0)
		return false;
	if (flock(fd, LOCK_SH | LOCK_NB) != 0)
		busy = errno == EWOULDBLOCK;
	else
		(void)flock(fd, LOCK_UN);
	close(fd);
	return busy;
}

int ringio_read_all(const struct ringio_ops *o, int fd, void *buf, size_t n,
                    uint64_t off)
{
	unsigned char *p = buf;
	size_t done = 0;
	ssize_t r;

	while (done < n) {
		r = o->pread(o->ctx, fd, p + done, n - done, off + done);
		if (r < 0 && errno == EINTR)
			continue;
		if (r < 0)
			return -1;
		if (r == 0) {
			errno = EIO; /* the file is shorter than it must be */
			return -1;
		}
		done += (size_t)r;
	}
	return 0;
}

int ringio_write_all(const struct ringio_ops *o, int fd, const void *buf,
                     size_t n, uint64_t off)
{
	const unsigned char *p = buf;
	size_t done = 0;
	ssize_t r;

	while (done < n) {
		r = o->pwrite(o->ctx, fd, p + done, n - done, off + done);
		if (r < 0 && errno == EINTR)
			continue;
		if (r < 0)
			return -1;
		if (r == 0) {
			errno = EIO; /* no progress: do not spin */
			return -1;
		}
		done += (size_t)r;
	}
	return 0;
}

/* EINTR means the call was interrupted before it finished and reported
 * nothing about write-back, so asking again is safe.  Any other error is
 * final: after a failed sync the kernel may already have marked the dirty
 * pages clean, so a second sync that "succeeds" proves nothing. */
int ringio_datasync(const struct ringio_ops *o, int fd)
{
	int r;

	do
		r = o->fdatasync(o->ctx, fd);
	while (r != 0 && errno == EINTR);
	return r;
}

int ringio_fullsync(const struct ringio_ops *o, int fd)
{
	int r;

	do
		r = o->fsync(o->ctx, fd);
	while (r != 0 && errno == EINTR);
	return r;
}

int ringio_open(const struct ringio_ops *o, const char *path, int flags,
                mode_t mode)
{
	int fd;

	do
		fd = o->open(o->ctx, path, flags, mode);
	while (fd < 0 && errno == EINTR);
	return fd;
}

int ringio_unlink(const struct ringio_ops *o, const char *path)
{
	int r;

	do
		r = o->unlink(o->ctx, path);
	while (r != 0 && errno == EINTR);
	return r;
}

int ringio_rename(const struct ringio_ops *o, const char *from, const char *to)
{
	int r;

	do
		r = o->rename(o->ctx, from, to);
	while (r != 0 && errno == EINTR);
	return r;
}

int ringio_size(const struct ringio_ops *o, int fd, uint64_t *len)
{
	int r;

	do
		r = o->size(o->ctx, fd, len);
	while (r != 0 && errno == EINTR);
	return r;
}

int ringio_lock(const struct ringio_ops *o, int fd)
{
	int r;

	do
		r = o->lock(o->ctx, fd);
	while (r != 0 && errno == EINTR);
	return r;
}

int ringio_free_bytes(const struct ringio_ops *o, const char *dir,
                      uint64_t *bytes)
{
	int r;

	do
		r = o->free_bytes(o->ctx, dir, bytes);
	while (r != 0 && errno == EINTR);
	return r;
}

int ringio_sync_dir(const struct ringio_ops *o, const char *path)
{
	char dir[PATH_MAX];
	const char *slash = strrchr(path, '/');
	size_t n;
	int fd, r, saved;

	if (slash == NULL) {
		dir[0] = '.';
		n = 1;
	} else {
		n = slash == path ? 1 : (size_t)(slash - path);
		if (n >= sizeof dir) {
			errno = ENAMETOOLONG;
			return -1;
		}
		memcpy(dir, path, n);
	}
	dir[n] = '\0';
	fd = ringio_open(o, dir, O_RDONLY | O_DIRECTORY, 0);
	if (fd < 0)
		return -1;
	r = ringio_fullsync(o, fd);
	saved = errno;
	(void)o->close(o->ctx, fd);
	errno = saved;
	return r;
}

/* ---- memdisk ---- */

#define MD_FILES    32
#define MD_NAMES    32
#define MD_FDS      32
#define MD_FD_BASE  100
#define MD_NAME_CAP 256
#define MD_SECTOR   512u
#define MD_DIR_INO  (-2)

struct md_pend {
	uint64_t off;
	size_t len;
	unsigned char *data; /* NULL: ftruncate to `off` */
};

struct md_file {
	int used;
	unsigned char *cur, *dur;
	uint64_t cur_len, cur_cap, dur_len, dur_cap;
	struct md_pend *pend;
	size_t n_pend, cap_pend;
};

struct md_name {
	char name[MD_NAME_CAP];
	int ino; /* -1: free slot */
};

enum md_nskind { NS_LINK, NS_RENAME, NS_UNLINK };

struct md_nsop {
	enum md_nskind kind;
	char a[MD_NAME_CAP], b[MD_NAME_CAP];
	int ino;
};

struct md_fd {
	int used;
	int ino; /* MD_DIR_INO for a directory */
	int locked;
};

struct memdisk {
	struct ringio_ops ops;
	uint64_t capacity;
	uint64_t rng;
	struct md_file files[MD_FILES];
	struct md_name cur_ns[MD_NAMES], dur_ns[MD_NAMES];
	struct md_nsop *nsops;
	size_t n_nsops, cap_nsops;
	struct md_fd fds[MD_FDS];
	struct memdisk_fault fault;
	uint64_t fault_seen;
	uint64_t cut_at, cut_seen;
	unsigned cut_mask;
	int dead;
	uint64_t calls[13];
};

enum gate { G_GO, G_FAIL, G_SHORT, G_CUT, G_DEAD };

static uint64_t rnd(struct memdisk *d)
{
	/* splitmix64 (Steele, Lea, Flood, "Fast splittable pseudorandom
	 * number generators", OOPSLA 2014) */
	uint64_t z = (d->rng += 0x9e3779b97f4a7c15ull);

	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
	z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
	return z ^ (z >> 31);
}

static uint64_t rnd_below(struct memdisk *d, uint64_t n)
{
	return n == 0 ? 0 : rnd(d) % n;
}

static int kind_index(unsigned kind)
{
	int i = 0;

	while (i < 13 && !(kind & (1u << i)))
		i++;
	return i;
}

/* Decide the fate of one call: cut, fault, or go. */
static enum gate gate(struct memdisk *d, unsigned kind)
{
	const struct memdisk_fault *f = &d->fault;

	d->calls[kind_index(kind)]++;
	if (d->dead) {
		errno = EIO;
		return G_DEAD;
	}
	if (d->cut_at != 0 && (kind & d->cut_mask)) {
		if (++d->cut_seen == d->cut_at) {
			d->dead = 1;
			errno = EIO;
			return G_CUT;
		}
	}
	if (f->at == 0 || !(kind & f->mask))
		return G_GO;
	d->fault_seen++;
	if (d->fault_seen < f->at || d->fault_seen - f->at >= f->count)
		return G_GO;
	if (f->err == MEMDISK_SHORT)
		return (kind & (MEMDISK_PREAD | MEMDISK_PWRITE)) ? G_SHORT
		                                                 : G_GO;
	errno = f->err;
	return G_FAIL;
}

static struct md_fd *fd_get(struct memdisk *d, int fd)
{
	int i = fd - MD_FD_BASE;

	if (i < 0 || i >= MD_FDS || !d->fds[i].used) {
		errno = EBADF;
		return NULL;
	}
	return &d->fds[i];
}

static struct md_file *fd_file(struct memdisk *d, int fd)
{
	struct md_fd *f = fd_get(d, fd);

	if (f == NULL)
		return NULL;
	if (f->ino < 0) {
		errno = EISDIR;
		return NULL;
	}
	return &d->files[f->ino];
}

static struct md_name *ns_find(struct md_name *ns, const char *name)
{
	size_t i;

	for (i = 0; i < MD_NAMES; i++)
		if (ns[i].ino >= 0 && strcmp(ns[i].name, name) == 0)
			return &ns[i];
	return NULL;
}

/* Apply one entry operation to a namespace; 0, or -1 with errno. */
static int ns_apply(struct md_name *ns, const struct md_nsop *op)
{
	struct md_name *e = ns_find(ns, op->a), *t;
	size_t i;

	switch (op->kind) {
	case NS_LINK:
		for (i = 0; i < MD_NAMES && ns[i].ino >= 0; i++)
			;
		if (i == MD_NAMES) {
			errno = ENOSPC;
			return -1;
		}
		memcpy(ns[i].name, op->a, MD_NAME_CAP);
		ns[i].ino = op->ino;
		return 0;
	case NS_RENAME:
		if (e == NULL)
			break;
		t = ns_find(ns, op->b);
		if (t != NULL && t != e)
			t->ino = -1;
		memcpy(e->name, op->b, MD_NAME_CAP);
		return 0;
	case NS_UNLINK:
		if (e == NULL)
			break;
		e->ino = -1;
		return 0;
	}
	errno = ENOENT;
	return -1;
}

/* Apply to the live namespace and queue for the durable one. */
static int ns_do(struct memdisk *d, enum md_nskind kind, const char *a,
                 const char *b, int ino)
{
	struct md_nsop op;
	struct md_nsop *grown;

	memset(&op, 0, sizeof op);
	op.kind = kind;
	op.ino = ino;
	if (strlen(a) >= MD_NAME_CAP || (b && strlen(b) >= MD_NAME_CAP)) {
		errno = ENAMETOOLONG;
		return -1;
	}
	memcpy(op.a, a, strlen(a));
	if (b != NULL)
		memcpy(op.b, b, strlen(b));
	if (d->n_nsops == d->cap_nsops) {
		size_t cap = d->cap_nsops ? d->cap_nsops * 2 : 8;

		grown = realloc(d->nsops, cap * sizeof *grown);
		if (grown == NULL)
			return -1;
		d->nsops = grown;
		d->cap_nsops = cap;
	}
	if (ns_apply(d->cur_ns, &op) != 0)
		return -1;
	d->nsops[d->n_nsops++] = op;
	return 0;
}

static int new_inode(struct memdisk *d)
{
	int i;

	for (i = 0; i < MD_FILES; i++) {
		if (!d->files[i].used) {
			memset(&d->files[i], 0, sizeof d->files[i]);
			d->files[i].used = 1;
			return i;
		}
	}
	errno = ENOSPC;
	return -1;
}

static int new_fd(struct memdisk *d, int ino)
{
	int i;

	for (i = 0; i < MD_FDS; i++) {
		if (!d->fds[i].used) {
			d->fds[i].used = 1;
			d->fds[i].ino = ino;
			d->fds[i].locked = 0;
			return MD_FD_BASE + i;
		}
	}
	errno = EMFILE;
	return -1;
}

static int md_open(void *ctx, const char *path, int flags, mode_t mode)
{
	struct memdisk *d = ctx;
	struct md_name *e;
	int ino;

	enum gate g = gate(d, MEMDISK_OPEN);

	if (g != G_GO && g != G_SHORT)
		return -1;
	if (flags & O_DIRECTORY)
		return new_fd(d, MD_DIR_INO);
	e = ns_find(d->cur_ns, path);
	if (e != NULL && (flags & O_CREAT) && (flags & O_EXCL)) {
		errno = EEXIST;
		return -1;
	}
	if (e != NULL)
		return new_fd(d, e->ino);
	if (!(flags & O_CREAT)) {
		errno = ENOENT;
		return -1;
	}
	ino = new_inode(d);
	if (ino < 0)
		return -1;
	if (ns_do(d, NS_LINK, path, NULL, ino) != 0) {
		d->files[ino].used = 0;
		return -1;
	}
	return new_fd(d, ino);
}

static ssize_t md_pread(void *ctx, int fd, void *buf, size_t n, uint64_t off)
{
	struct memdisk *d = ctx;
	struct md_file *f;
	enum gate g = gate(d, MEMDISK_PREAD);

	if (g == G_FAIL || g == G_CUT || g == G_DEAD)
		return -1;
	f = fd_file(d, fd);
	if (f == NULL)
		return -1;
	if (off >= f->cur_len || n == 0)
		return 0;
	if (n > f->cur_len - off)
		n = (size_t)(f->cur_len - off);
	if (g == G_SHORT && n > 1)
		n /= 2;
	memcpy(buf, f->cur + off, n);
	return (ssize_t)n;
}

static int grow(unsigned char **buf, uint64_t *cap, uint64_t need)
{
	unsigned char *p;
	uint64_t c = *cap ? *cap : 4096;

	if (need <= *cap)
		return 0;
	while (c < need)
		c *= 2;
	p = realloc(*buf, (size_t)c);
	if (p == NULL)
		return -1;
	memset(p + *cap, 0, (size_t)(c - *cap));
	*buf = p;
	*cap = c;
	return 0;
}

static uint64_t used_bytes(const struct memdisk *d)
{
	uint64_t sum = 0;
	size_t i;

	for (i = 0; i < MD_FILES; i++)
		if (d->files[i].used)
			sum += d->files[i].cur_len;
	return sum;
}

static int queue_pend(struct md_file *f, uint64_t off, const void *buf,
                      size_t n)
{
	struct md_pend *p;

	if (f->n_pend == f->cap_pend) {
		size_t cap = f->cap_pend ? f->cap_pend * 2 : 16;

		p = realloc(f->pend, cap * sizeof *p);
		if (p == NULL)
			return -1;
		f->pend = p;
		f->cap_pend = cap;
	}
	p = &f->pend[f->n_pend];
	p->off = off;
	p->len = n;
	p->data = NULL;
	if (buf != NULL) {
		p->data = malloc(n ? n : 1);
		if (p->data == NULL)
			return -1;
		memcpy(p->data, buf, n);
	}
	f->n_pend++;
	return 0;
}

/* Write into the live image and queue the write as pending. */
static int live_write(struct memdisk *d, struct md_file *f, const void *buf,
                      size_t n, uint64_t off)
{
	uint64_t end = off + n;

	if (end > f->cur_len && d->capacity != 0 &&
	    used_bytes(d) + (end - f->cur_len) > d->capacity) {
		errno = ENOSPC;
		return -1;
	}
	if (grow(&f->cur, &f->cur_cap, end) != 0 ||
	    queue_pend(f, off, buf, n) != 0) {
		errno = ENOMEM;
		return -1;
	}
	memcpy(f->cur + off, buf, n);
	if (end > f->cur_len)
		f->cur_len = end;
	return 0;
}

static ssize_t md_pwrite(void *ctx, int fd, const void *buf, size_t n,
                         uint64_t off)
{
	struct memdisk *d = ctx;
	struct md_file *f;
	enum gate g = gate(d, MEMDISK_PWRITE);

	if (g == G_FAIL || g == G_DEAD)
		return -1;
	f = fd_file(d, fd);
	if (f == NULL)
		return -1;
	if (g == G_CUT) {
		(void)live_write(d, f, buf, n, off); /* in flight at the cut */
		errno = EIO;
		return -1;
	}
	if (g == G_SHORT && n > 1)
		n /= 2;
	if (live_write(d, f, buf, n, off) != 0)
		return -1;
	return (ssize_t)n;
}

/* Copy one pending write into the durable image: the first `keep` bytes
 * of it, the rest as old content (fill -1), a byte, or random (-2). */
static int apply_pend(struct memdisk *d, struct md_file *f,
                      const struct md_pend *p, size_t keep, int fill)
{
	uint64_t end = p->off + (fill == -1 ? keep : p->len);
	size_t i;

	if (p->data == NULL) { /* ftruncate */
		if (grow(&f->dur, &f->dur_cap, p->off) != 0)
			return -1;
		if (p->off > f->dur_len)
			memset(f->dur + f->dur_len, 0,
			       (size_t)(p->off - f->dur_len));
		f->dur_len = p->off;
		return 0;
	}
	if (grow(&f->dur, &f->dur_cap, end) != 0)
		return -1;
	if (p->off > f->dur_len)
		memset(f->dur + f->dur_len, 0, (size_t)(p->off - f->dur_len));
	memcpy(f->dur + p->off, p->data, keep);
	for (i = keep; fill != -1 && i < p->len; i++)
		f->dur[p->off + i] =
		    fill == -2 ? (unsigned char)rnd(d) : (unsigned char)fill;
	if (end > f->dur_len)
		f->dur_len = end;
	return 0;
}

/* Fill one 512-byte sector touched by the write with random bytes. */
static void garble(struct memdisk *d, struct md_file *f,
                   const struct md_pend *p)
{
	uint64_t first = p->off / MD_SECTOR;
	uint64_t last = (p->off + p->len - 1) / MD_SECTOR;
	uint64_t s = first + rnd_below(d, last - first + 1);
	uint64_t a = s * MD_SECTOR, b = a + MD_SECTOR, i;

	if (a < p->off)
		a = p->off;
	if (b > p->off + p->len)
		b = p->off + p->len;
	for (i = a; i < b; i++)
		f->dur[i] = (unsigned char)rnd(d);
}

static void drop_pend(struct md_file *f)
{
	size_t i;

	for (i = 0; i < f->n_pend; i++)
		free(f->pend[i].data);
	f->n_pend = 0;
}

/* Sync: every pending write reaches the durable image. */
static int settle(struct memdisk *d, struct md_file *f)
{
	size_t i;

	for (i = 0; i < f->n_pend; i++)
		if (apply_pend(d, f, &f->pend[i], f->pend[i].len, 0) != 0)
			return -1;
	drop_pend(f);
	return 0;
}

/* A failed sync: each pending write may or may not have reached the
 * medium; either way the pages are now "clean" and not retried. */
static void settle_failed(struct memdisk *d, struct md_file *f)
{
	size_t i;

	for (i = 0; i < f->n_pend; i++)
		if (rnd(d) & 1)
			(void)apply_pend(d, f, &f->pend[i], f->pend[i].len, 0);
	drop_pend(f);
}

static int md_sync(struct memdisk *d, int fd, unsigned kind)
{
	struct md_fd *h;
	enum gate g = gate(d, kind);
	int saved = errno;

	if (g == G_CUT || g == G_DEAD)
		return -1;
	h = fd_get(d, fd);
	if (h == NULL)
		return -1;
	if (g == G_FAIL && saved != EINTR && h->ino >= 0)
		settle_failed(d, &d->files[h->ino]);
	if (g == G_FAIL) {
		errno = saved;
		return -1;
	}
	if (h->ino == MD_DIR_INO) {
		size_t i;

		for (i = 0; i < d->n_nsops; i++)
			(void)ns_apply(d->dur_ns, &d->nsops[i]);
		d->n_nsops = 0;
		return 0;
	}
	if (settle(d, &d->files[h->ino]) != 0) {
		errno = ENOMEM;
		return -1;
	}
	return 0;
}

static int md_fdatasync(void *ctx, int fd)
{
	return md_sync(ctx, fd, MEMDISK_FDATASYNC);
}

static int md_fsync(void *ctx, int fd)
{
	return md_sync(ctx, fd, MEMDISK_FSYNC);
}

static int md_ftruncate(void *ctx, int fd, uint64_t len)
{
	struct memdisk *d = ctx;
	struct md_file *f;
	enum gate g = gate(d, MEMDISK_FTRUNCATE);

	if (g == G_FAIL || g == G_CUT || g == G_DEAD)
		return -1;
	f = fd_file(d, fd);
	if (f == NULL)
		return -1;
	if (grow(&f->cur, &f->cur_cap, len) != 0 ||
	    queue_pend(f, len, NULL, 0) != 0) {
		errno = ENOMEM;
		return -1;
	}
	if (len > f->cur_len)
		memset(f->cur + f->cur_len, 0, (size_t)(len - f->cur_len));
	f->cur_len = len;
	return 0;
}

static int md_close(void *ctx, int fd)
{
	struct memdisk *d = ctx;
	struct md_fd *h = fd_get(d, fd);
	enum gate g;

	if (h == NULL)
		return -1;
	h->used = 0; /* gone even when close reports failure */
	g = gate(d, MEMDISK_CLOSE);
	return g == G_GO || g == G_SHORT ? 0 : -1;
}

static int md_rename(void *ctx, const char *from, const char *to)
{
	struct memdisk *d = ctx;
	enum gate g = gate(d, MEMDISK_RENAME);

	if (g == G_FAIL || g == G_CUT || g == G_DEAD)
		return -1;
	return ns_do(d, NS_RENAME, from, to, -1);
}

static int md_unlink(void *ctx, const char *path)
{
	struct memdisk *d = ctx;
	enum gate g = gate(d, MEMDISK_UNLINK);

	if (g == G_FAIL || g == G_CUT || g == G_DEAD)
		return -1;
	return ns_do(d, NS_UNLINK, path, NULL, -1);
}

static int md_size(void *ctx, int fd, uint64_t *len)
{
	struct memdisk *d = ctx;
	struct md_file *f;
	enum gate g = gate(d, MEMDISK_SIZE);

	if (g == G_FAIL || g == G_CUT || g == G_DEAD)
		return -1;
	f = fd_file(d, fd);
	if (f == NULL)
		return -1;
	*len = f->cur_len;
	return 0;
}

static int md_lock(void *ctx, int fd)
{
	struct memdisk *d = ctx;
	struct md_fd *h;
	enum gate g = gate(d, MEMDISK_LOCK);
	size_t i;

	if (g == G_FAIL || g == G_CUT || g == G_DEAD)
		return -1;
	h = fd_get(d, fd);
	if (h == NULL)
		return -1;
	for (i = 0; i < MD_FDS; i++) {
		if (d->fds[i].used && d->fds[i].locked &&
		    d->fds[i].ino == h->ino && &d->fds[i] != h) {
			errno = EWOULDBLOCK;
			return -1;
		}
	}
	h->locked = 1;
	return 0;
}

static int md_free_bytes(void *ctx, const char *dir, uint64_t *bytes)
{
	struct memdisk *d = ctx;
	enum gate g = gate(d, MEMDISK_FREE);
	uint64_t used;

	if (g == G_FAIL || g == G_CUT || g == G_DEAD)
		return -1;
	used = used_bytes(d);
	if (d->capacity == 0)
		*bytes = UINT64_MAX / 2;
	else
		*bytes = used >= d->capacity ? 0 : d->capacity - used;
	return 0;
}

/* Reads see the medium again: the durable image with the pending
 * (dirty) writes on top; what a failed sync left only in the cache is
 * forgotten. */
static int md_drop_cache(void *ctx, int fd)
{
	struct memdisk *d = ctx;
	struct md_file *f;
	enum gate g = gate(d, MEMDISK_DROP);
	size_t i;

	if (g == G_FAIL || g == G_CUT || g == G_DEAD)
		return -1;
	f = fd_file(d, fd);
	if (f == NULL)
		return -1;
	if (grow(&f->cur, &f->cur_cap, f->dur_len) != 0) {
		errno = ENOMEM;
		return -1;
	}
	memset(f->cur, 0, (size_t)f->cur_cap);
	if (f->dur_len)
		memcpy(f->cur, f->dur, (size_t)f->dur_len);
	f->cur_len = f->dur_len;
	for (i = 0; i < f->n_pend; i++) {
		const struct md_pend *p = &f->pend[i];
		uint64_t end = p->data ? p->off + p->len : p->off;

		if (grow(&f->cur, &f->cur_cap, end) != 0) {
			errno = ENOMEM;
			return -1;
		}
		if (p->data != NULL)
			memcpy(f->cur + p->off, p->data, p->len);
		if (p->data == NULL || end > f->cur_len)
			f->cur_len = end;
	}
	return 0;
}

static void bind_ops(struct memdisk *d)
{
	d->ops.ctx = d;
	d->ops.open = md_open;
	d->ops.pread = md_pread;
	d->ops.pwrite = md_pwrite;
	d->ops.fdatasync = md_fdatasync;
	d->ops.fsync = md_fsync;
	d->ops.ftruncate = md_ftruncate;
	d->ops.close = md_close;
	d->ops.rename = md_rename;
	d->ops.unlink = md_unlink;
	d->ops.size = md_size;
	d->ops.lock = md_lock;
	d->ops.free_bytes = md_free_bytes;
	d->ops.drop_cache = md_drop_cache;
}

struct memdisk *memdisk_new(uint64_t capacity, uint64_t seed)
{
	struct memdisk *d = calloc(1, sizeof *d);
	size_t i;

	if (d == NULL)
		return NULL;
	d->capacity = capacity;
	d->rng = seed;
	for (i = 0; i < MD_NAMES; i++) {
		d->cur_ns[i].ino = -1;
		d->dur_ns[i].ino = -1;
	}
	bind_ops(d);
	return d;
}

static void file_free(struct md_file *f)
{
	drop_pend(f);
	free(f->pend);
	free(f->cur);
	free(f->dur);
	memset(f, 0, sizeof *f);
}

void memdisk_free(struct memdisk *d)
{
	size_t i;

	if (d == NULL)
		return;
	for (i = 0; i < MD_FILES; i++)
		file_free(&d->files[i]);
	free(d->nsops);
	free(d);
}

static unsigned char *dup_bytes(const unsigned char *p, uint64_t cap)
{
	unsigned char *q;

	if (p == NULL || cap == 0)
		return NULL;
	q = malloc((size_t)cap);
	if (q != NULL)
		memcpy(q, p, (size_t)cap);
	return q;
}

static int file_clone(struct md_file *dst, const struct md_file *src)
{
	size_t i;

	*dst = *src;
	dst->cur = dup_bytes(src->cur, src->cur_cap);
	dst->dur = dup_bytes(src->dur, src->dur_cap);
	dst->pend =
	    src->cap_pend ? calloc(src->cap_pend, sizeof *dst->pend) : NULL;
	dst->n_pend = 0;
	if ((src->cur_cap && !dst->cur) || (src->dur_cap && !dst->dur) ||
	    (src->cap_pend && !dst->pend))
		return -1;
	for (i = 0; i < src->n_pend; i++) {
		dst->pend[i] = src->pend[i];
		dst->pend[i].data = NULL;
		dst->n_pend = i + 1;
		if (src->pend[i].data == NULL)
			continue;
		dst->pend[i].data = dup_bytes(
		    src->pend[i].data, src->pend[i].len ? src->pend[i].len : 1);
		if (dst->pend[i].data == NULL)
			return -1;
	}
	return 0;
}

struct memdisk *memdisk_clone(const struct memdisk *s)
{
	struct memdisk *d = calloc(1, sizeof *d);
	size_t i;

	if (d == NULL)
		return NULL;
	*d = *s;
	memset(d->files, 0, sizeof d->files);
	memset(d->fds, 0, sizeof d->fds);
	memset(&d->fault, 0, sizeof d->fault);
	d->cut_at = 0;
	d->dead = 0;
	d->nsops = NULL;
	d->cap_nsops = d->n_nsops = 0;
	bind_ops(d);
	for (i = 0; i < MD_FILES; i++)
		if (s->files[i].used &&
		    file_clone(&d->files[i], &s->files[i]) != 0)
			goto fail;
	if (s->n_nsops != 0) {
		d->nsops = malloc(s->n_nsops * sizeof *d->nsops);
		if (d->nsops == NULL)
			goto fail;
		memcpy(d->nsops, s->nsops, s->n_nsops * sizeof *d->nsops);
		d->n_nsops = d->cap_nsops = s->n_nsops;
	}
	return d;
fail:
	memdisk_free(d);
	return NULL;
}

const struct ringio_ops *memdisk_ops(struct memdisk *d)
{
	return &d->ops;
}

void memdisk_set_fault(struct memdisk *d, const struct memdisk_fault *f)
{
	memset(&d->fault, 0, sizeof d->fault);
	if (f != NULL)
		d->fault = *f;
	d->fault_seen = 0;
}

void memdisk_set_cut(struct memdisk *d, uint64_t n, unsigned mask)
{
	d->cut_at = n;
	d->cut_mask = mask;
	d->cut_seen = 0;
}

int memdisk_dead(const struct memdisk *d)
{
	return d->dead;
}

uint64_t memdisk_calls(const struct memdisk *d, unsigned mask)
{
	uint64_t n = 0;
	int i;

	for (i = 0; i < 13; i++)
		if (mask & (1u << i))
			n += d->calls[i];
	return n;
}

size_t memdisk_open_fds(const struct memdisk *d)
{
	size_t i, n = 0;

	for (i = 0; i < MD_FDS; i++)
		n += d->fds[i].used ? 1 : 0;
	return n;
}

static const struct md_file *file_at(const struct memdisk *d, const char *path)
{
	size_t i;

	for (i = 0; i < MD_NAMES; i++)
		if (d->cur_ns[i].ino >= 0 &&
		    strcmp(d->cur_ns[i].name, path) == 0)
			return &d->files[d->cur_ns[i].ino];
	return NULL;
}

size_t memdisk_pending(const struct memdisk *d, const char *path)
{
	const struct md_file *f = file_at(d, path);

	return f == NULL ? 0 : f->n_pend;
}

int memdisk_pending_write(const struct memdisk *d, const char *path, size_t i,
                          uint64_t *off, size_t *len)
{
	const struct md_file *f = file_at(d, path);

	if (f == NULL || i >= f->n_pend)
		return -1;
	*off = f->pend[i].off;
	*len = f->pend[i].len;
	return 0;
}

/* After a cut: the live image is the durable one, every fd is gone. */
static void power_on(struct memdisk *d, size_t ns_keep)
{
	size_t i;

	for (i = 0; i < ns_keep && i < d->n_nsops; i++)
		(void)ns_apply(d->dur_ns, &d->nsops[i]);
	d->n_nsops = 0;
	memcpy(d->cur_ns, d->dur_ns, sizeof d->cur_ns);
	for (i = 0; i < MD_FILES; i++) {
		struct md_file *f = &d->files[i];

		if (!f->used)
			continue;
		drop_pend(f);
		if (grow(&f->cur, &f->cur_cap, f->dur_len) == 0) {
			if (f->dur_len)
				memcpy(f->cur, f->dur, (size_t)f->dur_len);
			f->cur_len = f->dur_len;
		}
	}
	memset(d->fds, 0, sizeof d->fds);
	memset(&d->fault, 0, sizeof d->fault);
	d->cut_at = 0;
	d->dead = 0;
}

static void cut_one(struct memdisk *d, struct md_file *f,
                    const struct md_pend *p, const struct memdisk_cutmix *m)
{
	uint64_t r = rnd_below(d, 100);

	if (r < m->apply_pct) {
		(void)apply_pend(d, f, p, p->len, 0);
	} else if (r < m->apply_pct + m->drop_pct) {
		return;
	} else if (r < m->apply_pct + m->drop_pct + m->torn_pct) {
		(void)apply_pend(d, f, p, (size_t)rnd_below(d, p->len + 1), -1);
	} else {
		if (apply_pend(d, f, p, p->len, 0) == 0 && p->data && p->len)
			garble(d, f, p);
	}
}

void memdisk_powercut(struct memdisk *d, const struct memdisk_cutmix *mix)
{
	static const struct memdisk_cutmix def = {50, 25, 15};
	const struct memdisk_cutmix *m = mix;
	size_t i, j;

	if (m == NULL || m->apply_pct + m->drop_pct + m->torn_pct == 0)
		m = &def;
	for (i = 0; i < MD_FILES; i++) {
		struct md_file *f = &d->files[i];

		for (j = 0; f->used && j < f->n_pend; j++)
			cut_one(d, f, &f->pend[j], m);
	}
	power_on(d, (size_t)rnd_below(d, d->n_nsops + 1));
}

int memdisk_cut_torn(struct memdisk *d, const char *path, long which,
                     size_t keep, int fill)
{
	const struct md_file *target = file_at(d, path);
	size_t i, j, w;

	if (target == NULL || target->n_pend == 0)
		return -1;
	w = which < 0 ? target->n_pend - 1 : (size_t)which;
	if (w >= target->n_pend || keep > target->pend[w].len)
		return -1;
	for (i = 0; i < MD_FILES; i++) {
		struct md_file *f = &d->files[i];

		for (j = 0; f->used && j < f->n_pend; j++) {
			const struct md_pend *p = &f->pend[j];

			if (f != target || j < w)
				(void)apply_pend(d, f, p, p->len, 0);
			else if (j == w)
				(void)apply_pend(d, f, p, keep, fill);
		}
	}
	power_on(d, d->n_nsops);
	return 0;
}

int memdisk_peek(const struct memdisk *d, const char *path, uint64_t off,
                 void *buf, size_t n)
{
	const struct md_file *f = file_at(d, path);

	if (f == NULL || off > f->cur_len || n > f->cur_len - off)
		return -1;
	memcpy(buf, f->cur + off, n);
	return 0;
}

int memdisk_poke(struct memdisk *d, const char *path, uint64_t off,
                 const void *buf, size_t n)
{
	struct md_file *f = (struct md_file *)file_at(d, path);

	if (f == NULL || off > f->cur_len || n > f->cur_len - off ||
	    off > f->dur_len || n > f->dur_len - off)
		return -1;
	memcpy(f->cur + off, buf, n);
	memcpy(f->dur + off, buf, n);
	return 0;
}

int memdisk_exists(const struct memdisk *d, const char *path)
{
	return file_at(d, path) != NULL;
}
