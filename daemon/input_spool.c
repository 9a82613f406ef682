/*
 * input_spool.c - the `spool` input: a folder where a gateway drops
 * message files, one packet per file (framing `whole` unless the input
 * says otherwise); and the replay folder `tidepost replay` hands files to
 * a running daemon through.
 *
 * Which entries are read (RELIABILITY.md T20):
 *   - names of 1..SPOOL_NAME_MAX bytes of [A-Za-z0-9._-], not starting
 *     with '.', not ending in ".tmp" (a producer writes NAME.tmp or
 *     .NAME, syncs, then renames it into place), and matching the
 *     input's `pattern` (fnmatch);
 *   - opened with openat(dirfd, name, O_RDONLY | O_NOFOLLOW | O_NONBLOCK
 *     | O_CLOEXEC | O_NOCTTY), then fstat: only a regular file with one
 *     link (no hard link to a file elsewhere) of at most SPOOL_FILE_MAX
 *     bytes; a FIFO or device is never opened (d_type) and could not
 *     block us anyway (O_NONBLOCK);
 *   - a bad entry (symlink, FIFO, device, socket, odd name, extra links)
 *     is left alone and logged once, with its name escaped; folders
 *     (done/ and rejected/ may live inside) are skipped silently.
 *
 * What happens to a file:
 *   - its readings staged -> after the commit that holds them returned:
 *     moved to `done` (or deleted with delete_done), then fsync of done
 *     and of the folder; the file is checked to be the same inode as the
 *     one read (a file swapped in meanwhile is left for the next sweep);
 *   - no valid packet (or too big) -> moved to `rejected`, with
 *     NAME.reason beside it (one line: why);
 *   - the ring full or failed -> left in place and tried again after
 *     INPUT_RETRY_MS; readings of it already accepted are then known
 *     duplicates (seen.h), so a retried file is not relayed twice.
 *
 * The folder is watched with inotify (IN_CLOSE_WRITE, IN_MOVED_TO); an
 * event starts a sweep (readdir from the start) unless one is running, in
 * which case one more sweep follows it.  A sweep handles SPOOL_BATCH
 * files per loop iteration so the commit (and the moves) happen between
 * batches.  At start the folder is swept once: files already there are
 * taken.  --once: that first sweep only, no inotify.
 */
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <fnmatch.h>
#include <inttypes.h>
#include <poll.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/inotify.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fdio.h"
#include "input.h"
#include "log.h"
#include "seen.h"

#define SPOOL_WARNED_MAX 256

enum pend_kind { PEND_DONE, PEND_REJECT };

struct pend {
	char name[SPOOL_NAME_MAX + 1];
	dev_t dev;
	ino_t ino;
	enum pend_kind kind;
	char reason[160];
};

struct spool_in {
	struct input in;
	struct cfg_input own; /* replay: the entry, with owned dirs */
	bool replay;
	int dirfd, donefd, rejfd; /* donefd -1 with delete_done */
	int ifd;                  /* inotify, or -1 */
	DIR *sweep;               /* a sweep in progress, or NULL */
	bool rescan;              /* events came during the sweep */
	bool blocked;             /* ring full or failed: retry later */
	bool swept;               /* the first sweep is complete */
	struct loop_timer step;   /* next batch / retry */
	struct pend pend[SPOOL_BATCH];
	size_t n_pend;
	struct pend cur; /* the file being read */
	uint64_t warned[SPOOL_WARNED_MAX];
	size_t n_warned;
	uint64_t files_done, files_rejected;
	struct tp_framer fr;
	uint8_t frame[TP_MAX_PACKET];
	uint8_t buf[SPOOL_FILE_MAX + 1];
};

/* What reading one file came to. */
enum file_rc { FILE_SKIP, FILE_PEND, FILE_BLOCKED };

static void arm(struct spool_in *s, int64_t ms)
{
	if (loop_timer_arm(s->in.ctx.loop, &s->step, ms) != 0)
		log_err("input: %s: timer: %s", s->in.name, strerror(errno));
}

/* Log a skipped entry once (by name). */
static void warn_once(struct spool_in *s, const char *name, const char *why)
{
	uint64_t h = seen_hash(name, strlen(name));
	char esc[256];
	size_t i;

	for (i = 0; i < s->n_warned && i < SPOOL_WARNED_MAX; i++)
		if (s->warned[i] == h)
			return;
	if (s->n_warned == SPOOL_WARNED_MAX) {
		s->n_warned++;
		log_warn("input: %s: more entries skipped in %s; not logged "
		         "each",
		         s->in.name, s->in.ci->dir);
		return;
	}
	if (s->n_warned > SPOOL_WARNED_MAX)
		return;
	s->warned[s->n_warned++] = h;
	input_escape_name(name, esc, sizeof(esc));
	log_warn("input: %s: skipping \"%s\" in %s: %s; left in place",
	         s->in.name, esc, s->in.ci->dir, why);
}

