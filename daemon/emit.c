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

#include "emit.h"

#define EMIT_MAX_DECIMALS  40
#define EMIT_FAST_DECIMALS 9    /* emit_fixed_chars handles 0..9 */
#define EMIT_FORM_F64      (-1) /* struct emit_col form: shortest */
#define EMIT_FORM_F32      (-2) /* struct emit_col form: %.9g */

#if defined(__SIZEOF_INT128__)
__extension__ typedef unsigned __int128 u128;
#define EMIT_HAVE_U128 1
#endif

static const char pairs[] =
    "00010203040506070809101112131415161718192021222324252627282930313233"
    "34353637383940414243444546474849505152535455565758596061626364656667"
    "6869707172737475767778798081828384858687888990919293949596979899";

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
		memcpy(p, pairs + 2 * r, 2);
	}
	if (u >= 10) {
		p -= 2;
		memcpy(p, pairs + 2 * u, 2);
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

/* v in decimal at p (at most 20 bytes, no NUL); returns the end. */
static char *put_i64(char *p, int64_t v)
{
	if (v >= 0)
		return put_u64(p, (uint64_t)v);
	*p++ = '-';
	return put_u64(p, (uint64_t)0 - (uint64_t)v);
}

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

/*
 * |v| * 10^d rounded to an integer the way glibc's printf("%.*f") rounds
 * in the default rounding mode: to nearest, ties to even, on the exact
 * binary value (C11 7.21.6.1p8 leaves the rounding to the library; glibc
 * converts exactly and honours the rounding mode).  v = m * 2^e exactly,
 * m < 2^53, so m * 10^d < 2^83 fits 128 bits and the rounding is an
 * exact comparison of the bits shifted out with one half.  The caller
 * has checked |v| < 10^(18 - d), so the result is at most 10^18.
 * Without 128-bit integers (32-bit targets) it returns false: the caller
 * then leaves the number to snprintf.
 */
static bool exact_round(double v, int d, uint64_t *out)
{
#ifdef EMIT_HAVE_U128
	static const uint32_t p10[] = {1,         10,        100,     1000,
	                               10000,     100000,    1000000, 10000000,
	                               100000000, 1000000000};
	uint64_t bits, m, q;
	u128 x, rest, half;
	int e, k;

	memcpy(&bits, &v, sizeof bits);
	e = (int)((bits >> 52) & 0x7ff);
	m = bits & ((UINT64_C(1) << 52) - 1);
	if (e == 0)
		e = 1; /* subnormal: no implicit bit */
	else
		m |= UINT64_C(1) << 52;
	e -= 1075;
	x = (u128)m * p10[d];
	if (e >= 0) {
		*out = (uint64_t)(x << e);
		return true;
	}
	k = -e;
	if (k > 100) { /* x < 2^83 <= half: rounds to 0 */
		*out = 0;
		return true;
	}
	q = (uint64_t)(x >> k);
	rest = x & (((u128)1 << k) - 1);
	half = (u128)1 << (k - 1);
	if (rest > half || (rest == half && (q & 1)))
		q++;
	*out = q;
	return true;
#else
	(void)v;
	(void)d;
	(void)out;
	return false;
#endif
}

/*
 * exact_round, quicker when it can be: y = |v| * 10^d in double is the
 * exact product rounded once, so for y < 2^32 it is within 2^-22 of it.
 * Unless y lies within 2^-20 of a half-integer, no half-integer lies
 * between y and the exact product, so both round to the same integer and
 * y's fraction (exact: y - floor(y)) decides.  Else the exact path.
 */
static inline bool near_round(double v, int d, uint64_t *q)
{
	static const double p10[] = {1e0, 1e1, 1e2, 1e3, 1e4,
	                             1e5, 1e6, 1e7, 1e8, 1e9};
	double y = fabs(v) * p10[d], fr;

	if (!(y < 4294967296.0))
		return exact_round(v, d, q);
	*q = (uint64_t)y;
	fr = y - (double)*q;
	if (fabs(fr - 0.5) <= 0x1p-20)
		return exact_round(v, d, q);
	*q += fr > 0.5;
	return true;
}

/* emit_fixed_chars (see emit.h).  The digits are stored straight into
 * out, never read back: reading back digits just stored in pieces stalls
 * the CPU (a failed store-to-load forward), which made this the hottest
 * function of decode. */
static inline size_t fixed_chars(char *out, double v, int d)
{
	static const double lim[] = {1e18, 1e17, 1e16, 1e15, 1e14,
	                             1e13, 1e12, 1e11, 1e10, 1e9};
	static const uint32_t p10[] = {1,         10,        100,     1000,
	                               10000,     100000,    1000000, 10000000,
	                               100000000, 1000000000};
	char *p = out;
	uint64_t q;

	if (d < 0 || d > EMIT_FAST_DECIMALS || !(fabs(v) < lim[d]))
		return 0;
	if (!near_round(v, d, &q))
		return 0;
	*p = '-'; /* kept only for a value not rounding to 0 (emit.h) */
	p += q != 0 && signbit(v);
	if (d == 0)
		return (size_t)(put_u64(p, q) - out);
	p = put_u64(p, q / p10[d]);
	*p = '.';
	digits_back(p + 1 + d, q % p10[d], d);
	return (size_t)(p + 1 + d - out);
}

size_t emit_fixed_chars(char *out, double v, int decimals)
{
	return fixed_chars(out, v, decimals);
}

void emit_fixed(struct buf *b, double v, int decimals)
{
	char tmp[EMIT_FIXED_MAX];
	size_t start = b->len, n;

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
	n = fixed_chars(tmp, v, decimals);
	if (n > 0) {
		buf_add(b, tmp, n);
		return;
	}
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

/* A number in one of the forms of struct emit_col. */
static void emit_form(struct buf *b, int form, double v)
{
	if (form == EMIT_FORM_F32)
		emit_float32(b, v);
	else if (form == EMIT_FORM_F64)
		emit_shortest(b, v);
	else
		emit_fixed(b, v, form);
}

/* The form a value field's numbers take. */
static int field_form(const struct tp_field *f)
{
	if (f->type == TP_T_F32)
		return EMIT_FORM_F32;
	if (f->type == TP_T_F64)
		return EMIT_FORM_F64;
	return tp_field_decimals(f);
}

void emit_number(struct buf *b, const struct tp_field *f, double v)
{
	emit_form(b, field_form(f), v);
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
static void json_chars(struct buf *b, const char *s)
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
	json_chars(b, s);
	buf_addc(b, '"');
}

/*
 * Year, month, day of a count of days since 1970-01-01 (proleptic
 * Gregorian); the algorithm of H. Hinnant, "chrono-Compatible Low-Level
 * Date Algorithms" (2013), civil_from_days, valid for any day that fits.
 */
#define EMIT_DATE_LEN 10

static void civil_from_days(int64_t z, int64_t *y, int *m, int *d)
{
	int64_t era, doe, yoe, doy, mp;

	z += 719468;
	era = (z >= 0 ? z : z - 146096) / 146097;
	doe = z - era * 146097;
	yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
	doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
	mp = (5 * doy + 2) / 153;
	*d = (int)(doy - (153 * mp + 2) / 5 + 1);
	*m = (int)(mp < 10 ? mp + 3 : mp - 9);
	*y = yoe + era * 400 + (*m <= 2);
}

/* Two digits of n (0..99) at p. */
static inline char *put2(char *p, int n)
{
	memcpy(p, pairs + 2 * n, 2);
	return p + 2;
}

/* t (clamped, see emit.h) as days since 1970-01-01 and the second of
 * that day. */
static int64_t split_time(int64_t t, int *sec)
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

/* "YYYY-MM-DD" (EMIT_DATE_LEN bytes) of a day at p; returns the end. */
static char *put_date(char *p, int64_t days)
{
	int64_t y;
	int mo, d;

	civil_from_days(days, &y, &mo, &d);
	p = put2(p, (int)(y / 100));
	p = put2(p, (int)(y % 100));
	*p++ = '-';
	p = put2(p, mo);
	*p++ = '-';
	return put2(p, d);
}

/* "THH:MM:SSZ" of a second of the day at p; returns the end. */
static char *put_clock(char *p, int s)
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

/* t as "YYYY-MM-DDTHH:MM:SSZ" at p (EMIT_TIME_LEN bytes, no NUL). */
static char *put_time(char *p, int64_t t)
{
	int s;
	int64_t days = split_time(t, &s);

	return put_clock(put_date(p, days), s);
}

void emit_time(struct buf *b, int64_t t)
{
	char tmp[EMIT_TIME_LEN];

	buf_add(b, tmp, (size_t)(put_time(tmp, t) - tmp));
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
	static const int dm[12] = {31, 28, 31, 30, 31, 30,
	                           31, 31, 30, 31, 30, 31};
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
	if (mo < 1 || mo > 12 || d < 1 || d > days_in_month(y, mo) || h > 23 ||
	    mi > 59 || se > 60)
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
	*out =
	    days_from_civil(y, mo, d) * 86400 + h * 3600 + mi * 60 + se - off;
	return 0;
}

/* n bytes of s at p; returns the end. */
static inline char *put_mem(char *p, const char *s, size_t n)
{
	memcpy(p, s, n);
	return p + n;
}

#define LIT(s) (s), (sizeof(s) - 1)

/* Bytes "-<time>-<seq>-<record>" may take. */
#define ID_NUMS_MAX (3 + 20 + 20 + 10)

/* "-<packet time>-<seq>-" at p; returns the end. */
static char *put_id_prefix(char *p, int64_t packet_time_s, uint64_t seq)
{
	*p++ = '-';
	p = put_i64(p, packet_time_s);
	*p++ = '-';
	p = put_u64(p, seq);
	*p++ = '-';
	return p;
}

/* "-<packet time>-<seq>-<record>" at p; returns the end. */
static char *put_id_numbers(char *p, int64_t packet_time_s, uint64_t seq,
                            uint32_t record)
{
	return put_u64(put_id_prefix(p, packet_time_s, seq), record);
}

/* The seq of a packet in its id (0 without a seq field). */
static uint64_t id_seq(const struct tp_packet *pk)
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

	emit_id(b, er->station, pk->time_s, id_seq(pk), er->reading->record);
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

/* Value slots the layout describes that this reading holds. */
static size_t n_slots(const struct emit_reading *er)
{
	size_t n = tp_layout_n_values(er->packet->layout);

	return er->reading->n_values < n ? er->reading->n_values : n;
}

/* The JSON member value of slot v in a form of struct emit_col: the
 * number, null, or (flag) its flag. */
static void member_value(struct buf *b, int form, const struct tp_value *v,
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
	size_t i, n = n_slots(er);
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
		member_value(b, flags ? 0 : field_form(f),
		             &er->reading->values[i], flags);
	}
}

/* Does json_members write any member for er? */
static bool any_member(const struct emit_reading *er)
{
	size_t i, n = n_slots(er);

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
		member_value(b, d->decimals, &er->reading->values[d->slot],
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

/* The station's characters as json_chars writes them: st (st_len bytes)
 * when given, else escaped now. */
static void station_chars(struct buf *b, const struct emit_reading *er,
                          const char *st, size_t st_len)
{
	if (st != NULL)
		buf_add(b, st, st_len);
	else
		json_chars(b, er->station);
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
	        (size_t)(put_id_prefix(tmp, pk->time_s, id_seq(pk)) - tmp));
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
		p = put_time(p, er->received_s);
	p = put_mem(p, LIT("\",\"values\":{"));
	buf_add(b, tmp, (size_t)(p - tmp));
}

/* t as put_time writes it, the date taken from *day / date (a cache of
 * the last day written, updated here). */
static char *put_time_cached(char *p, int64_t t, int64_t *day, char *date)
{
	int s;
	int64_t days = split_time(t, &s);

	if (days != *day) {
		put_date(date, days);
		*day = days;
	}
	memcpy(p, date, EMIT_DATE_LEN);
	return put_clock(p + EMIT_DATE_LEN, s);
}

/* The record number and the reading time, with hb (head_b) between
 * them; day / date as for put_time_cached. */
static void head_record(struct buf *b, const struct emit_reading *er,
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
	buf_commit(b, put_time_cached(p, er->reading->time_s, day, date));
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

/* Slack after the plan's text, so keys may be copied in 16-byte blocks. */
#define PLAN_SLACK 16

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
		c->form = field_form(f);
		c->key = t.len;
		buf_addc(&t, ',');
		emit_json_string(&t, f->name);
		buf_addc(&t, ':');
		c->key_len = t.len - c->key;
		pl->n_head_cols += i < l->n_fields;
		pl->room += c->key_len + 16 + EMIT_FIXED_MAX;
	}
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
#define PCACHE_STATION 128          /* longer station names: no cache */
#define PCACHE_TEXT    (256 * 1024) /* longer pieces: no cache */

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

static struct emit_pcache *pcache_new(void)
{
	struct emit_pcache *pc = calloc(1, sizeof(*pc));

	if (pc != NULL) {
		buf_init(&pc->text, PCACHE_TEXT);
		buf_init(&pc->st_json, PCACHE_STATION * 6);
		pc->day = INT64_MIN;
	}
	return pc;
}

static void pcache_free(struct emit_pcache *pc)
{
	if (pc == NULL)
		return;
	buf_free(&pc->text);
	buf_free(&pc->st_json);
	free(pc);
}

/* The station of er escaped for JSON (from the cache, made when the
 * station changed), or NULL: then head_a/head_b escape it themselves.
 * pcache_start has checked that the name fits pc->station. */
static const char *pcache_station(struct emit_pcache *pc,
                                  const struct emit_reading *er, size_t *len)
{
	if (strcmp(pc->st_for, er->station) != 0 || buf_failed(&pc->st_json)) {
		pc->st_for[0] = '\0';
		buf_reset(&pc->st_json);
		json_chars(&pc->st_json, er->station);
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
		put_time(pc->recv, er->received_s);
		pc->recv_for = er->received_s;
		pc->recv_ok = true;
	}
	return pc->recv;
}

/* Header slots of the reading: those before the records that it holds. */
static size_t head_slots(const struct emit_reading *er, size_t ns)
{
	size_t nf = er->packet->layout->n_fields;

	return ns < nf ? ns : nf;
}

static bool same_value(const struct tp_value *a, const struct tp_value *b)
{
	return memcmp(&a->v, &b->v, sizeof(a->v)) == 0 && a->flag == b->flag;
}

/* Was the cache made from this reading's packet? */
static bool pcache_hit(const struct emit_pcache *pc,
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

/* Start new pieces for this reading's packet; false if it cannot be
 * cached (no cache, or a station name too long). */
static bool pcache_start(struct emit_pcache *pc, const struct emit_reading *er,
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
static void pcache_cut(struct emit_pcache *pc, int i, bool last,
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

/* Piece i of the cache. */
static const char *piece(const struct emit_pcache *pc, int i, size_t *len)
{
	*len = pc->cut[i + 1] - pc->cut[i];
	return pc->text.data + pc->cut[i];
}

static struct emit_sk *sk_new(void);
static void sk_free(struct emit_sk *sk);

int emit_plans_init(struct emit_plans *ps, const struct tp_layout *const *ls,
                    size_t n)
{
	size_t i;

	memset(ps, 0, sizeof(*ps));
	ps->plan = calloc(n ? n : 1, sizeof(*ps->plan));
	ps->pc = pcache_new();
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
	pcache_free(ps->pc);
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

/* n bytes from s to p in 16-byte blocks: reads up to 15 bytes past s + n
 * (PLAN_SLACK) and writes up to 15 past p + n (room the caller has). */
static inline char *put_blocks(char *p, const char *s, size_t n)
{
	size_t i;

	for (i = 0; i < n; i += 16)
		memcpy(p + i, s + i, 16);
	return p + n;
}

/* One member: key (with its comma, or without for the first) and the
 * value or flag of slot v, through ordinary appends. */
static void plan_member(struct buf *b, const char *key, size_t key_len,
                        int form, const struct tp_value *v, bool flag)
{
	buf_add(b, key, key_len);
	member_value(b, form, v, flag);
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
	n = fixed_chars(p, v->v, form);
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
	pcache_cut(pc, 1, false, NULL);
	head_b(t, er, pl->text, pl->name_len, st, st_len);
	pcache_cut(pc, 2, false, NULL);
	head_c(t, er, pcache_received(pc, er));
	plan_members(t, pl, er, 0, pl->n_head_cols, nh, false, &first);
	pcache_cut(pc, 3, false, NULL);
	first = true;
	buf_add(t, LIT("},\"flags\":{"));
	plan_members(t, pl, er, 0, pl->n_head_cols, nh, true, &first);
	pc->any_head = !first;
	pcache_cut(pc, 4, true, pl->layout);
}

/* emit_json_planned from the cached pieces. */
static void json_cached(struct buf *b, const struct emit_plan *pl,
                        struct emit_pcache *pc, const struct emit_reading *er,
                        size_t ns, const struct emit_sci *sc)
{
	const char *s;
	size_t n, hb_len;
	const char *hb = piece(pc, 1, &hb_len);
	bool first = !pc->any_head;

	s = piece(pc, 0, &n);
	buf_add(b, s, n);
	head_record(b, er, hb, hb_len, &pc->day, pc->date);
	s = piece(pc, 2, &n);
	buf_add(b, s, n);
	plan_members(b, pl, er, pl->n_head_cols, pl->n_cols, ns, false, &first);
	science_members(b, er, sc, false, &first);
	s = piece(pc, 3, &n);
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

/* Piece i of the cache copied to p in blocks (text has PLAN_SLACK). */
static char *put_piece(char *p, const struct emit_pcache *pc, int i)
{
	size_t n;
	const char *s = piece(pc, i, &n);

	return put_blocks(p, s, n);
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
	p = put_piece(p, pc, 0);
	p = put_u64(p, er->reading->record);
	p = put_piece(p, pc, 1);
	p = put_time_cached(p, er->reading->time_s, &pc->day, pc->date);
	p = put_piece(p, pc, 2);
	p = members_at(p, pl, er, pl->n_head_cols, ns, false, &first);
	if (p != NULL)
		p = science_at(p, e, er, false, &first);
	if (p == NULL)
		return false;
	p = put_piece(p, pc, 3);
	first = !pc->any_head;
	p = members_at(p, pl, er, pl->n_head_cols, ns, true, &first);
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
	ns = n_slots(er);
	if (ps->pc != NULL && !pcache_hit(ps->pc, er, ns)) {
		ps->pc->layout = NULL; /* stale, even if no new one is made */
		if (pcache_start(ps->pc, er, ns))
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
			form[col] = field_form(f);
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
	c->pc = pcache_new();
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
	pcache_free(c->pc);
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
 * n is n_slots(er), form the column's number form. */
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
	k = p != NULL ? fixed_chars(p + 1, v->v, form) : 0;
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
	member_value(b, 0, v, true);
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
	k = fixed_chars(p + 1, v->v, form);
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

/* The CSV pieces of this reading's packet (see pcache above): the id up
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
	        (size_t)(put_id_prefix(tmp, pk->time_s, id_seq(pk)) - tmp));
	pcache_cut(pc, 1, false, NULL);
	buf_addc(t, ',');
	buf_adds(t, er->station);
	buf_addc(t, ',');
	pcache_cut(pc, 2, false, NULL);
	buf_addc(t, ',');
	if (pk->has_seq)
		buf_add(t, tmp, (size_t)(put_u64(tmp, pk->seq) - tmp));
	for (i = 0; i < c->n_names && csv_constant(c, li, i, er, ns); i++)
		csv_value(t, er, ns, c->slot[li * c->n_names + i],
		          c->form[li * c->n_names + i]);
	pc->run = i;
	pcache_cut(pc, 3, true, pk->layout);
}

/* Make the packet cache hold er's packet when it can (else it holds
 * nothing). */
static void csv_cache(const struct emit_csv *c, size_t li,
                      const struct emit_reading *er, size_t ns)
{
	struct emit_pcache *pc = c->pc;

	if (pc != NULL && !pcache_hit(pc, er, ns)) {
		pc->layout = NULL; /* stale, even if no new one can be made */
		if (!csv_special(er->station) && pcache_start(pc, er, ns))
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
		s = piece(pc, 0, &n);
		buf_add(b, s, n);
		hb = piece(pc, 1, &hb_len);
		head_record(b, er, hb, hb_len, &pc->day, pc->date);
		s = piece(pc, 2, &n);
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
	p = put_piece(p, pc, 0);
	p = put_u64(p, er->reading->record);
	p = put_piece(p, pc, 1);
	p = put_time_cached(p, er->reading->time_s, &pc->day, pc->date);
	p = put_piece(p, pc, 2);
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
	ns = n_slots(er);
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
