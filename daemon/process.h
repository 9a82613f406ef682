/*
 * process.h - the per-station reading pipeline between the decoder and
 * the writers: QARTOD tests on the layout's values, then the derived
 * values (derive.h), then QARTOD tests on derived values that have
 * settings.  Every reading leaves with its final real-time flags, its
 * derived values appended after the layout's slots, the per-test flags of
 * every value with QC settings, and the corrected flags of earlier
 * readings that the spike test could judge only now.
 *
 * Owns: one lane per station number and layout, made on the first reading
 * of that pair: the station's tp_derive_plan bound to the layout, and one
 * tp_qc_state per QC'd value (history kept across readings).  Borrows the
 * config, which must outlive it; a new config needs a new struct process
 * (QC history then starts afresh).
 *
 * Order within one reading (SCIENCE.md; qc.h, derive.h):
 *   1. QC of the layout values with a qc entry, a multi-variate peer
 *      before the value that uses it (a cycle of peers: the later one
 *      in the cycle sees no peer and gets multi_variate 2); the roll-up
 *      replaces the decoder's flag (which entered as in_flag);
 *   2. tp_derive_apply (derived flags are the worst of their inputs'
 *      QC'd flags);
 *   3. QC of derived values with a qc entry (same rules).  A layout value
 *      whose peer is a derived value sees no peer (multi_variate 2).
 *
 * Per layout, from the station's settings (cfg_qc.base):
 *   - the gross range's sensor span is the field's layout `range`
 *     narrowed by `fail`; the user span is `suspect`;
 *   - flat_eps not given: half the field's scale for integer fields,
 *     half a unit of the last printed decimal for derived values, 0
 *     (exactly equal) for float fields;
 *   - a qc entry naming a value the layout lacks is skipped for it;
 *   - a peer without its own qc entry gets a history of its own (syntax
 *     test only) that is never written back or reported.
 * A station not in the config (or with derive false) gets the derived
 * values of a zeroed tp_derive_cfg (salinity, oxygen) or none.
 *
 * The previous reading's update: when a value's spike judgement of its
 * previous accepted point changes that point's flag (qc.h: flags only get
 * worse), out->update gets the id that reading was processed with, the
 * value, its spike flag and its new flag.  Derived values of that earlier
 * reading are not re-derived.  Only changed flags are reported.
 *
 * Called by `tidepost decode` (cmd_decode.c) and the daemon's ingest.
 */
#ifndef TIDEPOST_PROCESS_H
#define TIDEPOST_PROCESS_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "tidepost/derive.h"
#include "tidepost/layout.h"
#include "tidepost/qc.h"

#include "buf.h"
#include "config.h"

#define PROC_UNKNOWN_LANES_MAX 64 /* lanes before unknown stations get none */
#define PROC_ID_MAX            128 /* reading ids kept for updates, bytes with NUL */

struct process;

/* Per-test flags of one value with QC settings. */
struct proc_test {
	size_t slot;      /* value slot in the reading */
	const char *name; /* value name (config strings) */
	uint8_t test[TP_QC_N_TESTS];
};

/* A corrected flag of an earlier reading's value. */
struct proc_update {
	const char *id; /* that reading's id; valid until the next
	                   process_reading of the same station+layout */
	uint64_t ref;   /* the ref it was processed with */
	int64_t time_s; /* its reading time */
	size_t slot;
	const char *name;
	uint8_t spike; /* its spike flag, 1, 3 or 4 */
	uint8_t flag;  /* its new flag (never better) */
};

struct proc_out {
	const struct tp_derive_plan *plan; /* names, units, decimals of the
	                                      derived slots; NULL: none */
	bool spike; /* some value of this station+layout has a spike test:
	               its flags are final only after the next reading */
	size_t n_tests;
	struct proc_test test[TP_MAX_VALUES];
	size_t n_updates;
	struct proc_update update[TP_MAX_VALUES];
};

