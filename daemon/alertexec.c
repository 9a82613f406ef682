/*
 * alertexec.c - the exec alert target: posix_spawn with a fixed argument
 * vector and a minimal environment, no shell, no inherited fds, one
 * child at a time, a time limit and a rate limit; see alert.h.
 *
 * The child is watched through a pidfd (pidfd_open(2), Linux 5.3) that
 * becomes readable when it exits; where that call is missing, a timer
 * polls waitpid(WNOHANG) every REAP_POLL_MS.  Either way only our own
 * child's pid is ever waited for.
 */
#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <math.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/pidfd.h>
#include <sys/wait.h>
#include <unistd.h>

#include "alertpriv.h"
#include "emit.h"
#include "log.h"

#define REAP_POLL_MS   50
#define RATE_WINDOW_MS 60000

static int64_t mono(const struct target *t)
{
	return clock_mono_ms(loop_clock(t->a->loop));
}

/* ---- the environment ---------------------------------------------------
 */

/* "NAME=value" (value cut to ALERT_TEXT_MAX) into m->env[*k]. */
static int put(struct amsg *m, size_t *k, const char *name, const char *v)
{
	char *cv;
	size_t n;

	if (v == NULL)
		return 0;
	if (*k + 1 >= ALERT_ENV_MAX)
		return -1;
	cv = alert_text_dup(v);
	n = strlen(name) + (cv ? strlen(cv) : 0) + 2;
	m->env[*k] = cv != NULL ? malloc(n) : NULL;
	if (m->env[*k] != NULL)
		snprintf(m->env[*k], n, "%s=%s", name, cv);
	free(cv);
	return m->env[(*k)++] != NULL ? 0 : -1;
}

static int put_time(struct amsg *m, size_t *k, const char *name, int64_t t)
{
	struct buf b;
	int rc;

	buf_init(&b, 64);
	emit_time(&b, t);
	rc = put(m, k, name, buf_str(&b));
	buf_free(&b);
	return rc;
}

static int put_num(struct amsg *m, size_t *k, const char *name, double v)
{
	struct buf b;
	int rc;

	if (!isfinite(v))
		return 0;
	buf_init(&b, 64);
	emit_shortest(&b, v);
	rc = put(m, k, name, buf_str(&b));
	buf_free(&b);
	return rc;
}

int alert_exec_env(struct amsg *m, const struct alert_event *ev)
{
	size_t k = 0;
	int rc = 0;

	rc |= put(m, &k, "PATH", "/usr/bin:/bin");
	rc |= put(m, &k, "TIDEPOST_EVENT", alert_kind_name(ev->kind));
	rc |= put(m, &k, "TIDEPOST_ID", ev->id);
	rc |= put(m, &k, "TIDEPOST_CONDITION", ev->condition);
	rc |= put(m, &k, "TIDEPOST_SEVERITY", ev->severity);
	rc |= put(m, &k, "TIDEPOST_STATION", ev->station);
	rc |= put(m, &k, "TIDEPOST_OUTPUT", ev->output);
	rc |= put(m, &k, "TIDEPOST_FIELD", ev->field);
	rc |= put_time(m, &k, "TIDEPOST_SINCE", ev->since_s);
	rc |= put_time(m, &k, "TIDEPOST_TIME", ev->time_s);
	rc |= put_num(m, &k, "TIDEPOST_VALUE", ev->value);
	rc |= put_num(m, &k, "TIDEPOST_THRESHOLD", ev->threshold);
	rc |= put(m, &k, "TIDEPOST_UNIT", ev->unit);
	if (ev->forecast_s != 0)
		rc |= put_time(m, &k, "TIDEPOST_FORECAST", ev->forecast_s);
	rc |= put_num(m, &k, "TIDEPOST_RATE_PER_DAY", ev->rate_per_day);
	rc |= put(m, &k, "TIDEPOST_MESSAGE", ev->message);
	m->env[k] = NULL;
	return rc != 0 ? -1 : 0;
}

/* ---- spawning ----------------------------------------------------------
 */

