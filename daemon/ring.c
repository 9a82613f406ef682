/*
 * ring.c - the crash-safe ring file.  Format, protocol and recovery are
 * described in ring.h and docs/ring.md; this file follows them.
 *
 * Order of durability, written once here and kept everywhere below:
 *   commit:  pwrite records -> fdatasync -> only then "accepted";
 *   ack:     pwrite header to the slot not holding the last durable
 *            header (gen + 1) -> fdatasync -> only then the cursor and the
 *            tail move in memory and freed space may be reused;
 *   create:  ring.tmp, zeros written, both slots, fsync, rename, fsync
 *            of the directory;
 *   open:    drop the clean cached pages, pick slot, scan, zero the torn
 *            remainder, new header, fdatasync.
 * Any failed write or sync marks the ring failed (fsyncgate: a failed
 * sync is never retried and never assumed to have worked).
 */
#include "ring.h"

#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "tidepost/check.h"

#define SLOT_BYTES     4096u
#define DATA_START     8192u
#define SLOT_CRC_AT    400u
#define OUT_AT         80u
#define OUT_BYTES      40u
#define HDR            24u   /* record header */
#define REC_MAX        4096u /* HDR + RING_PAYLOAD_MAX */
#define STAGE_MAX      65536u
#define RBUF_BYTES     65536u
#define RING_JUMPS     4 /* places remembered for walk() */
#define SIZE_MAX_BYTES (1ull << 40)
#define SLOT_MAGIC     0x48525054u /* "TPRH" */
#define REC_MAGIC      0x43525054u /* "TPRC" */
#define VERSION        1u

enum { T_DATA = 1, T_WRAP = 2, T_GAP = 3 };
enum { RK_BAD = 0, RK_DATA, RK_WRAP, RK_GAP };

int ring_test_ack_before_sync = 0; /* TEST-ONLY: see ring.h */

/* CRC-32/ISCSI (CRC-32C), parameters and check value as listed in the CRC
 * RevEng catalogue (Greg Cook): width 32, poly 0x1edc6f41, init and
 * xorout 0xffffffff, reflected in and out, check 0xe3069283. */
static const struct tp_crc_params crc32c_params = {
    "CRC-32/ISCSI", 32,   0x1edc6f41u, 0xffffffffu,
    true,           true, 0xffffffffu, 0xe3069283u,
};

/* A place in the data area and the seq the scanner expects there. */
struct pos {
	uint64_t off;
	uint32_t lap;
	uint64_t seq;
};

struct out {
	char name[RING_NAME_MAX + 1];
	uint64_t acked;
};

/* One header slot, decoded. */
struct hdr {
	uint64_t gen, size, dstart, next_seq;
	struct pos tail, head; /* head: the hint, head.seq == next_seq */
	size_t n_outs;
	struct out outs[RING_OUTPUTS_MAX];
};

struct stage {
	size_t seg0, seg1; /* bytes at the head / at data start */
	size_t n;          /* records staged */
	int wrapped;       /* later records go to seg1 */
	struct pos head;   /* where the next staged record goes */
};

struct rview {
	int type;
	size_t len, bytes;
	uint64_t seq;
	const unsigned char *payload;
	const char *why; /* for RK_BAD */
};

struct ring {
	const struct ringio_ops *ops;
	int fd;
	char *path;
	uint64_t size, dstart;
	struct tp_crc crc;
	bool hw_crc;           /* CRC-32C by the CPU's instruction (x86) */
	uint64_t gen;          /* last durable header */
	int dslot;             /* its slot */
	struct pos tail, head; /* durable tail, committed head */
	uint64_t gap_to;       /* seq to jump to (GAP), 0: none */
	size_t n_outs;
	struct out outs[RING_OUTPUTS_MAX];
	unsigned char *stage;
	size_t stage_cap;
	struct stage st;
	int owed_sync; /* mutation switch only */
	uint64_t refused, lost, recovery_us;
	int failed;
	struct pos rhint;            /* ring_read: after the last read */
	struct pos jump[RING_JUMPS]; /* places readers reached (walk) */
	unsigned jump_next;
	unsigned char *rbuf;
	uint64_t rb_off;
	size_t rb_len;
	unsigned char slot[SLOT_BYTES];
};

/* ---- little-endian fields ---- */

static void put16(unsigned char *b, uint16_t v)
{
	b[0] = (unsigned char)v;
	b[1] = (unsigned char)(v >> 8);
}

static void put32(unsigned char *b, uint32_t v)
{
	put16(b, (uint16_t)v);
	put16(b + 2, (uint16_t)(v >> 16));
}

static void put64(unsigned char *b, uint64_t v)
{
	put32(b, (uint32_t)v);
	put32(b + 4, (uint32_t)(v >> 32));
}

static uint16_t get16(const unsigned char *b)
{
	return (uint16_t)(b[0] | (b[1] << 8));
}

static uint32_t get32(const unsigned char *b)
{
	return (uint32_t)get16(b) | ((uint32_t)get16(b + 2) << 16);
}

static uint64_t get64(const unsigned char *b)
{
	return (uint64_t)get32(b) | ((uint64_t)get32(b + 4) << 32);
}

/* ---- small helpers ---- */

static size_t rec_bytes(size_t len)
{
	return (HDR + len + 7u) & ~(size_t)7u;
}

static uint64_t data_bytes(const struct ring *r)
{
	return r->size - r->dstart;
}

/* Fewer than HDR bytes before the end: continue at the start, next lap. */
static void norm(const struct ring *r, struct pos *p)
{
	if (r->size - p->off < HDR) {
		p->off = r->dstart;
		p->lap++;
	}
}

