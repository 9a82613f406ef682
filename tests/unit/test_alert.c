/*
 * test_alert.c - alert delivery: the event JSON; the exec target run for
 * real (tests/tools/alert_record.sh records its argv, environment and
 * fds) with injection attempts that must never reach a shell, a hanging
 * command killed at its timeout, the rate limit and the queue cap on a
 * loop clock the test moves; the webhook's URL rules, token hygiene and
 * give-up after its retries (a closed loopback port).
 *
 * Station names and messages are invented test data; the hostile strings
 * follow RELIABILITY.md test T21 and SEI CERT ENV33-C's example.
 */
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <cmocka.h>
#include <cjson/cJSON.h>

#include "alert.h"
#include "config.h"
#include "loop.h"

#ifndef RECORDER
#define RECORDER "tests/tools/alert_record.sh"
#endif

/* A loop clock that runs with the system's, plus a jump the test adds. */
static int64_t jump_ms;

static int64_t mono(void *arg)
{
	(void)arg;
	return clock_mono_ms(clock_system()) + jump_ms;
}

static int64_t real(void *arg)
{
	(void)arg;
	return clock_real_ms(clock_system()) + jump_ms;
}

static const struct clock moved = {mono, real, NULL, 0};

static char dir[64], recorder[4096];
static struct loop *loop;

static int setup(void **state)
{
	(void)state;
	snprintf(dir, sizeof(dir), "/tmp/test_alert.XXXXXX");
	if (mkdtemp(dir) == NULL || realpath(RECORDER, recorder) == NULL)
		return -1;
	jump_ms = 0;
	loop = loop_new(&moved);
	return loop != NULL ? 0 : -1;
}

/* Remove every file of dir (not dir itself). */
static void clear_dir(void)
{
	DIR *d = opendir(dir);
	struct dirent *e;
	char p[400];

	while (d != NULL && (e = readdir(d)) != NULL) {
		if (e->d_name[0] == '.')
			continue;
		snprintf(p, sizeof(p), "%s/%s", dir, e->d_name);
		unlink(p);
	}
	if (d != NULL)
		closedir(d);
}

static int teardown(void **state)
{
	(void)state;
	clear_dir();
	rmdir(dir);
	loop_free(loop);
	return 0;
}

/* Run the loop until a has started n children in all (or ms passed). */
static void run_spawned(struct alert *a, uint64_t n, int64_t ms)
{
	int64_t end = clock_mono_ms(clock_system()) + ms;
	struct alert_stat st;

	for (;;) {
		alert_stat(a, &st);
		if (clock_mono_ms(clock_system()) >= end)
			break;
		/* done: n started and every child ended (so that moving the
		 * clock next cannot hit a child's time limit) */
		if (st.spawned >= n && st.sent + st.failed >= st.spawned)
			break;
		(void)loop_run_once(loop, 20);
	}
}

/* Run the loop until a is idle or ms passed. */
static void run(struct alert *a, int64_t ms)
{
	int64_t end = clock_mono_ms(clock_system()) + ms;

	while (alert_busy(a) && clock_mono_ms(clock_system()) < end)
		(void)loop_run_once(loop, 50);
}

static size_t files_with(const char *suffix)
{
	DIR *d = opendir(dir);
	struct dirent *e;
	size_t n = 0, k = strlen(suffix), l;

	while (d != NULL && (e = readdir(d)) != NULL) {
		l = strlen(e->d_name);
		n += l > k && strcmp(e->d_name + l - k, suffix) == 0;
	}
	if (d != NULL)
		closedir(d);
	return n;
}

/* The contents of the (only / first) file ending in suffix. */
static char *slurp_one(const char *suffix, size_t *len)
{
	DIR *d = opendir(dir);
	struct dirent *e;
	char p[400], *buf = NULL;
	size_t k = strlen(suffix), l;
	FILE *f;

	while (buf == NULL && d != NULL && (e = readdir(d)) != NULL) {
		l = strlen(e->d_name);
		if (l <= k || strcmp(e->d_name + l - k, suffix) != 0)
			continue;
		snprintf(p, sizeof(p), "%s/%s", dir, e->d_name);
		f = fopen(p, "rb");
		buf = malloc(1 << 20);
		*len = fread(buf, 1, (1 << 20) - 1, f);
		buf[*len] = '\0';
		fclose(f);
	}
	if (d != NULL)
		closedir(d);
	return buf;
}

