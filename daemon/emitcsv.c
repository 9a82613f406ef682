/*
 * emitcsv.c - readings as CSV rows (RFC 4180); see emit.h.
 */
#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "emitint.h"

/* Quote the cell written since `start` if it needs it (RFC 4180). */
static void csv_quote_from(struct buf *b, size_t start)
{
	size_t i, j, n, q = 0;
	bool need = false;

	if (buf_failed(b))
		return;
	for (i = start; i < b->len; i++) {
		q += b->data[i] == '"';
		need |= b->data[i] == '"' || b->data[i] == ',' ||
		        b->data[i] == '\r' || b->data[i] == '\n';
	}
	if (!need)
		return;
	n = b->len - start;
	for (i = 0; i < q + 2; i++)
		buf_addc(b, '"');
	if (buf_failed(b))
		return;
	/* copy backwards, doubling quotes; the last byte is the closing
	 * quote already, and data[start] gets the opening one */
	j = b->len - 2;
	for (i = start + n; i-- > start;) {
		b->data[j--] = b->data[i];
		if (b->data[i] == '"')
			b->data[j--] = '"';
	}
	b->data[start] = '"';
}

void emit_csv_cell(struct buf *b, const char *s, size_t n)
{
	size_t start = b->len;

	buf_add(b, s, n);
	csv_quote_from(b, start);
}

/* Column of name in c->names, or -1. */
static int csv_find(const struct emit_csv *c, const char *name)
{
	size_t i;

	for (i = 0; i < c->n_names; i++) {
		if (strcmp(c->names[i], name) == 0)
			return (int)i;
	}
	return -1;
}

/* Add the value names of l not seen yet (names has room for all). */
static void csv_add_names(struct emit_csv *c, const struct tp_layout *l)
{
	const struct tp_field *f;
	size_t i, n = tp_layout_n_values(l);

	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (emit_is_value(f) && csv_find(c, f->name) < 0)
			c->names[c->n_names++] = f->name;
	}
}

/* slot[li * n_names + col] for layout li: its first slot of that name. */
static void csv_map_layout(struct emit_csv *c, size_t li)
{
	const struct tp_layout *l = c->layouts[li];
	const struct tp_field *f;
	int *row = c->slot + li * c->n_names;
	int *form = c->form + li * c->n_names;
	size_t i, n = tp_layout_n_values(l);
	int col;

	for (i = 0; i < c->n_names; i++) {
		row[i] = -1;
		form[i] = 0;
	}
	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (!emit_is_value(f))
			continue;
		col = csv_find(c, f->name);
		if (col >= 0 && row[col] < 0) {
			row[col] = (int)i;
			form[col] = emit_field_form(f);
		}
	}
}

int emit_csv_init(struct emit_csv *c, const struct tp_layout *const *ls,
                  size_t n)
{
	size_t i, total = 0;

	memset(c, 0, sizeof(*c));
	c->layouts = ls;
	c->n_layouts = n;
	for (i = 0; i < n; i++)
		total += tp_layout_n_values(ls[i]);
	c->names = calloc(total ? total : 1, sizeof(*c->names));
	if (c->names == NULL)
		return -1;
	for (i = 0; i < n; i++)
		csv_add_names(c, ls[i]);
	c->slot = calloc(n * c->n_names + 1, sizeof(*c->slot));
	c->form = calloc(n * c->n_names + 1, sizeof(*c->form));
	c->pc = emit_pcache_new();
	if (c->slot == NULL || c->form == NULL || c->pc == NULL) {
		emit_csv_free(c);
		errno = ENOMEM;
		return -1;
	}
	for (i = 0; i < n; i++)
		csv_map_layout(c, i);
	return 0;
}

void emit_csv_free(struct emit_csv *c)
{
	if (c == NULL)
		return;
	free(c->names);
	free(c->slot);
	free(c->form);
	free(c->dnames);
	free(c->qnames);
	c->dnames = c->qnames = NULL;
	c->n_dnames = c->n_qnames = 0;
	emit_pcache_free(c->pc);
	c->pc = NULL;
	c->names = NULL;
	c->slot = NULL;
	c->form = NULL;
	c->n_names = 0;
}