static bool same_place(const struct pos *a, const struct pos *b)
{
	return a->off == b->off && a->lap == b->lap;
}

static uint64_t used_bytes(const struct ring *r)
{
	return (uint64_t)(r->head.lap - r->tail.lap) * data_bytes(r) +
	       r->head.off - r->tail.off;
}

static uint64_t next_seq(const struct ring *r)
{
	return r->gap_to > r->head.seq ? r->gap_to : r->head.seq;
}

static void msg(char *err, size_t cap, const char *what, const char *path,
                const char *cause)
{
	if (err != NULL && cap != 0)
		snprintf(err, cap, "ring: %s: %s: %s", what, path, cause);
}

static int fail(struct ring *r, int err)
{
	r->failed = err ? err : EIO;
	memset(&r->st, 0, sizeof r->st);
	r->st.head = r->head;
	r->owed_sync = 0;
	errno = r->failed;
	return -1;
}

#if defined(__x86_64__) && defined(__GNUC__)
/* SSE4.2's crc32 instruction computes the reflected CRC-32C register
 * update, the same as the table engine's for CRC-32/ISCSI; used only when
 * the CPU has it and it agrees with the catalogue check value. */
__attribute__((target("sse4.2"))) static uint32_t
crc32c_hw(uint32_t reg, const void *data, size_t n)
{
	const unsigned char *p = data;
	uint64_t v;

	for (; n >= 8; n -= 8, p += 8) {
		memcpy(&v, p, 8);
		reg = (uint32_t)__builtin_ia32_crc32di(reg, v);
	}
	for (; n > 0; n--, p++)
		reg = __builtin_ia32_crc32qi(reg, *p);
	return reg;
}

static bool hw_crc_works(const struct tp_crc *c)
{
	uint32_t reg;

	__builtin_cpu_init();
	if (!__builtin_cpu_supports("sse4.2"))
		return false;
	reg = crc32c_hw(tp_crc_start(c), "123456789", 9);
	return tp_crc_final(c, reg) == crc32c_params.check;
}
#else
static uint32_t crc32c_hw(uint32_t reg, const void *data, size_t n)
{
	(void)data;
	(void)n;
	return reg;
}

static bool hw_crc_works(const struct tp_crc *c)
{
	(void)c;
	return false;
}
#endif

static uint32_t crc_update(const struct ring *r, uint32_t reg, const void *data,
                           size_t n)
{
	if (r->hw_crc)
		return crc32c_hw(reg, data, n);
	return tp_crc_update(&r->crc, reg, data, n);
}

static uint32_t rec_crc(const struct ring *r, const unsigned char *hdr,
                        const void *payload, size_t len)
{
	uint32_t reg = tp_crc_start(&r->crc);

	reg = crc_update(r, reg, hdr, 20);
	reg = crc_update(r, reg, payload, len);
	return tp_crc_final(&r->crc, reg);
}

/* ---- buffered reading of the data area ---- */

static void rb_drop(struct ring *r, uint64_t off, size_t n)
{
	if (off < r->rb_off + r->rb_len && r->rb_off < off + n)
		r->rb_len = 0;
}

static int fetch(struct ring *r, uint64_t off, size_t n,
                 const unsigned char **out)
{
	size_t len = RBUF_BYTES;

	if (off >= r->rb_off && off + n <= r->rb_off + r->rb_len) {
		*out = r->rbuf + (off - r->rb_off);
		return 0;
	}
	if (len > r->size - off)
		len = (size_t)(r->size - off);
	if (n > len) {
		errno = EIO;
		return -1;
	}
	r->rb_len = 0;
	if (ringio_read_all(r->ops, r->fd, r->rbuf, len, off) != 0)
		return -1;
	r->rb_off = off;
	r->rb_len = len;
	*out = r->rbuf;
	return 0;
}

static int wr(struct ring *r, const void *buf, size_t n, uint64_t off)
{
	rb_drop(r, off, n);
	return ringio_write_all(r->ops, r->fd, buf, n, off);
}

/* ---- records ---- */

static void rec_encode(const struct ring *r, unsigned char *b, int type,
                       uint32_t lap, uint64_t seq, const void *payload,
                       size_t len)
{
	memset(b, 0, rec_bytes(len));
	put32(b, REC_MAGIC);
	b[4] = (unsigned char)type;
	b[5] = 0;
	put16(b + 6, (uint16_t)len);
	put32(b + 8, lap);
	put64(b + 12, seq);
	if (len != 0)
		memcpy(b + HDR, payload, len);
	put32(b + 20, rec_crc(r, b, b + HDR, len));
}

/* Check the header fields of the record at p (no CRC). */
static const char *hdr_check(const struct ring *r, const struct pos *p,
                             const unsigned char *b, struct rview *v)
{
	v->type = b[4];
	v->len = get16(b + 6);
	v->seq = get64(b + 12);
	v->bytes = rec_bytes(v->len);
	if (get32(b) != REC_MAGIC)
		return "no record magic";
	if (b[5] != 0 || v->type < T_DATA || v->type > T_GAP)
		return "unknown record type or flags";
	if (get32(b + 8) != p->lap)
		return "record from another lap";
	if (v->type == T_DATA && (v->len == 0 || v->len > RING_PAYLOAD_MAX ||
	                          p->off + v->bytes > r->size))
		return "record length out of bounds";
	if (v->type != T_DATA && v->len != 0)
		return "marker with a length";
	if (v->type == T_GAP ? v->seq <= p->seq : v->seq != p->seq)
		return "seq out of order";
	return NULL;
}

/* Read and check the record at p; crc: also check the CRC.  Returns an
 * RK_ kind (RK_BAD with v->why) or -1 on an I/O error. */
