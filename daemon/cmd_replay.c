/*
 * cmd_replay.c - `tidepost replay -c CONFIG [--framing F] FILE...`:
 * archived packets (message files, captured streams) into the ring for
 * delivery, keeping their own times.
 *
 * Choices (the README states them):
 *   - a reading's time comes from its packet; `received` is the file's
 *     modification time (when the message file arrived, as for `decode`);
 *   - readings whose id was accepted before (seen.h: live, or an earlier
 *     replay) are recognised and not queued again;
 *   - framing: --framing, else `whole` for *.sbd and *.bin, else cobs;
 *   - if no daemon holds the ring, replay opens it and ingests directly
 *     (one commit per file); if a daemon holds it (its exclusive flock),
 *     the valid packets are handed to the daemon instead: written, COBS
 *     framed, into files of at most ~60 KiB in <state_dir>/replay/ (as
 *     .NAME.tmp, synced, mtime set to the archive's, then renamed to
 *     rYYYYmmddHHMMSS-PID-N.cobs and the folder synced), which the daemon
 *     always watches; it deletes each file once its readings are
 *     committed.  replay does not wait for that: the daemon's log says
 *     what it accepted;
 *   - packets are checked here in both cases (layout, check value,
 *     decode); bad ones are counted and, with -v, listed.
 * Exit status: 0 all queued or handed over, 1 some file had no valid
 * packet, some packet was bad, or the ring was full; 2 usage, config or
 * I/O error.
 */
#include <errno.h>
#include <fcntl.h>
#include <getopt.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "tidepost/frame.h"
#include "tidepost/layout.h"

#include "cli.h"
#include "cli_run.h"
#include "ingest.h"
#include "progress.h"
#include "log.h"
#include "ring.h"
#include "seen.h"

#define REPLAY_READ_BYTES  (64 * 1024)
#define REPLAY_CHUNK_BYTES (60 * 1024)
#define REPLAY_ENC_MAX     (TP_MAX_PACKET + TP_MAX_PACKET / 254 + 2)

const char cmd_replay_usage[] =
    "usage: tidepost replay -c CONFIG [--framing F] [-v] FILE...\n"
    "\n"
    "Put archived packets (message files or captured streams) into the\n"
    "ring for delivery, keeping their own times.  Readings accepted\n"
    "before (live or by an earlier replay) are not queued again.  When\n"
    "the daemon is running the packets are handed to it through\n"
    "<state_dir>/replay/; otherwise the ring is written directly.\n"
    "\n"
    "  -c, --config CONFIG   the daemon's config\n"
    "  --framing F           cobs, slip, hex, whole or fixed:N; default\n"
    "                        whole for *.sbd and *.bin files, else cobs\n"
    "  -v, --verbose         one line per bad packet\n"
    "  -h, --help            this text\n"
    "\n"
    "Exit status: 0 done, 1 bad packets or a full ring, 2 usage, config\n"
    "or I/O error.\n";

struct replay {
	struct config *cfg;
	bool verbose, has_framing, handoff, full, io_error;
	enum tp_framing framing;
	size_t fixed_n;
	struct ring *ring;
	struct seen *seen;
	struct ingest *ing;
	struct ingest_src src;
	int dirfd; /* handoff: the replay folder */
	int chunk_fd;
	char chunk_tmp[64];
	size_t chunk_len;
	int64_t chunk_mtime;
	unsigned n_chunks;
	uint64_t files, packets, bad, broken, staged, dups, refused;
	uint64_t done_bytes; /* read so far, for the progress line */
	struct progress pg;
	const char *file; /* being read, for messages */
	struct tp_framer fr;
	struct tp_packet pk;
	uint8_t frame[TP_MAX_PACKET];
	uint8_t enc[REPLAY_ENC_MAX];
	uint8_t in[REPLAY_READ_BYTES];
};

static int parse_framing(struct replay *rp, const char *arg)
{
	rp->has_framing = true;
	if (tp_framing_parse(arg, &rp->framing, &rp->fixed_n) == TP_OK &&
	    (rp->framing != TP_FRAMING_FIXED || rp->fixed_n <= TP_MAX_PACKET))
		return 0;
	log_err("replay: --framing %s: not a framing; valid: cobs, slip, hex, "
	        "whole, fixed:N (N 1..%d)",
	        arg, TP_MAX_PACKET);
	return -1;
}

