/*
 * emit.c - readings to JSON lines and CSV rows; see emit.h for the
 * choices.  Nothing here allocates except emit_csv_init.
 */
#include <errno.h>
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "emit.h"

#define EMIT_MAX_DECIMALS 40

bool emit_is_value(const struct tp_field *f)
{
	return f != NULL && f->name != NULL && f->type != TP_T_SKIP &&
	       f->role == TP_ROLE_VALUE;
}

/* "-0.000" (a small negative rounded to zero) -> "0.000". */
static void drop_negative_zero(struct buf *b, size_t start)
{
	size_t i;

	if (buf_failed(b) || b->len <= start || b->data[start] != '-')
		return;
	for (i = start + 1; i < b->len; i++) {
		if (b->data[i] != '0' && b->data[i] != '.')
			return;
	}
	memmove(b->data + start, b->data + start + 1, b->len - start);
	b->len--;
}

void emit_fixed(struct buf *b, double v, int decimals)
{
	size_t start = b->len;

	if (!isfinite(v)) {
		buf_adds(b, "null");
		return;
	}
	if (decimals < 0) {
		emit_shortest(b, v);
		return;
	}
	if (decimals > EMIT_MAX_DECIMALS)
		decimals = EMIT_MAX_DECIMALS;
	buf_printf(b, "%.*f", decimals, v);
	drop_negative_zero(b, start);
}

void emit_float32(struct buf *b, double v)
{
	size_t start = b->len;

	if (!isfinite(v)) {
		buf_adds(b, "null");
		return;
	}
	buf_printf(b, "%.9g", v);
	drop_negative_zero(b, start);
}

void emit_shortest(struct buf *b, double v)
{
	char tmp[40];
	int prec;

	if (!isfinite(v)) {
		buf_adds(b, "null");
		return;
	}
	if (v == 0) {
		buf_addc(b, '0');
		return;
	}
	for (prec = 15; prec < 17; prec++) {
		snprintf(tmp, sizeof(tmp), "%.*g", prec, v);
		if (strtod(tmp, NULL) == v)
			break;
	}
	snprintf(tmp, sizeof(tmp), "%.*g", prec, v);
	buf_adds(b, tmp);
}

