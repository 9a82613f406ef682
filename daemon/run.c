/*
 * run.c - `tidepost run`: the daemon.  Ties together the one poll loop,
 * the inputs, the ring, the seen set, ingest and the outputs, and the
 * daemon's life: start, signals, reload, stop, --once.
 *
 * Each turn of the loop: poll and dispatch (inputs stage readings in the
 * ring), then one ingest_commit (group commit: one fdatasync for all the
 * turn staged), whose listener tells every input the outcome (spool files
 * are moved only now) and kicks the outputs when readings were accepted;
 * then signal flags, ring health and the --once end condition are
 * looked at.
 *
 * Choices (docs/daemon.md has the long form):
 *   - never forks: a service manager runs us.  --foreground logs to
 *     stderr (with "<N>" priority prefixes when JOURNAL_STREAM or
 *     INVOCATION_ID says a service manager reads it); without it the
 *     daemon still runs in the foreground but logs to syslog;
 *   - signal handlers only set flags and write a byte to a self-pipe the
 *     loop watches; SIGPIPE is ignored (libcurl, NOSIGNAL);
 *   - SIGTERM/SIGINT: inputs stop, staged readings are committed, every
 *     HTTP output is stopped and its in-flight request may finish for up
 *     to max(timeout_s) + 1 s (at most 60 s), the ring is closed (last
 *     header synced), exit 0;
 *   - SIGHUP: the config is loaded again; a bad one is reported (every
 *     problem with its place) and the running one stays.  A good one:
 *     inputs stop, in-flight requests finish (as for SIGTERM), then inputs
 *     and outputs are rebuilt from it; the ring stays open (a change of
 *     ring path or size needs a restart and is logged), ring_outputs gets
 *     the new output names (a new output starts at the ring's tail, a
 *     removed one's cursor is dropped).  If the new inputs or outputs
 *     cannot start, the old config is started again;
 *   - a failed ring (fsync error): nothing is accepted (streams refuse,
 *     spool files stay), ring_recover is tried after 1, 2, 4, 8 and 16 s;
 *     if it still fails the daemon exits 4 so it is restarted;
 *   - <state_dir>/replay/ is always watched: `tidepost replay` hands
 *     files to a running daemon there;
 *   - --once: inputs take what is there (stdin to its end, spool folders
 *     one sweep, serial/tcp until 1 s without data), outputs deliver
 *     until each is drained or failing; exit 0 all drained, 3 not.
 */
#include <errno.h>
#include <fcntl.h>
#include <getopt.h>
#include <inttypes.h>
#include <poll.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cli.h"
#include "cli_run.h"
#include "fileout.h"
#include "ingest.h"
#include "input.h"
#include "log.h"
#include "loop.h"
#include "monitor.h"
#include "post.h"
#include "ring.h"
#include "seen.h"

#define RUN_MAX_INPUTS    (CFG_MAX_ITEMS + 1)
#define RUN_STOP_MAX_MS   60000
#define RUN_RECOVER_TRIES 5
#define RUN_OPT_ONCE      400 /* getopt_long value of --once */

const char cmd_run_usage[] =
    "usage: tidepost run -c CONFIG [--foreground] [--once]\n"
    "\n"
    "The daemon: read packets from the configured inputs, keep every\n"
    "accepted reading in the ring file, deliver to the outputs.\n"
    "It never forks; run it under a service manager.\n"
    "\n"
    "  -c, --config CONFIG   the config file\n"
    "  -f, --foreground      log to stderr (default: syslog)\n"
    "  --once                take what the inputs have now, deliver it,\n"
    "                        exit\n"
    "  -h, --help            this text\n"
    "\n"
    "Signals: SIGTERM/SIGINT stop (exit 0), SIGHUP reloads the config.\n"
    "Exit status: 0 stopped, or --once with everything delivered;\n"
    "2 usage, config or start-up error; 3 --once with some output not\n"
    "drained; 4 the ring failed and could not be recovered.\n";

enum phase { PHASE_RUN = 0, PHASE_STOPPING, PHASE_RELOADING };

struct outp {
	enum cfg_output_kind kind;
	struct post *post;
	struct fileout *file;
	const char *name;
};

