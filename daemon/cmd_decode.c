/*
 * cmd_decode.c - `tidepost decode`: archived packets (message files or
 * captured streams) -> one reading per line on stdout, NDJSON or CSV, and
 * a summary on stderr.
 *
 * Memory stays constant however large the input: one 64 KiB read buffer,
 * one frame buffer of TP_MAX_PACKET bytes, one packet, one reading and one
 * output buffer (64 KiB of lines plus one capped line), all allocated once
 * in struct decode, plus the per-layout output plans (emit.h).
 *
 * Speed: lines are appended to the output buffer and written to stdout
 * with write(2) whenever 64 KiB have gathered, not one stdio call per
 * line; each line is still checked against DECODE_LINE_MAX on its own.
 *
 * Choices (the README states them):
 * - framing: --framing, else `whole` for files named *.sbd or *.bin
 *   (message files; any letter case), else `cobs` (also for stdin);
 * - received time: --received, else the file's modification time (a
 *   message file is written when it arrives), for stdin the time now;
 * - an empty frame (two delimiters in a row) is idle fill, not counted;
 * - a layout without a station field gives station number 0;
 * - exit 0 if any packet decoded, 1 if none did, 2 for usage, config and
 *   I/O errors (a file that cannot be read, stdout that cannot be
 *   written); the other files are still decoded after an unreadable one.
 */
#include <errno.h>
#include <fcntl.h>
#include <getopt.h>
#include <inttypes.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "tidepost/frame.h"
#include "tidepost/layout.h"

#include "buf.h"
#include "cli.h"
#include "emit.h"
#include "log.h"
#include "process.h"
#include "progress.h"

#define DECODE_READ_BYTES     (64 * 1024)
#define DECODE_LINE_MAX       (1024 * 1024) /* one output line, at most */
#define DECODE_OUT_FLUSH      (64 * 1024)   /* write stdout at this much */
#define DECODE_MAX_WARNED     256           /* unknown stations logged once */
#define DECODE_OPT_QC_TESTS   512           /* --qc-tests (past CLI_OPT_*) */
#define DECODE_OPT_NO_SCIENCE 513           /* --no-science */

const char cmd_decode_usage[] =
    "usage: tidepost decode [-c CONFIG | -l LAYOUT ...] [--framing F]\n"
    "                       [--format ndjson|csv] [--received TIME]\n"
    "                       [--qc-tests | --no-science] [-v]\n"
    "                       [FILE ... | -]\n"
    "\n"
    "Decode archived packets (message files or captured byte streams)\n"
    "and write one reading per line on stdout; a summary goes to stderr.\n"
    "Without FILE, or with -, standard input is read.\n"
    "\n"
    "  -c, --config CONFIG   layouts and station names from a config\n"
    "  -l, --layout-file L   a layout file (repeat for several); station\n"
    "                        numbers are then written as numbers\n"
    "  --framing F           cobs, slip, hex, whole or fixed:N; default\n"
    "                        whole for *.sbd and *.bin files, else cobs\n"
    "  --format F            ndjson (default) or csv (RFC 4180)\n"
    "  --received TIME       the time the packets were received (RFC 3339\n"
    "                        or Unix seconds); default the file's\n"
    "                        modification time, or now for stdin\n"
    "  --qc-tests            add each QC'd value's per-test QARTOD flags\n"
    "                        (NDJSON \"tests\", CSV <value>_<test>)\n"
    "  --no-science          only the values the packets carry, flagged by\n"
    "                        the layout's ranges: no config QC tests and\n"
    "                        no derived values\n"
    "  -v, --verbose         one line per rejected packet or broken frame\n"
    "  -h, --help            this text\n"
    "\n"
    "Exit status: 0 some packet decoded, 1 no valid packet in the input,\n"
    "2 usage, config or I/O error.\n";

struct decode_opts {
	struct cli_source src;
	bool csv;
	bool verbose;
	bool has_framing;
	enum tp_framing framing;
	size_t fixed_n;
	bool has_received;
	int64_t received_s;
	bool qc_tests;   /* --qc-tests */
	bool no_science; /* --no-science */
};

/* One input being read. */
struct decode_input {
	const char *name; /* as given; "stdin" for standard input */
	int fd;
	int64_t received_s;
	struct tp_framer fr;
};

