/*
 * monitor.h - the daemon's watchdog, alert delivery and status files as
 * one unit for run.c: made when a config is applied, freed when its
 * outputs are, so a reload rebuilds all three on the new config (open
 * alerts carry over through the watchdog's state file,
 * <state_dir>/alerts.json).
 *
 * Owns one struct alert, one struct watch and one struct status, wired
 * together: the watch's events go to alert_send, its changes to
 * status_changed.  Borrows the config, loop, ring, ingest and the http
 * outputs' posts; they must outlive it.
 *
 * Called by run.c: monitor_new in apply(), monitor_accepted in the
 * commit listener, monitor_notice from the outputs' alert callback,
 * monitor_free before the outputs are freed.
 */
#ifndef TIDEPOST_MONITOR_H
#define TIDEPOST_MONITOR_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "config.h"
#include "loop.h"

struct monitor;
struct ring;
struct ingest;
struct post;

/* Start all three.  0 and *out, or -1 (logged: a bad alert target, e.g.
 * an unreadable token file, or out of memory). */
int monitor_new(const struct config *cfg, struct loop *loop, struct ring *ring,
                const struct ingest *ing, struct post *const *posts,
                size_t n_posts, struct monitor **out)
    __attribute__((warn_unused_result));

/* n readings were just committed; the newest is ingest's last_seq. */
void monitor_accepted(struct monitor *m, uint64_t n);

/* A one-off event of an output (post_ctx.alert's shape). */
void monitor_notice(struct monitor *m, const char *output,
                    const char *condition, const char *message);

/* Free; stopping (the daemon ends): the status file says "stopped".
 * NULL is fine. */
void monitor_free(struct monitor *m, bool stopping);

#endif
