/*
 * cmd_status.c - `tidepost status -c CONFIG [--json]`: what the daemon
 * last wrote in its status file (status.h), read without a socket, and
 * whether that daemon is still running.
 *
 * The verdict, from the file and /proc:
 *   absent      no status file: the daemon never ran with this config
 *   unreadable  the file is not a status file (message says why)
 *   stopped     the daemon wrote its last file when it stopped
 *   dead        the file's pid is gone: the daemon died (crash, kill -9)
 *   replaced    the pid lives but is not that daemon (its argv[0] is not
 *               tidepost, or its start time in /proc/PID/stat differs)
 *   stale       the daemon runs but the file is older than
 *               max(3 x every_s, 30 s): it is stuck
 *   running     all is well
 * Exit status: 0 running, 1 any other verdict, 2 usage or config error.
 */
#include <errno.h>
#include <fcntl.h>
#include <getopt.h>
#include <inttypes.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "fdio.h"
#include "cli.h"
#include "emit.h"
#include "log.h"
#include "status.h"

const char cmd_status_usage[] =
    "usage: tidepost status -c CONFIG [--json]\n"
    "\n"
    "Show what the daemon running with CONFIG knows: per station the\n"
    "last reading, its age, values and flags, the battery and its trend;\n"
    "per output the backlog, last success and last error; open alerts.\n"
    "Read from the status file the daemon rewrites every few seconds\n"
    "(status.path); says so when the daemon is not running or the file\n"
    "is stale.\n"
    "\n"
    "  -c, --config CONFIG   the daemon's config file\n"
    "      --json            one JSON object for scripts\n"
    "  -h, --help            this text\n"
    "\n"
    "Exit status: 0 the daemon is running, 1 it is not (or the status\n"
    "is stale or unreadable), 2 usage or config error.\n";

enum verdict {
	V_ABSENT,
	V_UNREADABLE,
	V_STOPPED,
	V_DEAD,
	V_REPLACED,
	V_STALE,
	V_RUNNING
};

static const char *const verdicts[] = {
    "absent", "unreadable", "stopped", "dead", "replaced", "stale", "running"};

struct look {
	const char *path;
	enum verdict v;
	char why[300];
	cJSON *doc; /* the file, or NULL */
	int64_t now_s, age_s;
};

/* ---- reading and judging -----------------------------------------------
 */

static double num(const cJSON *o, const char *k)
{
	const cJSON *n = cJSON_GetObjectItemCaseSensitive(o, k);

	return cJSON_IsNumber(n) ? n->valuedouble : NAN;
}

static const char *str(const cJSON *o, const char *k)
{
	const cJSON *n = cJSON_GetObjectItemCaseSensitive(o, k);

	return cJSON_IsString(n) ? n->valuestring : NULL;
}

/* Is /proc/PID/cmdline's argv[0] named tidepost? */
static int is_tidepost(int pid)
{
	char path[64], cmd[4096];
	const char *base;
	ssize_t n;
	int fd;

	snprintf(path, sizeof(path), "/proc/%d/cmdline", pid);
	fd = open(path, O_RDONLY | O_CLOEXEC);
	if (fd < 0)
		return 0;
	n = read(fd, cmd, sizeof(cmd) - 1);
	close(fd);
	if (n <= 0)
		return 0;
	cmd[n] = '\0';
	base = strrchr(cmd, '/');
	base = base != NULL ? base + 1 : cmd;
	return strcmp(base, "tidepost") == 0;
}

static void judge_pid(struct look *lk)
{
	double pid = num(lk->doc, "pid"), start = num(lk->doc, "proc_start");
	double every = num(lk->doc, "every_s"), lim;

	if (!(pid > 0 && pid < 4194305)) {
		lk->v = V_UNREADABLE;
		snprintf(lk->why, sizeof(lk->why), "it names no pid");
		return;
	}
	if (kill((pid_t)pid, 0) != 0 && errno == ESRCH) {
		lk->v = V_DEAD;
		snprintf(lk->why, sizeof(lk->why),
		         "pid %.0f is gone: the "
		         "daemon ended without a clean stop",
		         pid);
		return;
	}
	if (!is_tidepost((int)pid) ||
	    (start > 0 && (double)status_proc_start((int)pid) != start)) {
		lk->v = V_REPLACED;
		snprintf(lk->why, sizeof(lk->why),
		         "pid %.0f is now another "
		         "program: the daemon ended",
		         pid);
		return;
	}
	lim = isfinite(every) && every * 3 > 30 ? every * 3 : 30;
	lk->v = lk->age_s > lim ? V_STALE : V_RUNNING;
	if (lk->v == V_STALE)
		snprintf(lk->why, sizeof(lk->why),
		         "pid %.0f runs but wrote "
		         "nothing for %" PRId64 " s (every %.0f s expected)",
		         pid, lk->age_s, every);
}