struct decode {
	struct decode_opts o;
	struct config *cfg;
	struct emit_csv csv;
	struct emit_plans plans;
	struct buf out; /* lines not yet written to stdout */
	uint64_t frames, packets, readings;
	uint64_t bad_check, unknown, broken, undecodable, unreadable;
	uint64_t done_bytes; /* read so far, for the progress line */
	struct progress pg;
	bool write_failed;
	uint32_t warned[DECODE_MAX_WARNED];
	size_t n_warned;
	struct tp_packet pk;
	struct tp_reading rd;
	/* QC and derived values (process.h), one reading held per station
	 * and layout until its spike judgement is known */
	struct process *proc;
	struct proc_hold *hold;
	struct proc_out pout;
	uint64_t ref;
	struct buf id;
	uint8_t frame[TP_MAX_PACKET];
	uint8_t in[DECODE_READ_BYTES];
};

/* The option value for --framing / --format / --received. */
static int decode_option(struct decode_opts *o, int c, const char *arg)
{
	if (c == CLI_OPT_FRAMING) {
		o->has_framing = true;
		if (tp_framing_parse(arg, &o->framing, &o->fixed_n) == TP_OK &&
		    (o->framing != TP_FRAMING_FIXED ||
		     o->fixed_n <= TP_MAX_PACKET))
			return 0;
		log_err("decode: --framing %s: not a framing; valid: cobs, "
		        "slip, hex, whole, fixed:N (N 1..%d)",
		        arg, TP_MAX_PACKET);
	} else if (c == CLI_OPT_FORMAT) {
		o->csv = strcmp(arg, "csv") == 0;
		if (o->csv || strcmp(arg, "ndjson") == 0)
			return 0;
		log_err("decode: --format %s: valid: ndjson, csv", arg);
	} else if (c == CLI_OPT_RECEIVED) {
		o->has_received = true;
		if (cli_parse_time(arg, &o->received_s) == 0)
			return 0;
		log_err("decode: --received %s: not a time; give RFC 3339 "
		        "(2026-11-30T07:02:11Z) or Unix seconds",
		        arg);
	}
	return -1;
}

/* Options that cannot go together: -1 (fine), or the exit status. */
static int decode_opts_check(const struct decode_opts *o)
{
	if (o->qc_tests && o->no_science) {
		log_err(
		    "decode: --qc-tests and --no-science cannot go together "
		    "(--no-science runs no QC tests)");
		return CLI_EXIT_USAGE;
	}
	return -1;
}

/* Parse options; returns -1 to go on, else an exit status. */
static int decode_parse(struct decode_opts *o, int argc, char **argv)
{
	static const struct option opts[] = {
	    {"config", required_argument, NULL, 'c'},
	    {"layout-file", required_argument, NULL, 'l'},
	    {"framing", required_argument, NULL, CLI_OPT_FRAMING},
	    {"format", required_argument, NULL, CLI_OPT_FORMAT},
	    {"received", required_argument, NULL, CLI_OPT_RECEIVED},
	    {"qc-tests", no_argument, NULL, DECODE_OPT_QC_TESTS},
	    {"no-science", no_argument, NULL, DECODE_OPT_NO_SCIENCE},
	    {"verbose", no_argument, NULL, 'v'},
	    {"help", no_argument, NULL, 'h'},
	    {NULL, 0, NULL, 0}};
	int c;

	opterr = 0;
	for (;;) {
		c = getopt_long(argc, argv, ":c:l:vh", opts, NULL);
		if (c == -1)
			return decode_opts_check(o);
		if (c == 'c') {
			o->src.config = optarg;
		} else if (c == 'l') {
			if (cli_source_add(&o->src, "decode", optarg) < 0)
				return CLI_EXIT_USAGE;
		} else if (c == 'v') {
			o->verbose = true;
		} else if (c == DECODE_OPT_QC_TESTS) {
			o->qc_tests = true;
		} else if (c == DECODE_OPT_NO_SCIENCE) {
			o->no_science = true;
		} else if (c == 'h') {
			fputs(cmd_decode_usage, stdout);
			return CLI_EXIT_OK;
		} else if (c >= CLI_OPT_FRAMING && c <= CLI_OPT_RECEIVED) {
			if (decode_option(o, c, optarg) < 0)
				return CLI_EXIT_USAGE;
		} else {
			return cli_bad_option("decode", c, argv);
		}
	}
}