int emit_csv_science(struct emit_csv *c, const char *const *dnames,
                     size_t n_dnames, const char *const *qnames,
                     size_t n_qnames)
{
	size_t i;

	c->dnames = calloc(n_dnames + 1, sizeof(*c->dnames));
	c->qnames = calloc(n_qnames + 1, sizeof(*c->qnames));
	if (c->dnames == NULL || c->qnames == NULL) {
		emit_csv_free(c);
		errno = ENOMEM;
		return -1;
	}
	for (i = 0; i < n_dnames; i++)
		if (csv_find(c, dnames[i]) < 0)
			c->dnames[c->n_dnames++] = dnames[i];
	for (i = 0; i < n_qnames; i++)
		c->qnames[c->n_qnames++] = qnames[i];
	return 0;
}

/* The derived and per-test column names (emit_csv_science). */
static void csv_science_header(struct buf *b, const struct emit_csv *c)
{
	size_t i, start;
	int t;

	for (i = 0; i < c->n_dnames; i++) {
		buf_addc(b, ',');
		emit_csv_cell(b, c->dnames[i], strlen(c->dnames[i]));
		buf_addc(b, ',');
		start = b->len;
		buf_printf(b, "%s_flag", c->dnames[i]);
		csv_quote_from(b, start);
	}
	for (i = 0; i < c->n_qnames; i++)
		for (t = 0; t < TP_QC_N_TESTS; t++) {
			buf_addc(b, ',');
			start = b->len;
			buf_printf(b, "%s_%s", c->qnames[i],
			           tp_qc_test_name((enum tp_qc_test)t));
			csv_quote_from(b, start);
		}
}

void emit_csv_header(struct buf *b, const struct emit_csv *c)
{
	size_t i, start;

	buf_adds(b, "id,station,time,seq");
	for (i = 0; i < c->n_names; i++) {
		buf_addc(b, ',');
		emit_csv_cell(b, c->names[i], strlen(c->names[i]));
		buf_addc(b, ',');
		start = b->len;
		buf_adds(b, c->names[i]);
		buf_adds(b, "_flag");
		csv_quote_from(b, start);
	}
	csv_science_header(b, c);
	buf_adds(b, "\r\n");
}

/* ",value,flag" for one column (empty cells when absent or null);
 * n is emit_n_slots(er), form the column's number form. */
static void csv_value(struct buf *b, const struct emit_reading *er, size_t n,
                      int slot, int form)
{
	const struct tp_value *v;
	char *p;
	size_t k;

	if (slot < 0 || (size_t)slot >= n) {
		buf_add(b, LIT(",,"));
		return;
	}
	v = &er->reading->values[slot];
	if (is_null(v)) {
		buf_add(b, LIT(",,9"));
		return;
	}
	p = buf_room(b, EMIT_FIXED_MAX + 24);
	k = p != NULL ? emit_fixed_chars(p + 1, v->v, form) : 0;
	if (k > 0) {
		p[0] = ',';
		p += 1 + k;
		*p++ = ',';
		buf_commit(b, put_u64(p, v->flag));
		return;
	}
	buf_addc(b, ',');
	emit_form(b, form, v->v);
	buf_addc(b, ',');
	emit_member_value(b, 0, v, true);
}

/* csv_value written at p (room: EMIT_FIXED_MAX + 24 bytes): the end, or
 * NULL when the number needs the slow form. */
static inline char *csv_value_at(char *p, const struct emit_reading *er,
                                 size_t n, int slot, int form)
{
	const struct tp_value *v;
	size_t k;

	if (slot < 0 || (size_t)slot >= n)
		return put_mem(p, LIT(",,"));
	v = &er->reading->values[slot];
	if (is_null(v))
		return put_mem(p, LIT(",,9"));
	k = emit_fixed_chars(p + 1, v->v, form);
	if (k == 0)
		return NULL;
	p[0] = ',';
	p += 1 + k;
	*p++ = ',';
	return put_u64(p, v->flag);
}

/* Index of layout l in the table, or n_layouts. */
static size_t csv_layout_index(const struct emit_csv *c,
                               const struct tp_layout *l)
{
	size_t li;

	for (li = 0; li < c->n_layouts; li++) {
		if (c->layouts[li] == l)
			break;
	}
	return li;
}

/* Does s hold a byte that makes a CSV cell need quotes? */
static bool csv_special(const char *s)
{
	for (; *s != '\0'; s++) {
		if (*s == '"' || *s == ',' || *s == '\r' || *s == '\n')
			return true;
	}
	return false;
}

