/*
 * ringio.h - the I/O operations the ring file uses, as a table of function
 * pointers, with two implementations: the real POSIX calls, and "memdisk",
 * an in-memory disk for tests that can fail any call and cut the power.
 *
 * Owns: struct ringio_ops (the table), the retrying helpers every caller
 * uses (EINTR is retried, a short write or read continues where it
 * stopped), and the memdisk simulator.  All ring file I/O goes through a
 * ringio_ops so a test can inject faults at the N-th call and simulate a
 * power cut; nothing in daemon/ring.c calls the system directly.
 *
 * Conventions of every op: return >= 0 on success, -1 with errno set on
 * failure, exactly like the system call it stands for.  `ctx` is the
 * table's own pointer, passed back untouched.
 *
 * memdisk model (what a test can rely on):
 *   - every file (inode) has two images: `cur`, what reads see (the page
 *     cache), and `dur`, what survives a power cut.  pwrite changes `cur`
 *     and queues a pending write; fdatasync/fsync of the file moves every
 *     pending write of that inode into `dur`.
 *   - directory entries behave the same way: open(O_CREAT), rename and
 *     unlink change the live namespace at once and queue a pending entry
 *     operation; fsync of a directory fd makes them durable.
 *   - a failing fdatasync behaves like Linux after a write-back error
 *     (Rebello et al., ATC'20, "pages are always marked clean"): each
 *     pending write reaches `dur` or not at random, the pending list is
 *     emptied, and reads keep seeing the cached data.  A later successful
 *     sync does not write those pages again.  drop_cache makes reads
 *     see the durable image again, plus the still pending writes (dirty
 *     pages are kept), like POSIX_FADV_DONTNEED on Linux.
 *   - a power cut builds the new image from `dur` plus, for each pending
 *     write in order, one of: applied, dropped, torn to a random prefix,
 *     applied with one 512-byte sector of it garbled (random bytes); and
 *     a random prefix of the pending entry operations.  Damage stays inside
 *     the bytes a write covered (the "powersafe overwrite" assumption).
 *   - faults: the N-th counted call (counting only the kinds in a mask)
 *     and the `count - 1` counted calls after it fail with the chosen
 *     errno, or, for MEMDISK_SHORT, move only half the bytes.  A "cut"
 *     makes the N-th counted call the last: a pwrite at the cut is queued
 *     as pending (it was in flight), then that call and every later one
 *     fail with EIO until memdisk_powercut().
 *
 * Called by daemon/ring.c (the ops and helpers) and by the ring tests
 * (memdisk).
 */
#ifndef TIDEPOST_RINGIO_H
#define TIDEPOST_RINGIO_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>
#include <sys/types.h>

struct ringio_ops {
	void *ctx;
	/* open(2); O_CLOEXEC is always added by the implementation */
	int (*open)(void *ctx, const char *path, int flags, mode_t mode);
	ssize_t (*pread)(void *ctx, int fd, void *buf, size_t n, uint64_t off);
	ssize_t (*pwrite)(void *ctx, int fd, const void *buf, size_t n,
	                  uint64_t off);
	int (*fdatasync)(void *ctx, int fd);
	int (*fsync)(void *ctx, int fd); /* files and directories */
	int (*ftruncate)(void *ctx, int fd, uint64_t len);
	int (*close)(void *ctx, int fd); /* fd is gone even on error */
	int (*rename)(void *ctx, const char *from, const char *to);
	int (*unlink)(void *ctx, const char *path);
	int (*size)(void *ctx, int fd, uint64_t *len); /* fstat */
	int (*lock)(void *ctx, int fd); /* exclusive, non-blocking */
	/* bytes an unprivileged writer may still allocate under dir */
	int (*free_bytes)(void *ctx, const char *dir, uint64_t *bytes);
	/* forget the file's clean cached pages so later reads come from
	 * the medium (posix_fadvise POSIX_FADV_DONTNEED); advisory */
	int (*drop_cache)(void *ctx, int fd);
};

/* The real POSIX implementation (open(2), pread(2), ..., flock(2),
 * statvfs(3)).  A static table; never freed. */
const struct ringio_ops *ringio_posix(void);

/* Does another process hold the ring file at path (a running daemon's
 * exclusive flock)?  false when it is free or cannot be opened. */
bool ringio_in_use(const char *path);

/* Retrying helpers.  read_all/write_all move all n bytes or fail: EINTR
 * is retried, a short transfer continues, a transfer of 0 bytes fails with
 * EIO (end of file on read, no progress on write).  sync retries EINTR
 * only: any other failure is final (never retried and assumed durable). */
int ringio_read_all(const struct ringio_ops *o, int fd, void *buf, size_t n,
                    uint64_t off) __attribute__((warn_unused_result));
int ringio_write_all(const struct ringio_ops *o, int fd, const void *buf,
                     size_t n, uint64_t off)
    __attribute__((warn_unused_result));
int ringio_datasync(const struct ringio_ops *o, int fd)
    __attribute__((warn_unused_result));
int ringio_fullsync(const struct ringio_ops *o, int fd)
    __attribute__((warn_unused_result));
int ringio_open(const struct ringio_ops *o, const char *path, int flags,
                mode_t mode) __attribute__((warn_unused_result));
/* The other calls, with EINTR retried (close is never retried: the fd is
 * gone whatever it returns). */
int ringio_unlink(const struct ringio_ops *o, const char *path)
    __attribute__((warn_unused_result));
