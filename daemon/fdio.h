/*
 * fdio.h - whole reads and writes on file descriptors: the loops around
 * read(2) and write(2) that short counts and EINTR call for, and reading
 * a small regular file whole.  Used wherever the daemon writes a file or
 * reads a state, status, token or message file.
 */
#ifndef TIDEPOST_FDIO_H
#define TIDEPOST_FDIO_H

#include <stddef.h>
#include <sys/types.h>

/* Write all n bytes (retrying short writes and EINTR).  0, or -1 with
 * errno (EIO when write returns 0). */
int fdio_write_all(int fd, const void *p, size_t n)
    __attribute__((warn_unused_result));

/* Read until cap bytes or end of file (retrying EINTR): the bytes read,
 * or -1 with errno. */
ssize_t fdio_read_all(int fd, void *buf, size_t cap)
    __attribute__((warn_unused_result));

/* The whole of the regular file at path (opened with O_RDONLY |
 * O_CLOEXEC | oflags, e.g. O_NOFOLLOW), malloc'd with a NUL after it,
 * its length in *len; NULL with errno when it cannot be opened or read,
 * EFBIG when it is not a regular file or is longer than max bytes. */
char *fdio_slurp(const char *path, int oflags, size_t max, size_t *len);

#endif