/* Is column i of layout li the same for every record of the packet
 * (absent, a header slot, or past the slots the reading holds)? */
static bool csv_constant(const struct emit_csv *c, size_t li, size_t i,
                         const struct emit_reading *er, size_t ns)
{
	int slot = c->slot[li * c->n_names + i];

	return slot < 0 || (size_t)slot < er->packet->layout->n_fields ||
	       (size_t)slot >= ns;
}

/* The CSV pieces of this reading's packet (the packet cache, emit.c): the id up
 * to the record number, the station cell, then the seq cell and the
 * leading constant columns.  The station must need no quotes. */
static void pcache_csv(struct emit_pcache *pc, const struct emit_csv *c,
                       size_t li, const struct emit_reading *er, size_t ns)
{
	const struct tp_packet *pk = er->packet;
	struct buf *t = &pc->text;
	char tmp[ID_NUMS_MAX];
	size_t i;

	buf_adds(t, er->station);
	buf_add(t, tmp,
	        (size_t)(emit_put_id_prefix(tmp, pk->time_s, emit_id_seq(pk)) -
	                 tmp));
	emit_pcache_cut(pc, 1, false, NULL);
	buf_addc(t, ',');
	buf_adds(t, er->station);
	buf_addc(t, ',');
	emit_pcache_cut(pc, 2, false, NULL);
	buf_addc(t, ',');
	if (pk->has_seq)
		buf_add(t, tmp, (size_t)(put_u64(tmp, pk->seq) - tmp));
	for (i = 0; i < c->n_names && csv_constant(c, li, i, er, ns); i++)
		csv_value(t, er, ns, c->slot[li * c->n_names + i],
		          c->form[li * c->n_names + i]);
	pc->run = i;
	emit_pcache_cut(pc, 3, true, pk->layout);
}

/* Make the packet cache hold er's packet when it can (else it holds
 * nothing). */
static void csv_cache(const struct emit_csv *c, size_t li,
                      const struct emit_reading *er, size_t ns)
{
	struct emit_pcache *pc = c->pc;

	if (pc != NULL && !emit_pcache_hit(pc, er, ns)) {
		pc->layout = NULL; /* stale, even if no new one can be made */
		if (!csv_special(er->station) && emit_pcache_start(pc, er, ns))
			pcache_csv(pc, c, li, er, ns);
	}
}

/* id, station, time and seq cells, through the packet cache when it
 * holds er's packet (csv_cache); returns the first column still to
 * write. */
static size_t csv_head(struct buf *b, const struct emit_csv *c, size_t li,
                       const struct emit_reading *er, size_t ns)
{
	const struct tp_packet *pk = er->packet;
	struct emit_pcache *pc = c->pc;
	size_t start = b->len, n, hb_len;
	const char *s, *hb;

	if (pc != NULL && pc->layout == pk->layout) {
		s = emit_pcache_piece(pc, 0, &n);
		buf_add(b, s, n);
		hb = emit_pcache_piece(pc, 1, &hb_len);
		emit_head_record(b, er, hb, hb_len, &pc->day, pc->date);
		s = emit_pcache_piece(pc, 2, &n);
		buf_add(b, s, n);
		return pc->run;
	}
	emit_reading_id(b, er);
	csv_quote_from(b, start);
	buf_addc(b, ',');
	emit_csv_cell(b, er->station, strlen(er->station));
	buf_addc(b, ',');
	emit_time(b, er->reading->time_s);
	buf_addc(b, ',');
	if (pk->has_seq)
		buf_printf(b, "%" PRIu64, pk->seq);
	return 0;
}

/* Which of sc's derived values fills each derived column (-1: none),
 * worked out when sc's list changes; NULL when it cannot be kept (no
 * cache, or more names than it holds): then the caller looks them up. */
