/*
 * curlmulti.h - a libcurl multi handle driven by the daemon's poll loop,
 * and the settings every tidepost HTTP request starts from.  Shared by
 * the HTTP outputs (post.c) and the alert webhook (alert.c).
 *
 * The multi handle's sockets are watched by the loop and its timeout is
 * a loop timer; after libcurl has acted on either, `after` is called so
 * the owner can read the finished transfers (curl_multi_info_read).
 */
#ifndef TIDEPOST_CURLMULTI_H
#define TIDEPOST_CURLMULTI_H

#include <stdbool.h>
#include <stddef.h>

#include <curl/curl.h>

#include "loop.h"

struct curlmulti {
	CURLM *multi;
	struct loop *loop;
	struct loop_timer timer; /* libcurl's own timeout */
	void (*after)(void *arg);
	void *arg;
	const char *who; /* "post: NAME" or "alert", for log lines */
};

/* Make the multi handle and hook it to loop.  who is borrowed.
 * 0, or -1 (libcurl could not make or set it up). */
int curlmulti_init(struct curlmulti *cm, struct loop *loop,
                   void (*after)(void *arg), void *arg, const char *who)
    __attribute__((warn_unused_result));

/* Stop the timer and clean the handle up (its sockets are unwatched as
 * libcurl closes them).  Remove easy handles first.  Safe twice. */
void curlmulti_free(struct curlmulti *cm);

/*
 * What every request starts with: no signals, https only (and plain http
 * when `plain`: the caller has checked the rules for it), redirects never
 * followed, the peer's certificate and host name always verified (with
 * ca_file as the only trusted CA when given), connect and total timeouts,
 * the user agent, POST, a write callback, an error buffer
 * (CURL_ERROR_SIZE bytes).  0, or -1 when libcurl refused a setting.
 */
struct curlbase {
	const char *url;
	bool plain;
	const char *ca_file; /* NULL: the system's CAs */
	long connect_ms, total_ms;
	size_t (*write_cb)(char *data, size_t size, size_t n, void *arg);
	void *write_arg;
	char *errbuf;
};

int curlbase_setup(CURL *e, const struct curlbase *b)
    __attribute__((warn_unused_result));

#endif