/* An exec target: recorder OUTDIR [mode] */
static struct cfg_alerts exec_cfg(struct cfg_alert_to *to, char **argv,
                                  const char *mode, uint32_t per_min)
{
	struct cfg_alerts c;

	memset(to, 0, sizeof(*to));
	argv[0] = recorder;
	argv[1] = dir;
	argv[2] = (char *)mode;
	argv[3] = NULL;
	to->kind = CFG_ALERT_EXEC;
	to->argv = argv;
	to->argc = mode != NULL ? 3 : 2;
	to->timeout_s = 1;
	memset(&c, 0, sizeof(c));
	c.to = to;
	c.n_to = 1;
	c.repeat_s = 3600;
	c.exec_per_min = per_min;
	return c;
}

static struct alert_event event(const char *station, const char *msg)
{
	struct alert_event ev;

	memset(&ev, 0, sizeof(ev));
	ev.kind = ALERT_RAISED;
	ev.id = "battery_low-rf2-1796020500";
	ev.condition = "battery_low";
	ev.severity = "warning";
	ev.station = station;
	ev.since_s = 1796020500;
	ev.time_s = 1796024100;
	ev.value = 10.31;
	ev.threshold = 10.5;
	ev.unit = "V";
	ev.rate_per_day = NAN;
	ev.message = msg;
	return ev;
}

/* ---- JSON --------------------------------------------------------------
 */

static void json_fields(void **state)
{
	struct alert_event ev = event("rf2\"\n", "line\u00e9 \x01");
	struct buf b;
	cJSON *o;

	(void)state;
	ev.forecast_s = 1796200000;
	ev.rate_per_day = -0.42;
	buf_init(&b, 1 << 20);
	alert_json(&b, &ev);
	o = cJSON_Parse(buf_str(&b));
	assert_non_null(o);
	assert_string_equal(cJSON_GetObjectItem(o, "event")->valuestring,
	                    "raised");
	assert_string_equal(cJSON_GetObjectItem(o, "station")->valuestring,
	                    "rf2\"\n");
	assert_true(cJSON_IsNull(cJSON_GetObjectItem(o, "output")));
	/* 1796020500 s = 2026-11-30T06:35:00Z (GNU date -u -d) */
	assert_string_equal(cJSON_GetObjectItem(o, "since")->valuestring,
	                    "2026-11-30T06:35:00Z");
	assert_float_equal(cJSON_GetObjectItem(o, "value")->valuedouble, 10.31,
	                   1e-12);
	assert_float_equal(
	    cJSON_GetObjectItem(o, "rate_v_per_day")->valuedouble, -0.42,
	    1e-12);
	assert_non_null(cJSON_GetObjectItem(o, "forecast")->valuestring);
	cJSON_Delete(o);
	/* no rate: null, not NaN (JSON has none) */
	buf_reset(&b);
	ev.rate_per_day = NAN;
	alert_json(&b, &ev);
	assert_non_null(strstr(buf_str(&b), "\"rate_v_per_day\":null"));
	buf_free(&b);
}

/* Text is cut to ALERT_TEXT_MAX bytes at a character boundary. */
static void text_cut(void **state)
{
	char big[ALERT_TEXT_MAX + 10], *d;

	(void)state;
	memset(big, 'a', sizeof(big));
	big[ALERT_TEXT_MAX - 1] = (char)0xc3; /* a 2-byte character across */
	big[ALERT_TEXT_MAX] = (char)0xa9;     /* the cut */
	big[sizeof(big) - 1] = '\0';
	d = alert_text_dup(big);
	assert_int_equal(strlen(d), ALERT_TEXT_MAX - 1);
	free(d);
}

/* ---- exec --------------------------------------------------------------
 */

struct hostile_row {
	const char *why;
	const char *station;
	const char *message;
};

static char huge[100 * 1024];

static const struct hostile_row hostile[] = {
    {"command separator", "rf2; touch CANARY", "x; touch CANARY"},
    {"command substitution", "$(touch CANARY)", "$(touch CANARY)"},
    {"backticks", "`touch CANARY`", "`touch CANARY`"},
    {"newline", "rf2\ntouch CANARY", "a\ntouch CANARY\n"},
    {"quote breaking", "'; touch CANARY; '", "\"; touch CANARY; \""},
    {"100 KB string", huge, huge},
};

