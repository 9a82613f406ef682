/*
 * test_curlload.c - libcurl loaded on first use (daemon/curlload.c).
 *
 * The wrappers pass each option's argument on with the type its option
 * number gives; here one option of every kind goes in and is read back
 * through libcurl itself (CURLINFO_*), and the URL API round-trips a URL.
 * Nothing is loaded before the first call.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include <cmocka.h>
#include <curl/curl.h>

#include "curlload.h"

static size_t sink(char *p, size_t size, size_t n, void *arg)
{
	(void)p;
	(void)arg;
	return size * n;
}

static void loads_on_first_use(void **state)
{
	(void)state;
	assert_false(curlload_loaded());
	assert_int_equal(curl_global_init(CURL_GLOBAL_DEFAULT), CURLE_OK);
	assert_true(curlload_loaded());
	assert_null(curlload_error());
	curl_global_cleanup();
}

static void options_of_every_kind_pass_through(void **state)
{
	CURL *h;
	char *url = NULL;
	struct curl_slist *hd = NULL;

	(void)state;
	h = curl_easy_init();
	assert_non_null(h);
	/* pointer, long, function pointer, curl_off_t */
	assert_int_equal(curl_easy_setopt(h, CURLOPT_URL,
	                                  "http://127.0.0.1:9/a?b=c"),
	                 CURLE_OK);
	assert_int_equal(curl_easy_setopt(h, CURLOPT_TIMEOUT_MS, 1500L),
	                 CURLE_OK);
	assert_int_equal(curl_easy_setopt(h, CURLOPT_WRITEFUNCTION, sink),
	                 CURLE_OK);
	assert_int_equal(curl_easy_setopt(h, CURLOPT_POSTFIELDSIZE_LARGE,
	                                  (curl_off_t)5000000000LL),
	                 CURLE_OK);
	/* a bad long value is refused by libcurl, so the value arrived */
	assert_int_equal(curl_easy_setopt(h, CURLOPT_SSLVERSION, 999L),
	                 CURLE_BAD_FUNCTION_ARGUMENT);
	assert_int_equal(curl_easy_getinfo(h, CURLINFO_EFFECTIVE_URL, &url),
	                 CURLE_OK);
	assert_string_equal(url, "http://127.0.0.1:9/a?b=c");
	hd = curl_slist_append(hd, "X-Test: 1");
	assert_non_null(hd);
	assert_string_equal(hd->data, "X-Test: 1");
	curl_slist_free_all(hd);
	assert_non_null(strstr(curl_easy_strerror(CURLE_COULDNT_CONNECT),
	                       "connect"));
	curl_easy_cleanup(h);
}

static void url_api_round_trips(void **state)
{
	CURLU *u = curl_url();
	char *host = NULL;

	(void)state;
	assert_non_null(u);
	assert_int_equal(curl_url_set(u, CURLUPART_URL,
	                              "https://data.example.org:8443/in", 0),
	                 CURLUE_OK);
	assert_int_equal(curl_url_get(u, CURLUPART_HOST, &host, 0), CURLUE_OK);
	assert_string_equal(host, "data.example.org");
	curl_free(host);
	assert_int_not_equal(curl_url_set(u, CURLUPART_URL, "http://[::1", 0),
	                     CURLUE_OK);
	assert_non_null(curl_url_strerror(CURLUE_BAD_SCHEME));
	curl_url_cleanup(u);
}

static void multi_options_pass_through(void **state)
{
	CURLM *m = curl_multi_init();
	int left = -1;

	(void)state;
	assert_non_null(m);
	assert_int_equal(curl_multi_setopt(m, CURLMOPT_MAXCONNECTS, 4L),
	                 CURLM_OK);
	assert_null(curl_multi_info_read(m, &left));
	assert_int_equal(left, 0);
	assert_non_null(curl_multi_strerror(CURLM_BAD_HANDLE));
	assert_int_equal(curl_multi_cleanup(m), CURLM_OK);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test(loads_on_first_use),
	    cmocka_unit_test(options_of_every_kind_pass_through),
	    cmocka_unit_test(url_api_round_trips),
	    cmocka_unit_test(multi_options_pass_through),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
