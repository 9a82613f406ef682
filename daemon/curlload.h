/*
 * curlload.h - libcurl loaded on first use instead of at program start.
 *
 * curlload.c defines the libcurl functions tidepost calls (the names and
 * prototypes of <curl/curl.h>) and loads libcurl.so.4 with dlopen() the
 * first time one is called, so commands that never post keep libcurl and
 * its TLS and directory libraries out of memory.  When it cannot be
 * loaded, curl_global_init fails with CURLE_FAILED_INIT, the init
 * functions return NULL and the rest report an error; curlload_error()
 * then says why.  A libcurl function not listed in curlload.c does not
 * link: add it there.
 */
#ifndef TIDEPOST_CURLLOAD_H
#define TIDEPOST_CURLLOAD_H

#include <stdbool.h>

/* Load libcurl now if not tried yet: NULL when loaded, else why not. */
const char *curlload_error(void);

/* Has libcurl been loaded (by an earlier call)? */
bool curlload_loaded(void);

#endif
