/*
 * token.c - see token.h.
 */
#include <errno.h>
#include <fcntl.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fdio.h"
#include "token.h"

/* Drop one trailing LF or CRLF, then require visible ASCII only. */
static const char *clean(char *t, size_t *len)
{
	size_t n = *len, i;

	if (n > 0 && t[n - 1] == '\n')
		n--;
	if (n > 0 && t[n - 1] == '\r')
		n--;
	t[n] = '\0';
	*len = n;
	if (n == 0)
		return "empty";
	for (i = 0; i < n; i++)
		if ((unsigned char)t[i] < 0x21 || (unsigned char)t[i] > 0x7e)
			return "holds a space, control or non-ASCII byte"
			       " (a token is one line of visible ASCII)";
	return NULL;
}

/*
 * Is path a file directly inside $CREDENTIALS_DIRECTORY?  systemd writes a
 * credential root-owned with mode 0400 plus an ACL for the service user,
 * so stat shows 0440 (exec-credential.c, write_credential [read in a stored
 * copy]); such a file is accepted when owned by root or by us and nobody
 * can write or execute it.
 */
static bool in_credentials(const char *path)
{
	const char *dir = getenv("CREDENTIALS_DIRECTORY");
	size_t n;

	if (dir == NULL || dir[0] != '/')
		return false;
	n = strlen(dir);
	while (n > 1 && dir[n - 1] == '/')
		n--;
	return strncmp(path, dir, n) == 0 && path[n] == '/' &&
	       strchr(path + n + 1, '/') == NULL;
}

static const char *check_fd(int fd, bool cred)
{
	struct stat st;

	if (fstat(fd, &st) != 0)
		return strerror(errno);
	if (!S_ISREG(st.st_mode))
		return "not a regular file";
	cred = cred && (st.st_uid == 0 || st.st_uid == geteuid()) &&
	       (st.st_mode & 0137) == 0;
	if (!cred && st.st_uid != geteuid())
		return "not owned by the user tidepost runs as";
	if (!cred && (st.st_mode & 077))
		return "readable or writable by group or others (chmod 600)";
	if (st.st_size > TOKEN_MAX)
		return "larger than 4096 bytes";
	return NULL;
}

static const char *open_error(int e)
{
	if (e == ELOOP)
		return "is a symbolic link (refused: give the real file)";
	return strerror(e);
}

int token_read_file(const char *path, char **out, char *err, size_t errcap)
{
	const char *why = NULL;
	char *t = malloc(TOKEN_MAX + 2);
	ssize_t n = -1;
	size_t len = 0;
	int fd;

	*out = NULL;
	if (t != NULL)
		memset(t, 0, TOKEN_MAX + 2);
	fd = open(path, O_RDONLY | O_NOFOLLOW | O_CLOEXEC | O_NONBLOCK);
	if (t == NULL)
		why = "out of memory";
	else if (fd < 0)
		why = open_error(errno);
	else
		why = check_fd(fd, in_credentials(path));
	if (why == NULL) {
		n = fdio_read_all(fd, t, TOKEN_MAX + 1);
		why = n < 0           ? strerror(errno)
		      : n > TOKEN_MAX ? "larger than 4096 bytes"
		                      : NULL;
	}
	if (why == NULL) {
		len = (size_t)n;
		why = clean(t, &len);
	}
	if (fd >= 0)
		close(fd);
	if (why != NULL) {
		snprintf(err, errcap, "token_file: %s: %s", path, why);
		if (t != NULL)
			explicit_bzero(t, TOKEN_MAX + 2);
		free(t);
		errno = EINVAL;
		return -1;
	}
	*out = t;
	return 0;
}

int token_read_env(const char *name, char **out, char *err, size_t errcap)
{
	const char *v = getenv(name), *why = NULL;
	size_t len = v != NULL ? strlen(v) : 0;
	char *t = NULL;

	*out = NULL;
	if (v == NULL)
		why = "not set";
	else if (len > TOKEN_MAX)
		why = "longer than 4096 bytes";
	else if ((t = malloc(len + 1)) == NULL)
		why = "out of memory";
	if (why == NULL) {
		memcpy(t, v, len + 1);
		why = clean(t, &len);
	}
	unsetenv(name); /* even when refused: never inherited */
	if (why != NULL) {
		snprintf(err, errcap, "token_env: %s: %s", name, why);
		if (t != NULL)
			explicit_bzero(t, len + 1);
		free(t);
		errno = EINVAL;
		return -1;
	}
	*out = t;
	return 0;
}

void token_free(char *t)
{
	if (t == NULL)
		return;
	explicit_bzero(t, strlen(t));
	free(t);
}
