/*
 * cmd_ring.c - `tidepost ring -c CONFIG [--verify] [--json]`: what the
 * ring file holds (size, use, records, seqs, each output's cursor and
 * backlog, generation, failure) and, with --verify, a check of both
 * header slots and every kept record (ring_verify).
 *
 * Safe next to a running daemon: the file is only ever read.  The ring is
 * opened through a read-only overlay of struct ringio_ops: reads come
 * from the file, the writes ring_open makes while recovering (the torn
 * tail zeroed, a fresh header) land in memory and are seen by later reads
 * of this process only; syncs do nothing; no lock is taken (the daemon
 * holds an exclusive flock on the ring; a shared lock probe tells whether
 * it does, and the output says so).  While the daemon writes, the figures
 * are a snapshot and may be a little behind; --verify then tries up to
 * three times and reports problems only if they stay.
 *
 * Exit status: 0 healthy, 1 --verify found problems, 2 usage, config or
 * the file cannot be read as a ring.
 */
#include <errno.h>
#include <fcntl.h>
#include <getopt.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "buf.h"
#include "cli.h"
#include "cli_run.h"
#include "emit.h"
#include "log.h"
#include "ring.h"
#include "ringview.h"

#define RING_VERIFY_TRIES 3
#define RING_OPT_VERIFY   300
#define RING_OPT_JSON     301

const char cmd_ring_usage[] =
    "usage: tidepost ring -c CONFIG [--verify] [--json]\n"
    "\n"
    "Show the state of the ring file: size, space used, records, oldest\n"
    "and newest seq, per output the last acknowledged seq and the\n"
    "readings not yet delivered, the header generation, failures.\n"
    "The file is only read, so this is safe while the daemon runs.\n"
    "\n"
    "  -c, --config CONFIG   the config naming the ring\n"
    "  --verify              check both header slots and every record\n"
    "  --json                one JSON object instead of text\n"
    "  -h, --help            this text\n"
    "\n"
    "Exit status: 0 healthy, 1 --verify found problems, 2 usage error\n"
    "or the ring cannot be read.\n";

/* ---- printing ---- */

struct ring_opts {
	const char *config;
	bool verify, json;
};

static void print_text(const char *path, bool busy, const struct ring_stat *st)
{
	size_t i;

	printf("ring %s%s\n", path,
	       busy ? " (in use by a running daemon; "
	              "figures are a snapshot)"
	            : "");
	printf("  size        %" PRIu64 " bytes (data area %" PRIu64 ")\n",
	       st->size_bytes, st->data_bytes);
	printf("  used        %" PRIu64 " bytes (%.1f%%)\n", st->used_bytes,
	       st->data_bytes
	           ? 100.0 * (double)st->used_bytes / (double)st->data_bytes
	           : 0.0);
	printf("  records     %" PRIu64 "\n", st->records);
	printf("  oldest seq  %" PRIu64 "\n  newest seq  %" PRIu64 "\n",
	       st->records ? st->oldest_seq : 0, st->newest_seq);
	printf("  next seq    %" PRIu64 "\n  generation  %" PRIu64 "\n",
	       st->next_seq, st->generation);
	printf("  failed      %s\n", st->failed ? strerror(st->failed) : "no");
	if (st->recovered_lost)
		printf("  damaged     %" PRIu64 " records lost to damage\n",
		       st->recovered_lost);
	for (i = 0; i < st->n_outputs; i++)
		printf("  output %-16s acked %" PRIu64 ", unsent %" PRIu64 "\n",
		       st->outputs[i].name, st->outputs[i].acked,
		       st->outputs[i].unsent);
	if (st->n_outputs == 0)
		printf("  outputs     none (the ring keeps every record)\n");
}

static void print_verify_text(const struct ring_verify_report *v)
{
	int s;

	printf("verify: %" PRIu64 " records checked, %" PRIu64 " problems\n",
	       v->records, v->problems);
	for (s = 0; s < 2; s++) {
		if (v->slot_ok[s])
			printf("  header slot %d ok, generation %" PRIu64 "\n",
			       s, v->slot_gen[s]);
		else
			printf("  header slot %d invalid\n", s);
	}
	if (v->first[0] != '\0')
		printf("  first problem: %s\n", v->first);
}

static void json_stat(struct buf *b, const char *path, bool busy,
                      const struct ring_stat *st)
{
	size_t i;

	buf_adds(b, "{\"path\":");
	emit_json_string(b, path);
	buf_printf(
	    b,
	    ",\"in_use\":%s,\"size_bytes\":%" PRIu64 ",\"data_bytes"
	    "\":%" PRIu64 ",\"used_bytes\":%" PRIu64 ",\"records\":%" PRIu64
	    ",\"oldest_seq\":%" PRIu64 ",\"newest_seq\":%" PRIu64
	    ",\"next_seq\":%" PRIu64 ",\"generation\":%" PRIu64
	    ",\"recovered_lost\":%" PRIu64 ",\"failed\":",
	    busy ? "true" : "false", st->size_bytes, st->data_bytes,
	    st->used_bytes, st->records, st->records ? st->oldest_seq : 0,
	    st->newest_seq, st->next_seq, st->generation, st->recovered_lost);
	if (st->failed)
		emit_json_string(b, strerror(st->failed));
	else
		buf_adds(b, "false");
	buf_adds(b, ",\"outputs\":[");
	for (i = 0; i < st->n_outputs; i++) {
		buf_adds(b, i ? ",{\"name\":" : "{\"name\":");
		emit_json_string(b, st->outputs[i].name);
		buf_printf(b, ",\"acked\":%" PRIu64 ",\"unsent\":%" PRIu64 "}",
		           st->outputs[i].acked, st->outputs[i].unsent);
	}
	buf_adds(b, "]");
}