int ringio_rename(const struct ringio_ops *o, const char *from, const char *to)
    __attribute__((warn_unused_result));
int ringio_size(const struct ringio_ops *o, int fd, uint64_t *len)
    __attribute__((warn_unused_result));
int ringio_lock(const struct ringio_ops *o, int fd)
    __attribute__((warn_unused_result));
int ringio_free_bytes(const struct ringio_ops *o, const char *dir,
                      uint64_t *bytes) __attribute__((warn_unused_result));
/* fsync the directory holding path ("." when path has no '/'). */
int ringio_sync_dir(const struct ringio_ops *o, const char *path)
    __attribute__((warn_unused_result));

/* ---- memdisk: the simulated disk for tests ---- */

struct memdisk;

/* Kinds of call, for fault masks and counters. */
enum memdisk_op {
	MEMDISK_OPEN = 1u << 0,
	MEMDISK_PREAD = 1u << 1,
	MEMDISK_PWRITE = 1u << 2,
	MEMDISK_FDATASYNC = 1u << 3,
	MEMDISK_FSYNC = 1u << 4,
	MEMDISK_FTRUNCATE = 1u << 5,
	MEMDISK_CLOSE = 1u << 6,
	MEMDISK_RENAME = 1u << 7,
	MEMDISK_UNLINK = 1u << 8,
	MEMDISK_SIZE = 1u << 9,
	MEMDISK_LOCK = 1u << 10,
	MEMDISK_FREE = 1u << 11,
	MEMDISK_DROP = 1u << 12,
};
#define MEMDISK_ALL_OPS 0x1fffu
/* calls that change what is on disk: the places a power cut can fall */
#define MEMDISK_MUTATING                                                       \
	(MEMDISK_PWRITE | MEMDISK_FDATASYNC | MEMDISK_FSYNC |                  \
	 MEMDISK_FTRUNCATE | MEMDISK_RENAME | MEMDISK_UNLINK)

#define MEMDISK_SHORT   (-1) /* fault errno: a short transfer */
#define MEMDISK_FOREVER UINT32_MAX

struct memdisk_fault {
	uint64_t at;    /* 1-based index among counted calls; 0: none */
	uint32_t count; /* calls that fail from `at` (MEMDISK_FOREVER) */
	unsigned mask;  /* which kinds are counted (enum memdisk_op) */
	int err;        /* EIO, ENOSPC, EINTR, ... or MEMDISK_SHORT */
};

/* How a power cut treats pending writes: probabilities in percent of
 * apply, drop, torn (the rest: garbled sector).  {0,0,0} picks the
 * default 50/25/15 (10 garbled). */
struct memdisk_cutmix {
	unsigned apply_pct, drop_pct, torn_pct;
};

/* A new empty disk with `capacity` bytes of space (0: unlimited) and a
 * random generator seeded with `seed`.  NULL if out of memory.  Free
 * with memdisk_free (NULL is fine). */
struct memdisk *memdisk_new(uint64_t capacity, uint64_t seed);
void memdisk_free(struct memdisk *d);
/* An independent copy (files, pending writes, namespace, not fds or
 * faults), or NULL. */
struct memdisk *memdisk_clone(const struct memdisk *d);

/* The ops table bound to d (valid while d lives). */
const struct ringio_ops *memdisk_ops(struct memdisk *d);

void memdisk_set_fault(struct memdisk *d, const struct memdisk_fault *f);
/* Power dies at the n-th call among `mask` (0: no cut planned). */
void memdisk_set_cut(struct memdisk *d, uint64_t n, unsigned mask);
/* Nonzero once a planned cut has happened (calls now fail). */
int memdisk_dead(const struct memdisk *d);
/* Calls made so far among the kinds in mask (faulted ones included). */
uint64_t memdisk_calls(const struct memdisk *d, unsigned mask);
/* Open descriptors (for leak checks). */
size_t memdisk_open_fds(const struct memdisk *d);
/* Pending (unsynced) writes of the file at path, or 0. */
size_t memdisk_pending(const struct memdisk *d, const char *path);

/* Power cut now with the given mix (NULL: default), then power back on:
 * every fd is closed, fault and cut settings are cleared, counters kept. */
void memdisk_powercut(struct memdisk *d, const struct memdisk_cutmix *mix);

/* A controlled power cut for torn-write sweeps, on the file at path:
 * pending writes before index `which` (0-based; -1: the last) are
 * applied, later ones dropped, and write `which` keeps its first `keep`
 * bytes; the rest of it is the old content (fill -1), a byte value
 * (0..255) or random bytes (fill -2).  Other files: all applied.
 * Returns -1 if there is no such pending write. */
int memdisk_cut_torn(struct memdisk *d, const char *path, long which,
                     size_t keep, int fill);
/* Number of pending writes of path and the offset/length of one. */
int memdisk_pending_write(const struct memdisk *d, const char *path, size_t i,
                          uint64_t *off, size_t *len);

/* Direct access to the live image of a file, for damage tests: copy out
 * or overwrite bytes (no pending write is queued, both images change, as
 * if the medium itself changed).  -1 if no such file or out of range. */
int memdisk_peek(const struct memdisk *d, const char *path, uint64_t off,
                 void *buf, size_t n);
int memdisk_poke(struct memdisk *d, const char *path, uint64_t off,
                 const void *buf, size_t n);
/* Does path exist in the live namespace? */
int memdisk_exists(const struct memdisk *d, const char *path);

#endif