static void judge(struct look *lk)
{
	const char *state;
	size_t len = 0;
	char *text = fdio_slurp(lk->path, 0, STATUS_MAX, &len);

	if (text == NULL) {
		lk->v = errno == ENOENT ? V_ABSENT : V_UNREADABLE;
		snprintf(lk->why, sizeof(lk->why), "%s",
		         errno == ENOENT
		             ? "no status file: the daemon has not run with "
		               "this config"
		             : strerror(errno));
		return;
	}
	lk->doc = cJSON_ParseWithLength(text, len);
	free(text);
	if (!cJSON_IsObject(lk->doc) ||
	    num(lk->doc, "tidepost_status") != STATUS_FORMAT) {
		lk->v = V_UNREADABLE;
		snprintf(lk->why, sizeof(lk->why),
		         "not a status file of "
		         "format %d",
		         STATUS_FORMAT);
		return;
	}
	lk->age_s = lk->now_s - (int64_t)num(lk->doc, "written_s");
	state = str(lk->doc, "state");
	if (state != NULL && strcmp(state, "stopped") == 0) {
		lk->v = V_STOPPED;
		snprintf(lk->why, sizeof(lk->why), "the daemon stopped at %s",
		         str(lk->doc, "written") ? str(lk->doc, "written")
		                                 : "?");
		return;
	}
	judge_pid(lk);
}

/* ---- the table ---------------------------------------------------------
 */

static void age(char *out, size_t cap, double s)
{
	if (!isfinite(s))
		snprintf(out, cap, "-");
	else if (s < 120)
		snprintf(out, cap, "%.0fs", s);
	else if (s < 7200)
		snprintf(out, cap, "%.0fm", floor(s / 60));
	else if (s < 172800)
		snprintf(out, cap, "%.0fh%02.0fm", floor(s / 3600),
		         fmod(floor(s / 60), 60));
	else
		snprintf(out, cap, "%.0fd%02.0fh", floor(s / 86400),
		         fmod(floor(s / 3600), 24));
}

static const char *or_dash(const char *s)
{
	return s != NULL ? s : "-";
}

static void print_values(const cJSON *st)
{
	const cJSON *vals = cJSON_GetObjectItemCaseSensitive(st, "values");
	const cJSON *flags = cJSON_GetObjectItemCaseSensitive(st, "flags");
	const cJSON *m;
	int n = 0;

	cJSON_ArrayForEach(m, vals)
	{
		double f = num(flags, m->string);

		printf("%s %s", n++ == 0 ? "    values:" : " ", m->string);
		if (cJSON_IsNumber(m))
			printf("=%.6g", m->valuedouble);
		else
			printf("=null");
		if (isfinite(f))
			printf(" [%.0f]", f);
	}
	if (n > 0)
		printf("\n");
}

static void print_battery(const cJSON *st)
{
	const cJSON *b = cJSON_GetObjectItemCaseSensitive(st, "battery");
	double now, rate;

	if (!cJSON_IsObject(b)) {
		printf("%-9s %-14s %s", "-", "-", "-");
		return;
	}
	now = num(b, "now_v");
	rate = num(b, "rate_v_per_day");
	if (isfinite(now))
		printf("%-9.2f ", now);
	else
		printf("%-9s ", "-");
	if (isfinite(rate))
		printf("%+-14.3f ", rate);
	else
		printf("%-14s ", or_dash(str(b, "trend")));
	printf("%s", or_dash(str(b, "cutoff_at")));
}

static void print_stations(const struct look *lk)
{
	const cJSON *list =
	    cJSON_GetObjectItemCaseSensitive(lk->doc, "stations");
	const cJSON *st;
	char a[32];
	double rs;

	printf("\n%-12s %-21s %-8s %-9s %-14s %s\n", "STATION", "LAST READING",
	       "AGE", "BATTERY V", "TREND V/DAY", "CUTOFF AT");
	cJSON_ArrayForEach(st, list)
	{
		rs = num(st, "last_received_s");
		age(a, sizeof(a), (double)lk->now_s - rs);
		printf("%-12s %-21s %-8s ", or_dash(str(st, "name")),
		       or_dash(str(st, "last_time")), a);
		print_battery(st);
		printf("\n");
		print_values(st);
	}
}

static void print_outputs(const struct look *lk)
{
	const cJSON *list =
	    cJSON_GetObjectItemCaseSensitive(lk->doc, "outputs");
	const cJSON *o;
	double b;

	printf("\n%-12s %-6s %-9s %-9s %-21s %s\n", "OUTPUT", "KIND", "STATE",
	       "BACKLOG", "LAST SUCCESS", "LAST ERROR");
	cJSON_ArrayForEach(o, list)
	{
		b = num(o, "backlog");
		printf("%-12s %-6s %-9s %-9.0f %-21s %s\n",
		       or_dash(str(o, "name")), or_dash(str(o, "kind")),
		       or_dash(str(o, "state")), isfinite(b) ? b : 0,
		       or_dash(str(o, "last_success")),
		       or_dash(str(o, "last_error")));
	}
}