struct run {
	const char *cfg_path;
	bool once;
	struct config *cfg;
	struct config *next_cfg; /* reload: waiting for the drain */
	struct loop *loop;
	struct ring *ring;
	struct seen *seen;
	struct ingest *ing;
	struct input *in[RUN_MAX_INPUTS];
	size_t n_in;
	struct outp out[RING_OUTPUTS_MAX];
	size_t n_out;
	struct monitor *mon; /* watchdog, alerts, status (monitor.h) */
	/* the http outputs as the monitor sees them: it keeps this pointer,
	 * so the array lives as long as r->mon */
	struct post *mon_posts[RING_OUTPUTS_MAX];
	char replay_dir[4096];
	enum phase phase;
	bool done;
	int exit_code;
	bool ring_down;
	int recover_tries;
	struct loop_timer stop_timer; /* end of the stop/reload drain */
	struct loop_timer recover_timer;
	int sig_rfd;
};

static volatile sig_atomic_t got_term, got_hup;
static int sig_wfd = -1;

static void on_signal(int sig)
{
	int saved = errno;
	char c = 1;

	if (sig == SIGHUP)
		got_hup = 1;
	else
		got_term = 1;
	if (sig_wfd >= 0)
		(void)!write(sig_wfd, &c, 1);
	errno = saved;
}

static void on_sigpipe(void *arg, int fd, short revents)
{
	char b[64];

	(void)arg;
	(void)revents;
	while (read(fd, b, sizeof(b)) > 0)
		;
}

static int signals_init(struct run *r)
{
	struct sigaction sa;
	int p[2];

	if (pipe2(p, O_NONBLOCK | O_CLOEXEC) != 0)
		return -1;
	r->sig_rfd = p[0];
	sig_wfd = p[1];
	memset(&sa, 0, sizeof(sa));
	sa.sa_handler = on_signal;
	sigemptyset(&sa.sa_mask);
	sa.sa_flags = SA_RESTART;
	if (sigaction(SIGTERM, &sa, NULL) != 0 ||
	    sigaction(SIGINT, &sa, NULL) != 0 ||
	    sigaction(SIGHUP, &sa, NULL) != 0 ||
	    signal(SIGPIPE, SIG_IGN) == SIG_ERR)
		return -1;
	return loop_watch(r->loop, r->sig_rfd, POLLIN, on_sigpipe, r);
}

static void alert_log(void *arg, const char *output, const char *condition,
                      const char *message)
{
	monitor_notice(((struct run *)arg)->mon, output, condition, message);
}

/* ---- outputs ---- */

static void out_kick(struct outp *o)
{
	if (o->post != NULL)
		post_kick(o->post);
	else if (o->file != NULL)
		fileout_kick(o->file);
}

static void kick_all(struct run *r)
{
	size_t i;

	for (i = 0; i < r->n_out; i++)
		out_kick(&r->out[i]);
}

static void stop_outputs(struct run *r)
{
	size_t i;

	for (i = 0; i < r->n_out; i++)
		if (r->out[i].post != NULL)
			post_stop(r->out[i].post);
}

static bool outputs_busy(const struct run *r)
{
	size_t i;

	for (i = 0; i < r->n_out; i++)
		if (r->out[i].post != NULL && post_busy(r->out[i].post))
			return true;
	return false;
}

static void free_outputs(struct run *r)
{
	monitor_free(r->mon, false); /* it reports on the outputs */
	r->mon = NULL;
	while (r->n_out > 0) {
		struct outp *o = &r->out[--r->n_out];

		post_free(o->post);
		fileout_free(o->file);
		memset(o, 0, sizeof(*o));
	}
}

/* The output's cursor is at the newest accepted reading. */
static bool out_caught_up(const struct run *r, const struct outp *o)
{
	struct ring_stat st;
	uint64_t acked = 0;

	ring_stat(r->ring, &st);
	if (ring_cursor_get(r->ring, o->name, &acked) != 0)
		return false;
	return acked >= st.newest_seq;
}

/* --once: 1 drained, 0 still working, -1 failing. */
static int out_settled(const struct run *r, const struct outp *o)
{
	if (o->post != NULL) {
		enum post_state s = post_state(o->post);

		if (s == POST_BACKOFF || s == POST_PAUSED || s == POST_STOPPED)
			return -1;
		if (s == POST_SENDING || !out_caught_up(r, o))
			return 0;
		return 1;
	}
	if (fileout_state(o->file) == FILEOUT_BACKOFF)
		return -1;
	if (fileout_state(o->file) == FILEOUT_WRITING || !out_caught_up(r, o))
		return 0;
	return 1;
}