static int rec_at(struct ring *r, const struct pos *p, int crc, struct rview *v)
{
	const unsigned char *b;

	if (fetch(r, p->off, HDR, &b) != 0)
		return -1;
	v->why = hdr_check(r, p, b, v);
	if (v->why != NULL)
		return RK_BAD;
	if (fetch(r, p->off, HDR + v->len, &b) != 0)
		return -1;
	v->payload = b + HDR;
	if (crc && get32(b + 20) != rec_crc(r, b, b + HDR, v->len)) {
		v->why = "record CRC mismatch";
		return RK_BAD;
	}
	return v->type == T_DATA   ? RK_DATA
	       : v->type == T_WRAP ? RK_WRAP
	                           : RK_GAP;
}

/* Move p over the record there (if valid); returns its kind, -1 on I/O. */
static int step(struct ring *r, struct pos *p, int crc, struct rview *v)
{
	int k = rec_at(r, p, crc, v);

	if (k == RK_DATA) {
		p->off += v->bytes;
		p->seq++;
	} else if (k == RK_WRAP) {
		p->off = r->size;
	} else if (k == RK_GAP) {
		p->off += HDR;
		p->seq = v->seq;
	}
	if (k > 0)
		norm(r, p);
	return k;
}

/* Walk from p while records are valid: p ends at the first invalid one
 * (the head after a crash).  *n counts data records. */
static int scan(struct ring *r, struct pos *p, uint64_t *n)
{
	struct rview v;
	uint64_t moved = 0, before;
	int k;

	*n = 0;
	for (;;) {
		before = p->off;
		k = step(r, p, 1, &v);
		if (k <= 0)
			return k;
		*n += k == RK_DATA;
		moved += k == RK_WRAP ? r->size - before : v.bytes;
		if (moved > data_bytes(r))
			return 0; /* cannot happen with the lap check */
	}
}

/*
 * walk() would step over every record from the tail when an output's
 * acknowledgement frees a batch (hdr_tail), reading the batch a second
 * time through the read buffer.  Readers remember the places they reach
 * (record boundaries on the chain from tail to head), and walk starts
 * from the furthest one not past its target.  A place is usable while
 * its seq lies between the tail and the head: records there are never
 * rewritten, and one from a freed and reused part of the ring has a seq
 * below the tail.
 */
static void jump_note(struct ring *r, const struct pos *p)
{
	r->jump[r->jump_next] = *p;
	r->jump_next = (r->jump_next + 1) % RING_JUMPS;
}

static void jump_ahead(const struct ring *r, struct pos *p, uint64_t target)
{
	const struct pos *j;
	int i;

	for (i = 0; i < RING_JUMPS; i++) {
		j = &r->jump[i];
		if (j->seq > p->seq && j->seq <= target &&
		    j->seq >= r->tail.seq && j->seq <= r->head.seq)
			*p = *j;
	}
}

/* Walk from p (a valid place before the head) to the first record with
 * seq >= target, or to the head.  -1: I/O error or EBADMSG. */
static int walk(struct ring *r, struct pos *p, uint64_t target)
{
	struct rview v;
	int k;

	jump_ahead(r, p, target);
	while (p->seq < target && !same_place(p, &r->head)) {
		k = step(r, p, 0, &v);
		if (k < 0)
			return -1;
		if (k == RK_BAD) {
			errno = EBADMSG;
			return -1;
		}
	}
	return 0;
}

/* ---- header slots ---- */

static void slot_encode(const struct ring *r, const struct hdr *h, int slot,
                        unsigned char *b)
{
	size_t i;

	memset(b, 0, SLOT_BYTES);
	put32(b, SLOT_MAGIC);
	put16(b + 4, VERSION);
	put16(b + 6, (uint16_t)slot);
	put64(b + 8, h->gen);
	put64(b + 16, h->size);
	put64(b + 24, h->dstart);
	put64(b + 32, h->next_seq);
	put64(b + 40, h->tail.seq);
	put64(b + 48, h->tail.off);
	put32(b + 56, h->tail.lap);
	put32(b + 60, h->head.lap);
	put64(b + 64, h->head.off);
	put32(b + 72, (uint32_t)h->n_outs);
	for (i = 0; i < h->n_outs; i++) {
		unsigned char *o = b + OUT_AT + i * OUT_BYTES;

		memcpy(o, h->outs[i].name, strlen(h->outs[i].name));
		put64(o + 32, h->outs[i].acked);
	}
	put32(b + SLOT_CRC_AT, tp_crc_compute(&r->crc, b, SLOT_CRC_AT));
}

static bool place_ok(uint64_t size, uint64_t off)
{
	return off >= DATA_START && off < size && size - off >= HDR &&
	       off % 8 == 0;
}

static const char *outs_decode(const unsigned char *b, struct hdr *h)
{
	size_t i, j;

	for (i = 0; i < h->n_outs; i++) {
		const unsigned char *o = b + OUT_AT + i * OUT_BYTES;
		struct out *d = &h->outs[i];

		memcpy(d->name, o, 32);
		if (d->name[0] == '\0' || d->name[RING_NAME_MAX] != '\0')
			return "bad output name";
		d->acked = get64(o + 32);
		if (d->acked >= h->next_seq)
			return "output cursor past next_seq";
		for (j = 0; j < i; j++)
			if (strcmp(h->outs[j].name, d->name) == 0)
				return "duplicate output name";
	}
	return NULL;
}