/* The station as text: config name, else the number (logged once). */
static const char *station_of(struct decode *d, uint32_t number, char *tmp,
                              size_t cap)
{
	const struct cfg_station *st;
	size_t i;

	st = config_station(d->cfg, number);
	if (st != NULL && st->name != NULL)
		return st->name;
	snprintf(tmp, cap, "%" PRIu32, number);
	if (d->cfg->path == NULL)
		return tmp;
	for (i = 0; i < d->n_warned; i++) {
		if (d->warned[i] == number)
			return tmp;
	}
	if (d->n_warned < DECODE_MAX_WARNED) {
		d->warned[d->n_warned++] = number;
		progress_clear(&d->pg);
		log_warn("decode: station %" PRIu32 ": not in the config",
		         number);
	} else if (d->n_warned++ == DECODE_MAX_WARNED) {
		log_warn("decode: more stations not in the config; not "
		         "logged each");
	}
	return tmp;
}

static const char *station_text(struct decode *d, char *tmp, size_t cap)
{
	return station_of(d, d->pk.has_station ? d->pk.station : 0, tmp, cap);
}

/* Write the output buffer to stdout and empty it; false after a write
 * error (logged once; what is left is dropped). */
static bool decode_flush(struct decode *d)
{
	const char *p = d->out.data;
	size_t left = d->out.len;
	ssize_t n;

	while (!d->write_failed && left > 0) {
		n = write(STDOUT_FILENO, p, left);
		if (n < 0 && errno == EINTR)
			continue;
		if (n < 0) {
			log_err("decode: write: stdout: %s", strerror(errno));
			d->write_failed = true;
			break;
		}
		p += n;
		left -= (size_t)n;
	}
	buf_reset(&d->out);
	return !d->write_failed;
}

static enum tp_status decode_put(struct decode *d,
                                 const struct emit_reading *er,
                                 const struct emit_sci *sc);

/* Append one reading as a line: packet pk, reading rd, its derived
 * values (plan, NULL: none) and test results. */
static enum tp_status
decode_put_parts(struct decode *d, const char *station,
                 const struct tp_packet *pk, const struct tp_reading *rd,
                 int64_t received_s, const struct tp_derive_plan *plan,
                 const struct proc_test *test, size_t n_tests)
{
	struct emit_reading er;
	struct emit_sci sc;

	memset(&sc, 0, sizeof(sc));
	er.station = station;
	er.packet = pk;
	er.reading = rd;
	er.received_s = received_s;
	if (plan != NULL) {
		sc.derived = plan->out;
		sc.n_derived = plan->n_out;
	}
	if (d->o.qc_tests) {
		sc.tests = test;
		sc.n_tests = n_tests;
	}
	return decode_put(d, &er, &sc);
}

/* Append the held reading x of station text `station` as one line. */
static enum tp_status decode_put_held(struct decode *d, const char *station,
                                      const struct proc_held *x)
{
	return decode_put_parts(d, station, &x->pk, &x->rd, x->received_s,
	                        x->plan, x->test, x->n_tests);
}

/*
 * QC and derived values of d->rd (process.h), then hold-one: the reading
 * this station+layout held before gets the spike judgement that arrived
 * now and is written; d->rd is held in its place.  Only stations with a
 * spike test are held (the others keep file order); without memory for
 * either, d->rd is written at once (decoder flags, or no final spike).
 */
static enum tp_status decode_science(struct decode *d,
                                     const struct emit_reading *er)
{
	uint32_t number = d->pk.has_station ? d->pk.station : 0;
	struct proc_held *x = NULL;
	enum tp_status st = TP_OK;

	buf_reset(&d->id);
	emit_reading_id(&d->id, er);
	if (process_reading(d->proc, number, d->pk.layout, &d->rd, ++d->ref,
	                    buf_str(&d->id), &d->pout) == 0 &&
	    d->pout.spike) /* else nothing to wait for: file order */
		x = proc_hold_get(d->hold, number, d->pk.layout);
	if (x == NULL)
		return decode_put_parts(d, er->station, &d->pk, &d->rd,
		                        er->received_s, d->pout.plan,
		                        d->pout.test, d->pout.n_tests);
	proc_hold_apply(x, &d->pout);
	if (x->full)
		st = decode_put_held(d, er->station, x);
	proc_hold_put(x, &d->pk, &d->rd, er->received_s, d->ref, &d->pout);
	return st;
}

