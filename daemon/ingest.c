/*
 * ingest.c - packets to staged ring records, and the group commit; see
 * ingest.h.  The order is written here once:
 *
 *   ring_append (staged, nothing on disk) -> ring_commit (pwrite +
 *   fdatasync) -> only then: accepted, listener (spool moves files,
 *   outputs are kicked), seen_commit (ids on disk).
 */
#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "buf.h"
#include "emit.h"
#include "ingest.h"
#include "log.h"
#include "process.h"

#define INGEST_MAX_WARNED 256 /* unknown stations logged once */
#define INGEST_ID_MAX     256
#define INGEST_JSON_MAX   (RING_PAYLOAD_MAX + 1)
#define REFUSE_LOG_MS     60000 /* refusals: at most a line a minute */

struct ingest {
	const struct config *cfg;
	struct ring *ring;
	struct seen *seen;
	const struct clock *clock;
	ingest_listener_fn fn;
	void *fn_arg;
	struct ingest_stats st;
	size_t staged;
	uint64_t refused_unlogged;
	int64_t refused_logged_ms;
	bool refused_once;
	uint32_t warned[INGEST_MAX_WARNED];
	size_t n_warned;
	struct buf id;
	struct buf json;
	struct tp_packet pk;
	struct tp_reading rd;
	/* QC and derived values (process.h); NULL: decoder flags only */
	struct process *proc;
	struct proc_out *pout;
	uint64_t ref;
};

struct ingest *ingest_new(const struct config *cfg, struct ring *ring,
                          struct seen *seen, const struct clock *clock)
{
	struct ingest *ing = calloc(1, sizeof(*ing));

	if (ing == NULL)
		return NULL;
	ing->cfg = cfg;
	ing->ring = ring;
	ing->seen = seen;
	ing->clock = clock != NULL ? clock : clock_system();
	buf_init(&ing->id, INGEST_ID_MAX);
	buf_init(&ing->json, INGEST_JSON_MAX);
	ing->proc = process_new(cfg);
	ing->pout = calloc(1, sizeof(*ing->pout));
	if (ing->proc == NULL || ing->pout == NULL) {
		ingest_free(ing);
		return NULL;
	}
	return ing;
}

void ingest_free(struct ingest *ing)
{
	if (ing == NULL)
		return;
	buf_free(&ing->id);
	buf_free(&ing->json);
	process_free(ing->proc);
	free(ing->pout);
	free(ing);
}

void ingest_set_config(struct ingest *ing, const struct config *cfg)
{
	ing->cfg = cfg;
	ing->n_warned = 0;
	process_free(ing->proc); /* QC history starts afresh */
	ing->proc = process_new(cfg);
}

void ingest_set_listener(struct ingest *ing, ingest_listener_fn fn, void *arg)
{
	ing->fn = fn;
	ing->fn_arg = arg;
}

int ingest_src_init(struct ingest_src *src, const struct config *cfg,
                    const struct cfg_input *ci)
{
	size_t i;

	memset(src, 0, sizeof(*src));
	src->name = ci != NULL ? ci->name : "input";
	if (ci == NULL || ci->n_layouts == 0) {
		src->layouts = cfg->layout_ptrs;
		src->n_layouts = cfg->n_layouts;
		return 0;
	}
	src->own = calloc(ci->n_layouts, sizeof(*src->own));
	if (src->own == NULL)
		return -1;
	for (i = 0; i < ci->n_layouts; i++)
		src->own[i] = cfg->layout_ptrs[ci->layouts[i]];
	src->layouts = src->own;
	src->n_layouts = ci->n_layouts;
	return 0;
}

void ingest_src_free(struct ingest_src *src)
{
	if (src == NULL)
		return;
	free(src->own);
	src->own = NULL;
	src->layouts = NULL;
	src->n_layouts = 0;
}

size_t ingest_staged(const struct ingest *ing)
{
	return ing->staged;
}

const struct ingest_stats *ingest_stats(const struct ingest *ing)
{
	return &ing->st;
}

/* The station as text: the config's name, else the number (logged once
 * per number, at most INGEST_MAX_WARNED numbers). */
static const char *station_text(struct ingest *ing, const char *input,
                                char *tmp, size_t cap)
{
	uint32_t number = ing->pk.has_station ? ing->pk.station : 0;
	const struct cfg_station *st = config_station(ing->cfg, number);
	size_t i;

	if (st != NULL && st->name != NULL)
		return st->name;
	snprintf(tmp, cap, "%" PRIu32, number);
	for (i = 0; i < ing->n_warned && i < INGEST_MAX_WARNED; i++) {
		if (ing->warned[i] == number)
			return tmp;
	}
	if (ing->n_warned < INGEST_MAX_WARNED) {
		ing->warned[ing->n_warned++] = number;
		log_warn("ingest: %s: station %" PRIu32 ": not in the config; "
		         "its readings name it \"%s\"",
		         input, number, tmp);
	} else if (ing->n_warned++ == INGEST_MAX_WARNED) {
		log_warn("ingest: %s: more stations not in the config; not "
		         "logged each",
		         input);
	}
	return tmp;
}

