/*
 * emit.c - readings as JSON lines: strings, ids, the plain writer, and
 * the per-layout plans with the packet cache that make it fast; see
 * emit.h for the choices.  Numbers and times are in emitnum.c, CSV in
 * emitcsv.c.  Nothing here allocates except the plans and the cache.
 */
#include <errno.h>
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "emitint.h"

bool emit_is_value(const struct tp_field *f)
{
	return f != NULL && f->name != NULL && f->type != TP_T_SKIP &&
	       f->role == TP_ROLE_VALUE;
}

/*
 * Length of the valid UTF-8 sequence at s (1..4), or 0 if the bytes are
 * not one (RFC 3629 section 4: no overlongs, no surrogates, <= U+10FFFF).
 */
static size_t utf8_len(const unsigned char *s)
{
	unsigned char c = s[0], lo = 0x80, hi = 0xbf;
	size_t n, i;

	if (c < 0x80)
		return 1;
	if (c >= 0xc2 && c <= 0xdf)
		n = 2;
	else if (c >= 0xe0 && c <= 0xef)
		n = 3;
	else if (c >= 0xf0 && c <= 0xf4)
		n = 4;
	else
		return 0;
	if (c == 0xe0)
		lo = 0xa0;
	else if (c == 0xed)
		hi = 0x9f;
	else if (c == 0xf0)
		lo = 0x90;
	else if (c == 0xf4)
		hi = 0x8f;
	if (s[1] < lo || s[1] > hi)
		return 0;
	for (i = 2; i < n; i++) {
		if (s[i] < 0x80 || s[i] > 0xbf)
			return 0;
	}
	return n;
}

/* Bytes of s up to the first that needs escaping or UTF-8 checking
 * ('"', '\\', controls, DEL, non-ASCII) or the NUL. */
static size_t plain_prefix(const char *s)
{
	const unsigned char *p = (const unsigned char *)s;

	while (*p >= 0x20 && *p < 0x7f && *p != '"' && *p != '\\')
		p++;
	return (size_t)(p - (const unsigned char *)s);
}

/* The characters of s, escaped for a JSON string, without quotes. */
void emit_json_chars(struct buf *b, const char *s)
{
	const unsigned char *p = (const unsigned char *)s;
	size_t n;

	while (*p != '\0') {
		n = plain_prefix((const char *)p);
		if (n > 0) {
			buf_add(b, p, n);
			p += n;
			continue;
		}
		n = utf8_len(p);
		if (*p == '"' || *p == '\\') {
			buf_addc(b, '\\');
			buf_addc(b, (char)*p++);
		} else if (*p < 0x20 || *p == 0x7f) {
			buf_printf(b, "\\u%04x", (unsigned)*p++);
		} else if (n == 0) {
			buf_adds(b, "\\ufffd");
			p++;
		} else {
			buf_add(b, p, n);
			p += n;
		}
	}
}

void emit_json_string(struct buf *b, const char *s)
{
	buf_addc(b, '"');
	emit_json_chars(b, s);
	buf_addc(b, '"');
}

/* "-<packet time>-<seq>-" at p; returns the end. */
char *emit_put_id_prefix(char *p, int64_t packet_time_s, uint64_t seq)
{
	*p++ = '-';
	p = emit_put_i64(p, packet_time_s);
	*p++ = '-';
	p = put_u64(p, seq);
	*p++ = '-';
	return p;
}

/* "-<packet time>-<seq>-<record>" at p; returns the end. */
static char *put_id_numbers(char *p, int64_t packet_time_s, uint64_t seq,
                            uint32_t record)
{
	return put_u64(emit_put_id_prefix(p, packet_time_s, seq), record);
}

/* The seq of a packet in its id (0 without a seq field). */
uint64_t emit_id_seq(const struct tp_packet *pk)
{
	return pk->has_seq ? pk->seq : 0;
}

void emit_id(struct buf *b, const char *station, int64_t packet_time_s,
             uint64_t seq, uint32_t record)
{
	char tmp[ID_NUMS_MAX];
	char *end = put_id_numbers(tmp, packet_time_s, seq, record);

	buf_adds(b, station);
	buf_add(b, tmp, (size_t)(end - tmp));
}