/* Decode and validate one slot; NULL or the reason it is invalid. */
static const char *slot_decode(const struct ring *r, const unsigned char *b,
                               int slot, struct hdr *h)
{
	if (get32(b) != SLOT_MAGIC)
		return "no header magic";
	if (get32(b + SLOT_CRC_AT) != tp_crc_compute(&r->crc, b, SLOT_CRC_AT))
		return "header CRC mismatch";
	if (get16(b + 4) != VERSION)
		return "unsupported format version";
	if (get16(b + 6) != slot)
		return "header in the wrong slot";
	memset(h, 0, sizeof *h);
	h->gen = get64(b + 8);
	h->size = get64(b + 16);
	h->dstart = get64(b + 24);
	h->next_seq = get64(b + 32);
	h->tail.seq = get64(b + 40);
	h->tail.off = get64(b + 48);
	h->tail.lap = get32(b + 56);
	h->head.lap = get32(b + 60);
	h->head.off = get64(b + 64);
	h->head.seq = h->next_seq;
	h->n_outs = get32(b + 72);
	if (h->size != r->size || h->dstart != DATA_START)
		return "geometry does not match the file";
	if (!place_ok(h->size, h->tail.off) || !place_ok(h->size, h->head.off))
		return "tail or head outside the data area";
	if (h->tail.seq == 0 || h->tail.seq > h->next_seq ||
	    h->n_outs > RING_OUTPUTS_MAX)
		return "inconsistent seqs or output count";
	return outs_decode(b, h);
}

static void hdr_from_ring(const struct ring *r, struct hdr *h)
{
	memset(h, 0, sizeof *h);
	h->gen = r->gen + 1;
	h->size = r->size;
	h->dstart = r->dstart;
	h->next_seq = next_seq(r);
	h->tail = r->tail;
	h->head = r->head;
	h->n_outs = r->n_outs;
	memcpy(h->outs, r->outs, sizeof h->outs);
}

/* The tail h implies: the first record some output of h still needs. */
static int hdr_tail(struct ring *r, struct hdr *h)
{
	uint64_t min = UINT64_MAX;
	size_t i;

	if (h->n_outs == 0)
		return 0; /* nobody frees anything */
	for (i = 0; i < h->n_outs; i++)
		if (h->outs[i].acked < min)
			min = h->outs[i].acked;
	return walk(r, &h->tail, min + 1);
}

/* Write h to the slot not holding the last durable header, sync, and
 * only then adopt it.  Callers add their own writes before (synced by
 * the same fdatasync). */
static int hdr_commit(struct ring *r, const struct hdr *h)
{
	int slot = 1 - r->dslot;

	slot_encode(r, h, slot, r->slot);
	if (ringio_write_all(r->ops, r->fd, r->slot, SLOT_BYTES,
	                     (uint64_t)slot * SLOT_BYTES) != 0 ||
	    ringio_datasync(r->ops, r->fd) != 0)
		return fail(r, errno);
	r->gen = h->gen;
	r->dslot = slot;
	r->tail = h->tail;
	r->n_outs = h->n_outs;
	memcpy(r->outs, h->outs, sizeof r->outs);
	r->owed_sync = 0;
	return 0;
}

/* ---- creation ---- */

static int dir_of(const char *path, char *dir, size_t cap)
{
	const char *slash = strrchr(path, '/');
	size_t n = slash == NULL   ? 0
	           : slash == path ? 1
	                           : (size_t)(slash - path);

	if (n + 2 > cap) {
		errno = ENAMETOOLONG;
		return -1;
	}
	if (n == 0)
		dir[n++] = '.';
	else
		memcpy(dir, path, n);
	dir[n] = '\0';
	return 0;
}

static int space_check(struct ring *r, const char *path, char *err, size_t cap)
{
	char dir[PATH_MAX], cause[160];
	uint64_t avail;

	if (dir_of(path, dir, sizeof dir) != 0 ||
	    ringio_free_bytes(r->ops, dir, &avail) != 0) {
		msg(err, cap, "create", path, strerror(errno));
		return -1;
	}
	if (avail >= r->size)
		return 0;
	snprintf(cause, sizeof cause,
	         "needs %llu bytes but the filesystem "
	         "has only %llu free",
	         (unsigned long long)r->size, (unsigned long long)avail);
	msg(err, cap, "create", path, cause);
	errno = ENOSPC;
	return -1;
}

/* Zeros over the whole file, then both slots (gen 0 and gen 1). */
static int fill_new(struct ring *r, int fd)
{
	struct hdr h;
	uint64_t off;
	size_t n;
	int s;

	memset(r->rbuf, 0, RBUF_BYTES);
	r->rb_len = 0;
	for (off = 0; off < r->size; off += n) {
		n = r->size - off < RBUF_BYTES ? (size_t)(r->size - off)
		                               : RBUF_BYTES;
		if (ringio_write_all(r->ops, fd, r->rbuf, n, off) != 0)
			return -1;
	}
	memset(&h, 0, sizeof h);
	h.size = r->size;
	h.dstart = DATA_START;
	h.next_seq = 1;
	h.tail = (struct pos){DATA_START, 1, 1};
	h.head = h.tail;
	for (s = 0; s < 2; s++) {
		h.gen = (uint64_t)s;
		slot_encode(r, &h, s, r->slot);
		if (ringio_write_all(r->ops, fd, r->slot, SLOT_BYTES,
		                     (uint64_t)s * SLOT_BYTES) != 0)
			return -1;
	}
	return ringio_fullsync(r->ops, fd);
}