static int replay_parse(struct replay *rp, const char **config, int argc,
                        char **argv)
{
	static const struct option opts[] = {
	    {"config", required_argument, NULL, 'c'},
	    {"framing", required_argument, NULL, CLI_OPT_FRAMING},
	    {"verbose", no_argument, NULL, 'v'},
	    {"help", no_argument, NULL, 'h'},
	    {NULL, 0, NULL, 0}};
	int c;

	opterr = 0;
	for (;;) {
		c = getopt_long(argc, argv, ":c:vh", opts, NULL);
		if (c == -1)
			break;
		if (c == 'c') {
			*config = optarg;
		} else if (c == 'v') {
			rp->verbose = true;
		} else if (c == 'h') {
			fputs(cmd_replay_usage, stdout);
			return CLI_EXIT_OK;
		} else if (c == CLI_OPT_FRAMING) {
			if (parse_framing(rp, optarg) != 0)
				return CLI_EXIT_USAGE;
		} else {
			return cli_bad_option("replay", c, argv);
		}
	}
	if (*config == NULL || optind >= argc) {
		log_err("replay: %s; see 'tidepost help replay'",
		        *config == NULL ? "give -c CONFIG" : "give FILE...");
		return CLI_EXIT_USAGE;
	}
	return -1;
}

/* ---- handing packets to a running daemon ---- */

static int chunk_close(struct replay *rp)
{
	struct timespec ts[2];
	char name[96], stamp[32];
	struct tm tm;
	time_t t = (time_t)rp->chunk_mtime;
	int rc = 0;

	if (rp->chunk_fd < 0)
		return 0;
	ts[0].tv_sec = ts[1].tv_sec = t;
	ts[0].tv_nsec = ts[1].tv_nsec = 0;
	if (futimens(rp->chunk_fd, ts) != 0 || fsync(rp->chunk_fd) != 0)
		rc = -1;
	if (close(rp->chunk_fd) != 0)
		rc = -1;
	rp->chunk_fd = -1;
	if (gmtime_r(&t, &tm) == NULL ||
	    strftime(stamp, sizeof(stamp), "%Y%m%d%H%M%S", &tm) == 0)
		snprintf(stamp, sizeof(stamp), "0");
	snprintf(name, sizeof(name), "r%s-%ld-%u.cobs", stamp, (long)getpid(),
	         rp->n_chunks++);
	if (rc == 0 && renameat(rp->dirfd, rp->chunk_tmp, rp->dirfd, name) != 0)
		rc = -1;
	if (rc != 0) {
		log_err("replay: write: %s: %s", name, strerror(errno));
		rp->io_error = true;
		(void)unlinkat(rp->dirfd, rp->chunk_tmp, 0);
	}
	return rc;
}

static int chunk_open(struct replay *rp, int64_t mtime)
{
	snprintf(rp->chunk_tmp, sizeof(rp->chunk_tmp), ".replay-%ld-%u.tmp",
	         (long)getpid(), rp->n_chunks);
	rp->chunk_fd =
	    openat(rp->dirfd, rp->chunk_tmp,
	           O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC | O_NOFOLLOW, 0600);
	if (rp->chunk_fd < 0) {
		log_err("replay: create: %s/%s: %s", rp->cfg->state_dir,
		        rp->chunk_tmp, strerror(errno));
		rp->io_error = true;
		return -1;
	}
	rp->chunk_len = 0;
	rp->chunk_mtime = mtime;
	return 0;
}

static void handoff_packet(struct replay *rp, const uint8_t *p, size_t n,
                           int64_t mtime)
{
	size_t len = 0;

	if (tp_frame_encode(TP_FRAMING_COBS, p, n, rp->enc, sizeof(rp->enc),
	                    &len) != TP_OK)
		return;
	if (rp->chunk_fd >= 0 && (rp->chunk_len + len > REPLAY_CHUNK_BYTES ||
	                          rp->chunk_mtime != mtime))
		(void)chunk_close(rp);
	if (rp->chunk_fd < 0 && chunk_open(rp, mtime) != 0)
		return;
	if (write(rp->chunk_fd, rp->enc, len) != (ssize_t)len) {
		log_err("replay: write: %s: %s", rp->chunk_tmp,
		        strerror(errno));
		rp->io_error = true;
		return;
	}
	rp->chunk_len += len;
	rp->staged++;
}

