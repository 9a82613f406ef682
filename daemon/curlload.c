/*
 * curlload.c - libcurl, loaded when first used (see curlload.h).
 *
 * tidepost is not linked against libcurl.  The functions below carry the
 * names and prototypes of <curl/curl.h>, so post.c and alert.c call libcurl
 * as usual; the first call dlopen()s the library and looks every function
 * up.  Commands that post nothing (decode, encode, check, ring, report)
 * never load libcurl and the TLS, LDAP, SSH and Kerberos libraries it
 * pulls in, which were most of their memory.
 *
 * The executable does not export these names (nothing it links needs
 * them), and the library is opened RTLD_LOCAL, so libcurl's own calls
 * never come back here.
 *
 * The loaded library is process-wide state: one library, loaded once, by
 * the one thread the daemon has.
 */
#define CURL_DISABLE_TYPECHECK /* the typecheck macros would rename these */
#include <dlfcn.h>
#include <stdarg.h>
#include <stdbool.h>
#include <stdio.h>
#include <string.h>

#include <curl/curl.h>

#include "curlload.h"

#ifndef TP_CURL_SONAME
#define TP_CURL_SONAME "libcurl.so.4"
#endif

typedef void (*any_fn)(void);

struct curl_fns {
	CURLcode (*global_init)(long);
	void (*global_cleanup)(void);
	CURL *(*easy_init)(void);
	CURLcode (*easy_setopt)(CURL *, CURLoption, ...);
	CURLcode (*easy_getinfo)(CURL *, CURLINFO, ...);
	void (*easy_cleanup)(CURL *);
	const char *(*easy_strerror)(CURLcode);
	struct curl_slist *(*slist_append)(struct curl_slist *, const char *);
	void (*slist_free_all)(struct curl_slist *);
	void (*free)(void *);
	CURLM *(*multi_init)(void);
	CURLMcode (*multi_setopt)(CURLM *, CURLMoption, ...);
	CURLMcode (*multi_add_handle)(CURLM *, CURL *);
	CURLMcode (*multi_remove_handle)(CURLM *, CURL *);
	CURLMcode (*multi_socket_action)(CURLM *, curl_socket_t, int, int *);
	CURLMsg *(*multi_info_read)(CURLM *, int *);
	CURLMcode (*multi_cleanup)(CURLM *);
	const char *(*multi_strerror)(CURLMcode);
	CURLU *(*url)(void);
	void (*url_cleanup)(CURLU *);
	CURLUcode (*url_get)(CURLU *, CURLUPart, char **, unsigned int);
	CURLUcode (*url_set)(CURLU *, CURLUPart, const char *, unsigned int);
	const char *(*url_strerror)(CURLUcode);
};

/* The symbol behind each member, in member order. */
static const char *const fn_names[] = {
    "curl_global_init",
    "curl_global_cleanup",
    "curl_easy_init",
    "curl_easy_setopt",
    "curl_easy_getinfo",
    "curl_easy_cleanup",
    "curl_easy_strerror",
    "curl_slist_append",
    "curl_slist_free_all",
    "curl_free",
    "curl_multi_init",
    "curl_multi_setopt",
    "curl_multi_add_handle",
    "curl_multi_remove_handle",
    "curl_multi_socket_action",
    "curl_multi_info_read",
    "curl_multi_cleanup",
    "curl_multi_strerror",
    "curl_url",
    "curl_url_cleanup",
    "curl_url_get",
    "curl_url_set",
    "curl_url_strerror",
};

_Static_assert(sizeof(struct curl_fns) ==
                   sizeof(fn_names) / sizeof(fn_names[0]) * sizeof(any_fn),
               "one name per function");

static struct curl_fns fn;
static int load_state; /* 0 not tried, 1 loaded, -1 could not be loaded */
static char why[256];

/* dlsym's void * to a function pointer (POSIX guarantees this works). */
static any_fn sym(void *h, const char *name)
{
	any_fn f;
	void *p = dlsym(h, name);

	memcpy(&f, &p, sizeof(f));
	return p != NULL ? f : NULL;
}

static bool load(void)
{
	any_fn got[sizeof(fn_names) / sizeof(fn_names[0])];
	const char *e;
	void *h;
	size_t i;

	if (load_state != 0)
		return load_state > 0;
	load_state = -1;
	h = dlopen(TP_CURL_SONAME, RTLD_NOW | RTLD_LOCAL);
	if (h == NULL) {
		e = dlerror();
		snprintf(why, sizeof(why), "%s",
		         e != NULL ? e : TP_CURL_SONAME);
		return false;
	}
	for (i = 0; i < sizeof(got) / sizeof(got[0]); i++) {
		got[i] = sym(h, fn_names[i]);
		if (got[i] == NULL) {
			snprintf(why, sizeof(why), "%s: no %s", TP_CURL_SONAME,
			         fn_names[i]);
			dlclose(h);
			return false;
		}
	}
	memcpy(&fn, got, sizeof(fn));
	load_state = 1;
	return true;
}

const char *curlload_error(void)
{
	if (load_state >= 0 && load())
		return NULL;
	return why[0] != '\0' ? why : "libcurl could not be loaded";
}

bool curlload_loaded(void)
{
	return load_state > 0;
}

CURLcode curl_global_init(long flags)
{
	return load() ? fn.global_init(flags) : CURLE_FAILED_INIT;
}