static void print_ring(const struct look *lk)
{
	const cJSON *r = cJSON_GetObjectItemCaseSensitive(lk->doc, "ring");
	const cJSON *f;

	if (!cJSON_IsObject(r))
		return;
	f = cJSON_GetObjectItemCaseSensitive(r, "failed");
	printf("\nring: %.0f%% used, %.0f readings, %.0f refused%s\n",
	       num(r, "used_share") * 100, num(r, "records"), num(r, "refused"),
	       cJSON_IsTrue(f) ? ", FAILED" : "");
}

static void print_alerts(const struct look *lk)
{
	const cJSON *list = cJSON_GetObjectItemCaseSensitive(lk->doc, "alerts");
	const cJSON *al;
	int n = cJSON_GetArraySize(list);

	printf("\nalerts: %d open\n", n);
	cJSON_ArrayForEach(al, list)
	{
		printf("  %-8s %-16s since %s  %s\n",
		       or_dash(str(al, "severity")),
		       or_dash(str(al, "condition")), or_dash(str(al, "since")),
		       or_dash(str(al, "message")));
	}
}

static void print_text(const struct look *lk)
{
	printf("tidepost: %s", verdicts[lk->v]);
	if (lk->doc != NULL && num(lk->doc, "pid") > 0)
		printf(" (pid %.0f, started %s; status written %" PRId64
		       " s ago)",
		       num(lk->doc, "pid"), or_dash(str(lk->doc, "started")),
		       lk->age_s);
	printf("\n");
	if (lk->v != V_RUNNING)
		printf("tidepost: %s: %s%s\n", lk->path, lk->why,
		       lk->doc != NULL ? "; the figures below are its last"
		                       : "");
	if (lk->doc == NULL || lk->v == V_UNREADABLE)
		return;
	print_stations(lk);
	print_outputs(lk);
	print_ring(lk);
	print_alerts(lk);
}

static int print_json(struct look *lk)
{
	cJSON *o = cJSON_CreateObject();
	char *text;

	cJSON_AddBoolToObject(o, "running", lk->v == V_RUNNING);
	cJSON_AddStringToObject(o, "verdict", verdicts[lk->v]);
	cJSON_AddStringToObject(o, "why", lk->why);
	cJSON_AddStringToObject(o, "status_path", lk->path);
	if (lk->doc != NULL && lk->v != V_UNREADABLE) {
		cJSON_AddNumberToObject(o, "age_s", (double)lk->age_s);
		cJSON_AddItemToObject(o, "status", lk->doc);
		lk->doc = NULL;
	} else {
		cJSON_AddNullToObject(o, "status");
	}
	text = cJSON_PrintUnformatted(o);
	cJSON_Delete(o);
	if (text == NULL) {
		log_err("status: --json: %s", strerror(ENOMEM));
		return -1;
	}
	printf("%s\n", text);
	free(text);
	return 0;
}

/* ---- the command -------------------------------------------------------
 */

static int parse(int argc, char **argv, const char **cfg, bool *json)
{
	static const struct option longs[] = {
	    {"config", required_argument, NULL, 'c'},
	    {"json", no_argument, NULL, 'j'},
	    {"help", no_argument, NULL, 'h'},
	    {NULL, 0, NULL, 0},
	};
	int c;

	opterr = 0;
	while ((c = getopt_long(argc, argv, ":c:h", longs, NULL)) != -1) {
		if (c == 'c') {
			*cfg = optarg;
		} else if (c == 'j') {
			*json = true;
		} else if (c == 'h') {
			fputs(cmd_status_usage, stdout);
			return CLI_EXIT_OK;
		} else {
			return cli_bad_option("status", c, argv);
		}
	}
	if (optind < argc || *cfg == NULL) {
		log_err("status: %s; see 'tidepost help status'",
		        *cfg == NULL ? "no config: give -c CONFIG"
		                     : "unexpected argument");
		return CLI_EXIT_USAGE;
	}
	return -1;
}

int cmd_status(int argc, char **argv)
{
	struct cli_source src;
	struct config *cfg = NULL;
	struct look lk;
	bool json = false;
	int rc;

	memset(&src, 0, sizeof(src));
	rc = parse(argc, argv, &src.config, &json);
	if (rc >= 0)
		return rc;
	if (cli_source_load(&src, "status", &cfg) != 0)
		return CLI_EXIT_USAGE;
	memset(&lk, 0, sizeof(lk));
	lk.path = cfg->status.path;
	lk.now_s = (int64_t)time(NULL);
	judge(&lk);
	rc = 0;
	if (json)
		rc = print_json(&lk) != 0 ? CLI_EXIT_USAGE : 0;
	else
		print_text(&lk);
	if (rc == 0)
		rc = lk.v == V_RUNNING ? CLI_EXIT_OK : CLI_EXIT_FAIL;
	fflush(stdout);
	cJSON_Delete(lk.doc);
	config_free(cfg);
	return rc;
}
