/*
 * test_curlmiss.c - when libcurl cannot be loaded (daemon/curlload.c built
 * here with a library name that does not exist): every wrapper fails
 * cleanly, nothing crashes, and the reason names the library.
 */
#define TP_CURL_SONAME "libtidepost-test-no-such-curl.so.0"
#include "../../daemon/curlload.c"

#include <setjmp.h>
#include <stddef.h>

#include <cmocka.h>

static void every_wrapper_fails_cleanly(void **state)
{
	char *part = (char *)"set";
	int left = -1;

	(void)state;
	assert_int_equal(curl_global_init(CURL_GLOBAL_DEFAULT),
	                 CURLE_FAILED_INIT);
	assert_false(curlload_loaded());
	assert_non_null(curlload_error());
	assert_non_null(strstr(curlload_error(), TP_CURL_SONAME));
	assert_null(curl_easy_init());
	assert_int_equal(curl_easy_setopt(NULL, CURLOPT_TIMEOUT_MS, 1L),
	                 CURLE_FAILED_INIT);
	assert_int_equal(curl_easy_getinfo(NULL, CURLINFO_RESPONSE_CODE, &left),
	                 CURLE_FAILED_INIT);
	assert_null(curl_multi_init());
	assert_int_equal(curl_multi_setopt(NULL, CURLMOPT_MAXCONNECTS, 1L),
	                 CURLM_INTERNAL_ERROR);
	assert_null(curl_multi_info_read(NULL, &left));
	assert_int_equal(left, 0);
	assert_null(curl_url());
	assert_int_not_equal(curl_url_get(NULL, CURLUPART_HOST, &part, 0),
	                     CURLUE_OK);
	assert_null(part);
	assert_null(curl_slist_append(NULL, "x"));
	assert_non_null(curl_easy_strerror(CURLE_OK));
	assert_non_null(curl_multi_strerror(CURLM_OK));
	assert_non_null(curl_url_strerror(CURLUE_OK));
	/* the cleanups of what never existed do nothing */
	curl_easy_cleanup(NULL);
	curl_slist_free_all(NULL);
	curl_url_cleanup(NULL);
	curl_free(NULL);
	assert_int_equal(curl_multi_cleanup(NULL), CURLM_OK);
	curl_global_cleanup();
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test(every_wrapper_fails_cleanly),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