void emit_reading_id(struct buf *b, const struct emit_reading *er)
{
	const struct tp_packet *pk = er->packet;

	emit_id(b, er->station, pk->time_s, emit_id_seq(pk),
	        er->reading->record);
}

/* The JSON member value of slot v in a form of struct emit_col: the
 * number, null, or (flag) its flag. */
void emit_member_value(struct buf *b, int form, const struct tp_value *v,
                       bool flag)
{
	char tmp[20];

	if (flag)
		buf_add(b, tmp, (size_t)(put_u64(tmp, flag_of(v)) - tmp));
	else if (is_null(v))
		buf_add(b, LIT("null"));
	else
		emit_form(b, form, v->v);
}

/* "name":value,... or "name":flag,... over the value slots. */
static void json_members(struct buf *b, const struct emit_reading *er,
                         bool flags)
{
	const struct tp_layout *l = er->packet->layout;
	const struct tp_field *f;
	size_t i, n = emit_n_slots(er);
	bool first = true;

	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (!emit_is_value(f))
			continue;
		if (!first)
			buf_addc(b, ',');
		first = false;
		emit_json_string(b, f->name);
		buf_addc(b, ':');
		emit_member_value(b, flags ? 0 : emit_field_form(f),
		                  &er->reading->values[i], flags);
	}
}

/* Does json_members write any member for er? */
static bool any_member(const struct emit_reading *er)
{
	size_t i, n = emit_n_slots(er);

	for (i = 0; i < n; i++)
		if (emit_is_value(tp_layout_field(er->packet->layout, i)))
			return true;
	return false;
}

/* The derived members after the layout's (values or flags); the first
 * written loses its comma when *first, which is cleared if any is. */
static void science_members(struct buf *b, const struct emit_reading *er,
                            const struct emit_sci *sc, bool flags, bool *first)
{
	const struct tp_derived_info *d;
	size_t j;

	for (j = 0; sc != NULL && j < sc->n_derived; j++) {
		d = &sc->derived[j];
		if (d->slot >= er->reading->n_values)
			continue;
		if (!*first)
			buf_addc(b, ',');
		*first = false;
		emit_json_string(b, d->name);
		buf_addc(b, ':');
		emit_member_value(b, d->decimals, &er->reading->values[d->slot],
		                  flags);
	}
}

/* ,"tests":{"ph":{"gross_range":1,...},...} when sc has tests. */
static void tests_member(struct buf *b, const struct emit_sci *sc)
{
	size_t i;
	int t;

	if (sc == NULL || sc->tests == NULL)
		return;
	buf_add(b, LIT(",\"tests\":{"));
	for (i = 0; i < sc->n_tests; i++) {
		if (i > 0)
			buf_addc(b, ',');
		emit_json_string(b, sc->tests[i].name);
		buf_addc(b, ':');
		for (t = 0; t < TP_QC_N_TESTS; t++)
			buf_printf(b, "%c\"%s\":%u", t ? ',' : '{',
			           tp_qc_test_name((enum tp_qc_test)t),
			           (unsigned)sc->tests[i].test[t]);
		buf_addc(b, '}');
	}
	buf_addc(b, '}');
}

/* The end of a line: derived flags, "}", the tests, "}\n".  first: no
 * flag member was written yet. */
static void json_tail(struct buf *b, const struct emit_reading *er,
                      const struct emit_sci *sc, bool first)
{
	science_members(b, er, sc, true, &first);
	buf_addc(b, '}');
	tests_member(b, sc);
	buf_add(b, LIT("}\n"));
}

/*
 * A JSON line is head_a, the record number, head_b, the reading time,
 * head_c, the value members, "},\"flags\":{", the flag members, "}}\n".
 * Only the record number, the reading time and the record fields' members
 * change between the records of one packet (the packet cache below).
 */

/* The station's characters as emit_json_chars writes them: st (st_len bytes)
 * when given, else escaped now. */
static void station_chars(struct buf *b, const struct emit_reading *er,
                          const char *st, size_t st_len)
{
	if (st != NULL)
		buf_add(b, st, st_len);
	else
		emit_json_chars(b, er->station);
}

