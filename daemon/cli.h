/*
 * cli.h - the `tidepost` command line: entry points of the commands, the
 * usage texts, and the few helpers every command shares (option errors,
 * loading the config or layout files named by -c / -l).
 *
 * Each command is `int cmd_X(int argc, char **argv)` with argv[0] the
 * command name; it parses its own options with getopt_long (opterr off,
 * messages of our own) and returns the process exit status:
 *   0  done (decode: at least one valid packet)
 *   1  the input or config had problems (decode: no valid packet;
 *      encode: a bad row; check: the config has problems)
 *   2  usage error, a config that does not load, or an I/O error
 * Messages go to stderr through log.h; results to stdout.
 *
 * main.c holds the table of commands; cmd_*.c hold the commands.
 */
#ifndef TIDEPOST_CLI_H
#define TIDEPOST_CLI_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "config.h"

#ifndef TP_VERSION
#define TP_VERSION "0.0.0"
#endif

#define CLI_EXIT_OK    0
#define CLI_EXIT_FAIL  1
#define CLI_EXIT_USAGE 2

#define CLI_MAX_LAYOUT_FILES 64

/* Values of long-only options (getopt_long `val`), above any char. */
enum cli_opt {
	CLI_OPT_FRAMING = 256,
	CLI_OPT_FORMAT,
	CLI_OPT_RECEIVED,
	CLI_OPT_LAYOUT,
	CLI_OPT_HELP
};

/* Where the layouts come from: -c CONFIG, or -l LAYOUT (repeatable). */
struct cli_source {
	const char *config;
	const char *layouts[CLI_MAX_LAYOUT_FILES];
	size_t n_layouts;
};

/* Record one -l path; logs and returns -1 past CLI_MAX_LAYOUT_FILES. */
int cli_source_add(struct cli_source *s, const char *cmd, const char *path)
    __attribute__((warn_unused_result));

/* Load what s names (exactly one of -c / -l), print every problem.
 * Returns 0 and *out (free with config_free), or -1 (exit 2). */
int cli_source_load(const struct cli_source *s, const char *cmd,
                    struct config **out) __attribute__((warn_unused_result));

/* Print every message of errs to stderr, then free them. */
void cli_print_errors(struct cfg_errors *errs);

/* After getopt_long returned '?' or ':': say which option and how to get
 * help.  Returns CLI_EXIT_USAGE. */
int cli_bad_option(const char *cmd, int c, char **argv);

/* Does the file name end in .sbd or .bin (a message file: `whole`
 * framing by default)?  Case-insensitive. */
bool cli_is_message_file(const char *name);

/* Parse a Unix-seconds integer or an RFC 3339 time.  0, or -1. */
int cli_parse_time(const char *s, int64_t *out)
    __attribute__((warn_unused_result));

int cmd_decode(int argc, char **argv);
int cmd_encode(int argc, char **argv);
int cmd_check(int argc, char **argv);
int cmd_status(int argc, char **argv);

extern const char cmd_decode_usage[];
extern const char cmd_encode_usage[];
extern const char cmd_check_usage[];
extern const char cmd_status_usage[];

/* Parse a decimal integer that must fill s ("" and "12x" are errors).
 * 0, or -1. */
int cli_parse_int(const char *s, long long min, long long max, long long *out)
    __attribute__((warn_unused_result));

#endif
