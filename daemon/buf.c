/*
 * buf.c - see buf.h.  Growth doubles from 256 bytes up to max + 1, so a
 * buffer reused for many small lines settles at one allocation.
 */
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "buf.h"

#define BUF_FIRST 256

void buf_init(struct buf *b, size_t max)
{
	b->data = NULL;
	b->len = 0;
	b->size = 0;
	b->max = max;
	b->err = false;
}

void buf_free(struct buf *b)
{
	if (b == NULL)
		return;
	free(b->data);
	buf_init(b, b->max);
}

void buf_reset(struct buf *b)
{
	b->len = 0;
	b->err = false;
	if (b->data != NULL)
		b->data[0] = '\0';
}

/* Make room for `extra` more bytes plus the NUL; false if over the cap. */
static bool reserve(struct buf *b, size_t extra)
{
	size_t want, size;
	char *p;

	if (b->err || extra > b->max - b->len) {
		b->err = true;
		return false;
	}
	want = b->len + extra + 1;
	if (want <= b->size)
		return true;
	size = b->size ? b->size : BUF_FIRST;
	if (size > b->max)
		size = b->max + 1;
	while (size < want && size <= b->max / 2)
		size *= 2;
	if (size < want)
		size = b->max + 1;
	p = realloc(b->data, size);
	if (p == NULL) {
		b->err = true;
		return false;
	}
	b->data = p;
	b->size = size;
	return true;
}

void buf_add(struct buf *b, const void *p, size_t n)
{
	if ((b->err || b->data == NULL || n >= b->size - b->len) &&
	    !reserve(b, n))
		return;
	if (n > 0)
		memcpy(b->data + b->len, p, n);
	b->len += n;
	b->data[b->len] = '\0';
}

void buf_addc(struct buf *b, char c)
{
	if ((b->err || b->data == NULL || b->size - b->len < 2) &&
	    !reserve(b, 1))
		return;
	b->data[b->len++] = c;
	b->data[b->len] = '\0';
}

void buf_adds(struct buf *b, const char *s)
{
	buf_add(b, s, strlen(s));
}

void buf_printf(struct buf *b, const char *fmt, ...)
{
	va_list ap;
	int n;

	if (!reserve(b, 0))
		return;
	va_start(ap, fmt);
	n = vsnprintf(b->data + b->len, b->size - b->len, fmt, ap);
	va_end(ap);
	if (n < 0) {
		b->err = true;
	} else if ((size_t)n < b->size - b->len) {
		b->len += (size_t)n;
	} else if (reserve(b, (size_t)n)) {
		va_start(ap, fmt);
		vsnprintf(b->data + b->len, b->size - b->len, fmt, ap);
		va_end(ap);
		b->len += (size_t)n;
	}
	if (b->data != NULL)
		b->data[b->len] = '\0';
}

const char *buf_str(const struct buf *b)
{
	return b->data != NULL ? b->data : "";
}

void buf_trim(struct buf *b, size_t n)
{
	if (n > b->len)
		n = b->len;
	b->len -= n;
	if (b->data != NULL)
		b->data[b->len] = '\0';
}

void buf_rewind(struct buf *b, size_t len)
{
	if (len < b->len)
		b->len = len;
	b->err = false;
	if (b->data != NULL)
		b->data[b->len] = '\0';
}

char *buf_room_slow(struct buf *b, size_t n)
{
	if (b->err || n > b->max - b->len)
		return NULL;
	if (!reserve(b, n)) {
		b->err = false; /* out of memory: the fallback sets it */
		return NULL;
	}
	return b->data + b->len;
}
