/*
 * cmd_report.c - `tidepost report`: readings over a time range -> one
 * self-contained HTML page (a summary table, one SVG time series per
 * value, pH against oxygen, the battery forecast) or a CSV summary.
 *
 * Memory is bounded whatever the input size (report.h, series.h): the
 * inputs are streamed.  Without both --from and --to a first pass over
 * the inputs finds the time range of the readings that pass the filters
 * (the pixel columns need it before any reading is kept), then a second
 * pass builds the report; with both, one pass.
 *
 * Choices (the README states them):
 * - inputs: --ring (the config's ring file), or files: with --readings
 *   every file is NDJSON readings; without it files named *.ndjson or
 *   *.jsonl are readings and every other file holds packets (which need
 *   -c CONFIG or -l LAYOUT).  --ring and files cannot be combined.
 * - the range [--from, --to] is inclusive; a range shorter than a minute
 *   is widened to one hour around it so the time axis has room.
 * - -o FILE is written to FILE.tmp and renamed over FILE only when
 *   complete; default stdout.
 * - progress (progress.h) on stderr when it is a terminal.
 */
#include <errno.h>
#include <getopt.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "cli.h"
#include "cli_report.h"
#include "log.h"
#include "progress.h"
#include "report.h"
#include "reportin.h"
#include "reportout.h"
#include "svg.h"

#define OPT_FROM     400
#define OPT_TO       401
#define OPT_STATION  402
#define OPT_RING     403
#define OPT_READINGS 404
#define OPT_FRAMING  405
#define OPT_FORMAT   406
#define PATH_TMP_MAX 4096

const char cmd_report_usage[] =
    "usage: tidepost report [-c CONFIG | -l LAYOUT ...] [--from TIME]\n"
    "                       [--to TIME] [--station NAME]\n"
    "                       [--format html|csv] [-o FILE] [--framing F]\n"
    "                       [--ring | --readings FILE... | PACKETS...]\n"
    "\n"
    "Make a report of the readings over a time range: one HTML page that\n"
    "needs no network (a summary table per station, one time series per\n"
    "value with flagged points marked and gaps left open, pH against\n"
    "oxygen with Pearson's r, the battery trend and the time it is\n"
    "forecast to reach its cutoff), or with --format csv a summary table.\n"
    "\n"
    "  -c, --config CONFIG   layouts, station names, units, battery cutoff\n"
    "  -l, --layout-file L   a layout file (packets without a config)\n"
    "  --from TIME, --to TIME  the range (RFC 3339 or Unix seconds,\n"
    "                        inclusive); default the span of the data\n"
    "  --station NAME        only this station\n"
    "  --format F            html (default) or csv\n"
    "  -o, --output FILE     write here (default stdout)\n"
    "  --ring                read the ring file of the config, without\n"
    "                        changing it (safe while the daemon runs; it\n"
    "                        holds the backlog, not the whole history)\n"
    "  --readings            the files are NDJSON readings (the file\n"
    "                        output, or 'tidepost decode' output); files\n"
    "                        named *.ndjson or *.jsonl always are\n"
    "  --framing F           framing of packet files (as for decode)\n"
    "  -h, --help            this text\n"
    "\n"
    "Exit status: 0 written, 1 no reading to report, 2 usage, config or\n"
    "I/O error.\n";

struct report_opts {
	struct cli_source src;
	bool has_from, has_to, csv, ring, readings, has_framing;
	int64_t from, to;
	const char *station, *output;
	enum tp_framing framing;
	size_t fixed_n;
	char **files;
	int n_files;
};

static int opt_value(struct report_opts *o, int c, const char *arg)
{
	if (c == OPT_FROM || c == OPT_TO) {
		if (cli_parse_time(arg, c == OPT_FROM ? &o->from : &o->to) ==
		    0) {
			*(c == OPT_FROM ? &o->has_from : &o->has_to) = true;
			return 0;
		}
		log_err("report: --%s %s: not a time; give RFC 3339 "
		        "(2026-11-30T06:15:00Z) or Unix seconds",
		        c == OPT_FROM ? "from" : "to", arg);
	} else if (c == OPT_FORMAT) {
		o->csv = strcmp(arg, "csv") == 0;
		if (o->csv || strcmp(arg, "html") == 0)
			return 0;
		log_err("report: --format %s: valid: html, csv", arg);
	} else if (c == OPT_FRAMING) {
		o->has_framing = true;
		if (tp_framing_parse(arg, &o->framing, &o->fixed_n) == TP_OK &&
		    (o->framing != TP_FRAMING_FIXED ||
		     o->fixed_n <= TP_MAX_PACKET))
			return 0;
		log_err("report: --framing %s: not a framing; valid: cobs, "
		        "slip, hex, whole, fixed:N",
		        arg);
	}
	return -1;
}

