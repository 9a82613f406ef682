/*
 * monitor.c - watchdog + alert delivery + status files for run.c; see
 * monitor.h.
 */
#include <stdio.h>
#include <stdlib.h>

#include "alert.h"
#include "ingest.h"
#include "log.h"
#include "monitor.h"
#include "status.h"
#include "watch.h"

struct monitor {
	struct alert *alert;
	struct watch *watch;
	struct status *status;
	struct ring *ring;
	const struct ingest *ing;
	char state_path[4200];
};

static void sink(void *arg, const struct alert_event *ev)
{
	alert_send(arg, ev);
}

static int parts(struct monitor *m, const struct config *cfg, struct loop *loop,
                 struct status_ctx *sc)
{
	struct watch_ctx wc = {
	    cfg, loop_clock(loop), loop, m->state_path, sink, NULL, NULL, NULL};
	char err[600];

	if (alert_new(&cfg->alerts, loop, &m->alert, err, sizeof(err)) != 0)
		goto out_err;
	wc.sink_arg = m->alert;
	if (watch_new(&wc, &m->watch, err, sizeof(err)) != 0)
		goto out_err;
	sc->watch = m->watch;
	sc->alert = m->alert;
	if (status_new(sc, &m->status, err, sizeof(err)) != 0)
		goto out_err;
	watch_set_changed(m->watch, status_changed, m->status);
	return 0;
out_err:
	log_err("%s", err);
	return -1;
}

int monitor_new(const struct config *cfg, struct loop *loop, struct ring *ring,
                const struct ingest *ing, struct post *const *posts,
                size_t n_posts, struct monitor **out)
{
	struct monitor *m = calloc(1, sizeof(*m));
	struct status_ctx sc = {cfg, loop,  loop_clock(loop), NULL, ring,
	                        ing, posts, n_posts,          NULL};

	*out = NULL;
	if (m == NULL) {
		log_err("monitor: start: out of memory");
		return -1;
	}
	m->ring = ring;
	m->ing = ing;
	snprintf(m->state_path, sizeof(m->state_path), "%s/alerts.json",
	         cfg->state_dir != NULL ? cfg->state_dir : ".");
	if (parts(m, cfg, loop, &sc) != 0) {
		monitor_free(m, false);
		return -1;
	}
	*out = m;
	return 0;
}

void monitor_accepted(struct monitor *m, uint64_t n)
{
	if (m != NULL && n > 0)
		watch_accepted(m->watch, m->ring,
		               ingest_stats(m->ing)->last_seq, n);
}

void monitor_notice(struct monitor *m, const char *output,
                    const char *condition, const char *message)
{
	if (m != NULL)
		watch_notice(m->watch, output, condition, message);
	else
		log_warn("alert: %s: %s: %s", output, condition, message);
}

void monitor_free(struct monitor *m, bool stopping)
{
	if (m == NULL)
		return;
	status_free(m->status, stopping);
	watch_free(m->watch);
	alert_free(m->alert);
	free(m);
}