static int create(struct ring *r, const char *path, char *err, size_t cap)
{
	size_t n = strlen(path);
	char *tmp = malloc(n + 5);
	int fd = -1, saved;

	if (tmp == NULL) {
		msg(err, cap, "create", path, strerror(errno));
		return -1;
	}
	memcpy(tmp, path, n);
	memcpy(tmp + n, ".tmp", 5);
	if (space_check(r, path, err, cap) != 0)
		goto out_free;
	if (ringio_unlink(r->ops, tmp) != 0 && errno != ENOENT)
		goto out_msg;
	fd = ringio_open(r->ops, tmp, O_RDWR | O_CREAT | O_EXCL, 0600);
	if (fd < 0)
		goto out_msg;
	if (fill_new(r, fd) != 0)
		goto out_msg;
	/* fsync has reported; a close error cannot undo that */
	(void)r->ops->close(r->ops->ctx, fd);
	fd = -1;
	if (ringio_rename(r->ops, tmp, path) != 0 ||
	    ringio_sync_dir(r->ops, path) != 0)
		goto out_msg;
	free(tmp);
	return 0;
out_msg:
	saved = errno;
	msg(err, cap, "create", path, strerror(saved));
	if (fd >= 0)
		(void)r->ops->close(r->ops->ctx, fd);
	if (ringio_unlink(r->ops, tmp) != 0)
		saved = saved ? saved : errno; /* keep the first cause */
	errno = saved;
out_free:
	saved = errno;
	free(tmp);
	errno = saved;
	return -1;
}

/* ---- recovery ---- */

static int zero_range(struct ring *r, uint64_t off, size_t n)
{
	const unsigned char *b;
	size_t i = 0;

	if (fetch(r, off, n, &b) != 0)
		return -1;
	while (i < n && b[i] == 0)
		i++;
	if (i == n)
		return 0;
	memset(r->stage, 0, n);
	return wr(r, r->stage, n, off);
}

/* Zero the free space right after the head, as far as one interrupted
 * commit can reach: a torn batch may have left whole records there that
 * would chain onto new ones (same lap, next seq) and come back as
 * phantoms.  Only bytes that are not zero yet are written. */
static int scrub(struct ring *r)
{
	uint64_t span = r->stage_cap + REC_MAX + HDR;
	uint64_t avail = data_bytes(r) - used_bytes(r), off = r->head.off;
	size_t n;

	if (span > avail)
		span = avail;
	while (span > 0) {
		n = r->stage_cap;
		if (n > span)
			n = (size_t)span;
		if (n > r->size - off)
			n = (size_t)(r->size - off);
		if (zero_range(r, off, n) != 0)
			return -1;
		span -= n;
		off += n;
		if (off == r->size)
			off = r->dstart;
	}
	return 0;
}

static int recover_open(struct ring *r, const struct hdr *h, int slot,
                        char *err, size_t cap)
{
	struct pos p = h->tail;
	struct hdr nh;
	uint64_t n;

	r->gen = h->gen;
	r->dslot = slot;
	r->tail = h->tail;
	r->n_outs = h->n_outs;
	memcpy(r->outs, h->outs, sizeof r->outs);
	if (scan(r, &p, &n) != 0)
		goto out_io;
	r->head = p;
	if (p.seq < h->next_seq) {
		/* the header vouched for records that are not there */
		r->gap_to = h->next_seq;
		if (!same_place(&p, &h->head))
			r->lost = h->next_seq - p.seq;
	}
	memset(&r->st, 0, sizeof r->st);
	r->st.head = r->head;
	if (scrub(r) != 0)
		goto out_io;
	hdr_from_ring(r, &nh);
	if (hdr_commit(r, &nh) != 0)
		goto out_io;
	return 0;
out_io:
	n = (uint64_t)errno;
	msg(err, cap, "recover", r->path, strerror((int)n));
	errno = (int)n;
	return -1;
}

/* ---- open and close ---- */

static int size_ok(uint64_t size)
{
	return size % RING_BLOCK == 0 && size >= RING_SIZE_MIN &&
	       size <= SIZE_MAX_BYTES;
}

static void ring_free(struct ring *r)
{
	if (r->fd >= 0)
		(void)r->ops->close(r->ops->ctx, r->fd);
	free(r->path);
	free(r->rbuf);
	free(r->stage);
	free(r);
}

static struct ring *ring_alloc(const char *path, const struct ringio_ops *o)
{
	struct ring *r = calloc(1, sizeof *r);
	size_t n = strlen(path);

	if (r == NULL)
		return NULL;
	r->fd = -1;
	r->ops = o;
	r->path = malloc(n + 1);
	r->rbuf = malloc(RBUF_BYTES);
	r->stage = malloc(STAGE_MAX);
	if (r->path == NULL || r->rbuf == NULL || r->stage == NULL) {
		ring_free(r);
		errno = ENOMEM;
		return NULL;
	}
	memcpy(r->path, path, n + 1);
	return r;
}

/* Never trust a CRC engine that fails the catalogue's check value. */
static int crc_ready(struct ring *r)
{
	if (tp_crc_init(&r->crc, &crc32c_params) != TP_OK ||
	    tp_crc_compute(&r->crc, "123456789", 9) != crc32c_params.check) {
		errno = EINVAL;
		return -1;
	}
	r->hw_crc =
	    getenv("TIDEPOST_SOFT_CRC") == NULL && hw_crc_works(&r->crc);
	return 0;
}

static int geometry(struct ring *r, uint64_t want, char *err, size_t cap)
{
	char cause[200];
	uint64_t have;

	if (ringio_size(r->ops, r->fd, &have) != 0) {
		msg(err, cap, "open", r->path, strerror(errno));
		return -1;
	}
	if ((want != 0 && have != want) || !size_ok(have)) {
		snprintf(cause, sizeof cause,
		         "the file has %llu bytes, %s %llu;"
		         " a ring is never resized or re-initialised: move it "
		         "away to start a new one",
		         (unsigned long long)have,
		         want ? "expected" : "not a ring size, e.g.",
		         (unsigned long long)(want ? want : RING_SIZE_MIN));
		msg(err, cap, "open", r->path, cause);
		errno = EINVAL;
		return -1;
	}
	r->size = have;
	r->dstart = DATA_START;
	r->stage_cap =
	    (size_t)(data_bytes(r) / 4 < STAGE_MAX ? data_bytes(r) / 4
	                                           : STAGE_MAX);
	return 0;
}