static int opt_one(struct report_opts *o, int c, char **argv)
{
	switch (c) {
	case 'c':
		o->src.config = optarg;
		return -1;
	case 'l':
		return cli_source_add(&o->src, "report", optarg) < 0
		           ? CLI_EXIT_USAGE
		           : -1;
	case 'o':
		o->output = optarg;
		return -1;
	case 'h':
		fputs(cmd_report_usage, stdout);
		return CLI_EXIT_OK;
	case OPT_STATION:
		o->station = optarg;
		return -1;
	case OPT_RING:
		o->ring = true;
		return -1;
	case OPT_READINGS:
		o->readings = true;
		return -1;
	case OPT_FROM:
	case OPT_TO:
	case OPT_FORMAT:
	case OPT_FRAMING:
		return opt_value(o, c, optarg) < 0 ? CLI_EXIT_USAGE : -1;
	default:
		return cli_bad_option("report", c, argv);
	}
}

/* Parse options; -1 to go on, else an exit status. */
static int parse(struct report_opts *o, int argc, char **argv)
{
	static const struct option opts[] = {
	    {"config", required_argument, NULL, 'c'},
	    {"layout-file", required_argument, NULL, 'l'},
	    {"output", required_argument, NULL, 'o'},
	    {"from", required_argument, NULL, OPT_FROM},
	    {"to", required_argument, NULL, OPT_TO},
	    {"station", required_argument, NULL, OPT_STATION},
	    {"format", required_argument, NULL, OPT_FORMAT},
	    {"framing", required_argument, NULL, OPT_FRAMING},
	    {"ring", no_argument, NULL, OPT_RING},
	    {"readings", no_argument, NULL, OPT_READINGS},
	    {"help", no_argument, NULL, 'h'},
	    {NULL, 0, NULL, 0}};
	int c, rc;

	opterr = 0;
	for (;;) {
		c = getopt_long(argc, argv, ":c:l:o:h", opts, NULL);
		if (c == -1)
			break;
		rc = opt_one(o, c, argv);
		if (rc >= 0)
			return rc;
	}
	o->files = argv + optind;
	o->n_files = argc - optind;
	return -1;
}

static bool is_readings(const struct report_opts *o, const char *path)
{
	size_t n = strlen(path);

	return o->readings || (n > 7 && strcmp(path + n - 7, ".ndjson") == 0) ||
	       (n > 6 && strcmp(path + n - 6, ".jsonl") == 0);
}

/* The inputs make sense together; loads the config when one is named. */
static int check_inputs(const struct report_opts *o, struct config **cfg)
{
	bool packets = false;
	int i;

	for (i = 0; i < o->n_files; i++)
		packets = packets || !is_readings(o, o->files[i]);
	if (o->ring == (o->n_files > 0)) {
		log_err("report: give --ring or input files (one of them); "
		        "see 'tidepost help report'");
		return -1;
	}
	if (o->has_from && o->has_to && o->to < o->from) {
		log_err("report: --to is before --from");
		return -1;
	}
	if ((packets || o->ring || o->src.config != NULL ||
	     o->src.n_layouts > 0) &&
	    cli_source_load(&o->src, "report", cfg) < 0)
		return -1;
	if (o->ring && o->src.config == NULL) {
		log_err("report: --ring needs -c CONFIG (it names the ring)");
		return -1;
	}
	return 0;
}

static uint64_t input_bytes(const struct report_opts *o)
{
	struct stat sb;
	uint64_t n = 0;
	int i;

	for (i = 0; i < o->n_files; i++) {
		if (stat(o->files[i], &sb) == 0)
			n += (uint64_t)sb.st_size;
	}
	return n;
}

/* One pass over every input.  0, or -1 if some input was unreadable. */
static int one_pass(const struct report_opts *o, const struct config *cfg,
                    struct report *r, struct reportin_scan *scan,
                    const char *label, struct reportin_counts *counts)
{
	struct progress pg;
	struct reportin *in;
	int i, rc = 0;

	progress_start(&pg, label, o->ring ? "records" : "bytes",
	               o->ring ? 0 : input_bytes(o));
	in = reportin_new(cfg, r, scan, &pg, o->has_framing, o->framing,
	                  o->fixed_n);
	if (in == NULL) {
		log_err("report: start: %s", strerror(ENOMEM));
		return -1;
	}
	if (o->ring && reportin_ring(in, cfg->ring.path) < 0)
		rc = -1;
	for (i = 0; i < o->n_files; i++) {
		if ((is_readings(o, o->files[i])
		         ? reportin_readings(in, o->files[i])
		         : reportin_packets(in, o->files[i])) < 0)
			rc = -1;
	}
	progress_end(&pg);
	if (counts != NULL)
		*counts = *reportin_counts(in);
	reportin_free(in);
	return rc;
}

/* The range: given, or found by a first pass.  0, 1 (no readings), -1. */
static int find_range(const struct report_opts *o, const struct config *cfg,
                      int64_t *t0, int64_t *t1)
{
	struct reportin_scan scan;

	memset(&scan, 0, sizeof(scan));
	scan = (struct reportin_scan){
	    o->station, o->has_from, o->has_to, o->from, o->to, false, 0, 0, 0};
	if (!(o->has_from && o->has_to)) {
		if (one_pass(o, cfg, NULL, &scan, "report: pass 1 of 2 (range)",
		             NULL) < 0 &&
		    !scan.any)
			return -1;
		if (!scan.any)
			return 1;
	}
	*t0 = o->has_from ? o->from : scan.tmin;
	*t1 = o->has_to ? o->to : scan.tmax;
	if (*t1 - *t0 < 60) {
		*t0 -= 1800;
		*t1 += 1800;
	}
	if (*t1 - *t0 > SERIES_SPAN_MAX) {
		log_err("report: the range is longer than %lld years; give "
		        "--from and --to",
		        SERIES_SPAN_MAX / 31556952LL);
		return -1;
	}
	return 0;
}

