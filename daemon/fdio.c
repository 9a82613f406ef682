/*
 * fdio.c - see fdio.h.
 */
#include <errno.h>
#include <fcntl.h>
#include <stdint.h>
#include <stdlib.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fdio.h"

int fdio_write_all(int fd, const void *p, size_t n)
{
	const char *c = p;
	ssize_t w;

	while (n > 0) {
		w = write(fd, c, n);
		if (w < 0 && errno == EINTR)
			continue;
		if (w <= 0) {
			if (w == 0)
				errno = EIO;
			return -1;
		}
		c += w;
		n -= (size_t)w;
	}
	return 0;
}

ssize_t fdio_read_all(int fd, void *buf, size_t cap)
{
	char *b = buf;
	size_t got = 0;
	ssize_t n;

	while (got < cap) {
		n = read(fd, b + got, cap - got);
		if (n < 0 && errno == EINTR)
			continue;
		if (n < 0)
			return -1;
		if (n == 0)
			break;
		got += (size_t)n;
	}
	return (ssize_t)got;
}

char *fdio_slurp(const char *path, int oflags, size_t max, size_t *len)
{
	int fd = open(path, O_RDONLY | O_CLOEXEC | oflags), e;
	struct stat sb;
	char *text = NULL;
	ssize_t n = -1;

	if (fd < 0)
		return NULL;
	if (fstat(fd, &sb) != 0 || !S_ISREG(sb.st_mode) || sb.st_size < 0 ||
	    (uint64_t)sb.st_size > max) {
		errno = EFBIG;
		goto out_close;
	}
	text = malloc((size_t)sb.st_size + 1);
	if (text != NULL)
		n = fdio_read_all(fd, text, (size_t)sb.st_size);
	if (n < 0) {
		e = errno;
		free(text);
		text = NULL;
		errno = e;
		goto out_close;
	}
	text[n] = '\0';
	*len = (size_t)n;
out_close:
	e = errno;
	close(fd);
	errno = e;
	return text;
}