static const int *csv_dmap(const struct emit_csv *c, const struct emit_sci *sc)
{
	struct emit_pcache *pc = c->pc;
	size_t i, j;

	if (pc == NULL || c->n_dnames > TP_DV_N || sc->n_derived > TP_DV_N)
		return NULL;
	if (pc->dmap_of == sc->derived && pc->dmap_n == sc->n_derived) {
		for (j = 0; j < sc->n_derived; j++)
			if (pc->dmap_names[j] != sc->derived[j].name)
				break;
		if (j == sc->n_derived)
			return pc->dmap;
	}
	for (i = 0; i < c->n_dnames; i++) {
		pc->dmap[i] = -1;
		for (j = 0; j < sc->n_derived; j++)
			if (strcmp(sc->derived[j].name, c->dnames[i]) == 0) {
				pc->dmap[i] = (int)j;
				break;
			}
	}
	for (j = 0; j < sc->n_derived; j++)
		pc->dmap_names[j] = sc->derived[j].name;
	pc->dmap_of = sc->derived;
	pc->dmap_n = sc->n_derived;
	return pc->dmap;
}

/* The derived and per-test cells of a row: by name from er. */
static void csv_science_row(struct buf *b, const struct emit_csv *c,
                            const struct emit_reading *er,
                            const struct emit_sci *sc)
{
	static const struct emit_sci none;
	const struct tp_derived_info *d;
	size_t i, j;
	int t;

	const int *map;

	if (sc == NULL)
		sc = &none;
	map = csv_dmap(c, sc);
	for (i = 0; i < c->n_dnames; i++) {
		if (map != NULL) {
			j = map[i] >= 0 ? (size_t)map[i] : sc->n_derived;
		} else {
			for (j = 0; j < sc->n_derived; j++)
				if (strcmp(sc->derived[j].name, c->dnames[i]) ==
				    0)
					break;
		}
		d = j < sc->n_derived ? &sc->derived[j] : NULL;
		csv_value(b, er, er->reading->n_values,
		          d != NULL ? (int)d->slot : -1,
		          d != NULL ? d->decimals : 0);
	}
	for (i = 0; i < c->n_qnames; i++) {
		for (j = 0; sc->tests != NULL && j < sc->n_tests; j++)
			if (strcmp(sc->tests[j].name, c->qnames[i]) == 0)
				break;
		for (t = 0; t < TP_QC_N_TESTS; t++)
			if (sc->tests != NULL && j < sc->n_tests)
				buf_printf(b, ",%u",
				           (unsigned)sc->tests[j].test[t]);
			else
				buf_addc(b, ',');
	}
}

void emit_csv_row(struct buf *b, const struct emit_csv *c,
                  const struct emit_reading *er)
{
	emit_csv_row_sci(b, c, er, NULL);
}

/* The row of a reading whose packet is in the cache, without derived or
 * test columns, under one buf_room: true, or false (nothing written)
 * when it does not fit or a number needs the slow form. */
static bool csv_in_place(struct buf *b, const struct emit_csv *c, size_t li,
                         const struct emit_reading *er, size_t ns)
{
	struct emit_pcache *pc = c->pc;
	const int *slot = c->slot + li * c->n_names;
	const int *form = c->form + li * c->n_names;
	size_t i;
	char *p;

	if (pc == NULL || pc->layout != er->packet->layout ||
	    c->n_dnames + c->n_qnames > 0)
		return false;
	p = buf_room(b, pc->text.len + 3 * 16 + 10 + EMIT_TIME_LEN +
	                    (c->n_names - pc->run) * (EMIT_FIXED_MAX + 24) + 2);
	if (p == NULL)
		return false;
	p = emit_put_head(p, pc, er);
	for (i = pc->run; p != NULL && i < c->n_names; i++)
		p = csv_value_at(p, er, ns, slot[i], form[i]);
	if (p == NULL)
		return false;
	buf_commit(b, put_mem(p, LIT("\r\n")));
	return true;
}

void emit_csv_row_sci(struct buf *b, const struct emit_csv *c,
                      const struct emit_reading *er, const struct emit_sci *sc)
{
	size_t li, i, ns;

	li = csv_layout_index(c, er->packet->layout);
	if (li == c->n_layouts) {
		b->err = true;
		return;
	}
	ns = emit_n_slots(er);
	csv_cache(c, li, er, ns);
	if (csv_in_place(b, c, li, er, ns))
		return;
	for (i = csv_head(b, c, li, er, ns); i < c->n_names; i++)
		csv_value(b, er, ns, c->slot[li * c->n_names + i],
		          c->form[li * c->n_names + i]);
	if (c->n_dnames + c->n_qnames > 0)
		csv_science_row(b, c, er, sc);
	buf_add(b, LIT("\r\n"));
}
