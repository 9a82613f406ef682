/*
 * process.c - the per-station reading pipeline: QC, derive, QC of derived
 * values, updates of earlier readings (see process.h).
 */
#include "process.h"

#include <math.h>
#include <stddef.h>
#include <stdlib.h>
#include <string.h>

#include "emit.h"

/* One QC'd value of a lane. */
struct proc_entry {
	size_t slot;
	const char *name;
	bool derived; /* runs after derivation */
	bool listed;  /* has a qc entry (else only some entry's peer) */
	int peer;     /* index of the peer entry, or -1 */
	struct tp_qc_value_cfg cfg;
	struct tp_qc_state st;
	char head_id[PROC_ID_MAX]; /* id of st's newest value */
	char prev_id[PROC_ID_MAX]; /* the same, before this reading */
};

/* One station number and layout. */
struct proc_lane {
	uint32_t station;
	const struct tp_layout *layout;
	struct tp_derive_plan plan;
	size_t n; /* entries, in run order */
	struct proc_entry *e;
	bool spike; /* some listed entry has a spike test */
};

struct process {
	const struct config *cfg;
	struct proc_lane **lane; /* sorted by (station, layout) */
	size_t n_lanes, cap;
};

struct process *process_new(const struct config *cfg)
{
	struct process *p = calloc(1, sizeof(*p));

	if (p != NULL)
		p->cfg = cfg;
	return p;
}

void process_free(struct process *p)
{
	size_t i;

	if (p == NULL)
		return;
	for (i = 0; i < p->n_lanes; i++) {
		free(p->lane[i]->e);
		free(p->lane[i]);
	}
	free(p->lane);
	free(p);
}

/* ---- building a lane ---------------------------------------------------- */

/* The value slot called name in l, or -1. */
static int field_slot(const struct tp_layout *l, const char *name)
{
	size_t i, n = tp_layout_n_values(l);
	const struct tp_field *f;

	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (f != NULL && f->name != NULL && f->type != TP_T_SKIP &&
		    f->role == TP_ROLE_VALUE && strcmp(f->name, name) == 0)
			return (int)i;
	}
	return -1;
}

/* Where value `name` is in this lane: slot, and whether derived. */
static bool locate(const struct proc_lane *ln, const char *name, size_t *slot,
                   bool *derived)
{
	const struct tp_derived_info *d;
	int s = field_slot(ln->layout, name);

	*derived = s < 0;
	if (s >= 0) {
		*slot = (size_t)s;
		return true;
	}
	d = tp_derive_find(&ln->plan, name);
	if (d != NULL)
		*slot = d->slot;
	return d != NULL;
}

static double flat_eps_default(const struct proc_lane *ln,
                               const struct proc_entry *e)
{
	const struct tp_field *f;
	const struct tp_derived_info *d;

	if (e->derived) {
		d = tp_derive_find(&ln->plan, e->name);
		return d != NULL ? 0.5 * pow(10.0, -d->decimals) : 0;
	}
	f = tp_layout_field(ln->layout, e->slot);
	if (f == NULL || f->type == TP_T_F32 || f->type == TP_T_F64)
		return 0;
	return fabs(f->scale != 0 ? f->scale : 1.0) / 2;
}

/* The layout's range narrowed by `fail`. */
static void sensor_span(const struct proc_lane *ln, struct proc_entry *e)
{
	const struct tp_field *f =
	    e->derived ? NULL : tp_layout_field(ln->layout, e->slot);
	struct tp_qc_span *s = &e->cfg.sensor;

	if (f == NULL || !f->has_range)
		return;
	if (!s->set) {
		s->set = true;
		s->min = f->range_min;
		s->max = f->range_max;
		return;
	}
	if (f->range_min > s->min)
		s->min = f->range_min;
	if (f->range_max < s->max)
		s->max = f->range_max;
	if (s->min > s->max) /* disjoint: the layout's span rules */
		*s = (struct tp_qc_span){true, f->range_min, f->range_max};
}

/* Index of the entry for name, or -1. */
static int entry_index(const struct proc_entry *e, size_t n, const char *name)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (strcmp(e[i].name, name) == 0)
			return (int)i;
	return -1;
}