/* "CANARY" in the rows is replaced by dir/canary before use. */
static char *with_canary(const char *s)
{
	char path[128], *out = malloc(strlen(s) * 2 + 256), *o = out;
	const char *c;

	snprintf(path, sizeof(path), "%s/canary", dir);
	while ((c = strstr(s, "CANARY")) != NULL) {
		memcpy(o, s, (size_t)(c - s));
		o += c - s;
		memcpy(o, path, strlen(path));
		o += strlen(path);
		s = c + 6;
	}
	memcpy(o, s, strlen(s) + 1);
	return out;
}

/* The recorded argv: NUL-separated; [0] /bin/sh (the #! line), [1] the
 * script, [2] OUTDIR, then the last one is the event's JSON. */
static void check_argv(const char *station, const char *msg)
{
	size_t len, i, n = 0;
	char *a = slurp_one(".argv", &len), *argv[8];
	cJSON *o;

	assert_non_null(a);
	for (i = 0; i < len && n < 8; i += strlen(a + i) + 1)
		argv[n++] = a + i;
	assert_int_equal(n, 4);
	assert_string_equal(argv[1], recorder);
	assert_string_equal(argv[2], dir);
	o = cJSON_Parse(argv[3]);
	assert_non_null(o);
	/* the strings arrive whole (cut at ALERT_TEXT_MAX), not run */
	assert_int_equal(strncmp(cJSON_GetObjectItem(o, "station")->valuestring,
	                         station, ALERT_TEXT_MAX - 8),
	                 0);
	assert_int_equal(strncmp(cJSON_GetObjectItem(o, "message")->valuestring,
	                         msg, ALERT_TEXT_MAX - 8),
	                 0);
	cJSON_Delete(o);
	free(a);
}

/* The environment: PATH fixed, only TIDEPOST_ variables, no token. */
static void check_env(void)
{
	size_t len, i;
	char *e = slurp_one(".env", &len);
	int path = 0;

	assert_non_null(e);
	for (i = 0; i < len; i += strlen(e + i) + 1) {
		if (strcmp(e + i, "PATH=/usr/bin:/bin") == 0)
			path++;
		else
			assert_int_equal(strncmp(e + i, "TIDEPOST_", 9), 0);
		assert_null(strstr(e + i, "s3cret-token"));
	}
	assert_int_equal(path, 1);
	free(e);
}

/* fds: 0-2, plus the shell's own copies of its script and stdin; never
 * the test's own fd without O_CLOEXEC (leak-me). */
static void check_fds(void)
{
	size_t len;
	char *f = slurp_one(".fds", &len), *line, *nl;
	long fd;

	assert_non_null(f);
	for (line = f; *line != '\0'; line = nl + 1) {
		nl = strchr(line, '\n');
		if (nl == NULL)
			break;
		*nl = '\0';
		fd = strtol(line, NULL, 10);
		assert_null(strstr(line, "leak-me"));
		if (fd > 2)
			assert_true(strstr(line, "alert_record.sh") != NULL ||
			            strstr(line, "/dev/null") != NULL);
	}
	free(f);
}

static void exec_hostile(void **state)
{
	struct cfg_alert_to to;
	struct alert_event ev;
	struct cfg_alerts c;
	struct alert *a;
	char *argv[4], err[200], *st, *msg, leak[200];
	size_t i;
	int lfd, lfd2;

	(void)state;
	memset(huge, 'x', sizeof(huge) - 1);
	setenv("TIDEPOST_TEST_TOKEN", "s3cret-token", 1);
	/* an fd without O_CLOEXEC: the child must not get it */
	snprintf(leak, sizeof(leak), "%s/leak-me", dir);
	lfd = open(leak, O_WRONLY | O_CREAT, 0600);
	assert_true(lfd > 2);
	c = exec_cfg(&to, argv, NULL, 600);
	assert_int_equal(alert_new(&c, loop, &a, err, sizeof(err)), 0);
	for (i = 0; i < sizeof(hostile) / sizeof(hostile[0]); i++) {
		st = with_canary(hostile[i].station);
		msg = with_canary(hostile[i].message);
		ev = event(st, msg);
		alert_send(a, &ev);
		run(a, 5000);
		print_message("row: %s\n", hostile[i].why);
		assert_false(alert_busy(a));
		assert_int_equal(files_with(".done"), 1);
		check_argv(st, msg);
		check_env();
		check_fds();
		assert_int_equal(files_with("canary"), 0);
		clear_dir();
		lfd2 = open(leak, O_WRONLY | O_CREAT, 0600);
		close(lfd2);
		free(st);
		free(msg);
	}
	alert_free(a);
	close(lfd);
	unsetenv("TIDEPOST_TEST_TOKEN");
	/* nothing anywhere made the canary */
	assert_int_equal(files_with("canary"), 0);
}