/* Is the packet valid (layout, check, header)?  NULL, or why not. */
static const char *packet_problem(struct replay *rp, const uint8_t *p, size_t n)
{
	const struct config *c = rp->cfg;
	enum tp_status st;
	int li = tp_layout_select(c->layout_ptrs, c->n_layouts, p, n);

	if (li < 0)
		return "unknown layout";
	st = tp_decode_packet(c->layout_ptrs[li], p, n, &rp->pk);
	return st == TP_OK ? NULL : tp_strerror(st);
}

/* ---- one packet, one file ---- */

static void replay_packet(struct replay *rp, const uint8_t *p, size_t n,
                          int64_t mtime)
{
	struct ingest_result res;
	const char *why = packet_problem(rp, p, n);

	if (why == NULL && !rp->handoff) {
		if (ingest_packet(rp->ing, &rp->src, p, n, mtime, &res) ==
		    INGEST_REJECTED)
			why = res.reason;
		rp->staged += res.staged;
		rp->dups += res.duplicates;
		rp->refused += res.refused;
		rp->full |= res.refused > 0;
	} else if (why == NULL) {
		handoff_packet(rp, p, n, mtime);
	}
	if (why == NULL) {
		rp->packets++;
		return;
	}
	rp->bad++;
	progress_clear(&rp->pg);
	if (rp->verbose)
		log_info("replay: %s: offset %" PRIu64 ": %s", rp->file,
		         rp->fr.frame_start, why);
}

static void replay_result(struct replay *rp, enum tp_frame_result r,
                          int64_t mtime)
{
	if (r == TP_FRAME_BROKEN) {
		rp->broken++;
		progress_clear(&rp->pg);
		if (rp->verbose)
			log_info("replay: %s: offset %" PRIu64 ": broken frame",
			         rp->file, rp->fr.frame_start);
	} else if (r == TP_FRAME_READY && rp->fr.len > 0) {
		replay_packet(rp, tp_frame_data(&rp->fr), rp->fr.len, mtime);
	}
}

static void replay_chunk(struct replay *rp, size_t n, int64_t mtime)
{
	enum tp_frame_result r;
	size_t off = 0, used;

	while (off < n && !rp->full) {
		used = 0;
		r = tp_frame_push(&rp->fr, rp->in + off, n - off, &used);
		off += used;
		replay_result(rp, r, mtime);
		if (r == TP_FRAME_MORE && used == 0)
			break;
	}
}

static int replay_file(struct replay *rp, const char *path)
{
	enum tp_framing kind = TP_FRAMING_COBS;
	struct stat sb;
	ssize_t n = 0;
	int fd = open(path, O_RDONLY | O_CLOEXEC);

	if (fd < 0 || fstat(fd, &sb) != 0) {
		log_err("replay: open: %s: %s", path, strerror(errno));
		if (fd >= 0)
			close(fd);
		return -1;
	}
	if (rp->has_framing)
		kind = rp->framing;
	else if (cli_is_message_file(path))
		kind = TP_FRAMING_WHOLE;
	rp->file = path;
	(void)tp_frame_init(&rp->fr, kind, rp->fixed_n, rp->frame,
	                    sizeof(rp->frame));
	while (!rp->full) {
		n = read(fd, rp->in, sizeof(rp->in));
		if (n < 0 && errno == EINTR)
			continue;
		if (n <= 0)
			break;
		replay_chunk(rp, (size_t)n, (int64_t)sb.st_mtime);
		rp->done_bytes += (uint64_t)n;
		progress_update(&rp->pg, rp->done_bytes, rp->staged + rp->dups);
	}
	if (n < 0)
		log_err("replay: read: %s: %s", path, strerror(errno));
	if (!rp->full)
		replay_result(rp, tp_frame_finish(&rp->fr),
		              (int64_t)sb.st_mtime);
	close(fd);
	rp->files++;
	return n < 0 ? -1 : 0;
}

/* ---- direct or handed over ---- */

static int open_handoff(struct replay *rp)
{
	char dir[4096];

	snprintf(dir, sizeof(dir), "%s/replay", rp->cfg->state_dir);
	if (mkdir(dir, 0700) != 0 && errno != EEXIST) {
		log_err("replay: mkdir: %s: %s", dir, strerror(errno));
		return -1;
	}
	rp->dirfd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
	if (rp->dirfd < 0) {
		log_err("replay: open: %s: %s", dir, strerror(errno));
		return -1;
	}
	rp->handoff = true;
	log_info("replay: the daemon is running; handing the packets to it "
	         "through %s",
	         dir);
	return 0;
}