static int names_to_ring(struct run *r, const struct config *cfg)
{
	const char *names[RING_OUTPUTS_MAX];
	size_t i;

	if (cfg->n_outputs > RING_OUTPUTS_MAX) {
		log_err("run: %s: %zu outputs; the ring keeps cursors for at "
		        "most %u",
		        r->cfg_path, cfg->n_outputs, RING_OUTPUTS_MAX);
		return -1;
	}
	for (i = 0; i < cfg->n_outputs; i++) {
		names[i] = cfg->outputs[i].name;
		if (strlen(names[i]) > RING_NAME_MAX) {
			log_err("run: outputs[%zu].name: \"%s\" is longer than "
			        "the %u bytes a ring cursor name may have",
			        i, names[i], RING_NAME_MAX);
			return -1;
		}
	}
	if (ring_outputs(r->ring, names, cfg->n_outputs) != 0) {
		log_err("ring: outputs: %s: %s", cfg->ring.path,
		        strerror(errno));
		return -1;
	}
	return 0;
}

static int start_output(struct run *r, const struct config *cfg, size_t i)
{
	const struct cfg_output *o = &cfg->outputs[i];
	struct outp *op = &r->out[r->n_out];
	struct post_ctx pc = {r->loop,        r->ring,   cfg,
	                      cfg->state_dir, alert_log, r};
	char err[512];
	int rc;

	op->kind = o->kind;
	op->name = o->name;
	if (o->kind == CFG_OUT_HTTP)
		rc = post_new(o, &pc, &op->post, err, sizeof(err));
	else
		rc = fileout_new(o, r->loop, r->ring, &op->file, err,
		                 sizeof(err));
	if (rc != 0) {
		log_err("%s", err);
		memset(op, 0, sizeof(*op));
		return -1;
	}
	r->n_out++;
	return 0;
}

static int start_outputs(struct run *r, const struct config *cfg)
{
	size_t i;

	if (names_to_ring(r, cfg) != 0)
		return -1;
	for (i = 0; i < cfg->n_outputs; i++)
		if (start_output(r, cfg, i) != 0)
			return -1;
	kick_all(r); /* a backlog from before goes out without new input */
	return 0;
}

/* ---- inputs ---- */

static void free_inputs(struct run *r)
{
	while (r->n_in > 0)
		input_free(r->in[--r->n_in]);
}

static int start_inputs(struct run *r, const struct config *cfg)
{
	struct input_ctx ctx = {r->loop, r->ing, cfg, r->once};
	char err[512];
	size_t i;

	for (i = 0; i < cfg->n_inputs; i++) {
		if (input_new(&cfg->inputs[i], &ctx, &r->in[r->n_in], err,
		              sizeof(err)) != 0) {
			log_err("%s", err);
			return -1;
		}
		r->n_in++;
	}
	if (input_replay_new(r->replay_dir, &ctx, &r->in[r->n_in], err,
	                     sizeof(err)) != 0) {
		log_err("%s", err);
		return -1;
	}
	r->n_in++;
	return 0;
}

/* ingest committed (or failed to): tell the inputs, kick the outputs. */
static void on_commit(void *arg, bool ok, uint64_t n)
{
	struct run *r = arg;
	size_t i;

	for (i = 0; i < r->n_in; i++)
		input_committed(r->in[i], ok);
	if (ok && n > 0)
		kick_all(r);
	if (ok)
		monitor_accepted(r->mon, n);
}

/* The watchdog, alerts and status files on cfg and the outputs. */
static int start_monitor(struct run *r, const struct config *cfg)
{
	size_t i, n = 0;

	for (i = 0; i < r->n_out && n < RING_OUTPUTS_MAX; i++)
		if (r->out[i].post != NULL)
			r->mon_posts[n++] = r->out[i].post;
	return monitor_new(cfg, r->loop, r->ring, r->ing, r->mon_posts, n,
	                   &r->mon);
}

/* Inputs, ring cursors and outputs of cfg.  0, or -1 (logged; what was
 * started is stopped again). */
static int apply(struct run *r, struct config *cfg)
{
	ingest_set_config(r->ing, cfg);
	if (start_inputs(r, cfg) != 0 || start_outputs(r, cfg) != 0 ||
	    start_monitor(r, cfg) != 0) {
		free_inputs(r);
		free_outputs(r);
		return -1;
	}
	return 0;
}

/* ---- stop and reload ---- */

