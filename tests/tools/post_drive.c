/*
 * post_drive - run one HTTP output (daemon/post.c) against a URL, without
 * the rest of the daemon, for the integration tests (test_http.py,
 * test_tls.py).
 *
 * Opens (or creates) a ring file, optionally fills it with N invented
 * readings in the WIRE.md form, starts the output named in the config,
 * runs the poll loop until the output is drained (or --limit-s passes),
 * then stops it, lets the in-flight request end, and prints one JSON
 * summary line on stdout.  Alerts are printed on stderr and listed in the
 * summary.  SIGPIPE is ignored, as the daemon does.
 *
 * Readings (invented test data): reading i (1-based) belongs to station
 * "st<k>", k = (i - 1) % K + 1, with station seq s = (i - 1) / K + 1 and
 * id "st<k>-<1796020500 + 900 s>-<s>-0" (emit_id).  A "salinity" value
 * that no layout describes is included (no "quantities" entry).
 *
 * Usage: post_drive --config FILE --ring PATH [--output NAME] [--url URL]
 *   [--state-dir DIR] [--fill N] [--stations K] [--pad BYTES]
 *   [--garbage I] [--more N --more-at-ms MS] [--limit-s S] [--keep-running]
 *   [--ring-size BYTES]
 * Exit: 0 drained (or --keep-running ran its time), 1 not drained, 2 set-up
 * failed (the summary has "error").
 */
#include <errno.h>
#include <inttypes.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "buf.h"
#include "clock.h"
#include "config.h"
#include "emit.h"
#include "log.h"
#include "loop.h"
#include "post.h"
#include "ring.h"

#define MAX_ALERTS 50

struct opts {
	const char *config, *ring, *output, *url, *state_dir;
	unsigned long fill, stations, pad, garbage, more, more_at_ms;
	unsigned long limit_s, ring_size;
	int keep_running;
};

struct alerts {
	size_t n;
	struct buf json;
};

static unsigned long filled;

static void on_alert(void *arg, const char *output, const char *cond,
                     const char *msg)
{
	struct alerts *a = arg;

	fprintf(stderr, "post_drive: alert: %s: %s: %s\n", output, cond, msg);
	if (a->n++ >= MAX_ALERTS)
		return;
	buf_adds(&a->json, a->n > 1 ? ",{\"condition\":" : "{\"condition\":");
	emit_json_string(&a->json, cond);
	buf_adds(&a->json, ",\"message\":");
	emit_json_string(&a->json, msg);
	buf_addc(&a->json, '}');
}

static void reading(struct buf *b, unsigned long i, const struct opts *o)
{
	unsigned long k = (i - 1) % o->stations + 1;
	unsigned long s = (i - 1) / o->stations + 1;
	char st[32];
	int64_t t = 1796020500 + (int64_t)s * 900;

	snprintf(st, sizeof(st), "st%lu", k);
	buf_adds(b, "{\"id\":\"");
	emit_id(b, st, t, s, 0);
	buf_printf(b,
	           "\",\"station\":\"%s\",\"seq\":%lu,\"layout\":"
	           "\"reef-v2\",\"time\":\"",
	           st, s);
	emit_time(b, t);
	buf_adds(b, "\",\"received\":\"");
	emit_time(b, t + 120);
	buf_printf(b,
	           "\",\"values\":{\"ph\":%.3f,\"temperature\":%.2f,"
	           "\"battery\":12.48,\"salinity\":null},\"flags\":{\"ph\":1,"
	           "\"temperature\":1,\"battery\":1,\"salinity\":9}",
	           7.9 + (double)(i % 200) * 0.001,
	           25.0 + (double)(i % 300) * 0.01);
	if (o->pad > 0) {
		buf_adds(b, ",\"note\":\"");
		for (k = 0; k < o->pad; k++)
			buf_addc(b, 'x');
		buf_addc(b, '"');
	}
	buf_addc(b, '}');
}