static bool safe_char(char c)
{
	return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') ||
	       (c >= '0' && c <= '9') || c == '.' || c == '_' || c == '-';
}

/* NULL if the name may be read, else why not (NULL + *quiet: ignore). */
static const char *name_problem(const struct spool_in *s, const char *name,
                                bool *quiet)
{
	size_t i, n = strlen(name);

	*quiet = false;
	if (name[0] == '.' || (n > 4 && strcmp(name + n - 4, ".tmp") == 0)) {
		*quiet = true; /* being written, or ours (. and ..) */
		return "a temporary file";
	}
	for (i = 0; i < n; i++)
		if (!safe_char(name[i]))
			return "name not of [A-Za-z0-9._-]";
	if (n > SPOOL_NAME_MAX)
		return "name longer than 128 bytes";
	return NULL;
}

static const char *pattern_problem(const struct spool_in *s, const char *name)
{
	const char *pat = s->in.ci->pattern ? s->in.ci->pattern : "*";

	if (fnmatch(pat, name, 0) != 0)
		return "name does not match the input's pattern";
	return NULL;
}

/* Entry types that are never opened. */
static const char *type_problem(unsigned char t, bool *quiet)
{
	*quiet = t == DT_DIR;
	switch (t) {
	case DT_DIR:
		return "a folder";
	case DT_LNK:
		return "a symbolic link";
	case DT_FIFO:
		return "a FIFO";
	case DT_CHR:
	case DT_BLK:
		return "a device";
	case DT_SOCK:
		return "a socket";
	default:
		return NULL;
	}
}

/* The framing of a replay file: its last suffix. */
static int replay_framing(const char *name, enum tp_framing *k, size_t *n)
{
	const char *dot = strrchr(name, '.');
	char word[32];
	size_t i;

	if (dot == NULL || strlen(dot + 1) >= sizeof(word))
		return -1;
	for (i = 0; dot[1 + i] != '\0'; i++)
		word[i] = dot[1 + i] == '-' ? ':' : dot[1 + i];
	word[i] = '\0';
	if (tp_framing_parse(word, k, n) != TP_OK)
		return -1;
	return *k == TP_FRAMING_FIXED && *n > TP_MAX_PACKET ? -1 : 0;
}

static int set_framing(struct spool_in *s, const char *name)
{
	enum tp_framing kind = s->in.ci->framing;
	size_t n = s->in.ci->fixed_n;

	if (s->replay && replay_framing(name, &kind, &n) != 0)
		return -1;
	if (tp_frame_init(&s->fr, kind, n, s->frame, sizeof(s->frame)) != TP_OK)
		return -1;
	return 0;
}

static void pend_reject(struct pend *p, const char *what, const char *more)
{
	p->kind = PEND_REJECT;
	snprintf(p->reason, sizeof(p->reason), "%s%s", what, more);
}

/* Push the file's bytes through the framer into ingest. */
static enum file_rc ingest_file(struct spool_in *s, struct pend *p, size_t len,
                                int64_t mtime_s)
{
	struct ingest_result res;
	enum tp_frame_result r;
	enum ingest_rc rc;
	size_t off = 0, used, ok = 0;
	bool end = false;

	p->reason[0] = '\0';
	while (!end) {
		used = 0;
		if (off < len) {
			r = tp_frame_push(&s->fr, s->buf + off, len - off,
			                  &used);
		} else {
			r = tp_frame_finish(&s->fr);
			end = true;
		}
		off += used;
		if (r == TP_FRAME_BROKEN && p->reason[0] == '\0')
			pend_reject(p, "broken frame", "");
		if (r != TP_FRAME_READY || s->fr.len == 0)
			continue;
		rc = ingest_packet(s->in.ctx.ing, &s->in.src,
		                   tp_frame_data(&s->fr), s->fr.len, mtime_s,
		                   &res);
		if (rc == INGEST_FULL || rc == INGEST_DOWN)
			return FILE_BLOCKED;
		if (rc == INGEST_OK)
			ok++;
		else if (p->reason[0] == '\0')
			pend_reject(p, res.reason, "");
	}
	if (ok > 0)
		p->kind = PEND_DONE;
	else if (p->reason[0] == '\0')
		pend_reject(p, "no packet in the file", "");
	return FILE_PEND;
}