void curl_global_cleanup(void)
{
	if (load_state > 0)
		fn.global_cleanup();
}

CURL *curl_easy_init(void)
{
	return load() ? fn.easy_init() : NULL;
}

/*
 * The variadic setters take one argument whose type the option number
 * gives (curl.h: CURLOPTTYPE_* are ranges of 10000; the multi options
 * use the same ranges): long, a data pointer, a function pointer, or a
 * curl_off_t.  It is read as that type and passed on as that type.
 */
#define OPT_LONG(o) ((o) < CURLOPTTYPE_OBJECTPOINT)
#define OPT_FUNC(o)                                                            \
	((o) >= CURLOPTTYPE_FUNCTIONPOINT && (o) < CURLOPTTYPE_OFF_T)
#define OPT_OFFT(o) ((o) >= CURLOPTTYPE_OFF_T && (o) < CURLOPTTYPE_BLOB)

CURLcode curl_easy_setopt(CURL *h, CURLoption o, ...)
{
	CURLcode rc;
	va_list ap;

	if (!load())
		return CURLE_FAILED_INIT;
	va_start(ap, o);
	if (OPT_LONG(o))
		rc = fn.easy_setopt(h, o, va_arg(ap, long));
	else if (OPT_FUNC(o))
		rc = fn.easy_setopt(h, o, va_arg(ap, any_fn));
	else if (OPT_OFFT(o))
		rc = fn.easy_setopt(h, o, va_arg(ap, curl_off_t));
	else
		rc = fn.easy_setopt(h, o, va_arg(ap, void *));
	va_end(ap);
	return rc;
}

/* Every CURLINFO_* takes a pointer to where the answer goes. */
CURLcode curl_easy_getinfo(CURL *h, CURLINFO info, ...)
{
	CURLcode rc;
	va_list ap;

	if (!load())
		return CURLE_FAILED_INIT;
	va_start(ap, info);
	rc = fn.easy_getinfo(h, info, va_arg(ap, void *));
	va_end(ap);
	return rc;
}

void curl_easy_cleanup(CURL *h)
{
	if (load_state > 0)
		fn.easy_cleanup(h);
}

const char *curl_easy_strerror(CURLcode c)
{
	return load() ? fn.easy_strerror(c) : "libcurl could not be loaded";
}

struct curl_slist *curl_slist_append(struct curl_slist *l, const char *s)
{
	return load() ? fn.slist_append(l, s) : NULL;
}

void curl_slist_free_all(struct curl_slist *l)
{
	if (load_state > 0)
		fn.slist_free_all(l);
}

void curl_free(void *p)
{
	if (load_state > 0)
		fn.free(p);
}

CURLM *curl_multi_init(void)
{
	return load() ? fn.multi_init() : NULL;
}

CURLMcode curl_multi_setopt(CURLM *m, CURLMoption o, ...)
{
	CURLMcode rc;
	va_list ap;

	if (!load())
		return CURLM_INTERNAL_ERROR;
	va_start(ap, o);
	if (OPT_LONG(o))
		rc = fn.multi_setopt(m, o, va_arg(ap, long));
	else if (OPT_FUNC(o))
		rc = fn.multi_setopt(m, o, va_arg(ap, any_fn));
	else if (OPT_OFFT(o))
		rc = fn.multi_setopt(m, o, va_arg(ap, curl_off_t));
	else
		rc = fn.multi_setopt(m, o, va_arg(ap, void *));
	va_end(ap);
	return rc;
}

CURLMcode curl_multi_add_handle(CURLM *m, CURL *h)
{
	return load() ? fn.multi_add_handle(m, h) : CURLM_INTERNAL_ERROR;
}

CURLMcode curl_multi_remove_handle(CURLM *m, CURL *h)
{
	return load() ? fn.multi_remove_handle(m, h) : CURLM_INTERNAL_ERROR;
}

CURLMcode curl_multi_socket_action(CURLM *m, curl_socket_t s, int ev,
                                   int *running)
{
	if (!load())
		return CURLM_INTERNAL_ERROR;
	return fn.multi_socket_action(m, s, ev, running);
}

CURLMsg *curl_multi_info_read(CURLM *m, int *left)
{
	if (!load()) {
		*left = 0;
		return NULL;
	}
	return fn.multi_info_read(m, left);
}

CURLMcode curl_multi_cleanup(CURLM *m)
{
	return load_state > 0 ? fn.multi_cleanup(m) : CURLM_OK;
}

const char *curl_multi_strerror(CURLMcode c)
{
	return load() ? fn.multi_strerror(c) : "libcurl could not be loaded";
}

CURLU *curl_url(void)
{
	return load() ? fn.url() : NULL;
}

void curl_url_cleanup(CURLU *u)
{
	if (load_state > 0)
		fn.url_cleanup(u);
}

CURLUcode curl_url_get(CURLU *u, CURLUPart what, char **part,
                       unsigned int flags)
{
	if (!load()) {
		*part = NULL;
		return CURLUE_OUT_OF_MEMORY;
	}
	return fn.url_get(u, what, part, flags);
}

CURLUcode curl_url_set(CURLU *u, CURLUPart what, const char *part,
                       unsigned int flags)
{
	return load() ? fn.url_set(u, what, part, flags) : CURLUE_OUT_OF_MEMORY;
}

const char *curl_url_strerror(CURLUcode c)
{
	return load() ? fn.url_strerror(c) : "libcurl could not be loaded";
}