static int64_t drain_ms(const struct config *cfg)
{
	int64_t ms = 0;
	size_t i;

	for (i = 0; i < cfg->n_outputs; i++)
		if (cfg->outputs[i].kind == CFG_OUT_HTTP &&
		    (int64_t)cfg->outputs[i].timeout_s * 1000 + 1000 > ms)
			ms = (int64_t)cfg->outputs[i].timeout_s * 1000 + 1000;
	return ms > RUN_STOP_MAX_MS ? RUN_STOP_MAX_MS : ms;
}

/* Stop the inputs and let in-flight requests end (bounded). */
static void begin_drain(struct run *r, enum phase ph)
{
	if (ingest_commit(r->ing) != 0)
		log_err("run: the last staged readings were not accepted");
	free_inputs(r);
	stop_outputs(r);
	r->phase = ph;
	if (loop_timer_arm(r->loop, &r->stop_timer, drain_ms(r->cfg)) != 0)
		log_err("run: timer: %s", strerror(errno));
}

static void begin_stop(struct run *r, int code, const char *why)
{
	if (r->phase == PHASE_STOPPING)
		return;
	log_info("run: stopping (%s)", why);
	r->exit_code = code;
	if (r->phase == PHASE_RELOADING) {
		config_free(r->next_cfg);
		r->next_cfg = NULL;
	}
	begin_drain(r, PHASE_STOPPING);
}

static void begin_reload(struct run *r)
{
	struct cfg_errors errs;
	struct config *nc = NULL;

	log_info("run: SIGHUP: loading %s", r->cfg_path);
	memset(&errs, 0, sizeof(errs));
	if (config_load(r->cfg_path, &nc, &errs) != 0) {
		cli_print_errors(&errs);
		log_err("run: reload: %s has problems; not applied, the "
		        "running config stays",
		        r->cfg_path);
		return;
	}
	cfg_errors_free(&errs);
	if (strcmp(nc->ring.path, r->cfg->ring.path) != 0 ||
	    nc->ring.size_mb != r->cfg->ring.size_mb)
		log_warn("run: reload: ring path or size changed; the open "
		         "ring %s stays until a restart",
		         r->cfg->ring.path);
	r->next_cfg = nc;
	begin_drain(r, PHASE_RELOADING);
}

static void finish_reload(struct run *r)
{
	struct config *nc = r->next_cfg;

	loop_timer_disarm(r->loop, &r->stop_timer);
	free_outputs(r);
	r->next_cfg = NULL;
	r->phase = PHASE_RUN;
	if (apply(r, nc) == 0) {
		config_free(r->cfg);
		r->cfg = nc;
		log_info("run: reload: %s applied (%zu inputs, %zu outputs)",
		         r->cfg_path, nc->n_inputs, nc->n_outputs);
		return;
	}
	log_err("run: reload: the new config could not start; starting the "
	        "previous one again");
	config_free(nc);
	if (apply(r, r->cfg) != 0) {
		log_err("run: the previous config does not start either");
		r->exit_code = CLI_EXIT_USAGE;
		r->done = true;
	}
}

static void on_stop_timer(void *arg)
{
	(void)arg; /* the loop turns; run_turn sees the deadline */
}

/* ---- ring failure ---- */

static void on_recover(void *arg)
{
	struct run *r = arg;
	char err[512];

	if (ring_recover(r->ring, err, sizeof(err)) == 0) {
		log_info("ring: %s: recovered; accepting readings again",
		         r->cfg->ring.path);
		r->ring_down = false;
		r->recover_tries = 0;
		kick_all(r);
		return;
	}
	log_err("%s", err);
	if (++r->recover_tries >= RUN_RECOVER_TRIES) {
		log_err("ring: %s: not recovered after %d tries; exiting so the"
		        " service manager restarts us",
		        r->cfg->ring.path, r->recover_tries);
		r->exit_code = RUN_EXIT_RING_FAILED;
		r->done = true;
		return;
	}
	if (loop_timer_arm(r->loop, &r->recover_timer,
	                   1000LL << r->recover_tries) != 0)
		r->done = true;
}

static void check_ring(struct run *r)
{
	struct ring_stat st;

	if (r->ring_down)
		return;
	ring_stat(r->ring, &st);
	if (st.failed == 0)
		return;
	r->ring_down = true;
	log_err("ring: %s: failed (%s); not accepting readings; recovering "
	        "in 1 s",
	        r->cfg->ring.path, strerror(st.failed));
	if (loop_timer_arm(r->loop, &r->recover_timer, 1000) != 0)
		r->done = true;
}