/* Open name safely and check what it is; fd or -1 (handled). */
static int open_entry(struct spool_in *s, const char *name, struct stat *sb)
{
	int fd =
	    openat(s->dirfd, name,
	           O_RDONLY | O_NOFOLLOW | O_NONBLOCK | O_CLOEXEC | O_NOCTTY);

	if (fd < 0) {
		if (errno == ELOOP)
			warn_once(s, name, "a symbolic link");
		else if (errno != ENOENT)
			warn_once(s, name, strerror(errno));
		return -1;
	}
	if (fstat(fd, sb) != 0) {
		warn_once(s, name, strerror(errno));
		close(fd);
		return -1;
	}
	if (!S_ISREG(sb->st_mode) || sb->st_nlink != 1) {
		if (!S_ISDIR(sb->st_mode))
			warn_once(s, name,
			          S_ISREG(sb->st_mode) ? "has other hard links"
			                               : "not a regular file");
		close(fd);
		return -1;
	}
	return fd;
}

/* One entry of the sweep. */
static enum file_rc take_file(struct spool_in *s, const char *name)
{
	struct pend *p = &s->cur; /* ingest may commit (and move the
	                           * pending files) while this one is read */
	enum file_rc rc = FILE_PEND;
	struct stat sb;
	ssize_t n;
	int fd = open_entry(s, name, &sb);

	if (fd < 0)
		return FILE_SKIP;
	memset(p, 0, sizeof(*p));
	memcpy(p->name, name, strlen(name) + 1);
	p->dev = sb.st_dev;
	p->ino = sb.st_ino;
	n = sb.st_size > SPOOL_FILE_MAX
	        ? 0
	        : fdio_read_all(fd, s->buf, sizeof(s->buf));
	if (sb.st_size > SPOOL_FILE_MAX || n > SPOOL_FILE_MAX)
		pend_reject(p,
		            "larger than the spool limit of 65536 "
		            "bytes",
		            "");
	else if (n < 0)
		pend_reject(p, "read: ", strerror(errno));
	else if (set_framing(s, name) != 0)
		pend_reject(p,
		            "no framing suffix (.cobs .slip .hex "
		            ".whole .fixed-N)",
		            "");
	else
		rc = ingest_file(s, p, (size_t)n, (int64_t)sb.st_mtime);
	close(fd);
	if (rc == FILE_PEND)
		s->pend[s->n_pend++] = *p;
	return rc;
}

static enum file_rc consider(struct spool_in *s, const struct dirent *d)
{
	const char *why, *type_why;
	bool quiet, type_quiet;

	why = name_problem(s, d->d_name, &quiet);
	if (why != NULL && quiet)
		return FILE_SKIP; /* temporary files, . and .. */
	type_why = type_problem(d->d_type, &type_quiet);
	if (type_why != NULL) {
		if (!type_quiet)
			warn_once(s, d->d_name, type_why);
		return FILE_SKIP; /* folders silently */
	}
	if (why == NULL)
		why = pattern_problem(s, d->d_name);
	if (why != NULL) {
		warn_once(s, d->d_name, why);
		return FILE_SKIP;
	}
	return take_file(s, d->d_name);
}

static void end_sweep(struct spool_in *s)
{
	if (s->sweep != NULL)
		closedir(s->sweep);
	s->sweep = NULL;
}

static int begin_sweep(struct spool_in *s)
{
	int fd = openat(s->dirfd, ".", O_RDONLY | O_DIRECTORY | O_CLOEXEC);

	if (fd >= 0)
		s->sweep = fdopendir(fd);
	if (s->sweep == NULL) {
		log_err("input: %s: read folder: %s: %s", s->in.name,
		        s->in.ci->dir, strerror(errno));
		if (fd >= 0)
			close(fd);
		return -1;
	}
	return 0;
}

/* Handle up to SPOOL_BATCH files of the sweep (starting one if none). */
static void spool_step(void *arg)
{
	struct spool_in *s = arg;
	struct dirent *d;

	if (s->blocked || s->n_pend > 0)
		return;
	if (s->sweep == NULL) {
		s->rescan = false;
		if (begin_sweep(s) != 0) {
			arm(s, INPUT_RETRY_MS);
			return;
		}
	}
	while (s->n_pend < SPOOL_BATCH) {
		d = readdir(s->sweep);
		if (d == NULL) {
			end_sweep(s);
			s->swept = true;
			if (s->rescan && s->n_pend == 0)
				arm(s, 0);
			return;
		}
		if (consider(s, d) == FILE_BLOCKED) {
			end_sweep(s);
			s->blocked = true;
			arm(s, INPUT_RETRY_MS);
			return;
		}
	}
}