/* Open the ring ourselves, or find the daemon has it. */
static int open_target(struct replay *rp)
{
	const struct config *c = rp->cfg;
	uint64_t size = (uint64_t)c->ring.size_mb * 1024 * 1024;
	char err[512];

	if (ringio_in_use(c->ring.path))
		return open_handoff(rp);
	if (mkdir(c->state_dir, 0750) != 0 && errno != EEXIST) {
		log_err("replay: mkdir: %s: %s", c->state_dir, strerror(errno));
		return -1;
	}
	if (ring_open(c->ring.path, size, NULL, &rp->ring, err, sizeof(err)) !=
	    0) {
		if (errno == EWOULDBLOCK)
			return open_handoff(rp);
		log_err("%s", err);
		return -1;
	}
	if (seen_open(c->state_dir, 0, &rp->seen, err, sizeof(err)) != 0) {
		log_err("%s", err);
		return -1;
	}
	rp->ing = ingest_new(c, rp->ring, rp->seen, NULL);
	if (rp->ing == NULL || ingest_src_init(&rp->src, c, NULL) != 0) {
		log_err("replay: start: %s", strerror(ENOMEM));
		return -1;
	}
	return 0;
}

/* Commit (direct) or close the last chunk and sync the folder. */
static int settle(struct replay *rp)
{
	if (!rp->handoff)
		return ingest_commit(rp->ing);
	if (chunk_close(rp) != 0 || fsync(rp->dirfd) != 0)
		return -1;
	return 0;
}

static void summary(const struct replay *rp)
{
	if (rp->handoff)
		log_info("replay: %" PRIu64 " files, %" PRIu64 " packets "
		         "handed to the daemon in %u files, %" PRIu64 " bad "
		         "packets, %" PRIu64 " broken frames",
		         rp->files, rp->packets, rp->n_chunks, rp->bad,
		         rp->broken);
	else
		log_info(
		    "replay: %" PRIu64 " files, %" PRIu64 " packets, %" PRIu64
		    " readings queued, %" PRIu64 " already "
		    "accepted before, %" PRIu64 " refused (ring full), %" PRIu64
		    " bad packets, %" PRIu64 " broken frames",
		    rp->files, rp->packets, rp->staged, rp->dups, rp->refused,
		    rp->bad, rp->broken);
	if (rp->full)
		log_warn("replay: the ring is full; start the daemon so it "
		         "delivers, then replay again (what was queued now is "
		         "recognised)");
}

static int replay_all(struct replay *rp, int nfiles, char **files)
{
	int i, rc = CLI_EXIT_OK;

	if (open_target(rp) != 0)
		return CLI_EXIT_USAGE;
	progress_start(&rp->pg, "replay", "bytes",
	               progress_file_bytes(nfiles, files));
	for (i = 0; i < nfiles && !rp->full; i++) {
		if (replay_file(rp, files[i]) != 0)
			rc = CLI_EXIT_USAGE;
		if (settle(rp) != 0) {
			log_err("replay: not queued: %s", strerror(errno));
			return CLI_EXIT_USAGE;
		}
	}
	progress_end(&rp->pg);
	summary(rp);
	if (rp->io_error)
		rc = CLI_EXIT_USAGE;
	if (rc == CLI_EXIT_OK && (rp->bad > 0 || rp->full || rp->packets == 0))
		rc = CLI_EXIT_FAIL;
	return rc;
}

int cmd_replay(int argc, char **argv)
{
	struct replay *rp = calloc(1, sizeof(*rp));
	struct cfg_errors errs;
	const char *config = NULL;
	int rc;

	if (rp == NULL)
		return CLI_EXIT_USAGE;
	rp->dirfd = rp->chunk_fd = -1;
	rc = replay_parse(rp, &config, argc, argv);
	memset(&errs, 0, sizeof(errs));
	if (rc < 0 && config_load(config, &rp->cfg, &errs) != 0) {
		cli_print_errors(&errs);
		rc = CLI_EXIT_USAGE;
	} else if (rc < 0) {
		cfg_errors_free(&errs);
		rc = replay_all(rp, argc - optind, argv + optind);
	}
	if (rp->chunk_fd >= 0)
		close(rp->chunk_fd);
	if (rp->dirfd >= 0)
		close(rp->dirfd);
	ingest_src_free(&rp->src);
	ingest_free(rp->ing);
	seen_close(rp->seen);
	if (rp->ring != NULL && ring_close(rp->ring) != 0)
		rc = CLI_EXIT_USAGE;
	config_free(rp->cfg);
	free(rp);
	return rc;
}