static void json_verify(struct buf *b, const struct ring_verify_report *v)
{
	int s;

	buf_printf(b,
	           ",\"verify\":{\"records\":%" PRIu64 ",\"problems\":%" PRIu64
	           ",\"slots\":[",
	           v->records, v->problems);
	for (s = 0; s < 2; s++)
		buf_printf(b, "%s{\"ok\":%s,\"generation\":%" PRIu64 "}",
		           s ? "," : "", v->slot_ok[s] ? "true" : "false",
		           v->slot_ok[s] ? v->slot_gen[s] : 0);
	buf_adds(b, "],\"first\":");
	emit_json_string(b, v->first);
	buf_adds(b, "}");
}

/* ---- the command ---- */

static int ring_parse(struct ring_opts *o, int argc, char **argv)
{
	static const struct option opts[] = {
	    {"config", required_argument, NULL, 'c'},
	    {"verify", no_argument, NULL, RING_OPT_VERIFY},
	    {"json", no_argument, NULL, RING_OPT_JSON},
	    {"help", no_argument, NULL, 'h'},
	    {NULL, 0, NULL, 0}};
	int c;

	opterr = 0;
	for (;;) {
		c = getopt_long(argc, argv, ":c:h", opts, NULL);
		if (c == -1)
			break;
		if (c == 'c') {
			o->config = optarg;
		} else if (c == RING_OPT_VERIFY) {
			o->verify = true;
		} else if (c == RING_OPT_JSON) {
			o->json = true;
		} else if (c == 'h') {
			fputs(cmd_ring_usage, stdout);
			return CLI_EXIT_OK;
		} else {
			return cli_bad_option("ring", c, argv);
		}
	}
	if (o->config == NULL || optind < argc) {
		log_err("ring: %s; see 'tidepost help ring'",
		        o->config == NULL ? "give -c CONFIG"
		                          : "unexpected arguments");
		return CLI_EXIT_USAGE;
	}
	return -1;
}

/* Open a snapshot, stat it, verify it when asked.  0, or -1 (logged). */
static int ring_look(const char *path, struct ringview *ov, bool verify,
                     struct ring_stat *st, struct ring_verify_report *v)
{
	struct ringio_ops ops = ringview_ops(ov);
	struct ring *r;
	char err[512];
	int rc = 0;

	ringview_reset(ov);
	if (ring_open(path, 0, &ops, &r, err, sizeof(err)) != 0) {
		log_err("%s", err);
		return -1;
	}
	ring_stat(r, st);
	if (verify && ring_verify(r, v) < 0) {
		log_err("ring: verify: %s: %s", path, strerror(errno));
		rc = -1;
	}
	(void)ring_close(r);
	ringview_reset(ov);
	return rc;
}

static int ring_show(const struct ring_opts *o, const char *path)
{
	struct ringview *ov = ringview_new();
	struct ring_verify_report v;
	struct ring_stat st;
	bool busy = ringio_in_use(path);
	int tries = 0, rc;
	struct buf b;

	memset(&v, 0, sizeof(v));
	if (ov == NULL)
		return CLI_EXIT_USAGE;
	do {
		rc = ring_look(path, ov, o->verify, &st, &v);
	} while (rc == 0 && busy && o->verify && v.problems > 0 &&
	         ++tries < RING_VERIFY_TRIES);
	ringview_free(ov);
	if (rc != 0)
		return CLI_EXIT_USAGE;
	if (o->json) {
		buf_init(&b, 64 * 1024);
		json_stat(&b, path, busy, &st);
		if (o->verify)
			json_verify(&b, &v);
		buf_adds(&b, "}\n");
		fputs(buf_str(&b), stdout);
		buf_free(&b);
	} else {
		print_text(path, busy, &st);
		if (o->verify)
			print_verify_text(&v);
	}
	return o->verify && v.problems > 0 ? CLI_EXIT_FAIL : CLI_EXIT_OK;
}

int cmd_ring(int argc, char **argv)
{
	struct ring_opts o = {NULL, false, false};
	struct cfg_errors errs;
	struct config *cfg = NULL;
	int rc = ring_parse(&o, argc, argv);

	if (rc >= 0)
		return rc;
	memset(&errs, 0, sizeof(errs));
	if (config_load(o.config, &cfg, &errs) != 0) {
		cli_print_errors(&errs);
		return CLI_EXIT_USAGE;
	}
	cfg_errors_free(&errs);
	rc = ring_show(&o, cfg->ring.path);
	config_free(cfg);
	return rc;
}