/* Is the entry still the file that was read? */
static bool same_file(const struct spool_in *s, const struct pend *p)
{
	struct stat sb;

	if (fstatat(s->dirfd, p->name, &sb, AT_SYMLINK_NOFOLLOW) != 0)
		return false;
	return sb.st_dev == p->dev && sb.st_ino == p->ino;
}

static void write_reason(struct spool_in *s, const struct pend *p)
{
	char name[SPOOL_NAME_MAX + 16], line[200];
	int fd, n;

	snprintf(name, sizeof(name), "%s.reason", p->name);
	fd =
	    openat(s->rejfd, name,
	           O_WRONLY | O_CREAT | O_TRUNC | O_NOFOLLOW | O_CLOEXEC, 0640);
	n = snprintf(line, sizeof(line), "%s\n", p->reason);
	if (fd < 0 || write(fd, line, (size_t)n) != n || fsync(fd) != 0)
		log_warn("input: %s: write: %s/%s: %s", s->in.name,
		         s->in.ci->rejected, name, strerror(errno));
	if (fd >= 0)
		close(fd);
}

static void move_one(struct spool_in *s, const struct pend *p)
{
	const char *to =
	    p->kind == PEND_DONE ? s->in.ci->done : s->in.ci->rejected;
	int rc;

	if (!same_file(s, p)) {
		log_warn("input: %s: %s: changed after it was read; left for "
		         "the next sweep",
		         s->in.name, p->name);
		return;
	}
	if (p->kind == PEND_DONE && s->donefd < 0)
		rc = unlinkat(s->dirfd, p->name, 0);
	else
		rc = renameat(s->dirfd, p->name,
		              p->kind == PEND_DONE ? s->donefd : s->rejfd,
		              p->name);
	if (rc != 0) {
		log_err("input: %s: move: %s to %s: %s; it stays (read again "
		        "later, its readings known as duplicates)",
		        s->in.name, p->name, to ? to : "(deleted)",
		        strerror(errno));
		return;
	}
	if (p->kind == PEND_DONE) {
		s->files_done++;
		return;
	}
	s->files_rejected++;
	log_warn("input: %s: %s: rejected (%s); moved to %s", s->in.name,
	         p->name, p->reason, to);
	write_reason(s, p);
}

static void sync_dirs(struct spool_in *s)
{
	if ((s->donefd >= 0 && fsync(s->donefd) != 0) || fsync(s->rejfd) != 0 ||
	    fsync(s->dirfd) != 0)
		log_warn("input: %s: fsync: %s: %s", s->in.name, s->in.ci->dir,
		         strerror(errno));
}

/* ingest committed: the pending files are safe to move (ok), or must
 * stay and be read again (!ok). */
static void spool_committed(struct input *in, bool ok)
{
	struct spool_in *s = (struct spool_in *)in;
	size_t i;

	if (s->n_pend == 0)
		return;
	if (!ok) {
		s->n_pend = 0;
		end_sweep(s);
		s->blocked = true;
		arm(s, INPUT_RETRY_MS);
		return;
	}
	for (i = 0; i < s->n_pend; i++)
		move_one(s, &s->pend[i]);
	s->n_pend = 0;
	sync_dirs(s);
	if (s->sweep != NULL || s->rescan)
		arm(s, 0);
}

static void spool_retry(void *arg)
{
	struct spool_in *s = arg;

	s->blocked = false;
	spool_step(s);
}

static void spool_event(void *arg, int fd, short revents)
{
	struct spool_in *s = arg;
	char evbuf[4096] __attribute__((aligned(8)));

	(void)revents;
	while (read(fd, evbuf, sizeof(evbuf)) > 0)
		;
	if (s->sweep != NULL || s->n_pend > 0 || s->blocked) {
		s->rescan = true;
		return;
	}
	arm(s, 0);
}

static enum input_state spool_state(const struct input *in)
{
	const struct spool_in *s = (const struct spool_in *)in;

	if (s->blocked)
		return INPUT_BLOCKED;
	if (!s->swept || s->sweep != NULL || s->n_pend > 0 || s->rescan)
		return INPUT_BUSY;
	return INPUT_IDLE;
}