/* Refusals: the first one, then at most one summary line a minute. */
static void note_refused(struct ingest *ing, const char *input, uint32_t n,
                         const char *why)
{
	int64_t now = clock_mono_ms(ing->clock);

	ing->st.refused += n;
	ing->refused_unlogged += n;
	if (ing->refused_once && now - ing->refused_logged_ms < REFUSE_LOG_MS)
		return;
	log_warn("ingest: %s: %" PRIu64 " %s refused: %s (%" PRIu64
	         " refused since start)",
	         input, ing->refused_unlogged,
	         ing->refused_unlogged == 1 ? "reading" : "readings", why,
	         ing->st.refused);
	ing->refused_once = true;
	ing->refused_logged_ms = now;
	ing->refused_unlogged = 0;
}

int ingest_commit(struct ingest *ing)
{
	uint64_t last = 0, n = ing->staged;

	if (n == 0) {
		/* nothing to write: what was handed in is settled */
		if (ing->fn != NULL)
			ing->fn(ing->fn_arg, true, 0);
		return 0;
	}
	ing->staged = 0;
	/* write staged records + fdatasync: only after this are they
	 * accepted */
	if (ring_commit(ing->ring, &last) != 0) {
		log_err("ring: commit: %s: %s; %" PRIu64 " staged %s not "
		        "accepted",
		        ing->cfg->ring.path ? ing->cfg->ring.path : "ring",
		        strerror(errno), n, n == 1 ? "reading" : "readings");
		ing->st.lost_commit += n;
		if (ing->seen != NULL)
			seen_abort(ing->seen);
		if (ing->fn != NULL)
			ing->fn(ing->fn_arg, false, 0);
		return -1;
	}
	ing->st.accepted += n;
	ing->st.commits++;
	ing->st.last_seq = last;
	if (ing->fn != NULL)
		ing->fn(ing->fn_arg, true, n);
	if (ing->seen != NULL && seen_commit(ing->seen) != 0)
		log_warn("seen: append: %s: %s; a reading may be relayed "
		         "twice after a restart",
		         ing->cfg->state_dir ? ing->cfg->state_dir : "-",
		         strerror(errno));
	return 0;
}

/* Stage one JSON record; commits first when a batch is full. */
static enum ring_rc stage(struct ingest *ing, const char *p, size_t n)
{
	enum ring_rc rc;

	if (ing->seen != NULL && !seen_room(ing->seen) &&
	    ingest_commit(ing) != 0)
		return RING_ERR;
	rc = ring_append(ing->ring, p, n);
	if (rc == RING_BATCH_FULL) {
		if (ingest_commit(ing) != 0)
			return RING_ERR;
		rc = ring_append(ing->ring, p, n);
	}
	return rc;
}

/* The id of the current reading into ing->id; its hash. */
static uint64_t reading_id(struct ingest *ing, const struct emit_reading *er)
{
	buf_reset(&ing->id);
	emit_reading_id(&ing->id, er);
	return seen_hash(buf_str(&ing->id), ing->id.len);
}

/* QC and derived values of ing->rd, before its JSON (process.h): *sci
 * gets the derived values to print.  On failure (out of memory) the
 * reading keeps the decoder's flags and has no derived values. */
static void ingest_process(struct ingest *ing, struct emit_sci *sci)
{
	uint32_t number = ing->pk.has_station ? ing->pk.station : 0;

	memset(sci, 0, sizeof(*sci));
	if (process_reading(ing->proc, number, ing->pk.layout, &ing->rd,
	                    ++ing->ref, buf_str(&ing->id), ing->pout) != 0) {
		ing->pout->n_updates = 0;
		return;
	}
	sci->derived = ing->pout->plan->out;
	sci->n_derived = ing->pout->plan->n_out;
}

/* The corrected flags of earlier readings (the spike test's delayed
 * judgement), each id's as its own ring record after the new reading;
 * outputs relay them like readings.  Counted in `staged` (ring records
 * to commit), not in res->staged. */
static enum ring_rc ingest_updates(struct ingest *ing)
{
	const struct proc_out *o = ing->pout;
	enum ring_rc rc = RING_OK;
	size_t i = 0;

	while (i < o->n_updates && rc == RING_OK) {
		buf_reset(&ing->json);
		i += process_update_json(&ing->json, o->update + i,
		                         o->n_updates - i);
		if (buf_failed(&ing->json))
			continue;
		rc = stage(ing, ing->json.data, ing->json.len);
		ing->staged += rc == RING_OK; /* a ring record to commit */
	}
	return rc;
}