/* Add an entry for name (settings q, or NULL for a bare peer). */
static void add_entry(struct proc_lane *ln, struct proc_entry *e, size_t *n,
                      const char *name, const struct cfg_qc *q)
{
	struct proc_entry *x = &e[*n];

	if (entry_index(e, *n, name) >= 0 ||
	    !locate(ln, name, &x->slot, &x->derived))
		return;
	memset(&x->cfg, 0, sizeof(x->cfg));
	memset(&x->st, 0, sizeof(x->st));
	x->head_id[0] = x->prev_id[0] = '\0';
	x->name = name;
	x->listed = q != NULL;
	x->peer = -1;
	if (q != NULL) {
		x->cfg = q->base;
		sensor_span(ln, x);
		if (x->cfg.flat_eps == 0)
			x->cfg.flat_eps = flat_eps_default(ln, x);
	}
	(*n)++;
}

/* The entries of station cs for this lane, peers linked. */
static size_t collect(struct proc_lane *ln, const struct cfg_station *cs,
                      struct proc_entry *e)
{
	size_t i, n = 0;
	int k;

	for (i = 0; cs != NULL && i < cs->n_qc; i++)
		if (cs->qc[i].value != NULL)
			add_entry(ln, e, &n, cs->qc[i].value, &cs->qc[i]);
	for (i = 0; cs != NULL && i < cs->n_qc; i++)
		if (cs->qc[i].value != NULL && cs->qc[i].mv_with != NULL)
			add_entry(ln, e, &n, cs->qc[i].mv_with, NULL);
	for (i = 0; cs != NULL && i < cs->n_qc; i++) {
		if (cs->qc[i].value == NULL || cs->qc[i].mv_with == NULL)
			continue;
		k = entry_index(e, n, cs->qc[i].value);
		if (k >= 0)
			e[k].peer = entry_index(e, n, cs->qc[i].mv_with);
	}
	return n;
}

/* May entry i run now: its peer ran already, or can never run first? */
static bool ready(const struct proc_entry *e, int i, const bool *done)
{
	int pr = e[i].peer;

	return pr < 0 || done[pr] || e[pr].derived != e[i].derived;
}

/* Copy the n entries of e into ln->e in run order: layout values, then
 * derived ones; within each, peers first (cycles broken in file order). */
static void order(struct proc_lane *ln, const struct proc_entry *e, size_t n)
{
	bool done[TP_MAX_VALUES] = {false};
	int map[TP_MAX_VALUES], g, i, k = 0, moved;

	for (g = 0; g < 2; g++) {
		do {
			moved = 0;
			for (i = 0; i < (int)n; i++)
				if (!done[i] && e[i].derived == (g == 1) &&
				    ready(e, i, done)) {
					done[i] = true;
					map[i] = k++;
					moved = 1;
				}
		} while (moved);
		for (i = 0; i < (int)n; i++)
			if (!done[i] && e[i].derived == (g == 1)) {
				done[i] = true;
				map[i] = k++;
			}
	}
	for (i = 0; i < (int)n; i++) {
		ln->e[map[i]] = e[i];
		ln->e[map[i]].peer = e[i].peer < 0 ? -1 : map[e[i].peer];
	}
}

/* A plan that derives nothing (derive false, or a binding problem the
 * loader accepted because another layout binds). */
static void plan_off(struct tp_derive_plan *plan, const struct tp_layout *l)
{
	int i;

	memset(plan, 0, sizeof(*plan));
	plan->n_slots = tp_layout_n_values(l);
	plan->pressure = TP_PRES_ZERO;
	for (i = 0; i < TP_DIN_N; i++)
		plan->in[i] = -1;
	for (i = 0; i < TP_DV_N; i++)
		plan->pos[i] = -1;
}

static struct proc_lane *lane_new(const struct config *cfg, uint32_t station,
                                  const struct tp_layout *l)
{
	const struct cfg_station *cs =
	    cfg ? config_station(cfg, station) : NULL;
	struct tp_derive_cfg zero;
	struct proc_lane *ln = calloc(1, sizeof(*ln));
	struct proc_entry *tmp;
	size_t i;

	if (ln == NULL)
		return NULL;
	ln->station = station;
	ln->layout = l;
	memset(&zero, 0, sizeof(zero));
	if ((cs != NULL && !cs->derive) ||
	    tp_derive_bind(l, cs ? &cs->derive_cfg : &zero, &ln->plan, NULL) !=
	        TP_OK)
		plan_off(&ln->plan, l);
	tmp = calloc(TP_MAX_VALUES, sizeof(*tmp));
	ln->e = calloc(TP_MAX_VALUES, sizeof(*ln->e));
	if (tmp == NULL || ln->e == NULL) {
		free(tmp);
		free(ln->e);
		free(ln);
		return NULL;
	}
	ln->n = collect(ln, cs, tmp);
	order(ln, tmp, ln->n);
	free(tmp);
	for (i = 0; i < ln->n; i++)
		ln->spike |= ln->e[i].listed && (ln->e[i].cfg.spike_low > 0 ||
		                                 ln->e[i].cfg.spike_high > 0);
	return ln;
}