/* {"id":"<station>-<packet time>-<seq>- (st: see station_chars) */
static void head_a(struct buf *b, const struct emit_reading *er, const char *st,
                   size_t st_len)
{
	const struct tp_packet *pk = er->packet;
	char tmp[ID_NUMS_MAX];

	buf_add(b, LIT("{\"id\":\""));
	station_chars(b, er, st, st_len);
	buf_add(b, tmp,
	        (size_t)(emit_put_id_prefix(tmp, pk->time_s, emit_id_seq(pk)) -
	                 tmp));
}

/* ","station":"..","seq":..,"layout":"..","time":" -- lname is the layout
 * name as a JSON string (lname_len bytes), or NULL to write it here;
 * st: see station_chars. */
static void head_b(struct buf *b, const struct emit_reading *er,
                   const char *lname, size_t lname_len, const char *st,
                   size_t st_len)
{
	const struct tp_packet *pk = er->packet;
	char tmp[64], *p;

	buf_add(b, LIT("\",\"station\":\""));
	station_chars(b, er, st, st_len);
	buf_addc(b, '"');
	p = put_mem(tmp, LIT(",\"seq\":"));
	if (pk->has_seq)
		p = put_u64(p, pk->seq);
	else
		p = put_mem(p, LIT("null"));
	p = put_mem(p, LIT(",\"layout\":"));
	buf_add(b, tmp, (size_t)(p - tmp));
	if (lname != NULL)
		buf_add(b, lname, lname_len);
	else
		emit_json_string(b, pk->layout->name);
	buf_add(b, LIT(",\"time\":\""));
}

/* ","received":"..","values":{ -- recv: the received time's text when
 * given (EMIT_TIME_LEN bytes), else written here. */
static void head_c(struct buf *b, const struct emit_reading *er,
                   const char *recv)
{
	char tmp[EMIT_TIME_LEN + 32], *p;

	p = put_mem(tmp, LIT("\",\"received\":\""));
	if (recv != NULL)
		p = put_mem(p, recv, EMIT_TIME_LEN);
	else
		p = emit_put_time(p, er->received_s);
	p = put_mem(p, LIT("\",\"values\":{"));
	buf_add(b, tmp, (size_t)(p - tmp));
}

/* The record number and the reading time, with hb (head_b) between
 * them; day / date as for emit_put_time_cached. */
void emit_head_record(struct buf *b, const struct emit_reading *er,
                      const char *hb, size_t hb_len, int64_t *day, char *date)
{
	char *p = buf_room(b, 10 + hb_len + EMIT_TIME_LEN), tmp[20];

	if (p == NULL) {
		buf_add(b, tmp,
		        (size_t)(put_u64(tmp, er->reading->record) - tmp));
		buf_add(b, hb, hb_len);
		emit_time(b, er->reading->time_s);
		return;
	}
	p = put_u64(p, er->reading->record);
	p = put_mem(p, hb, hb_len);
	buf_commit(b, emit_put_time_cached(p, er->reading->time_s, day, date));
}

void emit_json(struct buf *b, const struct emit_reading *er)
{
	emit_json_sci(b, er, NULL);
}

void emit_json_sci(struct buf *b, const struct emit_reading *er,
                   const struct emit_sci *sc)
{
	char tmp[20];
	bool first;

	head_a(b, er, NULL, 0);
	buf_add(b, tmp, (size_t)(put_u64(tmp, er->reading->record) - tmp));
	head_b(b, er, NULL, 0, NULL, 0);
	emit_time(b, er->reading->time_s);
	head_c(b, er, NULL);
	json_members(b, er, false);
	first = !any_member(er);
	science_members(b, er, sc, false, &first);
	buf_add(b, LIT("},\"flags\":{"));
	json_members(b, er, true);
	json_tail(b, er, sc, !any_member(er));
}

/* ---- per-layout plans ------------------------------------------------- */

