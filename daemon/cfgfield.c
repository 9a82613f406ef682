/*
 * cfgfield.c - the fields of a layout (LAYOUT.md): type or bits, scale,
 * offset, missing, range, role, unit (canonical spellings), standard
 * name and epoch, into struct tp_field.  All memory is the config's
 * arena.  Called by cfglayout.c for the header and the records.
 */
#include <math.h>
#include <string.h>

#include "cfgload.h"

/* --- units ------------------------------------------------------------ */

/* Common spellings of the units LAYOUT.md names, and their UDUNITS-2
 * form.  "\xC2\xB5" is MICRO SIGN U+00B5, "\xCE\xBC" GREEK MU U+03BC,
 * "\xC2\xB0" DEGREE SIGN U+00B0, "\xE2\x84\x83" DEGREE CELSIUS U+2103. */
static const struct unit_alias {
	const char *canon;
	const char *alias[10];
} units[] = {
    {"degC",
     {"\xC2\xB0"
      "C",
      "Cel", "deg_C", "degree_Celsius", "degrees_Celsius", "\xE2\x84\x83",
      NULL}},
    {"mS/cm", {"mS cm-1", "mS cm^-1", "mS.cm-1", NULL}},
    {"S/m", {"S m-1", "S m^-1", "S.m-1", NULL}},
    {"dbar", {"decibar", "dbars", NULL}},
    {"umol/kg",
     {"\xC2\xB5mol/kg", "\xCE\xBCmol/kg", "umol kg-1", "\xC2\xB5mol kg-1",
      "\xCE\xBCmol kg-1", "umol.kg-1", NULL}},
    {"umol/L",
     {"umol l-1", "umol L-1", "umol/l", "\xC2\xB5mol/L", "\xC2\xB5mol/l",
      "\xCE\xBCmol/L", "\xC2\xB5mol l-1", "mmol/m3", "mmol m-3", NULL}},
    {"mg/L", {"mg l-1", "mg/l", "mg L-1", NULL}},
    {"mL/L", {"ml/l", "ml l-1", "mL L-1", "ml/L", NULL}},
    {"%", {"percent", NULL}},
    {"1", {"dimensionless", NULL}},
};

/* The canonical spelling of u, or u itself. */
static const char *canon_unit(const char *u)
{
	size_t i, j;

	for (i = 0; i < sizeof(units) / sizeof(units[0]); i++) {
		if (strcmp(u, units[i].canon) == 0)
			return units[i].canon;
		for (j = 0; units[i].alias[j] != NULL; j++)
			if (strcmp(u, units[i].alias[j]) == 0)
				return units[i].canon;
	}
	return u;
}

/* --- epochs (RFC 3339) ------------------------------------------------ */

/* Days from 1970-01-01 to y-m-d in the proleptic Gregorian calendar
 * (the days_from_civil algorithm of H. Hinnant, "chrono-Compatible
 * Low-Level Date Algorithms", 2013). */
static int64_t days_from_civil(int64_t y, int m, int d)
{
	int64_t era, yoe, doy, doe;

	y -= m <= 2;
	era = (y >= 0 ? y : y - 399) / 400;
	yoe = y - era * 400;
	doy = (153 * (m > 2 ? m - 3 : m + 9) + 2) / 5 + d - 1;
	doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
	return era * 146097 + doe - 719468;
}

static int num2(const char *s, int n, int *v)
{
	int i;

	*v = 0;
	for (i = 0; i < n; i++) {
		if (s[i] < '0' || s[i] > '9')
			return -1;
		*v = *v * 10 + (s[i] - '0');
	}
	return 0;
}

static int days_in_month(int y, int m)
{
	static const int dm[12] = {31, 28, 31, 30, 31, 30,
	                           31, 31, 30, 31, 30, 31};
	bool leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;

	return m == 2 && leap ? 29 : dm[m - 1];
}

/* "YYYY-MM-DDTHH:MM:SS" then "Z" or "+HH:MM"/"-HH:MM" (RFC 3339 5.6,
 * whole seconds, no leap second) into Unix seconds. */