/* ---- finding a lane ------------------------------------------------------ */

static int lane_cmp(const struct proc_lane *a, uint32_t station,
                    const struct tp_layout *l)
{
	if (a->station != station)
		return a->station < station ? -1 : 1;
	if ((uintptr_t)a->layout != (uintptr_t)l)
		return (uintptr_t)a->layout < (uintptr_t)l ? -1 : 1;
	return 0;
}

static struct proc_lane *lane_get(struct process *p, uint32_t station,
                                  const struct tp_layout *l)
{
	size_t lo = 0, hi = p->n_lanes, mid;
	struct proc_lane **nl, *ln;
	int c;

	while (lo < hi) {
		mid = lo + (hi - lo) / 2;
		c = lane_cmp(p->lane[mid], station, l);
		if (c == 0)
			return p->lane[mid];
		if (c < 0)
			lo = mid + 1;
		else
			hi = mid;
	}
	/* A station not in the config gets a lane only while few exist: a
	 * stream of made-up station numbers must not grow memory without
	 * bound (its readings then pass without QC and derived values). */
	if (p->n_lanes >= PROC_UNKNOWN_LANES_MAX &&
	    (p->cfg == NULL || config_station(p->cfg, station) == NULL))
		return NULL;
	if (p->n_lanes == p->cap) {
		nl = realloc(p->lane, (p->cap ? 2 * p->cap : 16) * sizeof(*nl));
		if (nl == NULL)
			return NULL;
		p->lane = nl;
		p->cap = p->cap ? 2 * p->cap : 16;
	}
	ln = lane_new(p->cfg, station, l);
	if (ln == NULL)
		return NULL;
	memmove(p->lane + lo + 1, p->lane + lo,
	        (p->n_lanes - lo) * sizeof(*p->lane));
	p->lane[lo] = ln;
	p->n_lanes++;
	return ln;
}

/* ---- one reading ----------------------------------------------------------
 */

static void copy_id(char *dst, const char *id)
{
	size_t n = id != NULL ? strlen(id) : 0;

	if (n >= PROC_ID_MAX)
		n = PROC_ID_MAX - 1;
	memcpy(dst, id != NULL ? id : "", n);
	dst[n] = '\0';
}

static void note_update(struct proc_out *out, const struct proc_entry *x,
                        const struct tp_qc_prev *pv)
{
	struct proc_update *u;

	if (!pv->set || !pv->changed || !x->listed ||
	    out->n_updates >= TP_MAX_VALUES)
		return;
	u = &out->update[out->n_updates++];
	u->id = x->prev_id;
	u->ref = pv->ref;
	u->time_s = pv->time_s;
	u->slot = x->slot;
	u->name = x->name;
	u->spike = pv->spike;
	u->flag = pv->flag;
}

/* QC of entry i of ln on reading r. */
static void run_entry(struct proc_lane *ln, size_t i, struct tp_reading *r,
                      uint64_t ref, const char *id, struct proc_out *out)
{
	struct proc_entry *x = &ln->e[i];
	struct tp_qc_sample in;
	struct tp_qc_peer peer;
	struct tp_qc_result res;

	in.v = r->values[x->slot].v;
	in.in_flag = r->values[x->slot].flag;
	in.time_s = r->time_s;
	in.ref = ref;
	if (x->peer >= 0)
		tp_qc_peer_from_state(&ln->e[x->peer].st, r->time_s,
		                      x->cfg.mv_window_s, &peer);
	memcpy(x->prev_id, x->head_id, sizeof(x->prev_id));
	if (tp_qc_apply(&x->cfg, &x->st, &in, x->peer >= 0 ? &peer : NULL,
	                &res) != TP_OK)
		return;
	if (x->st.head_ref == ref) /* entered the history */
		copy_id(x->head_id, id);
	note_update(out, x, &res.prev);
	if (!x->listed)
		return;
	r->values[x->slot].flag = res.flag;
	if (res.flag == TP_FLAG_MISSING)
		r->values[x->slot].v = NAN;
	out->test[out->n_tests].slot = x->slot;
	out->test[out->n_tests].name = x->name;
	memcpy(out->test[out->n_tests].test, res.test, sizeof(res.test));
	out->n_tests++;
}