/* A new pipeline over cfg (borrowed).  NULL when out of memory. */
struct process *process_new(const struct config *cfg);
void process_free(struct process *p);

/*
 * Run the pipeline on reading r of layout l from station number station
 * (r holds the layout's values as tp_decode_record left them; readings of
 * one station must come in time order for the history tests).  ref and
 * id (NULL: "") name this reading in later updates.  0, or -1 when out of
 * memory or r does not match l (r is then left as it was, out empty).
 */
int process_reading(struct process *p, uint32_t station,
                    const struct tp_layout *l, struct tp_reading *r,
                    uint64_t ref, const char *id, struct proc_out *out)
    __attribute__((warn_unused_result));

/* The name and decimals of value slot i of a reading processed with
 * plan (a layout field or a derived value); NULL when i is neither. */
const struct tp_derived_info *process_derived(const struct tp_derive_plan *plan,
                                              size_t slot);

/*
 * The value names that have QC settings in some station of cfg, each
 * once, in order of first appearance (for CSV columns known up front).
 * Returns how many were stored (at most cap).
 */
size_t process_qc_names(const struct config *cfg, const char **names,
                        size_t cap);

/*
 * The update record of the first updates of u[0..n) that name u[0].id
 * (adjacent ones; a later run of the same id makes a second record, which
 * a receiver applies the same way), as one JSON
 * object without a newline:
 *   {"update":"<id>","flags":{"ph":4},"tests":{"ph":{"spike":4}}}
 * "flags" holds each value's new flag (never better than the one sent),
 * "tests" its spike judgement.  Returns how many updates it used (>= 1
 * when n >= 1).
 */
size_t process_update_json(struct buf *b, const struct proc_update *u,
                           size_t n);

/*
 * The derived value names any station (or a station not in the config)
 * can produce with any layout of cfg, each once, in derive.h's order, for
 * CSV columns known up front.  Returns how many were stored (<= cap).
 */
size_t process_derived_names(const struct config *cfg, const char **names,
                             size_t cap);

/*
 * Hold-one, for offline use (`tidepost decode`): each station+layout keeps
 * its newest processed reading back until the next one has arrived, so the
 * spike judgement of the held one is known when it is written.  The
 * caller, per reading: process_reading; x = proc_hold_get; proc_hold_apply
 * (x, out) applies the updates that name x's ref; writes x if x->full;
 * proc_hold_put stores the new reading.  At the end it writes every full
 * entry (proc_hold_at, 0 .. proc_hold_n - 1), whose last readings keep
 * spike 2.  An update naming a reading older than the held one (its
 * value was missing or failed in between) is not applied: that reading
 * was already written, and keeps spike 2 for that value.
 */
struct proc_held {
	bool full;           /* holds a reading */
	uint64_t ref;        /* the ref it was processed with */
	struct tp_packet pk; /* copy; pk.data is not valid */
	struct tp_reading rd;
	int64_t received_s;
	const struct tp_derive_plan *plan;
	size_t n_tests;
	struct proc_test test[TP_MAX_VALUES];
};

struct proc_hold;

struct proc_hold *proc_hold_new(void);
void proc_hold_free(struct proc_hold *h);

/* The entry of station+layout (made empty on first use); NULL when out
 * of memory.  Valid until the next proc_hold_get. */
struct proc_held *proc_hold_get(struct proc_hold *h, uint32_t station,
                                const struct tp_layout *l);

/* Apply out's updates that name x->ref to x (flags only get worse). */
void proc_hold_apply(struct proc_held *x, const struct proc_out *out);

/* Store a processed reading in x. */
void proc_hold_put(struct proc_held *x, const struct tp_packet *pk,
                   const struct tp_reading *rd, int64_t received_s,
                   uint64_t ref, const struct proc_out *out);

size_t proc_hold_n(const struct proc_hold *h);
struct proc_held *proc_hold_at(struct proc_hold *h, size_t i);

#endif