static int parse_epoch(const char *s, int64_t *out)
{
	int y, mo, d, h, mi, sec, oh = 0, om = 0, sign = 0;

	if (strlen(s) < 20 || num2(s, 4, &y) || s[4] != '-' ||
	    num2(s + 5, 2, &mo) || s[7] != '-' || num2(s + 8, 2, &d) ||
	    (s[10] != 'T' && s[10] != 't') || num2(s + 11, 2, &h) ||
	    s[13] != ':' || num2(s + 14, 2, &mi) || s[16] != ':' ||
	    num2(s + 17, 2, &sec))
		return -1;
	s += 19;
	if ((*s == 'Z' || *s == 'z') && s[1] == '\0') {
		sign = 0;
	} else if ((*s == '+' || *s == '-') && strlen(s) == 6 &&
	           num2(s + 1, 2, &oh) == 0 && s[3] == ':' &&
	           num2(s + 4, 2, &om) == 0) {
		sign = *s == '+' ? 1 : -1;
	} else {
		return -1;
	}
	if (mo < 1 || mo > 12 || d < 1 || d > days_in_month(y, mo) || h > 23 ||
	    mi > 59 || sec > 59 || oh > 23 || om > 59)
		return -1;
	*out = days_from_civil(y, mo, d) * 86400 + h * 3600 + mi * 60 + sec -
	       sign * (oh * 3600 + om * 60);
	return 0;
}

/* --- fields ------------------------------------------------------------ */

static bool field_name_ok(const char *s)
{
	size_t i, n = strlen(s);

	if (n == 0 || n > CFG_NAME_MAX || (s[0] >= '0' && s[0] <= '9'))
		return false;
	for (i = 0; i < n; i++)
		if (!((s[i] >= 'a' && s[i] <= 'z') ||
		      (s[i] >= 'A' && s[i] <= 'Z') ||
		      (s[i] >= '0' && s[i] <= '9') || s[i] == '_'))
			return false;
	return true;
}

static bool std_name_ok(const char *s)
{
	for (; *s != '\0'; s++)
		if (!((*s >= 'a' && *s <= 'z') || (*s >= '0' && *s <= '9') ||
		      *s == '_'))
			return false;
	return true;
}

const uint8_t cfg_type_bits[] = {8, 8, 16, 16, 24, 24, 32, 32, 64, 64, 32, 64};

/* type / bits / signed into f. */
static int field_width(struct ld *ld, const cJSON *el, const cJSON **seen,
                       const struct fld_in *in, struct tp_field *f)
{
	const cJSON *t = opt_seen(&opt_field, seen, "type");
	const cJSON *b = opt_seen(&opt_field, seen, "bits");
	const cJSON *sg = opt_seen(&opt_field, seen, "signed");
	size_t old;

	if (t != NULL && b != NULL) {
		old = ld_key(ld, "bits");
		ld_err(ld, b, 1, "both \"type\" and \"bits\" given; give one");
		ld_pop(ld, old);
		return -1;
	}
	if (t == NULL && b == NULL) {
		old = ld_key(ld, "type");
		ld_err(ld, el, 0,
		       "missing required key; give \"type\" (u8 i8"
		       " u16 i16 u24 i24 u32 i32 u64 i64 f32 f64) or \"bits\""
		       " (1..64)");
		ld_pop(ld, old);
		return -1;
	}
	if (t != NULL && sg != NULL) {
		old = ld_key(ld, "signed");
		ld_err(ld, sg, 1,
		       "\"signed\" goes with \"bits\"; with \"type\""
		       " use i8 i16 i24 i32 i64 for signed fields");
		ld_pop(ld, old);
		return -1;
	}
	if (t != NULL && in->type >= 0) {
		f->type = (enum tp_type)(TP_T_U8 + in->type);
		f->bits = cfg_type_bits[in->type];
		f->is_signed = in->type < 10 && (in->type & 1);
	} else if (b != NULL) {
		f->type = TP_T_BITS;
		f->bits = in->bits;
		f->is_signed = in->is_signed;
	}
	return 0;
}

static int float_missing(struct ld *ld, const cJSON *m, struct tp_field *f)
{
	char found[96];
	uint32_t u32;
	uint64_t u64;
	float fv;
	double d;

	if (!cJSON_IsNumber(m) || !isfinite(m->valuedouble)) {
		ld_err(ld, m, 0, "found %s; expected a number",
		       ld_found(m, found, sizeof(found)));
		return -1;
	}
	d = m->valuedouble;
	if (f->type == TP_T_F32) {
		fv = (float)d;
		memcpy(&u32, &fv, sizeof(u32));
		f->missing = u32;
	} else {
		memcpy(&u64, &d, sizeof(u64));
		f->missing = u64;
	}
	f->has_missing = true;
	return 0;
}