/* Build the plan of layout l.  0, or -1 when out of memory. */
static int plan_build(struct emit_plan *pl, const struct tp_layout *l)
{
	size_t i, n = tp_layout_n_values(l);
	const struct tp_field *f;
	struct emit_col *c;
	struct buf t;

	memset(pl, 0, sizeof(*pl));
	pl->layout = l;
	pl->cols = calloc(n ? n : 1, sizeof(*pl->cols));
	if (pl->cols == NULL)
		return -1;
	buf_init(&t, SIZE_MAX / 4);
	emit_json_string(&t, l->name != NULL ? l->name : "");
	pl->name_len = t.len;
	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (!emit_is_value(f))
			continue;
		c = &pl->cols[pl->n_cols++];
		c->slot = i;
		c->form = emit_field_form(f);
		c->key = t.len;
		buf_addc(&t, ',');
		emit_json_string(&t, f->name);
		buf_addc(&t, ':');
		c->key_len = t.len - c->key;
		pl->n_head_cols += i < l->n_fields;
		pl->room += c->key_len + 16 + EMIT_FIXED_MAX;
	}
	pl->flags = t.len;
	for (i = pl->n_head_cols; i < pl->n_cols; i++) {
		buf_add(&t, t.data + pl->cols[i].key, pl->cols[i].key_len);
		buf_addc(&t, '0');
	}
	pl->flags_len = t.len - pl->flags;
	for (i = 0; i < PLAN_SLACK; i++)
		buf_addc(&t, '\0');
	pl->text = t.data;
	if (!buf_failed(&t))
		return 0;
	buf_free(&t);
	pl->text = NULL;
	return -1;
}

/*
 * The packet cache: the pieces of text that every record of one packet
 * shares (emit_json_planned: head_a, head_b, head_c with the header
 * members, the flags opening with the header flags; emit_csv_row: the id
 * prefix, the station cell, the seq cell and the leading columns that do
 * not change within the packet).  It is keyed by everything those pieces
 * are made from -- layout, station text, packet time, seq, received time,
 * the number of slots, and the header values bit for bit -- so a hit
 * writes exactly what building the pieces again would write.
 */

struct emit_pcache *emit_pcache_new(void)
{
	struct emit_pcache *pc = calloc(1, sizeof(*pc));

	if (pc != NULL) {
		buf_init(&pc->text, PCACHE_TEXT);
		buf_init(&pc->st_json, PCACHE_STATION * 6);
		pc->day = INT64_MIN;
	}
	return pc;
}

void emit_pcache_free(struct emit_pcache *pc)
{
	if (pc == NULL)
		return;
	buf_free(&pc->text);
	buf_free(&pc->st_json);
	free(pc);
}

/* The station of er escaped for JSON (from the cache, made when the
 * station changed), or NULL: then head_a/head_b escape it themselves.
 * emit_pcache_start has checked that the name fits pc->station. */
static const char *pcache_station(struct emit_pcache *pc,
                                  const struct emit_reading *er, size_t *len)
{
	if (strcmp(pc->st_for, er->station) != 0 || buf_failed(&pc->st_json)) {
		pc->st_for[0] = '\0';
		buf_reset(&pc->st_json);
		emit_json_chars(&pc->st_json, er->station);
		if (buf_failed(&pc->st_json))
			return NULL;
		memcpy(pc->st_for, pc->station, sizeof(pc->st_for));
	}
	*len = pc->st_json.len;
	return pc->st_json.data != NULL ? pc->st_json.data : "";
}

/* The received time's text, from the cache when it has not changed. */
static const char *pcache_received(struct emit_pcache *pc,
                                   const struct emit_reading *er)
{
	if (!pc->recv_ok || pc->recv_for != er->received_s) {
		emit_put_time(pc->recv, er->received_s);
		pc->recv_for = er->received_s;
		pc->recv_ok = true;
	}
	return pc->recv;
}

/* Start new pieces for this reading's packet; false if it cannot be
 * cached (no cache, or a station name too long). */
bool emit_pcache_start(struct emit_pcache *pc, const struct emit_reading *er,
                       size_t ns)
{
	const struct tp_packet *pk = er->packet;
	size_t n = strlen(er->station);

	if (pc == NULL)
		return false;
	pc->layout = NULL;
	if (n >= sizeof(pc->station))
		return false;
	memcpy(pc->station, er->station, n + 1);
	memcpy(pc->head, er->reading->values,
	       head_slots(er, ns) * sizeof(pc->head[0]));
	pc->time_s = pk->time_s;
	pc->received_s = er->received_s;
	pc->has_seq = pk->has_seq;
	pc->seq = pk->seq;
	pc->ns = ns;
	buf_reset(&pc->text);
	pc->cut[0] = 0;
	return true;
}