static const char *describe(const struct report_opts *o, char *tmp, size_t cap,
                            const struct config *cfg)
{
	if (o->ring)
		snprintf(tmp, cap, "the ring %s", cfg->ring.path);
	else if (o->n_files == 1)
		snprintf(tmp, cap, "%s", o->files[0]);
	else
		snprintf(tmp, cap, "%d files", o->n_files);
	return tmp;
}

static int write_out(FILE *fp, const struct report_opts *o,
                     const struct report *r, const struct reportout_info *info)
{
	int rc = o->csv ? reportout_csv(fp, r) : reportout_html(fp, r, info);

	if (fflush(fp) != 0)
		rc = -1;
	return rc;
}

/* Write the report to -o FILE (via FILE.tmp and rename) or stdout. */
static int emit(const struct report_opts *o, const struct report *r,
                const struct reportout_info *info)
{
	char tmp[PATH_TMP_MAX];
	FILE *fp;
	int rc;

	if (o->output == NULL) {
		rc = write_out(stdout, o, r, info);
		if (rc < 0)
			log_err("report: write: stdout: %s", strerror(errno));
		return rc;
	}
	if ((size_t)snprintf(tmp, sizeof(tmp), "%s.tmp", o->output) >=
	    sizeof(tmp)) {
		log_err("report: %s: path too long", o->output);
		return -1;
	}
	fp = fopen(tmp, "we");
	if (fp == NULL) {
		log_err("report: open: %s: %s", tmp, strerror(errno));
		return -1;
	}
	rc = write_out(fp, o, r, info);
	if (fclose(fp) != 0 || rc < 0 || rename(tmp, o->output) != 0) {
		log_err("report: write: %s: %s", o->output, strerror(errno));
		unlink(tmp);
		return -1;
	}
	return 0;
}

static void summary_line(const struct report *r,
                         const struct reportin_counts *c)
{
	log_info("report: %" PRIu64 " readings of %zu %s, %zu series; %" PRIu64
	         " duplicates, %" PRIu64 " outside the range, %" PRIu64
	         " of other stations, %" PRIu64 " bad lines, %" PRIu64
	         " bad frames, %" PRIu64 " over the caps",
	         r->counts.readings, r->n_st,
	         r->n_st == 1 ? "station" : "stations", r->n_series,
	         r->counts.duplicates, r->counts.outside, r->counts.other,
	         c->bad_lines, c->bad_frames, r->counts.refused);
}

/* Build the report over [t0, t1] and write it; the exit status. */
static int build(const struct report_opts *o, const struct config *cfg,
                 int64_t t0, int64_t t1)
{
	struct reportout_info info;
	struct reportin_counts counts;
	char what[512];
	struct report *r = calloc(1, sizeof(*r));
	int rc = CLI_EXIT_OK, pass;

	if (r == NULL ||
	    report_init(r, cfg, t0, t1, SVG_PLOT_W, o->station) < 0) {
		log_err("report: start: %s", strerror(errno));
		free(r);
		return CLI_EXIT_USAGE;
	}
	pass = one_pass(o, cfg, r, NULL,
	                o->has_from && o->has_to ? "report"
	                                         : "report: pass 2 of 2",
	                &counts);
	summary_line(r, &counts);
	info = (struct reportout_info){describe(o, what, sizeof(what), cfg),
	                               o->has_from || o->has_to,
	                               (int64_t)time(NULL), &counts};
	if (r->counts.readings == 0) {
		log_err("report: no reading to report");
		rc = pass < 0 ? CLI_EXIT_USAGE : CLI_EXIT_FAIL;
	} else if (emit(o, r, &info) < 0 || pass < 0) {
		rc = CLI_EXIT_USAGE;
	}
	report_free(r);
	free(r);
	return rc;
}

int cmd_report(int argc, char **argv)
{
	struct report_opts o;
	struct config *cfg = NULL;
	int64_t t0 = 0, t1 = 0;
	int rc;

	memset(&o, 0, sizeof(o));
	rc = parse(&o, argc, argv);
	if (rc >= 0)
		return rc;
	if (check_inputs(&o, &cfg) < 0) {
		config_free(cfg);
		return CLI_EXIT_USAGE;
	}
	rc = find_range(&o, cfg, &t0, &t1);
	if (rc == 1)
		log_err("report: no reading to report%s%s",
		        o.station != NULL ? " for station " : "",
		        o.station != NULL ? o.station : "");
	if (rc == 0)
		rc = build(&o, cfg, t0, t1);
	else
		rc = rc == 1 ? CLI_EXIT_FAIL : CLI_EXIT_USAGE;
	config_free(cfg);
	return rc;
}