/* ---- --once ---- */

static void check_once(struct run *r)
{
	bool blocked = false, failing = false;
	size_t i;
	int s;

	for (i = 0; i < r->n_in; i++) {
		enum input_state st = input_state(r->in[i]);

		if (st == INPUT_BUSY)
			return;
		blocked |= st == INPUT_BLOCKED;
	}
	for (i = 0; i < r->n_out; i++) {
		s = out_settled(r, &r->out[i]);
		if (s == 0)
			return;
		failing |= s < 0;
	}
	/* with a drained output, ring space frees up: blocked input waits */
	if (blocked && !failing && r->n_out > 0 && !r->ring_down)
		return;
	begin_stop(r, blocked || failing ? RUN_EXIT_UNDRAINED : CLI_EXIT_OK,
	           blocked || failing ? "--once: not everything delivered"
	                              : "--once: everything delivered");
}

/* One turn: poll and dispatch, commit, then look at flags and state. */
static void run_turn(struct run *r)
{
	int64_t now;

	if (loop_run_once(r->loop, -1) < 0) {
		log_err("run: poll: %s", strerror(errno));
		r->exit_code = CLI_EXIT_USAGE;
		r->done = true;
		return;
	}
	/* the group commit; a failure is logged there and fails the ring */
	if (ingest_commit(r->ing) != 0 || !r->ring_down)
		check_ring(r);
	if (got_term) {
		got_term = 0;
		begin_stop(r, CLI_EXIT_OK, "signal");
	}
	if (got_hup) {
		got_hup = 0;
		if (r->phase == PHASE_RUN)
			begin_reload(r);
	}
	if (r->phase == PHASE_RUN && r->once)
		check_once(r);
	now = clock_mono_ms(loop_clock(r->loop));
	if (r->phase != PHASE_RUN &&
	    (!outputs_busy(r) || !r->stop_timer.armed ||
	     now >= r->stop_timer.due_ms)) {
		if (r->phase == PHASE_STOPPING)
			r->done = true;
		else
			finish_reload(r);
	}
}

/* ---- start and end ---- */

static int parse_args(struct run *r, bool *fg, int argc, char **argv)
{
	static const struct option opts[] = {
	    {"config", required_argument, NULL, 'c'},
	    {"foreground", no_argument, NULL, 'f'},
	    {"once", no_argument, NULL, RUN_OPT_ONCE},
	    {"help", no_argument, NULL, 'h'},
	    {NULL, 0, NULL, 0}};
	int c;

	opterr = 0;
	for (;;) {
		c = getopt_long(argc, argv, ":c:fh", opts, NULL);
		if (c == -1)
			break;
		if (c == 'c')
			r->cfg_path = optarg;
		else if (c == 'f')
			*fg = true;
		else if (c == RUN_OPT_ONCE)
			r->once = true;
		else if (c == 'h') {
			fputs(cmd_run_usage, stdout);
			return CLI_EXIT_OK;
		} else
			return cli_bad_option("run", c, argv);
	}
	if (optind < argc || r->cfg_path == NULL) {
		log_err("run: %s; see 'tidepost help run'",
		        optind < argc ? "unexpected arguments"
		                      : "give -c CONFIG");
		return CLI_EXIT_USAGE;
	}
	return -1;
}

static int load_config(struct run *r)
{
	struct cfg_errors errs;

	memset(&errs, 0, sizeof(errs));
	if (config_load(r->cfg_path, &r->cfg, &errs) != 0) {
		cli_print_errors(&errs);
		log_err("run: %s: not started", r->cfg_path);
		return -1;
	}
	cfg_errors_free(&errs);
	if (r->cfg->n_outputs == 0 && r->cfg->n_inputs == 0) {
		log_err("run: %s: no inputs and no outputs: nothing to do; "
		        "not started",
		        r->cfg_path);
		return -1;
	}
	if (r->cfg->n_outputs == 0)
		log_warn("run: %s: no outputs: readings stay in the ring "
		         "until an output is configured",
		         r->cfg_path);
	if (mkdir(r->cfg->state_dir, 0750) != 0 && errno != EEXIST) {
		log_err("run: mkdir: %s: %s", r->cfg->state_dir,
		        strerror(errno));
		return -1;
	}
	snprintf(r->replay_dir, sizeof(r->replay_dir), "%s/replay",
	         r->cfg->state_dir);
	return 0;
}

