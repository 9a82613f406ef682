/*
 * status_drive.c - a stand-in daemon for tests/integration/test_status.py
 * (and test_alerts.py): the watchdog and the status writer of the real
 * daemon (daemon/watch.c, daemon/status.c) in the real poll loop, fed
 * readings from a file instead of inputs.
 *
 *   status_drive -c CONFIG [-r READINGS.ndjson]
 *
 * Loads CONFIG, starts alert delivery (alerts.to), the watchdog (state
 * file <state_dir>/alerts.json) and the status writer (status.path,
 * status.metrics_path, every status.every_s), judges each reading line
 * (WIRE.md JSON) with watch_reading_json, prints "ready" on stdout, then
 * runs until SIGTERM or SIGINT: then writes the last status file (state
 * "stopped") and exits 0.  The test starts it with argv[0] "tidepost" so
 * `tidepost status` takes it for the daemon; SIGKILL leaves a file whose
 * pid is gone.
 */
#include <errno.h>
#include <getopt.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "alert.h"
#include "config.h"
#include "loop.h"
#include "status.h"
#include "watch.h"

static volatile sig_atomic_t stop;

static void on_signal(int sig)
{
	(void)sig;
	stop = 1;
}

static void sink(void *arg, const struct alert_event *ev)
{
	alert_send(arg, ev);
}

static int feed(struct watch *w, const char *path)
{
	char line[8192];
	FILE *f = fopen(path, "r");
	int bad = 0;

	if (f == NULL) {
		fprintf(stderr, "status_drive: %s: %s\n", path,
		        strerror(errno));
		return -1;
	}
	while (fgets(line, sizeof(line), f) != NULL)
		bad += watch_reading_json(w, line, strlen(line)) != 0;
	fclose(f);
	if (bad > 0)
		fprintf(stderr,
		        "status_drive: %s: %d lines are not "
		        "readings\n",
		        path, bad);
	return 0;
}

struct parts {
	struct config *cfg;
	struct loop *loop;
	struct alert *alert;
	struct watch *watch;
	struct status *status;
	char state[4096];
};

static int start(struct parts *p, const char *readings)
{
	struct watch_ctx wc;
	struct status_ctx sc;
	char err[400];

	p->loop = loop_new(clock_system());
	if (p->loop == NULL || alert_new(&p->cfg->alerts, p->loop, &p->alert,
	                                 err, sizeof(err)) != 0)
		goto out_err;
	snprintf(p->state, sizeof(p->state), "%s/alerts.json",
	         p->cfg->state_dir);
	memset(&wc, 0, sizeof(wc));
	wc.cfg = p->cfg;
	wc.loop = p->loop;
	wc.state_path = p->state;
	wc.sink = sink;
	wc.sink_arg = p->alert;
	if (watch_new(&wc, &p->watch, err, sizeof(err)) != 0)
		goto out_err;
	if (readings != NULL && feed(p->watch, readings) != 0)
		return -1;
	memset(&sc, 0, sizeof(sc));
	sc.cfg = p->cfg;
	sc.loop = p->loop;
	sc.watch = p->watch;
	sc.alert = p->alert;
	if (status_new(&sc, &p->status, err, sizeof(err)) != 0)
		goto out_err;
	watch_set_changed(p->watch, status_changed, p->status);
	return 0;
out_err:
	fprintf(stderr, "status_drive: %s\n", p->loop ? err : "no loop");
	return -1;
}

int main(int argc, char **argv)
{
	struct cfg_errors errs;
	struct parts p;
	const char *cfgpath = NULL, *readings = NULL;
	size_t i;
	int c, rc = 0;

	while ((c = getopt(argc, argv, "c:r:")) != -1) {
		if (c == 'c')
			cfgpath = optarg;
		else if (c == 'r')
			readings = optarg;
		else
			return 2;
	}
	memset(&p, 0, sizeof(p));
	memset(&errs, 0, sizeof(errs));
	if (cfgpath == NULL || config_load(cfgpath, &p.cfg, &errs) != 0) {
		for (i = 0; i < errs.n; i++)
			fprintf(stderr, "%s\n", errs.msg[i]);
		fprintf(stderr, "usage: status_drive -c CONFIG [-r FILE]\n");
		cfg_errors_free(&errs);
		return 2;
	}
	cfg_errors_free(&errs);
	signal(SIGTERM, on_signal);
	signal(SIGINT, on_signal);
	signal(SIGPIPE, SIG_IGN);
	if (start(&p, readings) != 0)
		rc = 2;
	if (rc == 0) {
		printf("ready\n");
		fflush(stdout);
	}
	while (rc == 0 && !stop)
		(void)loop_run_once(p.loop, 200);
	status_free(p.status, true);
	watch_free(p.watch);
	alert_free(p.alert);
	loop_free(p.loop);
	config_free(p.cfg);
	return rc;
}