static int open_file(struct ring *r, uint64_t want, char *err, size_t cap)
{
	const char *cause;

	r->fd = ringio_open(r->ops, r->path, O_RDWR, 0);
	if (r->fd < 0 && errno == ENOENT && want != 0) {
		r->size = want;
		r->dstart = DATA_START;
		if (create(r, r->path, err, cap) != 0)
			return -1;
		r->fd = ringio_open(r->ops, r->path, O_RDWR, 0);
	}
	if (r->fd < 0) {
		msg(err, cap, "open", r->path, strerror(errno));
		return -1;
	}
	if (ringio_lock(r->ops, r->fd) != 0) {
		cause = errno == EWOULDBLOCK ? "in use by another process"
		                             : strerror(errno);
		msg(err, cap, "lock", r->path, cause);
		return -1;
	}
	/* An earlier process whose fdatasync failed leaves pages that are
	 * "clean" in the cache but were never written: forget them, so the
	 * scan sees the medium and never builds on records that are not
	 * there.  Advisory: a failure here changes nothing else. */
	if (r->ops->drop_cache(r->ops->ctx, r->fd) != 0) {
		/* nothing else depends on it */
	}
	return geometry(r, want, err, cap);
}

static int load_slots(struct ring *r, struct hdr *best, int *slot, char *err,
                      size_t cap)
{
	struct hdr h[2];
	const char *why[2];
	char cause[240];
	int s;

	for (s = 0; s < 2; s++) {
		if (ringio_read_all(r->ops, r->fd, r->slot, SLOT_BYTES,
		                    (uint64_t)s * SLOT_BYTES) != 0) {
			msg(err, cap, "open", r->path, strerror(errno));
			return -1;
		}
		why[s] = slot_decode(r, r->slot, s, &h[s]);
	}
	if (why[0] != NULL && why[1] != NULL) {
		snprintf(cause, sizeof cause,
		         "both header slots are invalid "
		         "(slot 0: %s; slot 1: %s); refusing to start over: "
		         "move the file away to begin a new ring",
		         why[0], why[1]);
		msg(err, cap, "open", r->path, cause);
		errno = EBADMSG;
		return -1;
	}
	s = why[0] != NULL ? 1 : why[1] != NULL ? 0 : h[1].gen > h[0].gen;
	*best = h[s];
	*slot = s;
	return 0;
}

static uint64_t now_us(void)
{
	struct timespec ts;

	if (clock_gettime(CLOCK_MONOTONIC, &ts) != 0)
		return 0;
	return (uint64_t)ts.tv_sec * 1000000u + (uint64_t)ts.tv_nsec / 1000u;
}

int ring_open(const char *path, uint64_t size_bytes,
              const struct ringio_ops *ops, struct ring **out, char *errbuf,
              size_t errcap)
{
	struct ring *r;
	struct hdr h;
	uint64_t t0 = now_us();
	int slot, saved;

	*out = NULL;
	if (errbuf != NULL && errcap != 0)
		errbuf[0] = '\0';
	if (path == NULL || (size_bytes != 0 && !size_ok(size_bytes))) {
		msg(errbuf, errcap, "open", path ? path : "(null)",
		    "size must "
		    "be a multiple of 4096 bytes, at least 40960");
		errno = EINVAL;
		return -1;
	}
	r = ring_alloc(path, ops != NULL ? ops : ringio_posix());
	if (r == NULL || crc_ready(r) != 0) {
		msg(errbuf, errcap, "open", path, strerror(errno));
		goto out_free;
	}
	if (open_file(r, size_bytes, errbuf, errcap) != 0 ||
	    load_slots(r, &h, &slot, errbuf, errcap) != 0 ||
	    recover_open(r, &h, slot, errbuf, errcap) != 0)
		goto out_free;
	r->recovery_us = now_us() - t0;
	*out = r;
	return 0;
out_free:
	saved = errno;
	if (r != NULL)
		ring_free(r);
	errno = saved;
	return -1;
}

int ring_close(struct ring *r)
{
	struct hdr h;
	int rc = 0, saved = 0;

	if (r == NULL)
		return 0;
	if (!r->failed && r->fd >= 0) {
		hdr_from_ring(r, &h);
		rc = hdr_commit(r, &h);
		saved = errno;
	}
	ring_free(r);
	if (rc != 0)
		errno = saved;
	return rc;
}

int ring_recover(struct ring *r, char *errbuf, size_t errcap)
{
	struct hdr h;
	int saved;

	if (errbuf != NULL && errcap != 0)
		errbuf[0] = '\0';
	if (!r->failed)
		return 0;
	r->failed = 0;
	r->owed_sync = 0;
	r->rb_len = 0;
	memset(&r->st, 0, sizeof r->st);
	r->st.head = r->head;
	if (scrub(r) != 0) {
		saved = errno;
		(void)fail(r, saved);
		msg(errbuf, errcap, "recover", r->path, strerror(saved));
		return -1;
	}
	hdr_from_ring(r, &h);
	if (hdr_commit(r, &h) != 0) {
		msg(errbuf, errcap, "recover", r->path, strerror(errno));
		return -1;
	}
	return 0;
}

/* ---- outputs ---- */

static int find_out(const struct out *outs, size_t n, const char *name)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (strcmp(outs[i].name, name) == 0)
			return (int)i;
	return -1;
}