/* Append record k of d->pk as one line.  TP_OK, the decoder's status,
 * or TP_ERR_SPACE when the line is longer than DECODE_LINE_MAX (then
 * nothing is appended). */
static enum tp_status decode_line(struct decode *d, uint32_t k,
                                  const struct emit_reading *er)
{
	enum tp_status st;

	st = tp_decode_record(&d->pk, k, &d->rd);
	if (st != TP_OK)
		return st;
	if (d->o.no_science)
		return decode_put_parts(d, er->station, &d->pk, &d->rd,
		                        er->received_s, NULL, NULL, 0);
	return decode_science(d, er);
}

/* Append er as one line (see decode_line). */
static enum tp_status decode_put(struct decode *d,
                                 const struct emit_reading *er,
                                 const struct emit_sci *sc)
{
	size_t start;

	if (d->out.len >= DECODE_OUT_FLUSH && !decode_flush(d))
		return TP_OK;
	start = d->out.len;
	if (d->o.csv)
		emit_csv_row_sci(&d->out, &d->csv, er, sc);
	else
		emit_json_planned_sci(&d->out, &d->plans, er, sc);
	if (buf_failed(&d->out) || d->out.len - start > DECODE_LINE_MAX) {
		buf_rewind(&d->out, start);
		return TP_ERR_SPACE;
	}
	return TP_OK;
}

/* Every record of the decoded packet d->pk -> one line each. */
static void decode_records(struct decode *d, const struct decode_input *in)
{
	char tmp[EMIT_NUM_MAX];
	struct emit_reading er;
	enum tp_status st;
	uint32_t k;

	er.station = station_text(d, tmp, sizeof(tmp));
	er.packet = &d->pk;
	er.reading = &d->rd;
	er.received_s = in->received_s;
	for (k = 0; k < d->pk.n_records && !d->write_failed; k++) {
		st = decode_line(d, k, &er);
		if (st != TP_OK) {
			d->undecodable++;
			progress_clear(&d->pg);
			log_warn("decode: %s: offset %" PRIu64
			         ": record %" PRIu32 ": %s",
			         in->name, in->fr.frame_start, k,
			         st != TP_ERR_SPACE
			             ? tp_strerror(st)
			             : "reading longer than an output "
			               "line may be");
			continue;
		}
		if (!d->write_failed)
			d->readings++;
	}
}

