/*
 * emitint.h - what the reading writers share (private to emit.c,
 * emitnum.c and emitcsv.c; not installed): number forms, the digit
 * writers of the hot paths (inline: they run for every number written),
 * and the packet cache that the JSON and CSV writers both keep.
 */
#ifndef TIDEPOST_EMITINT_H
#define TIDEPOST_EMITINT_H

#include <math.h>
#include <stdbool.h>
#include <stdint.h>
#include <string.h>

#include "buf.h"
#include "emit.h"

#define EMIT_MAX_DECIMALS  40
#define EMIT_FAST_DECIMALS 9    /* emit_fixed_chars handles 0..9 */
#define EMIT_FORM_F64      (-1) /* struct emit_col form: shortest */
#define EMIT_FORM_F32      (-2) /* struct emit_col form: %.9g */
#define EMIT_DATE_LEN      10   /* YYYY-MM-DD */
#define LIT(s)             (s), (sizeof(s) - 1)
/* Bytes "-<time>-<seq>-<record>" may take. */
#define ID_NUMS_MAX (3 + 20 + 20 + 10)
/* Slack after the plan's text, so keys may be copied in 16-byte blocks. */
#define PLAN_SLACK     16
#define PCACHE_STATION 128          /* longer station names: no cache */
#define PCACHE_TEXT    (256 * 1024) /* longer pieces: no cache */

/* "00", "01", ..., "99": two digits at a time. */
extern const char emit_pairs[201];

/* The decimal digits of u, at least min of them (zero-padded on the
 * left), written backwards so they end just before `end`; the start. */
static inline char *digits_back(char *end, uint64_t u, int min)
{
	char *p = end;
	unsigned r;

	while (u >= 100) {
		r = (unsigned)(u % 100);
		u /= 100;
		p -= 2;
		memcpy(p, emit_pairs + 2 * r, 2);
	}
	if (u >= 10) {
		p -= 2;
		memcpy(p, emit_pairs + 2 * u, 2);
	} else {
		*--p = (char)('0' + u);
	}
	while (end - p < min)
		*--p = '0';
	return p;
}

/* Decimal digits of u (1..20). */
static inline int n_digits(uint64_t u)
{
	int n = 1;

	while (u >= 10000) {
		u /= 10000;
		n += 4;
	}
	return n + (u >= 10) + (u >= 100) + (u >= 1000);
}

/* u in decimal at p (at most 20 bytes, no NUL); returns the end. */
static inline char *put_u64(char *p, uint64_t u)
{
	int n;

	if (u < 10) {
		*p = (char)('0' + u);
		return p + 1;
	}
	n = n_digits(u);
	digits_back(p + n, u, 1);
	return p + n;
}

/* n bytes of s at p; returns the end. */
static inline char *put_mem(char *p, const char *s, size_t n)
{
	memcpy(p, s, n);
	return p + n;
}

/* n bytes from s to p in 16-byte blocks: reads up to 15 bytes past s + n
 * (PLAN_SLACK) and writes up to 15 past p + n (room the caller has). */
static inline char *put_blocks(char *p, const char *s, size_t n)
{
	size_t i;

	for (i = 0; i < n; i += 16)
		memcpy(p + i, s + i, 16);
	return p + n;
}

/* Is value slot v null?  (flag 9, or no finite number) */
static inline bool is_null(const struct tp_value *v)
{
	return v->flag == TP_FLAG_MISSING || !isfinite(v->v);
}

/* The flag written for v: 9 when null. */
static inline unsigned flag_of(const struct tp_value *v)
{
	return is_null(v) ? TP_FLAG_MISSING : (unsigned)v->flag;
}

/* emitnum.c */
char *emit_put_i64(char *p, int64_t v);
void emit_form(struct buf *b, int form, double v);
int emit_field_form(const struct tp_field *f);
char *emit_put_time(char *p, int64_t t);
char *emit_put_date(char *p, int64_t days);

/* emit.c */
void emit_json_chars(struct buf *b, const char *s);
char *emit_put_id_prefix(char *p, int64_t packet_time_s, uint64_t seq);
uint64_t emit_id_seq(const struct tp_packet *pk);
void emit_member_value(struct buf *b, int form, const struct tp_value *v,
                       bool flag);
void emit_head_record(struct buf *b, const struct emit_reading *er,
                      const char *hb, size_t hb_len, int64_t *day, char *date);

/*
 * The packet cache: the pieces of text that every record of one packet
 * shares (see emit.c).
 */
struct emit_pcache {
	const struct tp_layout *layout; /* NULL: nothing cached */
	int64_t time_s, received_s;
	uint64_t seq;
	bool has_seq;
	bool any_head; /* JSON: a header member was written */
	size_t ns;     /* n_slots of the reading */
	size_t run;    /* CSV: leading columns in the pieces */
	struct tp_value head[TP_MAX_FIELDS];
	char station[PCACHE_STATION];
	struct buf text;
	size_t cut[5]; /* piece i is text[cut[i] .. cut[i + 1]) */
	int64_t day;   /* date[] is this day's (INT64_MIN: none) */
	char date[EMIT_DATE_LEN];
	/* kept across packets: the station escaped for JSON, and the text
	 * of the received time (they seldom change from one to the next) */
	char st_for[PCACHE_STATION]; /* the station st_json is of ("": none) */
	struct buf st_json;
	int64_t recv_for;
	bool recv_ok;
	char recv[EMIT_TIME_LEN];
	/* CSV: which derived value fills each derived column (dmap, -1:
	 * none), for the derived list dmap_of as it was (its name
	 * pointers, static strings: derive.h) */
	const struct tp_derived_info *dmap_of;
	size_t dmap_n;
	const char *dmap_names[TP_DV_N];
	int dmap[TP_DV_N];
};