static int fill(struct ring *r, unsigned long n, const struct opts *o)
{
	struct buf b;
	uint64_t last;
	enum ring_rc rc;
	unsigned long i;

	buf_init(&b, RING_PAYLOAD_MAX);
	for (i = 0; i < n; i++) {
		buf_reset(&b);
		filled++;
		if (filled == o->garbage)
			buf_adds(&b, "this is not JSON");
		else
			reading(&b, filled, o);
		if (buf_failed(&b))
			goto out_fail;
		rc = ring_append(r, b.data, b.len);
		if (rc == RING_BATCH_FULL) {
			if (ring_commit(r, &last) != 0)
				goto out_fail;
			rc = ring_append(r, b.data, b.len);
		}
		if (rc != RING_OK)
			goto out_fail;
	}
	buf_free(&b);
	return ring_commit(r, &last);
out_fail:
	buf_free(&b);
	fprintf(stderr, "post_drive: fill: reading %lu: %s\n", filled,
	        strerror(errno));
	return -1;
}

static int num(const char *s, unsigned long *out)
{
	char *end;

	errno = 0;
	*out = strtoul(s, &end, 10);
	return errno != 0 || end == s || *end != '\0' ? -1 : 0;
}

static int parse(int argc, char **argv, struct opts *o)
{
	static const char *const nk[] = {
	    "--fill",       "--stations", "--pad",       "--garbage", "--more",
	    "--more-at-ms", "--limit-s",  "--ring-size", NULL};
	unsigned long *nv[] = {&o->fill,    &o->stations, &o->pad,
	                       &o->garbage, &o->more,     &o->more_at_ms,
	                       &o->limit_s, &o->ring_size};
	const char **sv[] = {&o->config, &o->ring, &o->output, &o->url,
	                     &o->state_dir};
	static const char *const sk[] = {"--config", "--ring",      "--output",
	                                 "--url",    "--state-dir", NULL};
	int i, j, hit;

	*o = (struct opts){.stations = 2, .limit_s = 60, .ring_size = 4u << 20};
	for (i = 1; i < argc; i++) {
		hit = 0;
		if (strcmp(argv[i], "--keep-running") == 0) {
			o->keep_running = hit = 1;
			continue;
		}
		for (j = 0; sk[j] != NULL && !hit && i + 1 < argc; j++)
			if (strcmp(argv[i], sk[j]) == 0) {
				*sv[j] = argv[++i];
				hit = 1;
			}
		for (j = 0; nk[j] != NULL && !hit && i + 1 < argc; j++)
			if (strcmp(argv[i], nk[j]) == 0)
				hit = num(argv[++i], nv[j]) == 0 ? 1 : -1;
		if (hit != 1) {
			fprintf(stderr, "post_drive: bad argument: %s\n",
			        argv[i]);
			return -1;
		}
	}
	if (o->config == NULL || o->ring == NULL || o->stations == 0) {
		fprintf(stderr, "post_drive: --config and --ring needed\n");
		return -1;
	}
	return 0;
}

static struct cfg_output *find_output(struct config *c, const char *name)
{
	size_t i;

	for (i = 0; i < c->n_outputs; i++)
		if (c->outputs[i].kind == CFG_OUT_HTTP &&
		    (name == NULL || strcmp(c->outputs[i].name, name) == 0))
			return &c->outputs[i];
	return NULL;
}

static void summary(const struct post *p, const struct alerts *a,
                    const char *error, int64_t elapsed_ms)
{
	struct post_stat st;
	struct buf b;

	buf_init(&b, 1 << 20);
	buf_adds(&b, "{\"error\":");
	if (error != NULL)
		emit_json_string(&b, error);
	else
		buf_adds(&b, "null");
	if (p != NULL) {
		post_stat(p, &st);
		buf_adds(&b, ",\"state\":");
		emit_json_string(&b, post_state_name(st.state));
		buf_printf(&b,
		           ",\"acked\":%" PRIu64 ",\"backlog\":%" PRIu64
		           ",\"requests\":%" PRIu64 ",\"delivered\":%" PRIu64
		           ",\"retries\":%" PRIu64 ",\"deadlettered\":%" PRIu64
		           ",\"failures\":%" PRIu32 ",\"last_error\":",
		           st.acked, st.backlog, st.requests, st.delivered,
		           st.retries, st.deadlettered, st.failures);
		emit_json_string(&b, st.last_error);
		buf_printf(&b,
		           ",\"down_since_ms\":%" PRId64
		           ",\"last_success_ms\":%" PRId64,
		           st.down_since_ms, st.last_success_ms);
	}
	buf_printf(
	    &b, ",\"filled\":%lu,\"elapsed_ms\":%" PRId64 ",\"alerts\":[%s]}",
	    filled, elapsed_ms, buf_str(&a->json));
	puts(buf_str(&b));
	buf_free(&b);
}

