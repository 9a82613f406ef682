/*
 * buf.h - a byte buffer that grows up to a cap fixed at init.
 *
 * Owns its storage (malloc'd, freed by buf_free).  Invariants: len < size
 * <= max + 1 and data[len] == '\0' whenever data != NULL, so the content
 * can be used as a C string.  Appending past `max` bytes (or failing to
 * allocate) does not grow the buffer: it sets the sticky `err` flag, and
 * every later append is ignored until buf_reset.  Callers append freely
 * and check buf_failed() once, where they would use the result.
 *
 * Used by emit (readings as JSON lines / CSV rows) and later by the HTTP
 * output's batch bodies.
 */
#ifndef TIDEPOST_BUF_H
#define TIDEPOST_BUF_H

#include <stdbool.h>
#include <stddef.h>

struct buf {
	char *data;  /* NULL until the first append */
	size_t len;  /* bytes used, not counting the final NUL */
	size_t size; /* bytes allocated */
	size_t max;  /* cap on len */
	bool err;    /* sticky: an append did not fit or could not grow */
};

/* Empty buffer holding at most max bytes.  Allocates nothing yet. */
void buf_init(struct buf *b, size_t max);

/* Release the storage; b may be reused after buf_init.  NULL is fine. */
void buf_free(struct buf *b);

/* Forget the content and the error; keeps the storage for reuse. */
void buf_reset(struct buf *b);

/* Appends: all-or-nothing; on failure set b->err. */
void buf_add(struct buf *b, const void *p, size_t n);
void buf_addc(struct buf *b, char c);
void buf_adds(struct buf *b, const char *s);
void buf_printf(struct buf *b, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

/* Did any append since init/reset fail? */
static inline bool buf_failed(const struct buf *b)
{
	return b->err;
}

/* Content as a C string ("" when empty); valid until the next append,
 * reset or free. */
const char *buf_str(const struct buf *b);

/* Drop the last n bytes (n <= len). */
void buf_trim(struct buf *b, size_t n);

/* Back to the first len bytes (len <= b->len) with the error cleared:
 * undoes whatever was appended since b->len was len, failed or not. */
void buf_rewind(struct buf *b, size_t len);

/*
 * Writing in place, for hot paths: buf_room returns where n more bytes
 * (and the NUL after them) may be written, or NULL when they do not fit
 * under the cap, cannot be allocated or the buffer has failed already.
 * A NULL changes nothing (the error is not set): the caller falls back
 * to the ordinary appends, which set it if the bytes really do not fit.
 * buf_commit(b, end) then makes the bytes up to end (at most n past the
 * pointer returned) part of the content.  Nothing else may touch b in
 * between.
 */
char *buf_room_slow(struct buf *b, size_t n);

static inline char *buf_room(struct buf *b, size_t n)
{
	if (!b->err && b->data != NULL && n < b->size - b->len)
		return b->data + b->len;
	return buf_room_slow(b, n);
}

static inline void buf_commit(struct buf *b, char *end)
{
	b->len = (size_t)(end - b->data);
	*end = '\0';
}

#endif
