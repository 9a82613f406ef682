/*
 * alert_drive.c - drive the alert delivery module (daemon/alert.c) from a
 * config, for tests/integration/test_alerts.py.
 *
 *   alert_drive -c CONFIG [-n COUNT] [-s STATION] [-m MESSAGE]
 *               [-f FIELD] [-t RUN_S]
 *
 * Sends COUNT events (default 1) built from the arguments to every
 * target of the config's alerts.to, then runs the daemon's poll loop
 * until nothing is in flight or waiting, or RUN_S seconds passed
 * (default 30).  A 10 ms loop timer stands in for the daemon's reading
 * work: how late it fires shows whether delivery ever blocks the loop.
 * Prints one JSON line: events, sent, failed, dropped, spawned, killed,
 * busy (still busy at the end), max_late_ms, elapsed_ms.  Exit 0, or 2
 * on a usage or setup error.
 */
#include <getopt.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "alert.h"
#include "config.h"
#include "loop.h"

struct probe {
	struct loop *loop;
	struct loop_timer t;
	int64_t due_ms, max_late_ms;
};

static void on_probe(void *arg)
{
	struct probe *p = arg;
	int64_t now = clock_mono_ms(loop_clock(p->loop));

	if (now - p->due_ms > p->max_late_ms)
		p->max_late_ms = now - p->due_ms;
	p->due_ms = now + 10;
	if (loop_timer_arm(p->loop, &p->t, 10) != 0)
		fprintf(stderr, "alert_drive: timer\n");
}

struct opts {
	const char *config, *station, *message, *field;
	long count, run_s;
};

static int parse(int argc, char **argv, struct opts *o)
{
	int c;

	o->station = "rf2";
	o->message = "rf2: battery 10.31 V (median of 5), below 10.50 V";
	o->count = 1;
	o->run_s = 30;
	while ((c = getopt(argc, argv, "c:n:s:m:f:t:")) != -1) {
		switch (c) {
		case 'c':
			o->config = optarg;
			break;
		case 'n':
			o->count = strtol(optarg, NULL, 10);
			break;
		case 's':
			o->station = optarg;
			break;
		case 'm':
			o->message = optarg;
			break;
		case 'f':
			o->field = optarg;
			break;
		case 't':
			o->run_s = strtol(optarg, NULL, 10);
			break;
		default:
			return -1;
		}
	}
	return o->config != NULL && o->count >= 0 ? 0 : -1;
}

static void send_all(struct alert *a, const struct opts *o)
{
	struct alert_event ev;
	char id[64];
	long i;

	for (i = 0; i < o->count; i++) {
		memset(&ev, 0, sizeof(ev));
		snprintf(id, sizeof(id), "battery_low-drive-%ld", i);
		ev.kind = ALERT_RAISED;
		ev.id = id;
		ev.condition = "battery_low";
		ev.severity = "warning";
		ev.station = o->station;
		ev.field = o->field;
		ev.since_s = (int64_t)time(NULL) - 60;
		ev.time_s = (int64_t)time(NULL);
		ev.value = 10.31;
		ev.threshold = 10.5;
		ev.unit = "V";
		ev.rate_per_day = NAN;
		ev.message = o->message;
		alert_send(a, &ev);
	}
}

static void report(const struct alert *a, const struct probe *p,
                   int64_t elapsed)
{
	struct alert_stat st;

	alert_stat(a, &st);
	printf("{\"events\": %llu, \"sent\": %llu, \"failed\": %llu, "
	       "\"dropped\": %llu, \"spawned\": %llu, \"killed\": %llu, "
	       "\"busy\": %s, \"max_late_ms\": %lld, \"elapsed_ms\": %lld}\n",
	       (unsigned long long)st.events, (unsigned long long)st.sent,
	       (unsigned long long)st.failed, (unsigned long long)st.dropped,
	       (unsigned long long)st.spawned, (unsigned long long)st.killed,
	       alert_busy(a) ? "true" : "false", (long long)p->max_late_ms,
	       (long long)elapsed);
}

int main(int argc, char **argv)
{
	struct cfg_errors errs;
	struct config *cfg = NULL;
	struct alert *a = NULL;
	struct probe p;
	struct opts o;
	char err[400];
	int64_t t0;
	size_t i;

	memset(&o, 0, sizeof(o));
	memset(&errs, 0, sizeof(errs));
	if (parse(argc, argv, &o) != 0) {
		fprintf(stderr,
		        "usage: alert_drive -c CONFIG [-n COUNT] "
		        "[-s STATION] [-m MESSAGE] [-f FIELD] [-t RUN_S]\n");
		return 2;
	}
	signal(SIGPIPE, SIG_IGN);
	if (config_load(o.config, &cfg, &errs) != 0) {
		for (i = 0; i < errs.n; i++)
			fprintf(stderr, "%s\n", errs.msg[i]);
		cfg_errors_free(&errs);
		return 2;
	}
	cfg_errors_free(&errs);
	memset(&p, 0, sizeof(p));
	p.loop = loop_new(clock_system());
	if (p.loop == NULL ||
	    alert_new(&cfg->alerts, p.loop, &a, err, sizeof(err)) != 0) {
		fprintf(stderr, "%s\n", p.loop ? err : "alert_drive: loop");
		loop_free(p.loop);
		config_free(cfg);
		return 2;
	}
	loop_timer_init(&p.t, on_probe, &p);
	t0 = clock_mono_ms(clock_system());
	p.due_ms = t0;
	on_probe(&p);
	send_all(a, &o);
	while (alert_busy(a) &&
	       clock_mono_ms(clock_system()) - t0 < o.run_s * 1000)
		(void)loop_run_once(p.loop, 100);
	report(a, &p, clock_mono_ms(clock_system()) - t0);
	fflush(stdout);
	alert_free(a);
	loop_timer_disarm(p.loop, &p.t);
	loop_free(p.loop);
	config_free(cfg);
	return 0;
}
