/*
 * fileout.c - the `file` output; see fileout.h for the order of writes,
 * syncs and acks.
 */
#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fdio.h"
#include "fileout.h"
#include "log.h"

#define TAIL_WINDOW (RING_PAYLOAD_MAX + 64)
#define ERR_LOG_MS  60000

struct fileout {
	char name[RING_NAME_MAX + 1];
	char *path;
	struct loop *loop;
	struct ring *ring;
	int fd;
	off_t good; /* size after the last good sync */
	enum fileout_state state;
	int64_t backoff_ms;
	int64_t err_logged_ms;
	bool err_logged;
	struct loop_timer t;
	struct fileout_stat st;
	char *buf; /* FILEOUT_CHUNK_BYTES */
};

static void arm(struct fileout *f, int64_t ms)
{
	if (loop_timer_arm(f->loop, &f->t, ms) != 0)
		log_err("output: %s: timer: %s", f->name, strerror(errno));
}

/* A failed round: undo the partial write, log (rate-limited), back off. */
static void round_failed(struct fileout *f, const char *op, int err)
{
	int64_t now = clock_mono_ms(loop_clock(f->loop));

	if (ftruncate(f->fd, f->good) != 0)
		err = err ? err : errno;
	snprintf(f->st.last_error, sizeof(f->st.last_error), "%s: %s: %s", op,
	         f->path, strerror(err));
	f->st.failures++;
	f->backoff_ms = f->backoff_ms ? f->backoff_ms * 2 : 1000;
	if (f->backoff_ms > FILEOUT_BACKOFF_MAX_MS)
		f->backoff_ms = FILEOUT_BACKOFF_MAX_MS;
	if (!f->err_logged || now - f->err_logged_ms >= ERR_LOG_MS) {
		log_err("output: %s: %s; retrying in %" PRId64 " s (%" PRIu64
		        " failures)",
		        f->name, f->st.last_error, f->backoff_ms / 1000,
		        f->st.failures);
		f->err_logged = true;
		f->err_logged_ms = now;
	}
	f->state = FILEOUT_BACKOFF;
	arm(f, f->backoff_ms);
}

/* Lines of the records after the cursor into f->buf.  Returns the bytes
 * used (0: nothing new), *last the last seq, *more whether the chunk
 * filled up; -1 on a ring error. */
static ssize_t fill(struct fileout *f, uint64_t *last, bool *more,
                    size_t *count)
{
	struct ring_iter it;
	size_t used = 0, len, n = 0;
	uint64_t seq;
	int rc;

	*more = false;
	if (ring_cursor_get(f->ring, f->name, last) != 0)
		return -1;
	ring_iter_init(&it, *last);
	while (n < FILEOUT_CHUNK_RECORDS) {
		rc = ring_iter_next(f->ring, &it, f->buf + used,
		                    FILEOUT_CHUNK_BYTES - used - 1, &len, &seq);
		if (rc < 0 && errno == EMSGSIZE && used > 0)
			break;
		if (rc < 0)
			return -1;
		if (rc == 0) {
			*count = n;
			return (ssize_t)used;
		}
		f->buf[used + len] = '\n';
		used += len + 1;
		*last = seq;
		n++;
	}
	*more = true;
	*count = n;
	return (ssize_t)used;
}

static void fileout_round(void *arg)
{
	struct fileout *f = arg;
	uint64_t last = 0;
	size_t count = 0;
	bool more;
	ssize_t n = fill(f, &last, &more, &count);

	if (n < 0) {
		round_failed(f, "read ring", errno);
		return;
	}
	if (n == 0) {
		f->state = FILEOUT_DRAINED;
		return;
	}
	/* write -> fdatasync -> only then ack */
	if (fdio_write_all(f->fd, f->buf, (size_t)n) != 0) {
		round_failed(f, "write", errno);
		return;
	}
	if (fdatasync(f->fd) != 0) {
		round_failed(f, "fdatasync", errno);
		return;
	}
	f->good += n;
	if (ring_ack(f->ring, f->name, last) != 0) {
		round_failed(f, "ack", errno);
		return;
	}
	f->st.written += count;
	f->st.acked = last;
	f->backoff_ms = 0;
	f->st.last_error[0] = '\0';
	f->state = more ? FILEOUT_WRITING : FILEOUT_DRAINED;
	if (more)
		arm(f, 0);
}