int ring_outputs(struct ring *r, const char *const *names, size_t n)
{
	struct hdr h;
	size_t i, len, kept = 0;
	int j;

	if (r->failed) {
		errno = r->failed;
		return -1;
	}
	if (n > RING_OUTPUTS_MAX || (n != 0 && names == NULL)) {
		errno = EINVAL;
		return -1;
	}
	hdr_from_ring(r, &h);
	h.n_outs = n;
	for (i = 0; i < n; i++) {
		len = names[i] ? strlen(names[i]) : 0;
		if (len == 0 || len > RING_NAME_MAX ||
		    find_out(h.outs, i, names[i]) >= 0) {
			errno = EINVAL;
			return -1;
		}
		memset(h.outs[i].name, 0, sizeof h.outs[i].name);
		memcpy(h.outs[i].name, names[i], len);
		j = find_out(r->outs, r->n_outs, names[i]);
		kept += j >= 0;
		h.outs[i].acked = j >= 0 ? r->outs[j].acked : r->tail.seq - 1;
	}
	if (kept == n && n == r->n_outs)
		return 0; /* same set: nothing to make durable */
	if (hdr_tail(r, &h) != 0)
		return -1;
	return hdr_commit(r, &h);
}

int ring_cursor_get(const struct ring *r, const char *output, uint64_t *seq)
{
	int i = find_out(r->outs, r->n_outs, output);

	if (i < 0) {
		errno = ENOENT;
		return -1;
	}
	*seq = r->outs[i].acked;
	return 0;
}

int ring_ack(struct ring *r, const char *output, uint64_t seq)
{
	struct hdr h;
	int i;

	if (r->failed) {
		errno = r->failed;
		return -1;
	}
	i = find_out(r->outs, r->n_outs, output);
	if (i < 0) {
		errno = ENOENT;
		return -1;
	}
	if (seq < r->outs[i].acked || seq >= r->head.seq) {
		errno = EINVAL;
		return -1;
	}
	if (seq == r->outs[i].acked)
		return 0;
	hdr_from_ring(r, &h);
	h.outs[i].acked = seq;
	if (hdr_tail(r, &h) != 0)
		return -1;
	return hdr_commit(r, &h);
}

/* ---- appending ---- */

/* Is there room for `need` bytes at p (after a wrap, if `wrap`) without
 * touching the durable tail? */
static bool fits(const struct ring *r, const struct pos *p, size_t need,
                 int wrap)
{
	uint32_t ahead = p->lap - r->tail.lap; /* 0 or 1 lap ahead */

	if (!wrap)
		return ahead == 0 || p->off + need <= r->tail.off;
	return ahead == 0 && r->dstart + need <= r->tail.off;
}

static enum ring_rc stage_put(struct ring *r, int type, uint64_t seq,
                              const void *payload, size_t len)
{
	struct stage *s = &r->st;
	struct pos p = s->head;
	size_t need = rec_bytes(len);
	int wrap = p.off + need > r->size;
	uint32_t lap;

	if (s->seg0 + s->seg1 + need + (wrap ? HDR : 0) > r->stage_cap ||
	    (wrap && s->wrapped))
		return RING_BATCH_FULL;
	if (!fits(r, &p, need, wrap))
		return RING_FULL;
	if (wrap) {
		rec_encode(r, r->stage + s->seg0, T_WRAP, p.lap, p.seq, NULL,
		           0);
		s->seg0 += HDR;
		p.off = r->dstart;
		p.lap++;
		s->wrapped = 1;
	}
	rec_encode(r, r->stage + s->seg0 + s->seg1, type, p.lap, seq, payload,
	           len);
	*(s->wrapped ? &s->seg1 : &s->seg0) += need;
	p.off += need;
	p.seq = type == T_DATA ? seq + 1 : seq;
	lap = p.lap;
	norm(r, &p);
	s->wrapped |= p.lap != lap;
	s->head = p;
	s->n += type == T_DATA;
	return RING_OK;
}

enum ring_rc ring_append(struct ring *r, const void *payload, size_t len)
{
	struct stage saved;
	enum ring_rc rc = RING_OK;

	if (r->failed) {
		errno = r->failed;
		return RING_ERR;
	}
	if (payload == NULL || len == 0 || len > RING_PAYLOAD_MAX) {
		errno = EINVAL;
		return RING_ERR;
	}
	saved = r->st;
	if (r->gap_to > r->st.head.seq)
		rc = stage_put(r, T_GAP, r->gap_to, NULL, 0);
	if (rc == RING_OK)
		rc = stage_put(r, T_DATA, r->st.head.seq, payload, len);
	if (rc != RING_OK)
		r->st = saved;
	if (rc == RING_FULL)
		r->refused++;
	return rc;
}

int ring_commit(struct ring *r, uint64_t *last_seq)
{
	struct stage *s = &r->st;

	if (r->failed) {
		errno = r->failed;
		return -1;
	}
	if (r->owed_sync && ringio_datasync(r->ops, r->fd) != 0)
		return fail(r, errno);
	r->owed_sync = 0;
	if (s->seg0 + s->seg1 != 0) {
		if ((s->seg0 && wr(r, r->stage, s->seg0, r->head.off) != 0) ||
		    (s->seg1 &&
		     wr(r, r->stage + s->seg0, s->seg1, r->dstart) != 0))
			return fail(r, errno);
		if (ring_test_ack_before_sync)
			r->owed_sync = 1; /* TEST-ONLY mutant: no sync now */
		else if (ringio_datasync(r->ops, r->fd) != 0)
			return fail(r, errno);
		/* durable (or, in the mutant, pretended so): accepted */
		r->head = s->head;
		if (r->head.seq >= r->gap_to)
			r->gap_to = 0;
		memset(s, 0, sizeof *s);
		s->head = r->head;
	}
	if (last_seq != NULL)
		*last_seq = r->head.seq - 1;
	return 0;
}