static int open_ring(struct run *r)
{
	uint64_t size = (uint64_t)r->cfg->ring.size_mb * 1024 * 1024;
	struct ring_stat st;
	char err[512];

	if (ring_open(r->cfg->ring.path, size, NULL, &r->ring, err,
	              sizeof(err)) != 0) {
		log_err("%s", err);
		return -1;
	}
	ring_stat(r->ring, &st);
	log_info("ring: %s: open: %" PRIu64 " readings kept, %" PRIu64
	         " of %" PRIu64 " bytes used, next seq %" PRIu64
	         ", recovery %" PRIu64 " ms%s",
	         r->cfg->ring.path, st.records, st.used_bytes, st.data_bytes,
	         st.next_seq, st.recovery_us / 1000,
	         st.recovered_lost ? " (some records were damaged)" : "");
	if (seen_open(r->cfg->state_dir, 0, &r->seen, err, sizeof(err)) != 0) {
		log_err("%s", err);
		return -1;
	}
	return 0;
}

static int start(struct run *r)
{
	r->sig_rfd = -1;
	if (load_config(r) != 0)
		return -1;
	r->loop = loop_new(clock_system());
	if (r->loop == NULL || signals_init(r) != 0) {
		log_err("run: start: %s", strerror(errno));
		return -1;
	}
	loop_timer_init(&r->stop_timer, on_stop_timer, r);
	loop_timer_init(&r->recover_timer, on_recover, r);
	if (open_ring(r) != 0)
		return -1;
	r->ing = ingest_new(r->cfg, r->ring, r->seen, loop_clock(r->loop));
	if (r->ing == NULL)
		return -1;
	ingest_set_listener(r->ing, on_commit, r);
	if (apply(r, r->cfg) != 0)
		return -1;
	log_info("run: started: %zu inputs, %zu outputs%s", r->cfg->n_inputs,
	         r->cfg->n_outputs, r->once ? " (--once)" : "");
	return 0;
}

static int finish(struct run *r)
{
	const struct ingest_stats *st = r->ing ? ingest_stats(r->ing) : NULL;

	free_inputs(r);
	monitor_free(r->mon, true);
	r->mon = NULL;
	free_outputs(r);
	if (st != NULL)
		log_info("run: stopped: %" PRIu64 " readings accepted, %" PRIu64
		         " duplicates, %" PRIu64 " refused, %" PRIu64 " bad "
		         "packets",
		         st->accepted, st->duplicates, st->refused,
		         st->unknown + st->bad_check + st->undecodable);
	ingest_free(r->ing);
	seen_close(r->seen);
	if (r->ring != NULL && ring_close(r->ring) != 0) {
		log_err("ring: close: %s: %s", r->cfg->ring.path,
		        strerror(errno));
		if (r->exit_code == CLI_EXIT_OK)
			r->exit_code = RUN_EXIT_RING_FAILED;
	}
	if (sig_wfd >= 0)
		close(sig_wfd);
	if (r->sig_rfd >= 0)
		close(r->sig_rfd);
	sig_wfd = -1;
	loop_free(r->loop);
	config_free(r->next_cfg);
	config_free(r->cfg);
	return r->exit_code;
}

static void set_logging(bool fg)
{
	if (fg) {
		log_set_prefix(log_under_service_manager());
		return;
	}
	log_set_sink(LOG_SINK_SYSLOG, "tidepost");
}

int cmd_run(int argc, char **argv)
{
	struct run *r = calloc(1, sizeof(*r));
	bool fg = false;
	int rc;

	if (r == NULL) {
		log_err("run: start: %s", strerror(errno));
		return CLI_EXIT_USAGE;
	}
	rc = parse_args(r, &fg, argc, argv);
	if (rc >= 0) {
		free(r);
		return rc;
	}
	/* Start-up problems always reach stderr; without --foreground the
	 * running daemon then logs to syslog. */
	if (fg)
		set_logging(fg);
	r->sig_rfd = -1;
	if (start(r) != 0) {
		r->exit_code = CLI_EXIT_USAGE;
		r->done = true;
	} else if (!fg) {
		set_logging(fg);
	}
	while (!r->done)
		run_turn(r);
	rc = finish(r);
	free(r);
	log_set_sink(LOG_SINK_STDERR, NULL);
	return rc;
}