void emit_number(struct buf *b, const struct tp_field *f, double v)
{
	if (f->type == TP_T_F32)
		emit_float32(b, v);
	else if (f->type == TP_T_F64)
		emit_shortest(b, v);
	else
		emit_fixed(b, v, tp_field_decimals(f));
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

/* The characters of s, escaped for a JSON string, without quotes. */
static void json_chars(struct buf *b, const char *s)
{
	const unsigned char *p = (const unsigned char *)s;
	size_t n;

	while (*p != '\0') {
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
	json_chars(b, s);
	buf_addc(b, '"');
}

void emit_time(struct buf *b, int64_t t)
{
	struct tm tm;
	time_t tt;

	if (t < EMIT_TIME_MIN)
		t = EMIT_TIME_MIN;
	if (t > EMIT_TIME_MAX)
		t = EMIT_TIME_MAX;
	tt = (time_t)t;
	if (gmtime_r(&tt, &tm) == NULL) {
		b->err = true;
		return;
	}
	buf_printf(b, "%04d-%02d-%02dT%02d:%02d:%02dZ", tm.tm_year + 1900,
	           tm.tm_mon + 1, tm.tm_mday, tm.tm_hour, tm.tm_min,
	           tm.tm_sec);
}

/*
 * Days since 1970-01-01 of a proleptic Gregorian date; the algorithm of
 * H. Hinnant, "chrono-Compatible Low-Level Date Algorithms" (2013),
 * days_from_civil, valid for any year that fits.
 */
static int64_t days_from_civil(int64_t y, int m, int d)
{
	int64_t era, yoe, doy, doe;

	y -= m <= 2;
	era = (y >= 0 ? y : y - 399) / 400;
	yoe = y - era * 400;
	doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
	doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
	return era * 146097 + doe - 719468;
}

/* n decimal digits at s into *out; -1 if any is not a digit. */
static int digits(const char *s, int n, int *out)
{
	int i, v = 0;

	for (i = 0; i < n; i++) {
		if (s[i] < '0' || s[i] > '9')
			return -1;
		v = v * 10 + (s[i] - '0');
	}
	*out = v;
	return 0;
}

static int days_in_month(int y, int m)
{
	static const int dm[12] = { 31, 28, 31, 30, 31, 30,
		                    31, 31, 30, 31, 30, 31 };
	bool leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;

	return m == 2 && leap ? 29 : dm[m - 1];
}

/* "Z", "z", "+hh:mm" or "-hh:mm" and nothing after: offset in seconds. */
static int parse_offset(const char *s, int64_t *off)
{
	int hh, mm;

	if ((s[0] == 'Z' || s[0] == 'z') && s[1] == '\0') {
		*off = 0;
		return 0;
	}
	if (s[0] != '+' && s[0] != '-')
		return -1;
	if (digits(s + 1, 2, &hh) < 0 || s[3] != ':' ||
	    digits(s + 4, 2, &mm) < 0 || s[6] != '\0' || hh > 23 || mm > 59)
		return -1;
	*off = (int64_t)(hh * 3600 + mm * 60) * (s[0] == '-' ? -1 : 1);
	return 0;
}

int emit_parse_time(const char *s, int64_t *out)
{
	int y, mo, d, h, mi, se;
	int64_t off;
	size_t i;

	if (strlen(s) < 20 || digits(s, 4, &y) < 0 || s[4] != '-' ||
	    digits(s + 5, 2, &mo) < 0 || s[7] != '-' ||
	    digits(s + 8, 2, &d) < 0 ||
	    (s[10] != 'T' && s[10] != 't' && s[10] != ' ') ||
	    digits(s + 11, 2, &h) < 0 || s[13] != ':' ||
	    digits(s + 14, 2, &mi) < 0 || s[16] != ':' ||
	    digits(s + 17, 2, &se) < 0)
		return -1;
	if (mo < 1 || mo > 12 || d < 1 || d > days_in_month(y, mo) ||
	    h > 23 || mi > 59 || se > 60)
		return -1;
	i = 19;
	if (s[i] == '.') {
		i++;
		if (s[i] < '0' || s[i] > '9')
			return -1;
		while (s[i] >= '0' && s[i] <= '9')
			i++;
	}
	if (parse_offset(s + i, &off) < 0)
		return -1;
	*out = days_from_civil(y, mo, d) * 86400 + h * 3600 + mi * 60 + se -
	       off;
	return 0;
}

void emit_id(struct buf *b, const char *station, int64_t packet_time_s,
             uint64_t seq, uint32_t record)
{
	buf_adds(b, station);
	buf_printf(b, "-%" PRId64 "-%" PRIu64 "-%" PRIu32, packet_time_s, seq,
	           record);
}

void emit_reading_id(struct buf *b, const struct emit_reading *er)
{
	const struct tp_packet *pk = er->packet;

	emit_id(b, er->station, pk->time_s, pk->has_seq ? pk->seq : 0,
	        er->reading->record);
}

/* Is value slot v null?  (flag 9, or no finite number) */
static bool is_null(const struct tp_value *v)
{
	return v->flag == TP_FLAG_MISSING || !isfinite(v->v);
}

/* Value slots the layout describes that this reading holds. */
static size_t n_slots(const struct emit_reading *er)
{
	size_t n = tp_layout_n_values(er->packet->layout);

	return er->reading->n_values < n ? er->reading->n_values : n;
}

/* "name":value,... or "name":flag,... over the value slots. */
static void json_members(struct buf *b, const struct emit_reading *er,
                         bool flags)
{
	const struct tp_layout *l = er->packet->layout;
	const struct tp_value *v;
	const struct tp_field *f;
	size_t i, n = n_slots(er);
	bool first = true;

	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (!emit_is_value(f))
			continue;
		v = &er->reading->values[i];
		if (!first)
			buf_addc(b, ',');
		first = false;
		emit_json_string(b, f->name);
		buf_addc(b, ':');
		if (flags)
			buf_printf(b, "%u", is_null(v) ? TP_FLAG_MISSING
			                               : (unsigned)v->flag);
		else if (is_null(v))
			buf_adds(b, "null");
		else
			emit_number(b, f, v->v);
	}
}

void emit_json(struct buf *b, const struct emit_reading *er)
{
	const struct tp_packet *pk = er->packet;

	buf_adds(b, "{\"id\":\"");
	json_chars(b, er->station);
	buf_printf(b, "-%" PRId64 "-%" PRIu64 "-%" PRIu32 "\",\"station\":",
	           pk->time_s, pk->has_seq ? pk->seq : 0, er->reading->record);
	emit_json_string(b, er->station);
	if (pk->has_seq)
		buf_printf(b, ",\"seq\":%" PRIu64 ",\"layout\":", pk->seq);
	else
		buf_adds(b, ",\"seq\":null,\"layout\":");
	emit_json_string(b, pk->layout->name);
	buf_adds(b, ",\"time\":\"");
	emit_time(b, er->reading->time_s);
	buf_adds(b, "\",\"received\":\"");
	emit_time(b, er->received_s);
	buf_adds(b, "\",\"values\":{");
	json_members(b, er, false);
	buf_adds(b, "},\"flags\":{");
	json_members(b, er, true);
	buf_adds(b, "}}\n");
}

/* Quote the cell written since `start` if it needs it (RFC 4180). */
static void csv_quote_from(struct buf *b, size_t start)
{
	size_t i, j, n, q = 0;
	bool need = false;

	if (buf_failed(b))
		return;
	for (i = start; i < b->len; i++) {
		q += b->data[i] == '"';
		need |= b->data[i] != '\0' &&
		        strchr("\",\r\n", b->data[i]) != NULL;
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
	size_t i, n = tp_layout_n_values(l);
	int col;

	for (i = 0; i < c->n_names; i++)
		row[i] = -1;
	for (i = 0; i < n; i++) {
		f = tp_layout_field(l, i);
		if (!emit_is_value(f))
			continue;
		col = csv_find(c, f->name);
		if (col >= 0 && row[col] < 0)
			row[col] = (int)i;
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
	if (c->slot == NULL) {
		free(c->names);
		c->names = NULL;
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
	c->names = NULL;
	c->slot = NULL;
	c->n_names = 0;
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
	buf_adds(b, "\r\n");
}

/* ",value,flag" for one column (empty cells when absent or null). */
static void csv_value(struct buf *b, const struct emit_reading *er, int slot)
{
	const struct tp_value *v;

	buf_addc(b, ',');
	if (slot < 0 || (size_t)slot >= n_slots(er)) {
		buf_addc(b, ',');
		return;
	}
	v = &er->reading->values[slot];
	if (is_null(v)) {
		buf_printf(b, ",%u", TP_FLAG_MISSING);
		return;
	}
	emit_number(b, tp_layout_field(er->packet->layout, (size_t)slot),
	            v->v);
	buf_printf(b, ",%u", (unsigned)v->flag);
}

void emit_csv_row(struct buf *b, const struct emit_csv *c,
                  const struct emit_reading *er)
{
	const struct tp_packet *pk = er->packet;
	size_t li, i, start = b->len;

	for (li = 0; li < c->n_layouts; li++) {
		if (c->layouts[li] == pk->layout)
			break;
	}
	if (li == c->n_layouts) {
		b->err = true;
		return;
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
	for (i = 0; i < c->n_names; i++)
		csv_value(b, er, c->slot[li * c->n_names + i]);
	buf_adds(b, "\r\n");
}