struct run {
	struct loop *loop;
	struct ring *ring;
	struct post *post;
	const struct opts *o;
	int64_t t0;
};

/* Run until drained / the limit, then stop and let the request end. */
static int run(struct run *r)
{
	const struct clock *c = loop_clock(r->loop);
	int64_t end = r->t0 + (int64_t)r->o->limit_s * 1000, stop_end;
	int more = r->o->more > 0, drained = 0;

	post_kick(r->post);
	while (clock_mono_ms(c) < end) {
		if (loop_run_once(r->loop, 100) < 0)
			break;
		if (more &&
		    clock_mono_ms(c) - r->t0 >= (int64_t)r->o->more_at_ms) {
			more = 0;
			if (fill(r->ring, r->o->more, r->o) != 0)
				return 1;
			post_kick(r->post);
		}
		drained = !more && post_state(r->post) == POST_DRAINED;
		if (drained && !r->o->keep_running)
			break;
	}
	post_stop(r->post);
	stop_end = clock_mono_ms(c) + 120 * 1000;
	while (post_busy(r->post) && clock_mono_ms(c) < stop_end)
		if (loop_run_once(r->loop, 100) < 0)
			break;
	return drained || r->o->keep_running ? 0 : 1;
}

static int open_ring(const struct opts *o, struct cfg_output *out,
                     struct ring **r, char *err, size_t cap)
{
	const char *name = out->name;

	if (ring_open(o->ring, o->ring_size, NULL, r, err, cap) != 0)
		return -1;
	if (ring_outputs(*r, &name, 1) != 0) {
		snprintf(err, cap, "ring: outputs: %s", strerror(errno));
		return -1;
	}
	return fill(*r, o->fill, o);
}

static int load(const struct opts *o, struct config **cfg,
                struct cfg_output **out, char *err, size_t cap)
{
	struct cfg_errors errs;
	size_t i;

	if (config_load(o->config, cfg, &errs) != 0) {
		for (i = 0; i < errs.n; i++)
			fprintf(stderr, "%s\n", errs.msg[i]);
		cfg_errors_free(&errs);
		snprintf(err, cap, "config: %s: not valid", o->config);
		return -1;
	}
	cfg_errors_free(&errs);
	*out = find_output(*cfg, o->output);
	if (*out == NULL) {
		snprintf(err, cap, "config: no http output %s",
		         o->output ? o->output : "");
		return -1;
	}
	return 0;
}

int main(int argc, char **argv)
{
	struct opts o;
	struct config *cfg = NULL;
	struct cfg_output *found = NULL, out;
	struct alerts al = {0, {0}};
	struct run r = {0};
	struct post_ctx ctx;
	char err[512] = "";
	int rc = 2;

	signal(SIGPIPE, SIG_IGN);
	buf_init(&al.json, 1 << 16);
	if (parse(argc, argv, &o) != 0)
		return 2;
	r.o = &o;
	r.loop = loop_new(clock_system());
	r.t0 = clock_mono_ms(clock_system());
	if (r.loop == NULL || load(&o, &cfg, &found, err, sizeof(err)) != 0)
		goto out;
	out = *found;
	if (o.url != NULL)
		out.url = (char *)o.url;
	if (open_ring(&o, &out, &r.ring, err, sizeof(err)) != 0)
		goto out;
	ctx = (struct post_ctx){
	    r.loop,   r.ring, cfg, o.state_dir ? o.state_dir : cfg->state_dir,
	    on_alert, &al};
	if (post_new(&out, &ctx, &r.post, err, sizeof(err)) != 0)
		goto out;
	rc = run(&r);
	err[0] = '\0';
out:
	if (err[0] != '\0')
		fprintf(stderr, "post_drive: %s\n", err);
	summary(r.post, &al, err[0] ? err : NULL,
	        clock_mono_ms(clock_system()) - r.t0);
	post_free(r.post);
	if (ring_close(r.ring) != 0)
		rc = 2;
	loop_free(r.loop);
	config_free(cfg);
	buf_free(&al.json);
	return rc;
}