static void spool_free(struct input *in)
{
	struct spool_in *s = (struct spool_in *)in;

	loop_timer_disarm(in->ctx.loop, &s->step);
	end_sweep(s);
	if (s->ifd >= 0) {
		loop_unwatch(in->ctx.loop, s->ifd);
		close(s->ifd);
	}
	if (s->dirfd >= 0)
		close(s->dirfd);
	if (s->donefd >= 0)
		close(s->donefd);
	if (s->rejfd >= 0)
		close(s->rejfd);
	input_base_fini(in);
	free(s->own.dir);
	free(s->own.rejected);
	free(s);
}

static const struct input_ops spool_ops = {
    .committed = spool_committed,
    .state = spool_state,
    .free = spool_free,
};

/* Open (creating when missing) a folder. */
static int open_dir(const char *path, mode_t mode, char *err, size_t cap,
                    const char *name)
{
	int fd;

	if (mkdir(path, mode) != 0 && errno != EEXIST) {
		snprintf(err, cap, "input: %s: mkdir: %s: %s", name, path,
		         strerror(errno));
		return -1;
	}
	fd = open(path, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
	if (fd < 0)
		snprintf(err, cap, "input: %s: open: %s: %s", name, path,
		         strerror(errno));
	return fd;
}

static int open_dirs(struct spool_in *s, char *err, size_t cap)
{
	const struct cfg_input *ci = s->in.ci;
	mode_t mode = s->replay ? 0700 : 0750;

	s->dirfd = open_dir(ci->dir, mode, err, cap, ci->name);
	if (s->dirfd < 0)
		return -1;
	if (ci->done != NULL && !ci->delete_done) {
		s->donefd = open_dir(ci->done, mode, err, cap, ci->name);
		if (s->donefd < 0)
			return -1;
	}
	s->rejfd = open_dir(ci->rejected, mode, err, cap, ci->name);
	return s->rejfd < 0 ? -1 : 0;
}

static int watch_dir(struct spool_in *s, char *err, size_t cap)
{
	const struct cfg_input *ci = s->in.ci;

	s->ifd = inotify_init1(IN_NONBLOCK | IN_CLOEXEC);
	if (s->ifd < 0 ||
	    inotify_add_watch(s->ifd, ci->dir,
	                      IN_CLOSE_WRITE | IN_MOVED_TO | IN_ONLYDIR) < 0 ||
	    loop_watch(s->in.ctx.loop, s->ifd, POLLIN, spool_event, s) != 0) {
		snprintf(err, cap, "input: %s: inotify: %s: %s", ci->name,
		         ci->dir, strerror(errno));
		return -1;
	}
	return 0;
}

/* Replay: own copies of the entry and its folders. */
static int own_entry(struct spool_in *s, const struct cfg_input *ci)
{
	size_t n = strlen(ci->dir);

	s->own = *ci;
	s->own.dir = strdup(ci->dir);
	s->own.rejected = malloc(n + sizeof("/rejected"));
	if (s->own.dir == NULL || s->own.rejected == NULL)
		return -1;
	memcpy(s->own.rejected, ci->dir, n);
	memcpy(s->own.rejected + n, "/rejected", sizeof("/rejected"));
	s->own.done = NULL;
	return 0;
}

int input_spool_new(const struct cfg_input *ci, const struct input_ctx *ctx,
                    bool replay, struct input **out, char *err, size_t errcap)
{
	struct spool_in *s = calloc(1, sizeof(*s));

	*out = NULL;
	if (s == NULL)
		goto out_nomem;
	s->in.ctx = *ctx;
	loop_timer_init(&s->step, spool_retry, s);
	s->dirfd = s->donefd = s->rejfd = s->ifd = -1;
	s->replay = replay;
	if (replay && own_entry(s, ci) != 0)
		goto out_nomem;
	if (input_base_init(&s->in, &spool_ops, replay ? &s->own : ci, ctx))
		goto out_nomem;
	if (open_dirs(s, err, errcap) != 0 ||
	    (!ctx->once && watch_dir(s, err, errcap) != 0))
		goto out_free;
	arm(s, 0); /* the first sweep: files already there */
	*out = &s->in;
	return 0;
out_nomem:
	snprintf(err, errcap, "input: %s: start: %s", ci->name,
	         strerror(ENOMEM));
out_free:
	if (s != NULL)
		spool_free(&s->in);
	return -1;
}