/* `missing`: a raw value of the field's width; a negative number for a
 * signed field is stored as its two's complement bit pattern. */
static int field_missing(struct ld *ld, const cJSON *m, struct tp_field *f)
{
	uint64_t mag = 0, max, half;
	bool neg = false;

	if (f->type == TP_T_F32 || f->type == TP_T_F64)
		return float_missing(ld, m, f);
	if (f->bits == 0 || ld_integer(ld, m, &neg, &mag) != 0)
		return -1;
	max = f->bits >= 64 ? UINT64_MAX : (((uint64_t)1 << f->bits) - 1);
	half = (uint64_t)1 << (f->bits - 1);
	if (neg && mag != 0 && (!f->is_signed || mag > half)) {
		if (!f->is_signed)
			ld_err(ld, m, 0,
			       "-%llu for an unsigned field; valid:"
			       " 0..%llu",
			       (unsigned long long)mag,
			       (unsigned long long)max);
		else
			ld_err(ld, m, 0,
			       "-%llu does not fit in %u bits; valid:"
			       " -%llu..%llu",
			       (unsigned long long)mag, f->bits,
			       (unsigned long long)half,
			       (unsigned long long)max);
		return -1;
	}
	if (!neg && mag > max) {
		ld_err(ld, m, 0,
		       "%llu does not fit in %u bits; valid: %s%llu..%llu",
		       (unsigned long long)mag, f->bits,
		       f->is_signed ? "-" : "",
		       (unsigned long long)(f->is_signed ? half : 0),
		       (unsigned long long)max);
		return -1;
	}
	f->has_missing = true;
	f->missing = neg ? (~mag + 1) & max : mag;
	return 0;
}

