/*
 * ringview.c - a ring file opened without changing it; see ringview.h.
 */
#include <errno.h>
#include <fcntl.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "ringview.h"

#define OVERLAY_MAX_WRITES 256
#define OVERLAY_MAX_BYTES  (64u * 1024 * 1024)

struct ovl_write {
	uint64_t off;
	size_t len;
	unsigned char *data;
};

struct ringview {
	struct ovl_write w[OVERLAY_MAX_WRITES];
	size_t n;
	size_t bytes;
};

static int ovl_open(void *ctx, const char *path, int flags, mode_t mode)
{
	(void)ctx;
	(void)mode;
	if (flags & (O_CREAT | O_TRUNC)) {
		errno = EROFS;
		return -1;
	}
	return open(path, O_RDONLY | O_CLOEXEC);
}

static ssize_t ovl_pread(void *ctx, int fd, void *buf, size_t n, uint64_t off)
{
	struct ringview *o = ctx;
	ssize_t got = pread(fd, buf, n, (off_t)off);
	uint64_t a, b;
	size_t i;

	if (got <= 0)
		return got;
	for (i = 0; i < o->n; i++) {
		const struct ovl_write *w = &o->w[i];

		a = w->off > off ? w->off : off;
		b = w->off + w->len < off + (uint64_t)got ? w->off + w->len
		                                          : off + (uint64_t)got;
		if (a < b)
			memcpy((char *)buf + (a - off), w->data + (a - w->off),
			       (size_t)(b - a));
	}
	return got;
}

static ssize_t ovl_pwrite(void *ctx, int fd, const void *buf, size_t n,
                          uint64_t off)
{
	struct ringview *o = ctx;
	struct ovl_write *w = &o->w[o->n];

	(void)fd;
	if (o->n == OVERLAY_MAX_WRITES || o->bytes + n > OVERLAY_MAX_BYTES) {
		errno = ENOSPC;
		return -1;
	}
	w->data = malloc(n ? n : 1); /* freed by ovl_reset */
	if (w->data == NULL)
		return -1;
	memcpy(w->data, buf, n);
	w->off = off;
	w->len = n;
	o->n++;
	o->bytes += n;
	return (ssize_t)n;
}

static int ovl_nop(void *ctx, int fd)
{
	(void)ctx;
	(void)fd;
	return 0;
}

static int ovl_ftruncate(void *ctx, int fd, uint64_t len)
{
	(void)ctx;
	(void)fd;
	(void)len;
	errno = EROFS;
	return -1;
}

static int ovl_close(void *ctx, int fd)
{
	(void)ctx;
	return close(fd);
}

static int ovl_path_op(void *ctx, const char *a, const char *b)
{
	(void)ctx;
	(void)a;
	(void)b;
	errno = EROFS;
	return -1;
}

static int ovl_unlink(void *ctx, const char *path)
{
	return ovl_path_op(ctx, path, NULL);
}

static int ovl_size(void *ctx, int fd, uint64_t *len)
{
	struct stat sb;

	(void)ctx;
	if (fstat(fd, &sb) != 0)
		return -1;
	*len = (uint64_t)sb.st_size;
	return 0;
}

static int ovl_free_bytes(void *ctx, const char *dir, uint64_t *bytes)
{
	(void)ctx;
	(void)dir;
	*bytes = UINT64_MAX / 2;
	return 0;
}

void ringview_reset(struct ringview *o)
{
	while (o->n > 0)
		free(o->w[--o->n].data);
	o->bytes = 0;
}

struct ringio_ops ringview_ops(struct ringview *o)
{
	struct ringio_ops ops = {
	    .ctx = o,
	    .open = ovl_open,
	    .pread = ovl_pread,
	    .pwrite = ovl_pwrite,
	    .fdatasync = ovl_nop,
	    .fsync = ovl_nop,
	    .ftruncate = ovl_ftruncate,
	    .close = ovl_close,
	    .rename = ovl_path_op,
	    .unlink = ovl_unlink,
	    .size = ovl_size,
	    .lock = ovl_nop,
	    .free_bytes = ovl_free_bytes,
	    .drop_cache = ovl_nop,
	};

	return ops;
}

struct ringview *ringview_new(void)
{
	return calloc(1, sizeof(struct ringview));
}

void ringview_free(struct ringview *o)
{
	if (o == NULL)
		return;
	ringview_reset(o);
	free(o);
}
