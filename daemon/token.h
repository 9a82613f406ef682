/*
 * token.h - reading an output's bearer token (RELIABILITY.md 4, "Token
 * source"), so it never sits in the config text, a log or a child's
 * environment.
 *
 * Owns the token strings it returns: malloc'd, freed (and wiped first)
 * by token_free.  Rules enforced:
 *   - a token file is opened O_NOFOLLOW|O_CLOEXEC|O_NONBLOCK (a symlink
 *     or FIFO cannot redirect or block us), must be a regular file owned
 *     by our effective uid with no group/other permission bits (mode &
 *     077 == 0), and at most TOKEN_MAX bytes;
 *   - a token variable is read, then unsetenv()'d, so alert children
 *     never inherit it;
 *   - the token is one line of visible ASCII (0x21..0x7e, RFC 6750
 *     b64token characters and more); one trailing newline (LF or CRLF)
 *     is dropped; anything else (empty, spaces, CR/LF inside, control or
 *     non-ASCII bytes) is refused, so it cannot inject a header.
 * Error texts name the file or variable and the rule, never the token.
 *
 * Called by post.c (post_new) and by the alert module for http targets.
 */
#ifndef TIDEPOST_TOKEN_H
#define TIDEPOST_TOKEN_H

#include <stddef.h>

#define TOKEN_MAX 4096

/* Read the token in file path.  0 and *out, or -1 with errno and a
 * message "token_file: PATH: cause" in err. */
int token_read_file(const char *path, char **out, char *err, size_t errcap)
    __attribute__((warn_unused_result));

/* Read the token in environment variable name and unset it.  0 and
 * *out, or -1 with a message "token_env: NAME: cause" in err. */
int token_read_env(const char *name, char **out, char *err, size_t errcap)
    __attribute__((warn_unused_result));

/* Wipe and free a token; NULL is fine. */
void token_free(char *t);

#endif