struct emit_pcache *emit_pcache_new(void);
void emit_pcache_free(struct emit_pcache *pc);
bool emit_pcache_start(struct emit_pcache *pc, const struct emit_reading *er,
                       size_t ns);
void emit_pcache_cut(struct emit_pcache *pc, int i, bool last,
                     const struct tp_layout *l);

/* ---- inline for the per-reading paths ---- */

/* Two digits of n (0..99) at p. */
static inline char *put2(char *p, int n)
{
	memcpy(p, emit_pairs + 2 * n, 2);
	return p + 2;
}

/* t (clamped, see emit.h) as days since 1970-01-01 and the second of
 * that day. */
static inline int64_t split_time(int64_t t, int *sec)
{
	int64_t days;

	if (t < EMIT_TIME_MIN)
		t = EMIT_TIME_MIN;
	if (t > EMIT_TIME_MAX)
		t = EMIT_TIME_MAX;
	days = t / 86400;
	*sec = (int)(t % 86400);
	if (*sec < 0) {
		*sec += 86400;
		days--;
	}
	return days;
}

/* "THH:MM:SSZ" of a second of the day at p; returns the end. */
static inline char *put_clock(char *p, int s)
{
	*p++ = 'T';
	p = put2(p, s / 3600);
	*p++ = ':';
	p = put2(p, s / 60 % 60);
	*p++ = ':';
	p = put2(p, s % 60);
	*p++ = 'Z';
	return p;
}

/* t as emit_put_time writes it, the date taken from *day / date (a cache of
 * the last day written, updated here). */
static inline char *emit_put_time_cached(char *p, int64_t t, int64_t *day,
                                         char *date)
{
	int s;
	int64_t days = split_time(t, &s);

	if (days != *day) {
		emit_put_date(date, days);
		*day = days;
	}
	memcpy(p, date, EMIT_DATE_LEN);
	return put_clock(p + EMIT_DATE_LEN, s);
}

/* Value slots the layout describes that this reading holds. */
static inline size_t emit_n_slots(const struct emit_reading *er)
{
	size_t n = tp_layout_n_values(er->packet->layout);

	return er->reading->n_values < n ? er->reading->n_values : n;
}

/* Header slots of the reading: those before the records that it holds. */
static inline size_t head_slots(const struct emit_reading *er, size_t ns)
{
	size_t nf = er->packet->layout->n_fields;

	return ns < nf ? ns : nf;
}

static inline bool same_value(const struct tp_value *a,
                              const struct tp_value *b)
{
	return memcmp(&a->v, &b->v, sizeof(a->v)) == 0 && a->flag == b->flag;
}

/* Was the cache made from this reading's packet? */
static inline bool emit_pcache_hit(const struct emit_pcache *pc,
                                   const struct emit_reading *er, size_t ns)
{
	const struct tp_packet *pk = er->packet;
	size_t i, nh = head_slots(er, ns);

	if (pc == NULL || pc->layout != pk->layout || pc->ns != ns ||
	    pc->time_s != pk->time_s || pc->received_s != er->received_s ||
	    pc->has_seq != pk->has_seq || pc->seq != pk->seq)
		return false;
	for (i = 0; i < nh; i++) {
		if (!same_value(&pc->head[i], &er->reading->values[i]))
			return false;
	}
	return strcmp(pc->station, er->station) == 0;
}

/* Piece i of the cache. */
static inline const char *emit_pcache_piece(const struct emit_pcache *pc, int i,
                                            size_t *len)
{
	*len = pc->cut[i + 1] - pc->cut[i];
	return pc->text.data + pc->cut[i];
}

/* Piece i of the cache copied to p in blocks (text has PLAN_SLACK). */
static inline char *emit_put_piece(char *p, const struct emit_pcache *pc, int i)
{
	size_t n;
	const char *s = emit_pcache_piece(pc, i, &n);

	return put_blocks(p, s, n);
}

/* The start of a cached record line at p: the packet's first piece, the
 * record number, the second piece, the reading time, the third piece
 * (JSON: up to the record's value members; CSV: up to its columns).
 * p has room for the pieces plus 3 * 16 + 10 + EMIT_TIME_LEN. */
static inline char *emit_put_head(char *p, struct emit_pcache *pc,
                                  const struct emit_reading *er)
{
	p = emit_put_piece(p, pc, 0);
	p = put_u64(p, er->reading->record);
	p = emit_put_piece(p, pc, 1);
	p = emit_put_time_cached(p, er->reading->time_s, &pc->day, pc->date);
	return emit_put_piece(p, pc, 2);
}

#endif