/* End piece i (1..4); on the last, the pieces become valid if they all
 * fit. */
void emit_pcache_cut(struct emit_pcache *pc, int i, bool last,
                     const struct tp_layout *l)
{
	static const char zeros[PLAN_SLACK];

	pc->cut[i] = pc->text.len;
	if (!last)
		return;
	buf_add(&pc->text, zeros, PLAN_SLACK); /* so pieces copy in blocks */
	buf_trim(&pc->text, PLAN_SLACK);
	if (!buf_failed(&pc->text))
		pc->layout = l;
}

static struct emit_sk *sk_new(void);
static void sk_free(struct emit_sk *sk);

int emit_plans_init(struct emit_plans *ps, const struct tp_layout *const *ls,
                    size_t n)
{
	size_t i;

	memset(ps, 0, sizeof(*ps));
	ps->plan = calloc(n ? n : 1, sizeof(*ps->plan));
	ps->pc = emit_pcache_new();
	ps->sk = sk_new();
	if (ps->plan == NULL || ps->pc == NULL || ps->sk == NULL)
		goto out_free;
	for (i = 0; i < n; i++) {
		ps->n = i + 1;
		if (plan_build(&ps->plan[i], ls[i]) < 0)
			goto out_free;
	}
	return 0;
out_free:
	emit_plans_free(ps);
	errno = ENOMEM;
	return -1;
}

void emit_plans_free(struct emit_plans *ps)
{
	size_t i;

	if (ps == NULL)
		return;
	for (i = 0; ps->plan != NULL && i < ps->n; i++) {
		free(ps->plan[i].cols);
		free(ps->plan[i].text);
	}
	free(ps->plan);
	emit_pcache_free(ps->pc);
	sk_free(ps->sk);
	ps->plan = NULL;
	ps->pc = NULL;
	ps->sk = NULL;
	ps->n = 0;
}

/* The plan for layout l, or NULL. */
static const struct emit_plan *plan_for(const struct emit_plans *ps,
                                        const struct tp_layout *l)
{
	size_t i;

	for (i = 0; ps != NULL && i < ps->n; i++) {
		if (ps->plan[i].layout == l)
			return &ps->plan[i];
	}
	return NULL;
}

/* One member: key (with its comma, or without for the first) and the
 * value or flag of slot v, through ordinary appends. */
static void plan_member(struct buf *b, const char *key, size_t key_len,
                        int form, const struct tp_value *v, bool flag)
{
	buf_add(b, key, key_len);
	emit_member_value(b, form, v, flag);
}

/* The same member written at p, which has room for key_len + 16 +
 * EMIT_FIXED_MAX bytes; returns the end, or NULL when the number needs
 * the slow form (then what was written at p is not used). */
static inline char *member_at(char *p, const char *key, size_t key_len,
                              int form, const struct tp_value *v, bool flag)
{
	size_t n;

	p = put_blocks(p, key, key_len);
	if (flag)
		return put_u64(p, flag_of(v));
	if (is_null(v))
		return put_mem(p, LIT("null"));
	n = emit_fixed_chars(p, v->v, form);
	return n > 0 ? p + n : NULL;
}

/* Members of columns [from, to) whose slot is below n; the first one
 * written loses its comma when *first.  Clears *first if any is written.
 * Written in place under one buf_room when there is room (pl->room). */
static void plan_members(struct buf *b, const struct emit_plan *pl,
                         const struct emit_reading *er, size_t from, size_t to,
                         size_t n, bool flags, bool *first)
{
	const struct emit_col *c;
	const struct tp_value *v;
	size_t i, skip = *first ? 1 : 0;
	char *p = buf_room(b, pl->room), *q;

	for (i = from; i < to && pl->cols[i].slot < n; i++) {
		c = &pl->cols[i]; /* columns are in slot order */
		v = &er->reading->values[c->slot];
		q = p == NULL ? NULL
		              : member_at(p, pl->text + c->key + skip,
		                          c->key_len - skip, c->form, v, flags);
		if (q == NULL) {
			if (p != NULL)
				buf_commit(b, p);
			plan_member(b, pl->text + c->key + skip,
			            c->key_len - skip, c->form, v, flags);
			q = buf_room(b, pl->room);
		}
		p = q;
		skip = 0;
		*first = false;
	}
	if (p != NULL)
		buf_commit(b, p);
}

