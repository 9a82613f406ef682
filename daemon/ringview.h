/*
 * ringview.h - a read-only overlay of struct ringio_ops, to open a ring
 * file without changing it (tidepost ring, report --ring), even while a
 * daemon writes it.  Reads come from the file; the writes ring_open
 * makes while recovering (the torn tail zeroed, a fresh header) land in
 * memory and are seen by later reads of this process only; syncs do
 * nothing; no lock is taken; nothing is ever created, truncated,
 * renamed or removed (EROFS).  While the daemon writes, what is read is
 * a snapshot that may be a little behind.
 */
#ifndef TIDEPOST_RINGVIEW_H
#define TIDEPOST_RINGVIEW_H

#include "ringio.h"

struct ringview;

/* NULL when out of memory. */
struct ringview *ringview_new(void);
void ringview_free(struct ringview *v);

/* The ops to pass to ring_open; valid while v lives. */
struct ringio_ops ringview_ops(struct ringview *v);

/* Forget the writes kept in memory (before opening the ring again). */
void ringview_reset(struct ringview *v);

#endif