static int spawn_setup(posix_spawn_file_actions_t *fa, posix_spawnattr_t *at)
{
	sigset_t none, dflt;
	int rc;

	sigemptyset(&none);
	sigfillset(&dflt);
	sigdelset(&dflt, SIGKILL);
	sigdelset(&dflt, SIGSTOP);
	rc = posix_spawn_file_actions_addopen(fa, 0, "/dev/null", O_RDONLY, 0);
	if (rc == 0)
		rc = posix_spawn_file_actions_addclosefrom_np(fa, 3);
	if (rc == 0)
		rc = posix_spawnattr_setsigmask(at, &none);
	if (rc == 0)
		rc = posix_spawnattr_setsigdefault(at, &dflt);
	if (rc == 0)
		rc = posix_spawnattr_setpgroup(at, 0);
	if (rc == 0)
		rc = posix_spawnattr_setflags(at, POSIX_SPAWN_SETSIGMASK |
		                                      POSIX_SPAWN_SETSIGDEF |
		                                      POSIX_SPAWN_SETPGROUP);
	return rc;
}

/* The fixed argv: the configured strings, then the event's JSON. */
static int spawn(struct target *t, struct amsg *m, pid_t *pid)
{
	char *argv[66];
	posix_spawn_file_actions_t fa;
	posix_spawnattr_t at;
	size_t i;
	int rc;

	for (i = 0; i < t->cfg->argc && i < 64; i++)
		argv[i] = t->cfg->argv[i];
	argv[i++] = m->json;
	argv[i] = NULL;
	if (posix_spawn_file_actions_init(&fa) != 0)
		return ENOMEM;
	if (posix_spawnattr_init(&at) != 0) {
		posix_spawn_file_actions_destroy(&fa);
		return ENOMEM;
	}
	rc = spawn_setup(&fa, &at);
	if (rc == 0)
		rc = posix_spawn(pid, argv[0], &fa, &at, argv, m->env);
	posix_spawnattr_destroy(&at);
	posix_spawn_file_actions_destroy(&fa);
	return rc;
}

/* ---- the child's end ---------------------------------------------------
 */

static void child_done(struct target *t, int wstatus)
{
	struct alert *a = t->a;

	if (t->pidfd >= 0) {
		loop_unwatch(a->loop, t->pidfd);
		close(t->pidfd);
		t->pidfd = -1;
	}
	loop_timer_disarm(a->loop, &t->timer);
	loop_timer_disarm(a->loop, &t->reap_timer);
	t->pid = 0;
	if (WIFEXITED(wstatus) && WEXITSTATUS(wstatus) == 0) {
		a->st.sent++;
	} else {
		a->st.failed++;
		if (t->killed)
			log_err("alert: %s: %s: killed after %" PRIu32 " s",
			        t->name, t->cfg->argv[0], t->cfg->timeout_s);
		else if (WIFEXITED(wstatus))
			log_err("alert: %s: %s: exit status %d", t->name,
			        t->cfg->argv[0], WEXITSTATUS(wstatus));
		else
			log_err("alert: %s: %s: killed by signal %d", t->name,
			        t->cfg->argv[0], WTERMSIG(wstatus));
	}
	t->killed = false;
	alert_pop(t);
	alert_exec_kick(t);
}

/* Reap our child if it has exited; true when it did. */
static bool reap(struct target *t)
{
	int wstatus = 0;
	pid_t r;

	do
		r = waitpid(t->pid, &wstatus, WNOHANG);
	while (r < 0 && errno == EINTR);
	if (r == 0)
		return false;
	if (r < 0)
		wstatus = 0xff00; /* not ours any more: count as failed */
	child_done(t, wstatus);
	return true;
}

static void on_pidfd(void *arg, int fd, short revents)
{
	(void)fd;
	(void)revents;
	(void)reap(arg);
}

static void on_reap_poll(void *arg)
{
	struct target *t = arg;

	if (!reap(t) &&
	    loop_timer_arm(t->a->loop, &t->reap_timer, REAP_POLL_MS) != 0)
		log_err("alert: %s: timer: too many timers", t->name);
}

/* The timer: the child's time is up (kill its process group), or the
 * rate limit lets the next one start. */