/* A command that hangs is killed (with its children) at timeout_s. */
static void exec_timeout(void **state)
{
	struct cfg_alert_to to;
	struct alert_event ev = event("rf2", "hang");
	struct cfg_alerts c;
	struct alert_stat st;
	struct alert *a;
	char *argv[4], err[200];
	int64_t t0;

	(void)state;
	c = exec_cfg(&to, argv, "hang", 600);
	assert_int_equal(alert_new(&c, loop, &a, err, sizeof(err)), 0);
	t0 = clock_mono_ms(clock_system());
	alert_send(a, &ev);
	run(a, 5000);
	assert_false(alert_busy(a));
	/* 1 s limit: ended after it, well before the 600 s sleep */
	assert_true(clock_mono_ms(clock_system()) - t0 >= 1000);
	assert_true(clock_mono_ms(clock_system()) - t0 < 3000);
	alert_stat(a, &st);
	assert_int_equal(st.killed, 1);
	assert_int_equal(st.failed, 1);
	assert_int_equal(files_with(".hang"), 1);
	assert_int_equal(files_with(".done"), 0);
	/* no zombie is left: nothing to wait for */
	assert_int_equal(waitpid(-1, NULL, WNOHANG), -1);
	alert_free(a);
}

/* exit status != 0 counts as failed; the next message still goes. */
static void exec_failure_counted(void **state)
{
	struct cfg_alert_to to;
	struct alert_event ev = event("rf2", "fail");
	struct cfg_alerts c;
	struct alert_stat st;
	struct alert *a;
	char *argv[4], err[200];

	(void)state;
	c = exec_cfg(&to, argv, "fail", 600);
	assert_int_equal(alert_new(&c, loop, &a, err, sizeof(err)), 0);
	alert_send(a, &ev);
	alert_send(a, &ev);
	run(a, 5000);
	alert_stat(a, &st);
	assert_int_equal(st.spawned, 2);
	assert_int_equal(st.failed, 2);
	assert_int_equal(st.sent, 0);
	alert_free(a);
}

/* At most exec_per_min starts in any 60 s; the rest wait, in order. */
static void exec_rate_limit(void **state)
{
	struct cfg_alert_to to;
	struct alert_event ev = event("rf2", "rate");
	struct cfg_alerts c;
	struct alert_stat st;
	struct alert *a;
	char *argv[4], err[200];
	int i;

	(void)state;
	c = exec_cfg(&to, argv, NULL, 3);
	assert_int_equal(alert_new(&c, loop, &a, err, sizeof(err)), 0);
	for (i = 0; i < 10; i++)
		alert_send(a, &ev);
	run_spawned(a, 4, 600); /* a fourth must not start */
	alert_stat(a, &st);
	assert_int_equal(st.spawned, 3);
	assert_true(alert_busy(a)); /* 7 wait */
	jump_ms += 60 * 1000;       /* a minute later */
	run_spawned(a, 7, 600);
	alert_stat(a, &st);
	assert_int_equal(st.spawned, 6);
	jump_ms += 120 * 1000; /* long after: 3 more, then the last one */
	run_spawned(a, 9, 2000);
	jump_ms += 60 * 1000;
	run(a, 3000);
	alert_stat(a, &st);
	assert_int_equal(st.spawned, 10);
	assert_int_equal(st.sent, 10);
	assert_int_equal(files_with(".done"), 10);
	alert_free(a);
}

