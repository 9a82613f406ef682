/*
 * main.c - `tidepost COMMAND [OPTIONS]`: find the command in the table and
 * run it.  `tidepost --help` lists the commands, `tidepost help COMMAND`
 * (or `tidepost COMMAND --help`) prints a command's full usage,
 * `tidepost --version` the version.  Exit status: see cli.h.
 */
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "cli_run.h"
#include "cli_report.h"
#include "log.h"

struct command {
	const char *name;
	int (*run)(int argc, char **argv); /* NULL: not built yet */
	const char *summary;               /* one line for --help */
	const char *usage;                 /* full text for help NAME */
};

static const struct command commands[] = {
    {"run", cmd_run, "the daemon: inputs -> ring file -> outputs, alerts",
     cmd_run_usage},
    {"decode", cmd_decode,
     "archived packets -> readings (NDJSON or CSV) on stdout",
     cmd_decode_usage},
    {"encode", cmd_encode,
     "readings (CSV) -> framed packets of a layout on stdout",
     cmd_encode_usage},
    {"replay", cmd_replay, "put archived packets into the ring for delivery",
     cmd_replay_usage},
    {"status", cmd_status,
     "what the running daemon knows: stations, outputs, alerts",
     cmd_status_usage},
    {"ring", cmd_ring, "inspect or verify the ring file", cmd_ring_usage},
    {"check", cmd_check, "validate a config and its layouts", cmd_check_usage},
    {"report", cmd_report,
     "readings -> an HTML page (time series, summary) or CSV summary",
     cmd_report_usage},
};

#define N_COMMANDS (sizeof(commands) / sizeof(commands[0]))

static const struct command *find(const char *name)
{
	size_t i;

	for (i = 0; i < N_COMMANDS; i++) {
		if (strcmp(commands[i].name, name) == 0)
			return &commands[i];
	}
	return NULL;
}

static void list(FILE *fp)
{
	size_t i;

	fputs("usage: tidepost COMMAND [OPTIONS]\n"
	      "\n"
	      "Readings from coastal water-quality stations: decode their\n"
	      "binary packets and deliver them.\n"
	      "\n"
	      "commands:\n",
	      fp);
	for (i = 0; i < N_COMMANDS; i++)
		fprintf(fp, "  %-8s %s%s\n", commands[i].name,
		        commands[i].summary,
		        commands[i].run == NULL ? " (not built yet)" : "");
	fputs("\n"
	      "  tidepost help COMMAND   full usage of a command\n"
	      "  tidepost --version      the version\n",
	      fp);
}

static int help(int argc, char **argv)
{
	const struct command *c;

	if (argc < 3) {
		list(stdout);
		return CLI_EXIT_OK;
	}
	c = find(argv[2]);
	if (c == NULL) {
		log_err("tidepost: help: unknown command '%s'; see 'tidepost "
		        "--help'",
		        argv[2]);
		return CLI_EXIT_USAGE;
	}
	fputs(c->usage, stdout);
	if (c->run == NULL)
		printf("\n%s is not built yet.\n", c->name);
	return CLI_EXIT_OK;
}

int main(int argc, char **argv)
{
	const struct command *c;
	const char *name = argc > 1 ? argv[1] : NULL;

	if (name == NULL) {
		list(stderr);
		return CLI_EXIT_USAGE;
	}
	if (strcmp(name, "--help") == 0 || strcmp(name, "-h") == 0 ||
	    strcmp(name, "help") == 0)
		return help(argc, argv);
	if (strcmp(name, "--version") == 0 || strcmp(name, "-V") == 0) {
		printf("tidepost %s\n", TP_VERSION);
		return CLI_EXIT_OK;
	}
	c = find(name);
	if (c == NULL) {
		log_err("tidepost: unknown %s '%s'; see 'tidepost --help'",
		        name[0] == '-' ? "option" : "command", name);
		return CLI_EXIT_USAGE;
	}
	if (c->run == NULL) {
		log_err("tidepost: %s: not built yet", c->name);
		return CLI_EXIT_USAGE;
	}
	return c->run(argc - 1, argv + 1);
}