/* ---- reading ---- */

/* From p (a valid place before the head) skip markers and copy out the
 * data record there; p moves past it only on success. */
static int read_data(struct ring *r, struct pos *p, void *buf, size_t cap,
                     size_t *len, uint64_t *seq)
{
	struct pos q = *p;
	struct rview v;
	int k;

	for (;;) {
		if (same_place(&q, &r->head)) {
			errno = ENOENT;
			return -1;
		}
		k = rec_at(r, &q, 1, &v);
		if (k < 0)
			return -1;
		if (k == RK_BAD) {
			errno = EBADMSG;
			return -1;
		}
		if (k == RK_DATA)
			break;
		if (step(r, &q, 0, &v) <= 0)
			return -1;
	}
	*len = v.len;
	*seq = v.seq;
	if (v.len > cap) {
		errno = EMSGSIZE;
		return -1;
	}
	memcpy(buf, v.payload, v.len);
	q.off += v.bytes;
	q.seq++;
	norm(r, &q);
	*p = q;
	jump_note(r, &q);
	return 0;
}

int ring_read(struct ring *r, uint64_t seq, void *buf, size_t cap, size_t *len)
{
	struct pos p = r->tail;
	uint64_t got;

	if (seq < r->tail.seq || seq >= r->head.seq) {
		errno = ENOENT;
		return -1;
	}
	if (r->rhint.seq != 0 && r->rhint.seq >= r->tail.seq &&
	    r->rhint.seq <= seq)
		p = r->rhint;
	if (walk(r, &p, seq) != 0 || read_data(r, &p, buf, cap, len, &got) != 0)
		return -1;
	if (got != seq) {
		errno = ENOENT; /* seq fell in a GAP */
		return -1;
	}
	r->rhint = p;
	return 0;
}

void ring_iter_init(struct ring_iter *it, uint64_t after_seq)
{
	memset(it, 0, sizeof *it);
	it->seq = after_seq + 1;
}

int ring_iter_next(struct ring *r, struct ring_iter *it, void *buf, size_t cap,
                   size_t *len, uint64_t *seq)
{
	struct pos p = r->tail;

	if (it->known && it->seq < r->tail.seq) {
		errno = ENOENT; /* freed under the reader */
		return -1;
	}
	if (it->seq >= r->head.seq)
		return 0;
	if (it->known) {
		p.off = it->off;
		p.lap = it->lap;
		p.seq = it->seq;
	} else if (walk(r, &p, it->seq) != 0) {
		return -1;
	}
	if (same_place(&p, &r->head))
		return 0;
	if (read_data(r, &p, buf, cap, len, seq) != 0)
		return -1;
	it->off = p.off;
	it->lap = p.lap;
	it->seq = p.seq;
	it->known = 1;
	return 1;
}

/* ---- state ---- */

void ring_stat(const struct ring *r, struct ring_stat *st)
{
	size_t i;

	memset(st, 0, sizeof *st);
	st->size_bytes = r->size;
	st->data_bytes = data_bytes(r);
	st->used_bytes = used_bytes(r);
	st->oldest_seq = r->tail.seq;
	st->newest_seq = r->head.seq - 1;
	st->next_seq = r->gap_to > r->st.head.seq ? r->gap_to : r->st.head.seq;
	st->staged = r->st.n;
	st->records = r->head.seq - r->tail.seq;
	st->refused = r->refused;
	st->generation = r->gen;
	st->tail_off = r->tail.off;
	st->head_off = r->head.off;
	st->recovered_lost = r->lost;
	st->recovery_us = r->recovery_us;
	st->failed = r->failed;
	st->n_outputs = r->n_outs;
	for (i = 0; i < r->n_outs; i++) {
		memcpy(st->outputs[i].name, r->outs[i].name,
		       sizeof st->outputs[i].name);
		st->outputs[i].acked = r->outs[i].acked;
		st->outputs[i].unsent = r->head.seq - 1 - r->outs[i].acked;
	}
}

static void problem(struct ring_verify_report *rep, const char *what,
                    const struct pos *p, const char *why)
{
	if (rep->problems++ == 0)
		snprintf(rep->first, sizeof rep->first,
		         "%s at offset %llu (seq %llu): %s", what,
		         (unsigned long long)p->off, (unsigned long long)p->seq,
		         why);
}

int ring_verify(struct ring *r, struct ring_verify_report *rep)
{
	struct pos p = r->tail;
	struct rview v;
	struct hdr h;
	const char *why;
	int s, k;

	memset(rep, 0, sizeof *rep);
	for (s = 0; s < 2; s++) {
		if (ringio_read_all(r->ops, r->fd, r->slot, SLOT_BYTES,
		                    (uint64_t)s * SLOT_BYTES) != 0)
			return -1;
		why = slot_decode(r, r->slot, s, &h);
		rep->slot_ok[s] = why == NULL;
		rep->slot_gen[s] = why == NULL ? h.gen : 0;
		if (why != NULL && rep->problems++ == 0)
			snprintf(rep->first, sizeof rep->first,
			         "header slot %d: %s", s, why);
	}
	while (!same_place(&p, &r->head) && p.seq <= r->head.seq) {
		k = step(r, &p, 1, &v);
		if (k < 0)
			return -1;
		if (k == RK_BAD) {
			problem(rep, "record", &p, v.why);
			break;
		}
		rep->records += k == RK_DATA;
	}
	if (!same_place(&p, &r->head) && rep->problems == 0)
		problem(rep, "records end", &p, "past the head");
	return rep->problems > INT_MAX ? INT_MAX : (int)rep->problems;
}
