/*
 * cmd_check.c - `tidepost check -c CONFIG`: load the config and its
 * layouts, print every problem (exit 1) or a one-line summary (exit 0).
 *
 * Also the helpers every command shares (cli.h): -c / -l loading with the
 * problems printed, option error messages, time and integer parsing.
 */
#include <errno.h>
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "cli.h"
#include "emit.h"
#include "log.h"

const char cmd_check_usage[] =
    "usage: tidepost check -c CONFIG\n"
    "\n"
    "Load CONFIG and every layout it names and report what is wrong.\n"
    "Every problem is printed with its place (file:line:column and the\n"
    "key path) and what would be valid; nothing is started.\n"
    "\n"
    "  -c, --config CONFIG   the config file to check\n"
    "  -h, --help            this text\n"
    "\n"
    "Exit status: 0 the config is valid (a summary is printed),\n"
    "1 it has problems, 2 usage error.\n";

int cli_source_add(struct cli_source *s, const char *cmd, const char *path)
{
	if (s->n_layouts >= CLI_MAX_LAYOUT_FILES) {
		log_err("%s: -l %s: too many layout files (at most %d)", cmd,
		        path, CLI_MAX_LAYOUT_FILES);
		return -1;
	}
	s->layouts[s->n_layouts++] = path;
	return 0;
}

void cli_print_errors(struct cfg_errors *errs)
{
	size_t i;

	for (i = 0; i < errs->n; i++)
		log_err("%s", errs->msg[i]);
	if (errs->dropped > 0)
		log_err("... and %zu more problem%s", errs->dropped,
		        errs->dropped == 1 ? "" : "s");
	cfg_errors_free(errs);
}

int cli_source_load(const struct cli_source *s, const char *cmd,
                    struct config **out)
{
	struct cfg_errors errs;
	int rc;

	*out = NULL;
	if (s->config != NULL && s->n_layouts > 0) {
		log_err("%s: -c and -l cannot be combined: give a config or "
		        "layout files",
		        cmd);
		return -1;
	}
	if (s->config == NULL && s->n_layouts == 0) {
		log_err("%s: no layouts: give -c CONFIG or -l LAYOUT.json; "
		        "see 'tidepost help %s'",
		        cmd, cmd);
		return -1;
	}
	memset(&errs, 0, sizeof(errs));
	if (s->config != NULL)
		rc = config_load(s->config, out, &errs);
	else
		rc = config_load_layouts(s->layouts, s->n_layouts, out, &errs);
	cli_print_errors(&errs);
	if (rc == 0 && (*out)->n_layouts == 0) {
		log_err("%s: %s: no layouts loaded", cmd,
		        s->config != NULL ? s->config : "-l");
		config_free(*out);
		*out = NULL;
		rc = -1;
	}
	return rc == 0 ? 0 : -1;
}

int cli_bad_option(const char *cmd, int c, char **argv)
{
	const char *what = argv[optind - 1];
	char shortopt[3] = {'-', (char)optopt, '\0'};

	if (optopt > 0 && optopt < 128)
		what = shortopt;
	if (c == ':')
		log_err("%s: option %s needs a value; see 'tidepost help %s'",
		        cmd, what, cmd);
	else
		log_err("%s: unknown option %s; see 'tidepost help %s'", cmd,
		        what, cmd);
	return CLI_EXIT_USAGE;
}

int cli_parse_int(const char *s, long long min, long long max, long long *out)
{
	char *end;
	long long v;

	if (s[0] == '\0' || s[0] == ' ' || s[0] == '\t')
		return -1;
	errno = 0;
	v = strtoll(s, &end, 10);
	if (errno != 0 || *end != '\0' || v < min || v > max)
		return -1;
	*out = v;
	return 0;
}

int cli_parse_time(const char *s, int64_t *out)
{
	long long v;

	if (cli_parse_int(s, EMIT_TIME_MIN, EMIT_TIME_MAX, &v) == 0) {
		*out = v;
		return 0;
	}
	return emit_parse_time(s, out);
}

static int check_parse(int argc, char **argv, const char **path)
{
	static const struct option opts[] = {
	    {"config", required_argument, NULL, 'c'},
	    {"help", no_argument, NULL, 'h'},
	    {NULL, 0, NULL, 0}};
	int c;

	opterr = 0;
	for (;;) {
		c = getopt_long(argc, argv, ":c:h", opts, NULL);
		if (c == -1)
			break;
		if (c == 'c') {
			*path = optarg;
		} else if (c == 'h') {
			fputs(cmd_check_usage, stdout);
			return CLI_EXIT_OK;
		} else {
			return cli_bad_option("check", c, argv);
		}
	}
	if (optind < argc) {
		log_err("check: unexpected argument '%s'; see 'tidepost help "
		        "check'",
		        argv[optind]);
		return CLI_EXIT_USAGE;
	}
	if (*path == NULL) {
		log_err("check: no config: give -c CONFIG");
		return CLI_EXIT_USAGE;
	}
	return -1;
}

static const char *plural(size_t n, const char *one, const char *many)
{
	return n == 1 ? one : many;
}

int cmd_check(int argc, char **argv)
{
	struct cfg_errors errs;
	struct config *cfg = NULL;
	const char *path = NULL;
	size_t n;
	int rc;

	rc = check_parse(argc, argv, &path);
	if (rc >= 0)
		return rc;
	memset(&errs, 0, sizeof(errs));
	rc = config_load(path, &cfg, &errs);
	if (rc != 0) {
		n = errs.n + errs.dropped;
		cli_print_errors(&errs);
		log_err("check: %s: %zu %s", path, n,
		        plural(n, "problem", "problems"));
		return CLI_EXIT_FAIL;
	}
	cli_print_errors(&errs);
	printf("check: %s: ok: %zu %s, %zu %s, %zu %s, %zu %s\n", path,
	       cfg->n_layouts, plural(cfg->n_layouts, "layout", "layouts"),
	       cfg->n_stations, plural(cfg->n_stations, "station", "stations"),
	       cfg->n_inputs, plural(cfg->n_inputs, "input", "inputs"),
	       cfg->n_outputs, plural(cfg->n_outputs, "output", "outputs"));
	config_free(cfg);
	return CLI_EXIT_OK;
}

bool cli_is_message_file(const char *name)
{
	size_t n = strlen(name);

	return n > 4 && (strcasecmp(name + n - 4, ".sbd") == 0 ||
	                 strcasecmp(name + n - 4, ".bin") == 0);
}