/* unit and epoch, which depend on the role. */
static int field_time(struct ld *ld, const cJSON **seen,
                      const struct fld_in *in, struct tp_field *f)
{
	const cJSON *u = opt_seen(&opt_field, seen, "unit");
	const cJSON *e = opt_seen(&opt_field, seen, "epoch");
	bool timed = f->role == TP_ROLE_TIME || f->role == TP_ROLE_TIME_OFFSET;
	size_t old;
	int bad = 0;

	if (timed && in->unit != NULL && strcmp(in->unit, "s") != 0 &&
	    strcmp(in->unit, "min") != 0) {
		old = ld_key(ld, "unit");
		ld_err(ld, u, 0, "unit \"%s\" for a time field; valid: s min",
		       in->unit);
		ld_pop(ld, old);
		bad = 1;
	}
	f->time_unit_s =
	    timed && in->unit != NULL && strcmp(in->unit, "min") == 0 ? 60 : 1;
	f->unit = in->unit == NULL || timed ? NULL : canon_unit(in->unit);
	if (e == NULL)
		return bad ? -1 : 0;
	old = ld_key(ld, "epoch");
	if (f->role != TP_ROLE_TIME) {
		ld_err(ld, e, 1,
		       "only a field with role \"time\" has an epoch");
		bad = 1;
	} else if (parse_epoch(in->epoch, &f->epoch_s) != 0) {
		ld_err(ld, e, 0,
		       "bad epoch \"%s\"; expected an RFC 3339 time"
		       " such as \"2000-01-01T00:00:00Z\"",
		       in->epoch);
		bad = 1;
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int field_role(struct ld *ld, const cJSON **seen, bool in_records,
                      struct tp_field *f)
{
	const cJSON *r = opt_seen(&opt_field, seen, "role");
	size_t old;
	int rc = 0;

	if (r == NULL || f->role == TP_ROLE_VALUE)
		return 0;
	old = ld_key(ld, "role");
	if (in_records && f->role != TP_ROLE_TIME_OFFSET) {
		ld_err(ld, r, 0,
		       "role \"%s\" in a record; valid in records:"
		       " time_offset",
		       r->valuestring);
		rc = -1;
	} else if (!in_records && f->role == TP_ROLE_TIME_OFFSET) {
		ld_err(ld, r, 0,
		       "role \"time_offset\" in the header; valid in"
		       " the header: station seq time");
		rc = -1;
	} else if (f->type == TP_T_F32 || f->type == TP_T_F64) {
		ld_err(ld, r, 0,
		       "role \"%s\" on a float field; role fields"
		       " are integers",
		       r->valuestring);
		rc = -1;
	}
	ld_pop(ld, old);
	return rc;
}

static int field_names(struct ld *ld, const cJSON **seen,
                       const struct fld_in *in, struct tp_field *f)
{
	const cJSON *n = opt_seen(&opt_field, seen, "name");
	const cJSON *s = opt_seen(&opt_field, seen, "standard_name");
	size_t old;
	int bad = 0;

	if (in->name != NULL && !field_name_ok(in->name)) {
		old = ld_key(ld, "name");
		ld_err(ld, n, 0,
		       "bad name \"%s\"; valid: [A-Za-z_][A-Za-z0-9_]*,"
		       " at most 64 characters",
		       in->name);
		ld_pop(ld, old);
		bad = 1;
	}
	if (in->standard_name != NULL && !std_name_ok(in->standard_name)) {
		old = ld_key(ld, "standard_name");
		ld_err(ld, s, 0,
		       "bad standard name \"%s\"; CF standard names"
		       " are [a-z0-9_]",
		       in->standard_name);
		ld_pop(ld, old);
		bad = 1;
	}
	f->name = in->name;
	f->standard_name = in->standard_name;
	return bad ? -1 : 0;
}

static int parse_field(struct ld *ld, const cJSON *el, bool in_records,
                       struct tp_field *f)
{
	const cJSON *seen[CFG_MAX_OPTS], *m;
	struct fld_in in = {0};
	struct skip_in sk = {0};
	int bad;

	if (cJSON_IsObject(el) &&
	    cJSON_GetObjectItemCaseSensitive(el, "skip_bits") != NULL) {
		bad = opt_apply(ld, &opt_skip, el, &sk, -1, seen) != 0;
		f->type = TP_T_SKIP;
		f->bits = sk.bits;
		f->role = TP_ROLE_VALUE;
		return bad ? -1 : 0;
	}
	bad = opt_apply(ld, &opt_field, el, &in, -1, seen) != 0;
	if (!cJSON_IsObject(el))
		return -1;
	bad |= field_width(ld, el, seen, &in, f) != 0;
	bad |= field_names(ld, seen, &in, f) != 0;
	f->role = in.role < 0 ? TP_ROLE_VALUE : (enum tp_role)(in.role + 1);
	f->scale = in.scale;
	f->offset = in.offset;
	f->has_range = in.range.set;
	f->range_min = in.range.min;
	f->range_max = in.range.max;
	bad |= field_role(ld, seen, in_records, f) != 0;
	bad |= field_time(ld, seen, &in, f) != 0;
	m = opt_seen(&opt_field, seen, "missing");
	if (m != NULL && f->bits > 0) {
		size_t old = ld_key(ld, "missing");

		bad |= field_missing(ld, m, f) != 0;
		ld_pop(ld, old);
	}
	return bad ? -1 : 0;
}

int cfg_field_group(struct ld *ld, const cJSON *list, bool in_records,
                    struct grp *g)
{
	char found[96];
	const cJSON *el;
	size_t n, i = 0, old = ld_key(ld, "fields");
	int bad = 0;

	g->list = list;
	n = cJSON_IsArray(list) ? (size_t)cJSON_GetArraySize(list) : 0;
	if (!cJSON_IsArray(list) || n == 0 || n > TP_MAX_FIELDS) {
		ld_err(ld, list, 0,
		       "found %s%s; expected a list of 1..%d "
		       "fields",
		       ld_found(list, found, sizeof(found)),
		       cJSON_IsArray(list) ? " of that many items" : "",
		       TP_MAX_FIELDS);
		ld_pop(ld, old);
		return -1;
	}
	g->f = arena_alloc(ld->mem, n * sizeof(*g->f));
	if (g->f == NULL) {
		ld_pop(ld, old);
		return -1;
	}
	for (el = list->child; el != NULL; el = el->next, i++) {
		size_t o2 = ld_idx(ld, i);

		bad |= parse_field(ld, el, in_records, &g->f[i]) != 0;
		ld_pop(ld, o2);
	}
	g->n = n;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}