/* The JSON pieces of this reading's packet (see pcache above). */
static void pcache_json(struct emit_pcache *pc, const struct emit_plan *pl,
                        const struct emit_reading *er, size_t ns)
{
	struct buf *t = &pc->text;
	size_t nh = head_slots(er, ns), st_len = 0;
	const char *st = pcache_station(pc, er, &st_len);
	bool first = true;

	head_a(t, er, st, st_len);
	emit_pcache_cut(pc, 1, false, NULL);
	head_b(t, er, pl->text, pl->name_len, st, st_len);
	emit_pcache_cut(pc, 2, false, NULL);
	head_c(t, er, pcache_received(pc, er));
	plan_members(t, pl, er, 0, pl->n_head_cols, nh, false, &first);
	emit_pcache_cut(pc, 3, false, NULL);
	first = true;
	buf_add(t, LIT("},\"flags\":{"));
	plan_members(t, pl, er, 0, pl->n_head_cols, nh, true, &first);
	pc->any_head = !first;
	emit_pcache_cut(pc, 4, true, pl->layout);
}

/* emit_json_planned from the cached pieces. */
static void json_cached(struct buf *b, const struct emit_plan *pl,
                        struct emit_pcache *pc, const struct emit_reading *er,
                        size_t ns, const struct emit_sci *sc)
{
	const char *s;
	size_t n, hb_len;
	const char *hb = emit_pcache_piece(pc, 1, &hb_len);
	bool first = !pc->any_head;

	s = emit_pcache_piece(pc, 0, &n);
	buf_add(b, s, n);
	emit_head_record(b, er, hb, hb_len, &pc->day, pc->date);
	s = emit_pcache_piece(pc, 2, &n);
	buf_add(b, s, n);
	plan_members(b, pl, er, pl->n_head_cols, pl->n_cols, ns, false, &first);
	science_members(b, er, sc, false, &first);
	s = emit_pcache_piece(pc, 3, &n);
	buf_add(b, s, n);
	first = !pc->any_head;
	plan_members(b, pl, er, pl->n_head_cols, pl->n_cols, ns, true, &first);
	json_tail(b, er, sc, first);
}

/* emit_json_planned without the cache. */
static void json_uncached(struct buf *b, const struct emit_plan *pl,
                          const struct emit_reading *er, size_t ns,
                          const struct emit_sci *sc)
{
	bool first = true;
	char tmp[20];

	head_a(b, er, NULL, 0);
	buf_add(b, tmp, (size_t)(put_u64(tmp, er->reading->record) - tmp));
	head_b(b, er, pl->text, pl->name_len, NULL, 0);
	emit_time(b, er->reading->time_s);
	head_c(b, er, NULL);
	plan_members(b, pl, er, 0, pl->n_cols, ns, false, &first);
	science_members(b, er, sc, false, &first);
	buf_add(b, LIT("},\"flags\":{"));
	first = true;
	plan_members(b, pl, er, 0, pl->n_cols, ns, true, &first);
	json_tail(b, er, sc, first);
}

/* plan_members in place at p (room: pl->room): NULL when a number needs
 * the slow form.  *first as for plan_members. */
static char *members_at(char *p, const struct emit_plan *pl,
                        const struct emit_reading *er, size_t from, size_t n,
                        bool flags, bool *first)
{
	const struct emit_col *c;
	size_t i, skip;

	for (i = from; i < pl->n_cols && pl->cols[i].slot < n; i++) {
		c = &pl->cols[i];
		skip = *first ? 1 : 0;
		p = member_at(p, pl->text + c->key + skip, c->key_len - skip,
		              c->form, &er->reading->values[c->slot], flags);
		if (p == NULL)
			return NULL;
		*first = false;
	}
	return p;
}