/* Drop a last line a crash cut short (no final newline). */
static int fix_tail(struct fileout *f)
{
	char tail[TAIL_WINDOW];
	struct stat sb;
	off_t from, cut;
	ssize_t n;

	if (fstat(f->fd, &sb) != 0)
		return -1;
	f->good = sb.st_size;
	if (sb.st_size == 0)
		return 0;
	from = sb.st_size > TAIL_WINDOW ? sb.st_size - TAIL_WINDOW : 0;
	n = pread(f->fd, tail, (size_t)(sb.st_size - from), from);
	if (n != sb.st_size - from)
		return -1;
	if (tail[n - 1] == '\n')
		return 0;
	for (cut = n - 1; cut >= 0 && tail[cut] != '\n'; cut--)
		;
	if (cut < 0 && from > 0)
		return fdio_write_all(f->fd, "\n", 1) == 0 ? fix_tail(f) : -1;
	f->good = from + cut + 1;
	log_warn("output: %s: %s: dropping a cut-off last line (%" PRId64
	         " bytes) before appending",
	         f->name, f->path, (int64_t)(sb.st_size - f->good));
	if (ftruncate(f->fd, f->good) != 0 || fdatasync(f->fd) != 0)
		return -1;
	return 0;
}

static int sync_parent(const char *path)
{
	const char *slash = strrchr(path, '/');
	char dir[4096];
	int fd, rc;

	if (slash == NULL)
		snprintf(dir, sizeof(dir), ".");
	else
		snprintf(dir, sizeof(dir), "%.*s", (int)(slash - path + 1),
		         path);
	fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
	if (fd < 0)
		return -1;
	rc = fsync(fd);
	close(fd);
	return rc;
}

int fileout_new(const struct cfg_output *o, struct loop *loop,
                struct ring *ring, struct fileout **out, char *err,
                size_t errcap)
{
	struct fileout *f = calloc(1, sizeof(*f));

	*out = NULL;
	if (f != NULL) {
		f->fd = -1;
		f->buf = malloc(FILEOUT_CHUNK_BYTES);
		f->path = strdup(o->path);
	}
	if (f == NULL || f->buf == NULL || f->path == NULL) {
		snprintf(err, errcap, "output: %s: start: %s", o->name,
		         strerror(ENOMEM));
		fileout_free(f);
		return -1;
	}
	snprintf(f->name, sizeof(f->name), "%s", o->name);
	f->loop = loop;
	f->ring = ring;
	loop_timer_init(&f->t, fileout_round, f);
	f->fd = open(o->path,
	             O_RDWR | O_APPEND | O_CREAT | O_CLOEXEC | O_NOCTTY, 0640);
	if (f->fd < 0 || fix_tail(f) != 0 || sync_parent(o->path) != 0) {
		snprintf(err, errcap, "output: %s: open: %s: %s", o->name,
		         o->path, strerror(errno));
		fileout_free(f);
		return -1;
	}
	f->state = FILEOUT_WRITING;
	arm(f, 0); /* a backlog from before a restart goes out now */
	*out = f;
	return 0;
}

void fileout_kick(struct fileout *f)
{
	if (f->state == FILEOUT_BACKOFF)
		return;
	f->state = FILEOUT_WRITING;
	arm(f, 0);
}

enum fileout_state fileout_state(const struct fileout *f)
{
	return f->state;
}

void fileout_stat(const struct fileout *f, struct fileout_stat *st)
{
	*st = f->st;
}

void fileout_free(struct fileout *f)
{
	if (f == NULL)
		return;
	if (f->loop != NULL)
		loop_timer_disarm(f->loop, &f->t);
	if (f->fd >= 0)
		close(f->fd);
	free(f->buf);
	free(f->path);
	free(f);
}