/* A full queue drops its oldest waiting message and counts it. */
static void queue_cap(void **state)
{
	struct cfg_alert_to to;
	struct alert_event ev = event("rf2", "many");
	struct cfg_alerts c;
	struct alert_stat st;
	struct alert *a;
	char *argv[4], err[200];
	int i;

	(void)state;
	c = exec_cfg(&to, argv, NULL, 1);
	assert_int_equal(alert_new(&c, loop, &a, err, sizeof(err)), 0);
	for (i = 0; i < 1000; i++) /* 1000 alerts at once (T21) */
		alert_send(a, &ev);
	alert_stat(a, &st);
	assert_int_equal(st.events, 1000);
	assert_int_equal(st.spawned, 1);
	assert_int_equal(st.dropped, 1000 - ALERT_QUEUE_MAX);
	alert_free(a);
}

/* ---- webhook -----------------------------------------------------------
 */

struct url_row {
	const char *why;
	const char *url;
	bool plain_ok;
	int rc;
};

static const struct url_row url_rows[] = {
    {"https is fine", "https://alerts.example.org/in", false, 0},
    {"plain http to loopback is fine", "http://127.0.0.1:9/in", false, 0},
    {"plain http elsewhere needs allow_plain_http",
     "http://alerts.example.org/in", false, -1},
    {"... and is fine with it", "http://alerts.example.org/in", true, 0},
    {"other schemes never", "ftp://alerts.example.org/in", true, -1},
};

static void webhook_urls(void **state)
{
	struct cfg_alert_to to;
	struct cfg_alerts c;
	struct alert *a;
	char err[200];
	size_t i;

	(void)state;
	for (i = 0; i < sizeof(url_rows) / sizeof(url_rows[0]); i++) {
		memset(&to, 0, sizeof(to));
		to.kind = CFG_ALERT_HTTP;
		to.url = (char *)url_rows[i].url;
		to.allow_plain_http = url_rows[i].plain_ok;
		memset(&c, 0, sizeof(c));
		c.to = &to;
		c.n_to = 1;
		c.exec_per_min = 6;
		err[0] = '\0';
		print_message("row: %s\n", url_rows[i].why);
		assert_int_equal(alert_new(&c, loop, &a, err, sizeof(err)),
		                 url_rows[i].rc);
		if (url_rows[i].rc != 0)
			assert_non_null(strstr(err, "to[0]: url"));
		alert_free(a);
	}
}

/* The token comes from the environment once and leaves it (so no child
 * inherits it); the webhook retries a dead port ALERT_HTTP_TRIES times
 * on the backoff schedule, then gives up and counts a failure. */
static void webhook_retries_then_gives_up(void **state)
{
	struct cfg_alert_to to;
	struct alert_event ev = event("rf2", "webhook");
	struct cfg_alerts c;
	struct alert_stat st;
	struct alert *a;
	char err[200];
	int i;

	(void)state;
	setenv("TIDEPOST_ALERT_TOKEN", "s3cret-token", 1);
	memset(&to, 0, sizeof(to));
	to.kind = CFG_ALERT_HTTP;
	to.url = "http://127.0.0.1:9/in"; /* discard port: nothing listens */
	to.token_env = "TIDEPOST_ALERT_TOKEN";
	to.timeout_s = 2;
	memset(&c, 0, sizeof(c));
	c.to = &to;
	c.n_to = 1;
	c.exec_per_min = 6;
	assert_int_equal(alert_new(&c, loop, &a, err, sizeof(err)), 0);
	assert_null(getenv("TIDEPOST_ALERT_TOKEN"));
	alert_send(a, &ev);
	for (i = 0; i < ALERT_HTTP_TRIES + 2 && alert_busy(a); i++) {
		run(a, 300);
		jump_ms += ALERT_HTTP_CAP_S * 1000; /* past any backoff */
	}
	run(a, 300);
	alert_stat(a, &st);
	assert_false(alert_busy(a));
	assert_int_equal(st.failed, 1);
	assert_int_equal(st.sent, 0);
	alert_free(a);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test_setup_teardown(json_fields, setup, teardown),
	    cmocka_unit_test_setup_teardown(text_cut, setup, teardown),
	    cmocka_unit_test_setup_teardown(exec_hostile, setup, teardown),
	    cmocka_unit_test_setup_teardown(exec_timeout, setup, teardown),
	    cmocka_unit_test_setup_teardown(exec_failure_counted, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(exec_rate_limit, setup, teardown),
	    cmocka_unit_test_setup_teardown(queue_cap, setup, teardown),
	    cmocka_unit_test_setup_teardown(webhook_urls, setup, teardown),
	    cmocka_unit_test_setup_teardown(webhook_retries_then_gives_up,
	                                    setup, teardown),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