int process_reading(struct process *p, uint32_t station,
                    const struct tp_layout *l, struct tp_reading *r,
                    uint64_t ref, const char *id, struct proc_out *out)
{
	struct proc_lane *ln;
	size_t i;

	out->plan = NULL;
	out->spike = false;
	out->n_tests = 0;
	out->n_updates = 0;
	if (p == NULL || l == NULL || r == NULL ||
	    r->n_values != tp_layout_n_values(l))
		return -1;
	ln = lane_get(p, station, l);
	if (ln == NULL)
		return -1;
	for (i = 0; i < ln->n && !ln->e[i].derived; i++)
		run_entry(ln, i, r, ref, id, out);
	if (tp_derive_apply(&ln->plan, r) != TP_OK)
		return -1;
	for (; i < ln->n; i++)
		run_entry(ln, i, r, ref, id, out);
	out->plan = &ln->plan;
	out->spike = ln->spike;
	return 0;
}

const struct tp_derived_info *process_derived(const struct tp_derive_plan *plan,
                                              size_t slot)
{
	if (plan == NULL || slot < plan->n_slots ||
	    slot >= plan->n_slots + plan->n_out)
		return NULL;
	return &plan->out[slot - plan->n_slots];
}

size_t process_qc_names(const struct config *cfg, const char **names,
                        size_t cap)
{
	size_t i, j, k, n = 0;
	const struct cfg_station *s;
	bool dup;

	for (i = 0; cfg != NULL && i < cfg->n_stations; i++) {
		s = &cfg->stations[i];
		for (j = 0; j < s->n_qc; j++) {
			if (s->qc[j].value == NULL)
				continue;
			dup = false;
			for (k = 0; k < n && !dup; k++)
				dup = strcmp(names[k], s->qc[j].value) == 0;
			if (!dup && n < cap)
				names[n++] = s->qc[j].value;
		}
	}
	return n;
}

/* ---- up-front names ------------------------------------------------------ */

/* Mark what cfg (or a zeroed one) derives with layout l. */
static void mark_derived(const struct tp_layout *l,
                         const struct tp_derive_cfg *dc, bool *seen)
{
	struct tp_derive_plan plan;
	size_t j;

	if (tp_derive_bind(l, dc, &plan, NULL) != TP_OK)
		return;
	for (j = 0; j < plan.n_out; j++)
		seen[plan.out[j].what] = true;
}

size_t process_derived_names(const struct config *cfg, const char **names,
                             size_t cap)
{
	bool seen[TP_DV_N] = {false};
	struct tp_derive_cfg zero;
	size_t i, j, n = 0;

	memset(&zero, 0, sizeof(zero));
	for (i = 0; cfg != NULL && i < cfg->n_layouts; i++) {
		mark_derived(&cfg->layouts[i], &zero, seen);
		for (j = 0; j < cfg->n_stations; j++)
			if (cfg->stations[j].derive)
				mark_derived(&cfg->layouts[i],
				             &cfg->stations[j].derive_cfg,
				             seen);
	}
	for (i = 0; i < TP_DV_N && n < cap; i++)
		if (seen[i])
			names[n++] =
			    tp_derived_describe((enum tp_derived)i)->name;
	return n;
}

/* ---- hold-one -------------------------------------------------------------
 */

struct proc_hold_slot {
	uint32_t station;
	const struct tp_layout *layout;
	struct proc_held *x;
};

struct proc_hold {
	struct proc_hold_slot *s;
	size_t n, cap, last;
};

struct proc_hold *proc_hold_new(void)
{
	return calloc(1, sizeof(struct proc_hold));
}

void proc_hold_free(struct proc_hold *h)
{
	size_t i;

	if (h == NULL)
		return;
	for (i = 0; i < h->n; i++)
		free(h->s[i].x);
	free(h->s);
	free(h);
}

static bool hold_is(const struct proc_hold_slot *s, uint32_t station,
                    const struct tp_layout *l)
{
	return s->station == station && s->layout == l;
}

