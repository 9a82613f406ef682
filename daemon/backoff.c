/*
 * backoff.c - see backoff.h.
 *
 * Full jitter: sleep = random_between(0, min(cap, base * 2^attempt)),
 * from AWS, "Exponential Backoff And Jitter" (Brooker, 2015).  The
 * status table follows RELIABILITY.md 3.3 (RFC 9110, 6585, 8470; the
 * curl tool's transient list).
 */
#include <errno.h>
#include <stdint.h>
#include <sys/random.h>
#include <time.h>
#include <unistd.h>

#include <curl/curl.h>

#include "backoff.h"

static uint64_t rotl(uint64_t x, int k)
{
	return (x << k) | (x >> (64 - k));
}

/* splitmix64 (Steele, Lea & Flood 2014), to spread a seed over the
 * state as Blackman & Vigna recommend. */
static uint64_t splitmix(uint64_t *x)
{
	uint64_t z = (*x += 0x9e3779b97f4a7c15ULL);

	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
	z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
	return z ^ (z >> 31);
}

void backoff_seed(struct backoff *b, uint64_t seed)
{
	int i;

	for (i = 0; i < 4; i++)
		b->s[i] = splitmix(&seed);
}

int backoff_seed_random(struct backoff *b)
{
	uint64_t seed;
	struct timespec ts;
	ssize_t n;

	do {
		n = getrandom(&seed, sizeof(seed), GRND_NONBLOCK);
	} while (n < 0 && errno == EINTR);
	if (n == (ssize_t)sizeof(seed)) {
		backoff_seed(b, seed);
		return 0;
	}
	clock_gettime(CLOCK_MONOTONIC, &ts);
	seed = (uint64_t)ts.tv_nsec ^ ((uint64_t)ts.tv_sec << 32) ^
	       ((uint64_t)getpid() << 16);
	backoff_seed(b, seed);
	return -1;
}

static uint64_t next(struct backoff *b)
{
	uint64_t *s = b->s;
	uint64_t r = rotl(s[1] * 5, 7) * 9, t = s[1] << 17;

	s[2] ^= s[0];
	s[3] ^= s[1];
	s[1] ^= s[2];
	s[0] ^= s[3];
	s[2] ^= t;
	s[3] = rotl(s[3], 45);
	return r;
}

double backoff_uniform(struct backoff *b)
{
	return (double)(next(b) >> 11) * (1.0 / 9007199254740992.0);
}

int64_t backoff_limit_ms(uint32_t base_s, uint32_t cap_s, uint32_t attempt)
{
	int64_t cap = (int64_t)cap_s * 1000, lim = (int64_t)base_s * 1000;

	if (lim <= 0)
		lim = 1000;
	while (attempt-- > 0 && lim < cap)
		lim *= 2; /* stops at the cap: no overflow */
	return lim < cap ? lim : cap;
}

int64_t backoff_jitter_ms(struct backoff *b, uint32_t base_s, uint32_t cap_s,
                          uint32_t attempt)
{
	int64_t lim = backoff_limit_ms(base_s, cap_s, attempt);

	return (int64_t)(backoff_uniform(b) * (double)lim);
}

int64_t backoff_retry_after_ms(bool present, int64_t seconds, uint32_t cap_s)
{
	if (!present)
		return 0;
	if (seconds < 1)
		seconds = 1;
	if (seconds > (int64_t)cap_s)
		seconds = cap_s;
	return seconds * 1000;
}

static enum backoff_class by_status(long status)
{
	if (status >= 200 && status <= 299)
		return BACKOFF_DONE;
	switch (status) {
	case 408:
	case 425:
	case 429: /* RFC 9110, 8470, 6585 */
	case 500:
	case 502:
	case 503:
	case 504:
	case 522:
	case 524: /* CDN timeouts */
		return BACKOFF_RETRY;
	case 413:
		return BACKOFF_SPLIT;
	case 401:
	case 403:
		return BACKOFF_PAUSE;
	default:
		break;
	}
	if (status >= 300 && status <= 399)
		return BACKOFF_PAUSE; /* not followed: the URL is wrong */
	if (status >= 400 && status <= 499)
		return BACKOFF_DEADLETTER;
	return BACKOFF_RETRY; /* other 5xx, 1xx, nonsense */
}

static enum backoff_class by_transport(int code, bool verify_failed)
{
	switch (code) {
	case CURLE_PEER_FAILED_VERIFICATION: /* 60 */
	case CURLE_SSL_CACERT_BADFILE:       /* 77 */
	case CURLE_URL_MALFORMAT:            /* 3 */
	case CURLE_UNSUPPORTED_PROTOCOL:     /* 1 */
	case CURLE_NOT_BUILT_IN:             /* 4 */
	case CURLE_UNKNOWN_OPTION:           /* 48 */
	case CURLE_SSL_CERTPROBLEM:          /* 58: local cert */
	case CURLE_SSL_CIPHER:               /* 59 */
	case CURLE_SSL_CRL_BADFILE:          /* 82 */
	case CURLE_SSL_PINNEDPUBKEYNOTMATCH: /* 90 */
		return BACKOFF_PAUSE;
	case CURLE_SSL_CONNECT_ERROR: /* 35 */
		return verify_failed ? BACKOFF_PAUSE : BACKOFF_RETRY;
	default:
		return BACKOFF_RETRY; /* 6 7 16 18 28 52 55 56 92 ... */
	}
}

enum backoff_class backoff_classify(long status, int curl_code,
                                    bool verify_failed, bool capped)
{
	if (curl_code == CURLE_OK || (capped && status > 0))
		return status > 0 ? by_status(status) : BACKOFF_RETRY;
	return by_transport(curl_code, verify_failed);
}

const char *backoff_class_name(enum backoff_class c)
{
	switch (c) {
	case BACKOFF_DONE:
		return "done";
	case BACKOFF_RETRY:
		return "retry";
	case BACKOFF_SPLIT:
		return "split";
	case BACKOFF_DEADLETTER:
		return "deadletter";
	case BACKOFF_PAUSE:
		return "pause";
	}
	return "?";
}