/*
 * Derived-value keys: the `,"name":` texts of one emit_sci's derived list,
 * escaped once, so its members are written in place like the layout's.
 * A few lists are kept (one per station and layout in use, usually one);
 * an entry is keyed by the list's address and checked against the name
 * pointers (static strings, derive.h), decimals and slots it was made
 * from, so a list rebuilt at the same address cannot use stale keys.
 */
struct sci_was {
	const char *name;
	int decimals;
	size_t slot;
};

struct emit_scikeys {
	const struct tp_derived_info *derived; /* NULL: entry unused */
	size_t n;
	struct sci_was was[TP_DV_N];
	size_t key[TP_DV_N], key_len[TP_DV_N];
	size_t room; /* bytes all members may take in place */
	uint64_t used;
	struct buf text;
};

struct emit_sk {
	struct emit_scikeys e[EMIT_SCI_KEYS];
	uint64_t tick;
};

static struct emit_sk *sk_new(void)
{
	struct emit_sk *sk = calloc(1, sizeof(*sk));
	size_t i;

	for (i = 0; sk != NULL && i < EMIT_SCI_KEYS; i++)
		buf_init(&sk->e[i].text, 64 * 1024);
	return sk;
}

static void sk_free(struct emit_sk *sk)
{
	size_t i;

	for (i = 0; sk != NULL && i < EMIT_SCI_KEYS; i++)
		buf_free(&sk->e[i].text);
	free(sk);
}

/* Was entry e made from sc's list as it is now? */
static bool sk_same(const struct emit_scikeys *e, const struct emit_sci *sc)
{
	const struct tp_derived_info *d = sc->derived;
	size_t j;

	if (e->derived != d || e->n != sc->n_derived)
		return false;
	for (j = 0; j < e->n; j++) {
		if (e->was[j].name != d[j].name ||
		    e->was[j].decimals != d[j].decimals ||
		    e->was[j].slot != d[j].slot)
			return false;
	}
	return true;
}

/* Make e the keys of sc's list; false when out of memory. */
static bool sk_build(struct emit_scikeys *e, const struct emit_sci *sc)
{
	static const char zeros[PLAN_SLACK];
	const struct tp_derived_info *d = sc->derived;
	size_t j;

	e->derived = NULL;
	e->room = 0;
	buf_reset(&e->text);
	for (j = 0; j < sc->n_derived && j < TP_DV_N; j++) {
		e->was[j].name = d[j].name;
		e->was[j].decimals = d[j].decimals;
		e->was[j].slot = d[j].slot;
		e->key[j] = e->text.len;
		buf_addc(&e->text, ',');
		emit_json_string(&e->text, d[j].name);
		buf_addc(&e->text, ':');
		e->key_len[j] = e->text.len - e->key[j];
		e->room += e->key_len[j] + 16 + EMIT_FIXED_MAX;
	}
	buf_add(&e->text, zeros, PLAN_SLACK); /* so keys copy in blocks */
	if (buf_failed(&e->text) || j < sc->n_derived)
		return false;
	e->derived = d;
	e->n = sc->n_derived;
	return true;
}

/* The keys of sc's derived list, or NULL (none, or out of memory). */
static const struct emit_scikeys *sk_for(struct emit_sk *sk,
                                         const struct emit_sci *sc)
{
	struct emit_scikeys *e, *old;
	size_t i;

	if (sk == NULL || sc->derived == NULL || sc->n_derived == 0)
		return NULL;
	old = &sk->e[0];
	for (i = 0; i < EMIT_SCI_KEYS; i++) {
		e = &sk->e[i];
		if (sk_same(e, sc)) {
			e->used = ++sk->tick;
			return e;
		}
		if (e->used < old->used)
			old = e;
	}
	if (!sk_build(old, sc))
		return NULL;
	old->used = ++sk->tick;
	return old;
}

/* science_members in place at p (room: e->room): NULL when a number needs
 * the slow form.  *first as for science_members. */
static char *science_at(char *p, const struct emit_scikeys *e,
                        const struct emit_reading *er, bool flags, bool *first)
{
	const struct tp_value *v;
	size_t j, skip;

	for (j = 0; e != NULL && j < e->n; j++) {
		if (e->was[j].slot >= er->reading->n_values)
			continue;
		v = &er->reading->values[e->was[j].slot];
		skip = *first ? 1 : 0;
		p = member_at(p, e->text.data + e->key[j] + skip,
		              e->key_len[j] - skip, e->was[j].decimals, v,
		              flags);
		if (p == NULL)
			return NULL;
		*first = false;
	}
	return p;
}