/* One decoded reading (ing->rd of ing->pk): JSON, stage. */
static enum ingest_rc ingest_reading(struct ingest *ing,
                                     const struct emit_reading *er,
                                     struct ingest_result *res)
{
	uint64_t h = reading_id(ing, er);
	struct emit_sci sci;
	enum ring_rc rc;

	if (ing->seen != NULL && seen_has(ing->seen, h)) {
		res->duplicates++;
		ing->st.duplicates++;
		return INGEST_OK;
	}
	ingest_process(ing, &sci);
	buf_reset(&ing->json);
	emit_json_sci(&ing->json, er, &sci);
	if (buf_failed(&ing->json) || ing->json.len < 2) {
		ing->st.undecodable++;
		snprintf(res->reason, sizeof(res->reason),
		         "record %" PRIu32
		         ": reading longer than %u bytes of JSON",
		         er->reading->record, RING_PAYLOAD_MAX);
		return INGEST_REJECTED;
	}
	buf_trim(&ing->json, 1); /* the '\n' of a line */
	rc = stage(ing, ing->json.data, ing->json.len);
	if (rc == RING_FULL)
		return INGEST_FULL;
	if (rc != RING_OK)
		return INGEST_DOWN;
	/* room was made in stage(), so this does not fail */
	if (ing->seen != NULL && seen_stage(ing->seen, h) != 0)
		log_warn("seen: stage: %s", strerror(errno));
	ing->staged++;
	res->staged++;
	rc = ingest_updates(ing);
	/* a full ring drops the update (flags only get worse; the next
	 * reading is refused anyway); a failed ring stops ingest */
	return rc == RING_OK || rc == RING_FULL ? INGEST_OK : INGEST_DOWN;
}

/* Every record of ing->pk. */
static enum ingest_rc ingest_records(struct ingest *ing,
                                     const struct ingest_src *src,
                                     int64_t received_s,
                                     struct ingest_result *res)
{
	char tmp[EMIT_NUM_MAX];
	struct emit_reading er;
	enum ingest_rc rc = INGEST_OK, r;
	enum tp_status st;
	uint32_t k;

	er.station = station_text(ing, src->name, tmp, sizeof(tmp));
	er.packet = &ing->pk;
	er.reading = &ing->rd;
	er.received_s = received_s;
	for (k = 0; k < ing->pk.n_records; k++) {
		st = tp_decode_record(&ing->pk, k, &ing->rd);
		if (st != TP_OK) {
			ing->st.undecodable++;
			snprintf(res->reason, sizeof(res->reason),
			         "record %" PRIu32 ": %s", k, tp_strerror(st));
			rc = INGEST_REJECTED;
			continue;
		}
		r = ingest_reading(ing, &er, res);
		if (r == INGEST_FULL || r == INGEST_DOWN) {
			res->refused = ing->pk.n_records - k;
			note_refused(ing, src->name, res->refused,
			             r == INGEST_FULL ? "the ring is full"
			                              : "the ring failed");
			return r;
		}
		if (r != INGEST_OK)
			rc = r;
	}
	/* a packet of which some record was accepted is not "rejected" */
	if (rc == INGEST_REJECTED && res->staged + res->duplicates > 0)
		rc = INGEST_OK;
	return rc;
}

enum ingest_rc ingest_packet(struct ingest *ing, const struct ingest_src *src,
                             const uint8_t *p, size_t len, int64_t received_s,
                             struct ingest_result *res)
{
	const struct tp_layout *l;
	enum tp_status st;
	int li;

	memset(res, 0, sizeof(*res));
	li = tp_layout_select(src->layouts, src->n_layouts, p, len);
	if (li < 0) {
		ing->st.unknown++;
		snprintf(res->reason, sizeof(res->reason),
		         "unknown layout (%zu bytes)", len);
		return INGEST_REJECTED;
	}
	l = src->layouts[li];
	st = tp_decode_packet(l, p, len, &ing->pk);
	if (st == TP_ERR_CHECK) {
		ing->st.bad_check++;
		snprintf(res->reason, sizeof(res->reason),
		         "bad check (%s) as "
		         "%s",
		         tp_check_name(l), l->name);
		return INGEST_REJECTED;
	}
	if (st != TP_OK) {
		ing->st.undecodable++;
		snprintf(res->reason, sizeof(res->reason),
		         "undecodable as %s: %s", l->name, tp_strerror(st));
		return INGEST_REJECTED;
	}
	ing->st.packets++;
	if (!ing->pk.has_time)
		ing->pk.time_s = received_s;
	return ingest_records(ing, src, received_s, res);
}