/* A rejected frame: count it; with -v say where and why. */
static void decode_reject(struct decode *d, const struct decode_input *in,
                          uint64_t *count, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

static void decode_reject(struct decode *d, const struct decode_input *in,
                          uint64_t *count, const char *fmt, ...)
{
	char why[256];
	va_list ap;

	(*count)++;
	if (!d->o.verbose)
		return;
	va_start(ap, fmt);
	vsnprintf(why, sizeof(why), fmt, ap);
	va_end(ap);
	progress_clear(&d->pg);
	log_info("decode: %s: offset %" PRIu64 ": %s", in->name,
	         in->fr.frame_start, why);
}

/* One frame: pick the layout, check, decode, write its readings. */
static void decode_frame(struct decode *d, const struct decode_input *in)
{
	const struct config *cfg = d->cfg;
	const uint8_t *p = tp_frame_data(&in->fr);
	const struct tp_layout *l;
	size_t len = in->fr.len;
	enum tp_status st;
	int li;

	if (len == 0)
		return;
	d->frames++;
	li = tp_layout_select(cfg->layout_ptrs, cfg->n_layouts, p, len);
	if (li < 0) {
		decode_reject(d, in, &d->unknown, "unknown layout (%zu bytes)",
		              len);
		return;
	}
	l = cfg->layout_ptrs[li];
	st = tp_decode_validated(l, p, len, &d->pk); /* config validated l */
	if (st == TP_ERR_CHECK) {
		decode_reject(d, in, &d->bad_check, "bad check (%s)",
		              tp_check_name(l));
	} else if (st != TP_OK) {
		decode_reject(d, in, &d->undecodable, "undecodable as %s: %s",
		              l->name, tp_strerror(st));
	} else {
		d->packets++;
		if (!d->pk.has_time)
			d->pk.time_s = in->received_s;
		decode_records(d, in);
	}
}

static void decode_result(struct decode *d, const struct decode_input *in,
                          enum tp_frame_result r)
{
	if (r == TP_FRAME_READY)
		decode_frame(d, in);
	else if (r == TP_FRAME_BROKEN)
		decode_reject(d, in, &d->broken, "broken frame");
}

/* Push n bytes of d->in through the framer. */
static void decode_chunk(struct decode *d, struct decode_input *in, size_t n)
{
	enum tp_frame_result r;
	size_t off = 0, used;

	while (off < n && !d->write_failed) {
		used = 0;
		r = tp_frame_push(&in->fr, d->in + off, n - off, &used);
		off += used;
		decode_result(d, in, r);
		if (r == TP_FRAME_MORE && used == 0)
			break;
	}
}

/* Read in->fd to its end.  0, or -1 on a read error (logged). */
static int decode_stream(struct decode *d, struct decode_input *in)
{
	ssize_t n;

	for (;;) {
		n = read(in->fd, d->in, sizeof(d->in));
		if (n < 0 && errno == EINTR)
			continue;
		if (n < 0) {
			log_err("decode: read: %s: %s", in->name,
			        strerror(errno));
			return -1;
		}
		if (n == 0 || d->write_failed)
			break;
		decode_chunk(d, in, (size_t)n);
		d->done_bytes += (uint64_t)n;
		progress_update(&d->pg, d->done_bytes, d->readings);
	}
	decode_result(d, in, tp_frame_finish(&in->fr));
	return 0;
}

/* Open one input, set its framing and received time. */
static int decode_open(struct decode *d, struct decode_input *in,
                       const char *path)
{
	enum tp_framing kind = TP_FRAMING_COBS;
	bool is_stdin = strcmp(path, "-") == 0;
	struct stat sb;

	in->name = is_stdin ? "stdin" : path;
	in->fd = is_stdin ? STDIN_FILENO : open(path, O_RDONLY | O_CLOEXEC);
	if (in->fd < 0 || fstat(in->fd, &sb) < 0) {
		log_err("decode: open: %s: %s", path, strerror(errno));
		if (in->fd > STDIN_FILENO)
			close(in->fd);
		return -1;
	}
	in->received_s = is_stdin ? (int64_t)time(NULL) : (int64_t)sb.st_mtime;
	if (d->o.has_received)
		in->received_s = d->o.received_s;
	if (d->o.has_framing)
		kind = d->o.framing;
	else if (!is_stdin && cli_is_message_file(path))
		kind = TP_FRAMING_WHOLE;
	if (tp_frame_init(&in->fr, kind, d->o.fixed_n, d->frame,
	                  sizeof(d->frame)) != TP_OK) {
		log_err("decode: %s: framing cannot be set up", path);
		if (!is_stdin)
			close(in->fd);
		return -1;
	}
	return 0;
}

static void decode_file(struct decode *d, const char *path)
{
	struct decode_input in;

	if (decode_open(d, &in, path) < 0) {
		d->unreadable++;
		return;
	}
	if (decode_stream(d, &in) < 0)
		d->unreadable++;
	if (in.fd != STDIN_FILENO)
		close(in.fd);
}

static const char *plural(uint64_t n, const char *one, const char *many)
{
	return n == 1 ? one : many;
}

static void decode_summary(const struct decode *d)
{
	char extra[64] = "";

	if (d->unreadable > 0)
		snprintf(extra, sizeof(extra), ", %" PRIu64 " unreadable %s",
		         d->unreadable,
		         plural(d->unreadable, "input", "inputs"));
	log_info("decode: %" PRIu64 " %s, %" PRIu64 " %s, %" PRIu64 " %s, "
	         "%" PRIu64 " %s, %" PRIu64 " %s, %" PRIu64 " undecodable%s",
	         d->frames, plural(d->frames, "frame", "frames"), d->readings,
	         plural(d->readings, "reading", "readings"), d->bad_check,
	         plural(d->bad_check, "bad check", "bad checks"), d->unknown,
	         plural(d->unknown, "unknown layout", "unknown layouts"),
	         d->broken, plural(d->broken, "broken frame", "broken frames"),
	         d->undecodable, extra);
}

/* CSV columns of the derived values and (--qc-tests) per-test flags. */
static int decode_csv_science(struct decode *d)
{
	const char *dn[TP_DV_N], **qn;
	size_t n_d, n_q = 0;
	int rc;

	qn = calloc(CFG_MAX_ITEMS * (d->cfg->n_stations + 1), sizeof(*qn));
	if (qn == NULL)
		return -1;
	n_d = process_derived_names(d->cfg, dn, TP_DV_N);
	if (d->o.qc_tests)
		n_q = process_qc_names(
		    d->cfg, qn, CFG_MAX_ITEMS * (d->cfg->n_stations + 1));
	rc = emit_csv_science(&d->csv, dn, n_d, qn, n_q);
	free(qn);
	return rc;
}

/* Output plans; for CSV the columns and the header, before any input. */
static int decode_start(struct decode *d)
{
	d->proc = process_new(d->cfg);
	d->hold = proc_hold_new();
	if (d->proc == NULL || d->hold == NULL) {
		log_err("decode: qc state: %s", strerror(ENOMEM));
		return -1;
	}
	if (!d->o.csv && emit_plans_init(&d->plans, d->cfg->layout_ptrs,
	                                 d->cfg->n_layouts) < 0) {
		log_err("decode: output plans: %s", strerror(errno));
		return -1;
	}
	if (!d->o.csv)
		return 0;
	if (emit_csv_init(&d->csv, d->cfg->layout_ptrs, d->cfg->n_layouts) <
	        0 ||
	    (!d->o.no_science && decode_csv_science(d) < 0)) {
		log_err("decode: csv columns: %s", strerror(errno));
		return -1;
	}
	emit_csv_header(&d->out, &d->csv);
	if (buf_failed(&d->out) || d->out.len > DECODE_LINE_MAX) {
		log_err("decode: csv header: longer than an output line may "
		        "be");
		return -1;
	}
	return 0;
}

/* Write what hold-one still holds (the newest reading of each station
 * and layout; their spike tests stay 2). */
static void decode_held(struct decode *d)
{
	char tmp[EMIT_NUM_MAX];
	struct proc_held *x;
	size_t i;

	for (i = 0; i < proc_hold_n(d->hold) && !d->write_failed; i++) {
		x = proc_hold_at(d->hold, i);
		if (!x->full)
			continue;
		if (decode_put_held(
		        d,
		        station_of(d, x->pk.has_station ? x->pk.station : 0,
		                   tmp, sizeof(tmp)),
		        x) != TP_OK) {
			d->readings--; /* counted when it came in */
			d->undecodable++;
			log_warn("decode: a reading longer than an output line "
			         "may be");
		}
	}
}

/* Decode every input; the exit status. */
static int decode_run(struct decode *d, int nfiles, char **files)
{
	int i;

	if (decode_start(d) < 0)
		return CLI_EXIT_USAGE;
	progress_start(&d->pg, "decode", "bytes",
	               progress_file_bytes(nfiles, files));
	if (isatty(STDOUT_FILENO))
		d->pg.on = false; /* never mixed with readings on a terminal */
	if (nfiles == 0)
		decode_file(d, "-");
	for (i = 0; i < nfiles && !d->write_failed; i++)
		decode_file(d, files[i]);
	decode_held(d);
	decode_flush(d);
	if (!d->write_failed && fflush(stdout) != 0) {
		log_err("decode: write: stdout: %s", strerror(errno));
		d->write_failed = true;
	}
	progress_end(&d->pg);
	decode_summary(d);
	if (d->unreadable > 0 || d->write_failed)
		return CLI_EXIT_USAGE;
	return d->packets > 0 ? CLI_EXIT_OK : CLI_EXIT_FAIL;
}

int cmd_decode(int argc, char **argv)
{
	struct decode *d;
	int rc;

	d = calloc(1, sizeof(*d));
	if (d == NULL) {
		log_err("decode: start: %s", strerror(errno));
		return CLI_EXIT_USAGE;
	}
	buf_init(&d->out, DECODE_OUT_FLUSH + DECODE_LINE_MAX);
	buf_init(&d->id, PROC_ID_MAX);
	rc = decode_parse(&d->o, argc, argv);
	if (rc < 0 && cli_source_load(&d->o.src, "decode", &d->cfg) < 0)
		rc = CLI_EXIT_USAGE;
	if (rc < 0) {
		rc = decode_run(d, argc - optind, argv + optind);
		fflush(stdout);
	}
	emit_csv_free(&d->csv);
	emit_plans_free(&d->plans);
	process_free(d->proc);
	proc_hold_free(d->hold);
	buf_free(&d->id);
	buf_free(&d->out);
	config_free(d->cfg);
	free(d);
	return rc;
}