/*
 * The record columns' flag members at p, from the plan's template: one
 * copy, then each flag digit put in its place.  Flags are single digits
 * (enum tp_flag); a reading without every record column, or a flag that
 * is not one digit, takes members_at.  *first as for plan_members.
 */
static char *flags_at(char *p, const struct emit_plan *pl,
                      const struct emit_reading *er, size_t ns, bool *first)
{
	const struct emit_col *c;
	size_t i, at = 0, skip = *first ? 1 : 0;
	unsigned f;

	if (pl->n_cols == pl->n_head_cols)
		return p;
	if (pl->cols[pl->n_cols - 1].slot >= ns)
		return members_at(p, pl, er, pl->n_head_cols, ns, true, first);
	memcpy(p, pl->text + pl->flags + skip, pl->flags_len - skip);
	for (i = pl->n_head_cols; i < pl->n_cols; i++) {
		c = &pl->cols[i];
		f = flag_of(&er->reading->values[c->slot]);
		if (f > 9)
			return members_at(p, pl, er, pl->n_head_cols, ns, true,
			                  first);
		at += c->key_len;
		p[at - skip] = (char)('0' + f);
		at++;
	}
	*first = false;
	return p + pl->flags_len - skip;
}

/* json_cached in one buf_room, when it fits and every number takes the
 * fast form; false (nothing written) otherwise.  e: the keys of the
 * derived values (NULL: none). */
static bool json_in_place(struct buf *b, const struct emit_plan *pl,
                          struct emit_pcache *pc, const struct emit_reading *er,
                          size_t ns, const struct emit_scikeys *e)
{
	size_t sroom = e != NULL ? e->room : 0;
	char *p = buf_room(b, pc->text.len + 4 * 16 + 20 + EMIT_TIME_LEN +
	                          2 * (pl->room + sroom) + 3);
	bool first = !pc->any_head;

	if (p == NULL)
		return false;
	p = emit_put_head(p, pc, er);
	p = members_at(p, pl, er, pl->n_head_cols, ns, false, &first);
	if (p != NULL)
		p = science_at(p, e, er, false, &first);
	if (p == NULL)
		return false;
	p = emit_put_piece(p, pc, 3);
	first = !pc->any_head;
	p = flags_at(p, pl, er, ns, &first);
	p = science_at(p, e, er, true, &first); /* flags: always fast */
	buf_commit(b, put_mem(p, LIT("}}\n")));
	return true;
}

void emit_json_planned(struct buf *b, const struct emit_plans *ps,
                       const struct emit_reading *er)
{
	emit_json_planned_sci(b, ps, er, NULL);
}

void emit_json_planned_sci(struct buf *b, const struct emit_plans *ps,
                           const struct emit_reading *er,
                           const struct emit_sci *sc)
{
	const struct emit_plan *pl = plan_for(ps, er->packet->layout);
	const struct emit_scikeys *e;
	size_t ns;

	if (pl == NULL) {
		emit_json_sci(b, er, sc);
		return;
	}
	ns = emit_n_slots(er);
	if (ps->pc != NULL && !emit_pcache_hit(ps->pc, er, ns)) {
		ps->pc->layout = NULL; /* stale, even if no new one is made */
		if (emit_pcache_start(ps->pc, er, ns))
			pcache_json(ps->pc, pl, er, ns);
	}
	if (ps->pc == NULL || ps->pc->layout != pl->layout) {
		json_uncached(b, pl, er, ns, sc);
		return;
	}
	if (sc == NULL || sc->n_derived == 0) {
		if (sc == NULL || sc->tests == NULL) {
			if (json_in_place(b, pl, ps->pc, er, ns, NULL))
				return;
		}
	} else if (sc->tests == NULL) {
		e = sk_for(ps->sk, sc);
		if (e != NULL && json_in_place(b, pl, ps->pc, er, ns, e))
			return;
	}
	json_cached(b, pl, ps->pc, er, ns, sc);
}