static void on_timer(void *arg)
{
	struct target *t = arg;

	if (t->pid > 0) {
		t->killed = true;
		t->a->st.killed++;
		(void)kill(-t->pid, SIGKILL);
		(void)kill(t->pid, SIGKILL);
		return; /* the pidfd (or the poll) reaps it */
	}
	alert_exec_kick(t);
}

static int watch_child(struct target *t)
{
	struct loop *l = t->a->loop;
	int64_t lim = (int64_t)(t->cfg->timeout_s ? t->cfg->timeout_s : 10);

	t->pidfd = pidfd_open(t->pid, 0);
	if (t->pidfd >= 0 &&
	    (fcntl(t->pidfd, F_SETFD, FD_CLOEXEC) != 0 ||
	     loop_watch(l, t->pidfd, POLLIN, on_pidfd, t) != 0)) {
		close(t->pidfd);
		t->pidfd = -1;
	}
	if (t->pidfd < 0 &&
	    loop_timer_arm(l, &t->reap_timer, REAP_POLL_MS) != 0)
		return -1;
	return loop_timer_arm(l, &t->timer, lim * 1000);
}

/* ---- the rate limit ----------------------------------------------------
 */

/* 0: may start now; else ms to wait. */
static int64_t rate_wait(const struct target *t)
{
	int64_t oldest;

	if (t->n_starts < t->rate_cap)
		return 0;
	oldest = t->starts[t->starts_head];
	return oldest + RATE_WINDOW_MS > mono(t)
	           ? oldest + RATE_WINDOW_MS - mono(t)
	           : 0;
}

static void note_start(struct target *t)
{
	size_t cap = t->rate_cap;

	if (t->n_starts < cap) {
		t->starts[(t->starts_head + t->n_starts++) % cap] = mono(t);
		return;
	}
	t->starts[t->starts_head] = mono(t);
	t->starts_head = (t->starts_head + 1) % cap;
}

void alert_exec_kick(struct target *t)
{
	struct amsg *m;
	int64_t wait;
	int rc;

	while ((m = alert_head(t)) != NULL && t->pid == 0) {
		wait = rate_wait(t);
		if (wait > 0) {
			if (loop_timer_arm(t->a->loop, &t->timer, wait) != 0)
				log_err("alert: %s: timer: too many timers",
				        t->name);
			return;
		}
		note_start(t);
		rc = spawn(t, m, &t->pid);
		if (rc == 0) {
			t->a->st.spawned++;
			if (watch_child(t) != 0)
				log_err("alert: %s: cannot watch the child; "
				        "it will not be timed",
				        t->name);
			return;
		}
		t->pid = 0;
		t->a->st.failed++;
		log_err("alert: %s: spawn: %s: %s", t->name, t->cfg->argv[0],
		        strerror(rc));
		alert_pop(t);
	}
}

int alert_exec_init(struct target *t, char *err, size_t errcap)
{
	uint32_t n = t->a->cfg->exec_per_min ? t->a->cfg->exec_per_min : 1;

	if (t->cfg->argc == 0 || t->cfg->argv[0][0] != '/') {
		snprintf(err, errcap,
		         "alert: %s: argv[0] must be an absolute "
		         "path",
		         t->name);
		return -1;
	}
	t->starts = calloc(n, sizeof(*t->starts));
	if (t->starts == NULL) {
		snprintf(err, errcap, "alert: %s: %s", t->name,
		         strerror(ENOMEM));
		return -1;
	}
	t->rate_cap = n;
	loop_timer_init(&t->timer, on_timer, t);
	loop_timer_init(&t->reap_timer, on_reap_poll, t);
	return 0;
}

/* SIGKILL a running child and wait for it (alert_free only). */
void alert_exec_stop(struct target *t)
{
	int wstatus;

	if (t->pid > 0) {
		(void)kill(-t->pid, SIGKILL);
		(void)kill(t->pid, SIGKILL);
		while (waitpid(t->pid, &wstatus, 0) < 0 && errno == EINTR)
			;
		t->pid = 0;
	}
	if (t->pidfd >= 0) {
		loop_unwatch(t->a->loop, t->pidfd);
		close(t->pidfd);
		t->pidfd = -1;
	}
	loop_timer_disarm(t->a->loop, &t->reap_timer);
}