/* Entries are few (station+layout pairs of one archive): a linear search
 * after the last one used. */
struct proc_held *proc_hold_get(struct proc_hold *h, uint32_t station,
                                const struct tp_layout *l)
{
	struct proc_hold_slot *ns;
	size_t i;

	if (h->last < h->n && hold_is(&h->s[h->last], station, l))
		return h->s[h->last].x;
	for (i = 0; i < h->n; i++)
		if (hold_is(&h->s[i], station, l)) {
			h->last = i;
			return h->s[i].x;
		}
	if (h->n == h->cap) {
		ns = realloc(h->s, (h->cap ? 2 * h->cap : 8) * sizeof(*ns));
		if (ns == NULL)
			return NULL;
		h->s = ns;
		h->cap = h->cap ? 2 * h->cap : 8;
	}
	h->s[h->n].x = calloc(1, sizeof(struct proc_held));
	if (h->s[h->n].x == NULL)
		return NULL;
	h->s[h->n].station = station;
	h->s[h->n].layout = l;
	h->last = h->n;
	return h->s[h->n++].x;
}

void proc_hold_apply(struct proc_held *x, const struct proc_out *out)
{
	const struct proc_update *u;
	size_t i, j;

	for (i = 0; x->full && i < out->n_updates; i++) {
		u = &out->update[i];
		if (u->ref != x->ref || u->slot >= x->rd.n_values)
			continue;
		x->rd.values[u->slot].flag =
		    tp_qc_worse(x->rd.values[u->slot].flag, u->flag);
		for (j = 0; j < x->n_tests; j++)
			if (x->test[j].slot == u->slot)
				x->test[j].test[TP_QC_SPIKE] = u->spike;
	}
}

/* The used part of a packet and of a reading (what lies past their
 * header fields and n_values is never read), not the whole 5 KB. */
static void copy_packet(struct tp_packet *dst, const struct tp_packet *src)
{
	size_t n = src->layout != NULL ? src->layout->n_fields : TP_MAX_FIELDS;

	memcpy(dst, src, offsetof(struct tp_packet, header));
	memcpy(dst->header, src->header,
	       (n < TP_MAX_FIELDS ? n : TP_MAX_FIELDS) *
	           sizeof(dst->header[0]));
}

static void copy_reading(struct tp_reading *dst, const struct tp_reading *src)
{
	size_t n = src->n_values;

	memcpy(dst, src, offsetof(struct tp_reading, values));
	memcpy(dst->values, src->values,
	       (n < TP_MAX_VALUES ? n : TP_MAX_VALUES) *
	           sizeof(dst->values[0]));
}

void proc_hold_put(struct proc_held *x, const struct tp_packet *pk,
                   const struct tp_reading *rd, int64_t received_s,
                   uint64_t ref, const struct proc_out *out)
{
	x->full = true;
	x->ref = ref;
	copy_packet(&x->pk, pk);
	x->pk.data = NULL;
	x->pk.len = 0;
	copy_reading(&x->rd, rd);
	x->received_s = received_s;
	x->plan = out->plan;
	x->n_tests = out->n_tests;
	memcpy(x->test, out->test, out->n_tests * sizeof(out->test[0]));
}

size_t proc_hold_n(const struct proc_hold *h)
{
	return h->n;
}

struct proc_held *proc_hold_at(struct proc_hold *h, size_t i)
{
	return i < h->n ? h->s[i].x : NULL;
}

/* ---- the update record -----------------------------------------------------
 */

size_t process_update_json(struct buf *b, const struct proc_update *u, size_t n)
{
	size_t i, k = 0;

	while (k < n && strcmp(u[k].id, u[0].id) == 0)
		k++;
	if (k == 0)
		return 0;
	buf_adds(b, "{\"update\":");
	emit_json_string(b, u[0].id);
	buf_adds(b, ",\"flags\":{");
	for (i = 0; i < k; i++) {
		buf_adds(b, i ? "," : "");
		emit_json_string(b, u[i].name);
		buf_printf(b, ":%u", (unsigned)u[i].flag);
	}
	buf_adds(b, "},\"tests\":{");
	for (i = 0; i < k; i++) {
		buf_adds(b, i ? "," : "");
		emit_json_string(b, u[i].name);
		buf_printf(b, ":{\"spike\":%u}", (unsigned)u[i].spike);
	}
	buf_adds(b, "}}");
	return k;
}
