/*
 * backoff.h - the HTTP output's retry policy: which outcomes are retried,
 * which pause the output, which quarantine a batch (RELIABILITY.md 3.3),
 * and how long to wait before the next attempt (full jitter, 3.2).
 *
 * Owns a small PRNG (xoshiro256**, Blackman & Vigna 2018, "Scrambled
 * linear pseudorandom number generators") seeded from getrandom(), so
 * daemons started together do not retry in step.  Nothing here reads a
 * clock or does I/O besides the seeding; delays are returned in ms and
 * the caller arms a timer on the loop's monotonic clock.
 *
 * Invariants: backoff_jitter_ms(b, base, cap, n) is uniform on
 * [0, min(cap, base * 2^n)) ms for every n (no overflow for huge n: the
 * cap holds); there is no attempt limit.  Retry-After is honoured only
 * when the header was present, clamped to [1 s, cap] (libcurl 7.88 can
 * report a past date as a negative number, garbage as 0).
 *
 * Called by post.c; tested by tests/unit/test_post.c.
 */
#ifndef TIDEPOST_BACKOFF_H
#define TIDEPOST_BACKOFF_H

#include <stdbool.h>
#include <stdint.h>

struct backoff {
	uint64_t s[4]; /* xoshiro256** state; never all zero */
};

/* Seed deterministically (tests).  Any seed is fine, 0 included. */
void backoff_seed(struct backoff *b, uint64_t seed);

/* Seed from getrandom(); falls back to time and pid if that fails (the
 * jitter then still differs between processes).  Returns 0, or -1 when
 * the fallback was used. */
int backoff_seed_random(struct backoff *b);

/* Uniform on [0, 1) with 53 random bits. */
double backoff_uniform(struct backoff *b);

/* min(cap_s, base_s * 2^attempt) in ms (attempt 0 = the first retry). */
int64_t backoff_limit_ms(uint32_t base_s, uint32_t cap_s, uint32_t attempt);

/* A full-jitter delay: uniform on [0, backoff_limit_ms(...)) ms. */
int64_t backoff_jitter_ms(struct backoff *b, uint32_t base_s, uint32_t cap_s,
                          uint32_t attempt);

/* The wait a Retry-After asks for, in ms: 0 when the header was absent,
 * else the seconds libcurl parsed (negative for a past date, 0 for
 * garbage) clamped to [1 s, cap_s]. */
int64_t backoff_retry_after_ms(bool present, int64_t seconds, uint32_t cap_s);

/* What to do after one attempt. */
enum backoff_class {
	BACKOFF_DONE = 0,   /* 2xx: the batch is delivered */
	BACKOFF_RETRY,      /* transient: same batch after a delay */
	BACKOFF_SPLIT,      /* 413: halve the batch and retry */
	BACKOFF_DEADLETTER, /* permanent for this batch: quarantine */
	BACKOFF_PAUSE       /* config/credential/TLS: pause output */
};

/*
 * Classify an attempt.  curl_code is the transfer's CURLcode (0 = a
 * complete response), status its HTTP status (0 if none), verify_failed
 * whether TLS peer verification failed (CURLINFO_SSL_VERIFYRESULT != 0).
 * A response cut short by our own response cap (capped) is judged by its
 * status line.  Choices beyond RELIABILITY.md's table: 3xx (redirects are
 * not followed) pauses - the URL needs fixing; 5xx not in the table are
 * retried; unknown transport errors are retried (never drop data).
 */
enum backoff_class backoff_classify(long status, int curl_code,
                                    bool verify_failed, bool capped);

const char *backoff_class_name(enum backoff_class c);

#endif
