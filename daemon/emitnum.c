/*
 * emitnum.c - numbers and times as the reading writers print them; see
 * emit.h for the choices.
 */
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "emitint.h"

#if defined(__SIZEOF_INT128__)
__extension__ typedef unsigned __int128 u128;
#define EMIT_HAVE_U128 1
#endif

const char emit_pairs[201] =
    "00010203040506070809101112131415161718192021222324252627282930313233"
    "34353637383940414243444546474849505152535455565758596061626364656667"
    "6869707172737475767778798081828384858687888990919293949596979899";

/* v in decimal at p (at most 20 bytes, no NUL); returns the end. */
char *emit_put_i64(char *p, int64_t v)
{
	if (v >= 0)
		return put_u64(p, (uint64_t)v);
	*p++ = '-';
	return put_u64(p, (uint64_t)0 - (uint64_t)v);
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
size_t emit_fixed_chars(char *out, double v, int d)
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
	n = emit_fixed_chars(tmp, v, decimals);
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
void emit_form(struct buf *b, int form, double v)
{
	if (form == EMIT_FORM_F32)
		emit_float32(b, v);
	else if (form == EMIT_FORM_F64)
		emit_shortest(b, v);
	else
		emit_fixed(b, v, form);
}

/* The form a value field's numbers take. */
int emit_field_form(const struct tp_field *f)
{
	if (f->type == TP_T_F32)
		return EMIT_FORM_F32;
	if (f->type == TP_T_F64)
		return EMIT_FORM_F64;
	return tp_field_decimals(f);
}

void emit_number(struct buf *b, const struct tp_field *f, double v)
{
	emit_form(b, emit_field_form(f), v);
}

/*
 * Year, month, day of a count of days since 1970-01-01 (proleptic
 * Gregorian); the algorithm of H. Hinnant, "chrono-Compatible Low-Level
 * Date Algorithms" (2013), civil_from_days, valid for any day that fits.
 */

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

/* "YYYY-MM-DD" (EMIT_DATE_LEN bytes) of a day at p; returns the end. */
char *emit_put_date(char *p, int64_t days)
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

/* t as "YYYY-MM-DDTHH:MM:SSZ" at p (EMIT_TIME_LEN bytes, no NUL). */
char *emit_put_time(char *p, int64_t t)
{
	int s;
	int64_t days = split_time(t, &s);

	return put_clock(emit_put_date(p, days), s);
}

void emit_time(struct buf *b, int64_t t)
{
	char tmp[EMIT_TIME_LEN];

	buf_add(b, tmp, (size_t)(emit_put_time(tmp, t) - tmp));
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
