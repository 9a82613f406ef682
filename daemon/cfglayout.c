/*
 * cfglayout.c - layouts (LAYOUT.md) from JSON into struct tp_layout:
 * fields, records, match, length and check, then tp_layout_validate with
 * its problem placed at the JSON it came from.  All memory is the
 * config's arena.
 */
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "cfgload.h"
#include "tidepost/derive.h"

/* --- records, match, length --------------------------------------------- */

static int records_count(struct ld *ld, const cJSON *cnt, const struct grp *hdr,
                         struct tp_layout *out)
{
	const char *names[TP_MAX_FIELDS], *s;
	char found[96];
	size_t i;

	out->records.count_field = -1;
	if (cJSON_IsNumber(cnt) && cnt->valuedouble >= 1 &&
	    cnt->valuedouble <= TP_MAX_PACKET &&
	    cnt->valuedouble == floor(cnt->valuedouble)) {
		out->records.count = (uint32_t)cnt->valuedouble;
		return 0;
	}
	if (!cJSON_IsString(cnt)) {
		ld_err(ld, cnt, 0,
		       "found %s; expected a whole number 1..%d or"
		       " the name of a header field",
		       ld_found(cnt, found, sizeof(found)), TP_MAX_PACKET);
		return -1;
	}
	for (i = 0; i < hdr->n; i++) {
		names[i] = hdr->f[i].name;
		if (names[i] != NULL &&
		    strcmp(names[i], cnt->valuestring) == 0) {
			out->records.count_field = (int)i;
			return 0;
		}
	}
	s = opt_suggest(cnt->valuestring, names, hdr->n);
	ld_err(ld, cnt, 0,
	       "unknown field \"%s\"%s%s%s valid: a whole number"
	       " or the name of a header field",
	       cnt->valuestring, s ? "; did you mean \"" : "", s ? s : "",
	       s ? "\"?" : ";");
	return -1;
}

static int parse_records(struct ld *ld, const cJSON *node,
                         const struct grp *hdr, struct grp *rec,
                         struct tp_layout *out)
{
	const cJSON *seen[CFG_MAX_OPTS], *n;
	struct rec_in in = {0};
	size_t old = ld_key(ld, "records");
	int bad;

	bad = opt_apply(ld, &opt_records, node, &in, -1, seen) != 0;
	out->has_records = true;
	out->records.every_s = in.every_s;
	n = opt_seen(&opt_records, seen, "count");
	if (n != NULL) {
		size_t o2 = ld_key(ld, "count");

		bad |= records_count(ld, n, hdr, out) != 0;
		ld_pop(ld, o2);
	}
	n = opt_seen(&opt_records, seen, "fields");
	if (n != NULL && cfg_field_group(ld, n, true, rec) == 0) {
		out->records.fields = rec->f;
		out->records.n_fields = rec->n;
	} else {
		bad = 1;
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int match_value(struct ld *ld, const cJSON *is, int type,
                       struct tp_match *m)
{
	unsigned bits = cfg_type_bits[type];
	bool sgn = type & 1, neg = false;
	uint64_t mag = 0, max, half = (uint64_t)1 << (bits - 1);
	size_t old = ld_key(ld, "is");
	int rc = ld_integer(ld, is, &neg, &mag);

	max = bits >= 64 ? UINT64_MAX : (((uint64_t)1 << bits) - 1);
	if (rc == 0 && ((neg && mag != 0 && (!sgn || mag > half)) ||
	                (!neg && mag > (sgn ? half - 1 : max)))) {
		ld_err(ld, is, 0, "%s%llu does not fit %s; valid: %s%llu..%llu",
		       neg ? "-" : "", (unsigned long long)mag,
		       opt_words_types[type], sgn ? "-" : "",
		       (unsigned long long)(sgn ? half : 0),
		       (unsigned long long)(sgn ? half - 1 : max));
		rc = -1;
	}
	m->is = neg ? -(int64_t)(mag - 1) - 1 : (int64_t)mag;
	ld_pop(ld, old);
	return rc;
}

static int parse_match(struct ld *ld, const cJSON *list, struct tp_layout *out)
{
	const cJSON *seen[CFG_MAX_OPTS], *el;
	struct tp_match *m;
	struct match_in in;
	size_t i = 0, n, old = ld_key(ld, "match"), o2;
	int bad = 0;

	n = cJSON_IsArray(list) ? (size_t)cJSON_GetArraySize(list) : 0;
	m = n > 0 ? arena_alloc(ld->mem, n * sizeof(*m)) : NULL;
	if (!cJSON_IsArray(list) || n == 0 || n > TP_MAX_MATCH || m == NULL) {
		ld_err(ld, list, 0,
		       "expected a list of 1..%d {at, type, is}"
		       " tests",
		       TP_MAX_MATCH);
		ld_pop(ld, old);
		return -1;
	}
	for (el = list->child; el != NULL; el = el->next, i++) {
		o2 = ld_idx(ld, i);
		memset(&in, 0, sizeof(in));
		bad |= opt_apply(ld, &opt_match, el, &in, -1, seen) != 0;
		m[i].at = in.at;
		if (in.type >= 10) {
			size_t o3 = ld_key(ld, "type");

			ld_err(ld, opt_seen(&opt_match, seen, "type"), 0,
			       "a float cannot be matched; valid: u8 i8 u16 "
			       "i16 u24 i24 u32 i32 u64 i64");
			ld_pop(ld, o3);
			bad = 1;
		} else if (in.type >= 0) {
			m[i].type = (enum tp_type)(TP_T_U8 + in.type);
			if (opt_seen(&opt_match, seen, "is") != NULL)
				bad |= match_value(
				           ld, opt_seen(&opt_match, seen, "is"),
				           in.type, &m[i]) != 0;
		}
		ld_pop(ld, o2);
	}
	out->match = m;
	out->n_match = n;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int parse_length(struct ld *ld, const cJSON *node, struct tp_layout *out)
{
	const cJSON *seen[CFG_MAX_OPTS];
	struct len_in in = {0};
	size_t old = ld_key(ld, "length");
	int rc = 0;

	if (cJSON_IsNumber(node)) {
		if (node->valuedouble < 1 ||
		    node->valuedouble > TP_MAX_PACKET ||
		    node->valuedouble != floor(node->valuedouble)) {
			ld_err(ld, node, 0,
			       "%.15g bytes; valid: a whole number"
			       " 1..%d, or {min, max}",
			       node->valuedouble, TP_MAX_PACKET);
			rc = -1;
		}
		in.min = in.max = (uint32_t)node->valuedouble;
	} else if (opt_apply(ld, &opt_length, node, &in, -1, seen) != 0) {
		rc = -1;
	} else if (in.min > in.max) {
		ld_err(ld, node, 0,
		       "min %u is above max %u; expected min <="
		       " max",
		       in.min, in.max);
		rc = -1;
	}
	out->length_min = in.min;
	out->length_max = in.max;
	ld_pop(ld, old);
	return rc;
}

/* --- check ------------------------------------------------------------- */

/* One CRC parameter: a whole number that fits width bits. */
static int crc_value(struct ld *ld, const cJSON **seen, const char *key,
                     unsigned width, uint32_t *v)
{
	const cJSON *n = opt_seen(&opt_crc, seen, key);
	uint64_t mag = 0, max = (((uint64_t)1 << width) - 1);
	size_t old;
	bool neg = false;
	int rc = 0;

	*v = 0;
	if (n == NULL)
		return 0;
	old = ld_key(ld, key);
	if (ld_integer(ld, n, &neg, &mag) != 0) {
		rc = -1;
	} else if (neg || mag > max) {
		ld_err(ld, n, 0,
		       "%s0x%llX does not fit in %u bits; valid:"
		       " 0..0x%llX",
		       neg ? "-" : "", (unsigned long long)mag, width,
		       (unsigned long long)max);
		rc = -1;
	}
	*v = (uint32_t)mag;
	ld_pop(ld, old);
	return rc;
}

static int crc_params(struct ld *ld, const cJSON *node, struct tp_check *ck)
{
	const cJSON *seen[CFG_MAX_OPTS];
	struct tp_crc_params p;
	struct crc_in in = {0};
	enum tp_status st;
	int bad;

	memset(&p, 0, sizeof(p));
	bad = opt_apply(ld, &opt_crc, node, &in, -1, seen) != 0;
	if (bad)
		return -1;
	p.width = (uint8_t)in.width;
	p.refin = in.refin;
	p.refout = in.refout;
	bad |= crc_value(ld, seen, "poly", in.width, &p.poly) != 0;
	bad |= crc_value(ld, seen, "init", in.width, &p.init) != 0;
	bad |= crc_value(ld, seen, "xorout", in.width, &p.xorout) != 0;
	if (bad)
		return -1;
	st = tp_crc_init(&ck->crc, &p);
	if (st != TP_OK) {
		ld_err(ld, node, 0,
		       "these CRC parameters are not usable: %s;"
		       " expected width 8..32 and values that fit it",
		       tp_strerror(st));
		return -1;
	}
	ck->kind = TP_CHECK_CRC;
	return 0;
}

static void crc_unknown(struct ld *ld, const cJSON *node)
{
	const struct tp_crc_params *cat;
	const char *names[192], *s;
	size_t n = 0, i;

	cat = tp_crc_catalogue(&n);
	for (i = 0; i < n && i < 192; i++)
		names[i] = cat[i].name;
	if (strcasestr(node->valuestring, "CCITT") != NULL) {
		ld_err(ld, node, 0,
		       "unknown CRC \"%s\": \"CCITT\" names several"
		       " CRCs; say which, e.g. CRC-16/IBM-3740 (CCITT-FALSE),"
		       " CRC-16/KERMIT, CRC-16/XMODEM",
		       node->valuestring);
		return;
	}
	s = opt_suggest(node->valuestring, names, i);
	ld_err(ld, node, 0,
	       "unknown CRC \"%s\"%s%s%s valid: sum8 xor8 "
	       "CRC-8/SMBUS CRC-16/IBM-3740 CRC-16/XMODEM CRC-16/KERMIT "
	       "CRC-16/MODBUS CRC-32/ISO-HDLC CRC-32/ISCSI (and the other %zu "
	       "names of the CRC RevEng catalogue), or {width, poly, init, "
	       "refin, refout, xorout}",
	       node->valuestring, s ? "; did you mean \"" : "", s ? s : "",
	       s ? "\"?" : ";", n > 7 ? n - 7 : 0);
}

/* Slicing tables for the CRC (check.h), four bytes a step; without
 * memory for them it takes one byte a step, with the same results. */
static void crc_sliced(struct ld *ld, struct tp_crc *c)
{
	uint32_t(*t)[256] = arena_alloc(ld->mem, 3 * sizeof(*t));

	if (t == NULL)
		return;
	tp_crc_slices(c, t);
	c->slice = (const uint32_t(*)[256])t;
}

/* `crc`: a name or parameters.  *nbytes gets the check's size. */
static int check_kind(struct ld *ld, const cJSON *node, struct tp_check *ck,
                      unsigned *nbytes)
{
	const struct tp_crc_params *p;
	char found[96];
	enum tp_status st;
	size_t old = ld_key(ld, "crc");
	int rc = 0;

	*nbytes = 1;
	if (cJSON_IsString(node) &&
	    strcasecmp(node->valuestring, "sum8") == 0) {
		ck->kind = TP_CHECK_SUM8;
	} else if (cJSON_IsString(node) &&
	           strcasecmp(node->valuestring, "xor8") == 0) {
		ck->kind = TP_CHECK_XOR8;
	} else if (cJSON_IsString(node)) {
		p = tp_crc_find(node->valuestring);
		st = p != NULL ? tp_crc_init(&ck->crc, p) : TP_ERR_ARG;
		if (p == NULL) {
			crc_unknown(ld, node);
			rc = -1;
		} else if (st != TP_OK) {
			ld_err(ld, node, 0, "cannot build the table: %s",
			       tp_strerror(st));
			rc = -1;
		}
		ck->kind = TP_CHECK_CRC;
	} else if (cJSON_IsObject(node)) {
		rc = crc_params(ld, node, ck);
	} else {
		ld_err(ld, node, 0,
		       "found %s; expected a CRC catalogue name,"
		       " \"sum8\", \"xor8\" or {width, poly, init, refin, "
		       "refout, xorout}",
		       ld_found(node, found, sizeof(found)));
		rc = -1;
	}
	if (ck->kind == TP_CHECK_CRC && rc == 0) {
		*nbytes = (ck->crc.p.width + 7u) / 8u;
		crc_sliced(ld, &ck->crc);
	}
	ld_pop(ld, old);
	return rc;
}

static int check_covers(struct ld *ld, const cJSON *node, struct tp_check *ck)
{
	const cJSON *a = cJSON_IsArray(node) ? node->child : NULL;
	const cJSON *b = a != NULL ? a->next : NULL;
	size_t old = ld_key(ld, "covers");
	char found[96];
	int rc = 0;

	if (a == NULL || b == NULL || b->next != NULL || !cJSON_IsNumber(a) ||
	    !cJSON_IsNumber(b) || a->valuedouble != floor(a->valuedouble) ||
	    b->valuedouble != floor(b->valuedouble) ||
	    fabs(a->valuedouble) > TP_MAX_PACKET ||
	    fabs(b->valuedouble) > TP_MAX_PACKET) {
		ld_err(ld, node, 0,
		       "found %s; expected [from, to): two whole "
		       "numbers -%d..%d (negative: from the end)",
		       ld_found(node, found, sizeof(found)), TP_MAX_PACKET,
		       TP_MAX_PACKET);
		rc = -1;
	} else {
		ck->has_covers = true;
		ck->covers_from = (int32_t)a->valuedouble;
		ck->covers_to = (int32_t)b->valuedouble;
	}
	ld_pop(ld, old);
	return rc;
}

static int parse_check(struct ld *ld, const cJSON *node, struct tp_layout *l)
{
	const cJSON *seen[CFG_MAX_OPTS], *n;
	struct check_in in = {0};
	size_t old = ld_key(ld, "check");
	unsigned nbytes = 1;
	int bad;

	bad = opt_apply(ld, &opt_check, node, &in, -1, seen) != 0;
	n = opt_seen(&opt_check, seen, "crc");
	if (n != NULL)
		bad |= check_kind(ld, n, &l->check, &nbytes) != 0;
	l->check.at =
	    opt_seen(&opt_check, seen, "at") != NULL ? in.at : -(int32_t)nbytes;
	n = opt_seen(&opt_check, seen, "covers");
	if (n != NULL)
		bad |= check_covers(ld, n, &l->check) != 0;
	l->check.order = in.order < 0 ? l->order : (enum tp_order)in.order;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

/* --- the layout as a whole -------------------------------------------- */

/* The node of item i of list, or the list itself. */
static const cJSON *item(const cJSON *list, int i)
{
	const cJSON *c = i >= 0 ? cJSON_GetArrayItem(list, i) : NULL;

	return c != NULL ? c : list;
}

struct named {
	const char *name;
	size_t grp, idx;
};

static void dup_name(struct ld *ld, const struct grp *g, const struct named *a,
                     const struct named *first)
{
	size_t old = ld->plen;
	const cJSON *el = item(g[a->grp].list, (int)a->idx);

	if (a->grp == 1)
		ld_key(ld, "records");
	ld_key(ld, "fields");
	ld_idx(ld, a->idx);
	ld_key(ld, "name");
	ld_err(ld, cJSON_GetObjectItemCaseSensitive(el, "name"), 0,
	       "duplicate name \"%s\" (also %sfields[%zu]); names are unique"
	       " in a layout",
	       a->name, first->grp ? "records." : "", first->idx);
	ld_pop(ld, old);
}

/* Field names are unique across header and records: value names in a
 * reading must not collide. */
static int unique_names(struct ld *ld, const struct grp *g)
{
	struct named all[2 * TP_MAX_FIELDS];
	size_t n = 0, gi, i, j;
	int bad = 0;

	for (gi = 0; gi < 2; gi++)
		for (i = 0; i < g[gi].n; i++)
			if (g[gi].f[i].name != NULL) {
				all[n].name = g[gi].f[i].name;
				all[n].grp = gi;
				all[n++].idx = i;
			}
	for (i = 1; i < n; i++) {
		for (j = 0; j < i; j++) {
			if (strcmp(all[i].name, all[j].name) == 0) {
				dup_name(ld, g, &all[i], &all[j]);
				bad = 1;
				break;
			}
		}
	}
	return bad ? -1 : 0;
}

static void validate(struct ld *ld, const cJSON *obj, const cJSON **seen,
                     const struct grp *g, const struct tp_layout *l)
{
	struct tp_layout_problem pb = {4, -1, ""};
	const cJSON *at = obj;
	size_t old = ld->plen;

	if (tp_layout_validate(l, &pb) == TP_OK)
		return;
	if (pb.group == 0) {
		ld_key(ld, "fields");
		at = item(g[0].list, pb.index);
	} else if (pb.group == 1) {
		ld_key(ld, "records");
		ld_key(ld, "fields");
		at = item(g[1].list, pb.index);
	} else if (pb.group == 2) {
		ld_key(ld, "match");
		at = item(opt_seen(&opt_layout, seen, "match"), pb.index);
	} else if (pb.group == 3) {
		ld_key(ld, "check");
		at = opt_seen(&opt_layout, seen, "check");
	}
	if (pb.index >= 0 && pb.group <= 2 && at != obj)
		ld_idx(ld, (size_t)pb.index);
	ld_err(ld, at != NULL ? at : obj, 0, "%s",
	       pb.what != NULL ? pb.what : "inconsistent layout");
	ld_pop(ld, old);
}

static int layout_name(struct ld *ld, const cJSON **seen, const char *name,
                       const struct tp_layout *prev, size_t n_prev)
{
	const cJSON *n = opt_seen(&opt_layout, seen, "name");
	size_t i, old = ld_key(ld, "name");
	int rc = 0;

	if (!cfg_name_ok(name, CFG_NAME_MAX)) {
		ld_err(ld, n, 0,
		       "bad name \"%s\"; valid: [A-Za-z0-9_.-], 1..64"
		       " characters",
		       name);
		rc = -1;
	}
	for (i = 0; rc == 0 && i < n_prev; i++) {
		if (prev[i].name != NULL && strcmp(prev[i].name, name) == 0) {
			ld_err(ld, n, 0,
			       "duplicate layout name \"%s\" (also "
			       "layouts[%zu]); layout names are unique",
			       name, i);
			rc = -1;
		}
	}
	ld_pop(ld, old);
	return rc;
}

int cfg_layout_parse(struct ld *ld, const cJSON *obj, struct tp_layout *out,
                     const struct tp_layout *prev, size_t n_prev)
{
	const cJSON *seen[CFG_MAX_OPTS], *n;
	struct grp g[2];
	struct lay_in in = {0};
	int bad;

	memset(out, 0, sizeof(*out));
	memset(g, 0, sizeof(g));
	bad = opt_apply(ld, &opt_layout, obj, &in, -1, seen) != 0;
	if (!cJSON_IsObject(obj))
		return -1;
	if (in.name != NULL)
		bad |= layout_name(ld, seen, in.name, prev, n_prev) != 0;
	out->name = in.name;
	out->order = (enum tp_order)in.byte_order;
	n = opt_seen(&opt_layout, seen, "fields");
	if (n != NULL && cfg_field_group(ld, n, false, &g[0]) == 0) {
		out->fields = g[0].f;
		out->n_fields = g[0].n;
	} else {
		bad = 1;
	}
	n = opt_seen(&opt_layout, seen, "records");
	if (n != NULL)
		bad |= parse_records(ld, n, &g[0], &g[1], out) != 0;
	n = opt_seen(&opt_layout, seen, "match");
	bad |= n != NULL && parse_match(ld, n, out) != 0;
	n = opt_seen(&opt_layout, seen, "length");
	bad |= n != NULL && parse_length(ld, n, out) != 0;
	n = opt_seen(&opt_layout, seen, "check");
	bad |= n != NULL && parse_check(ld, n, out) != 0;
	if (!bad)
		bad |= unique_names(ld, g) != 0;
	if (!bad)
		validate(ld, obj, seen, g, out);
	return bad ? -1 : 0;
}

/* --- files and the list ------------------------------------------------ */

struct file_arg {
	struct tp_layout *out;
	const struct tp_layout *prev;
	size_t n_prev;
};

static int layout_doc(struct ld *ld, const cJSON *root, void *arg)
{
	struct file_arg *a = arg;

	return cfg_layout_parse(ld, root, a->out, a->prev, a->n_prev);
}

int cfg_layout_file(struct ld *ld, struct ld *ref, const cJSON *ref_node,
                    struct tp_layout *out, const struct tp_layout *prev,
                    size_t n_prev)
{
	struct file_arg a = {out, prev, n_prev};
	size_t len = 0, before = cfg_nerr(ld->errs);
	char *text;
	int rc;

	memset(out, 0, sizeof(*out));
	text = cfg_read_file(ld->file, CFG_MAX_LAYOUT_BYTES, &len);
	if (text == NULL) {
		const char *why = errno == EFBIG
		                      ? "larger than 262144 bytes "
		                        "(a layout file may be at most 256 KiB)"
		                      : strerror(errno);

		if (ref != NULL)
			ld_err(ref, ref_node, 0,
			       "cannot read layout file "
			       "\"%s\": %s",
			       ld->file, why);
		else
			cfg_err_plain(ld->errs, "%s: cannot read: %s", ld->file,
			              why);
		return -1;
	}
	rc = cfg_with_text(ld, text, len, layout_doc, &a);
	free(text);
	if (rc != 0 && cfg_nerr(ld->errs) == before)
		cfg_err_plain(ld->errs, "%s: layout not loaded", ld->file);
	return rc;
}

static int layout_item(struct ld *ld, const cJSON *el, struct config *c,
                       size_t i)
{
	struct ld *sub;
	char found[96];
	int rc;

	if (cJSON_IsObject(el))
		return cfg_layout_parse(ld, el, &c->layouts[i], c->layouts, i);
	if (!cJSON_IsString(el) || el->valuestring[0] == '\0') {
		ld_err(ld, el, 0,
		       "found %s; expected a layout file path or a"
		       " layout object",
		       ld_found(el, found, sizeof(found)));
		return -1;
	}
	sub = calloc(1, sizeof(*sub));
	if (sub == NULL) {
		ld_err(ld, el, 0, "out of memory");
		return -1;
	}
	sub->file = ld_path(ld, el, el->valuestring);
	sub->errs = ld->errs;
	sub->mem = ld->mem;
	memcpy(sub->path, ld->path, sizeof(sub->path));
	sub->plen = ld->plen;
	rc = sub->file == NULL
	         ? -1
	         : cfg_layout_file(sub, ld, el, &c->layouts[i], c->layouts, i);
	free(sub);
	return rc;
}

int cfg_layouts(struct ld *ld, const cJSON *list, struct config *c)
{
	const cJSON *el;
	size_t n, i = 0, old = ld_key(ld, "layouts"), o2;
	int bad = 0;

	n = cJSON_IsArray(list) ? (size_t)cJSON_GetArraySize(list) : 0;
	if (n == 0 || n > CFG_MAX_LAYOUTS) {
		ld_err(ld, list, 0,
		       "expected a list of 1..%d layouts (file "
		       "paths or layout objects)",
		       CFG_MAX_LAYOUTS);
		ld_pop(ld, old);
		return -1;
	}
	c->layouts = arena_alloc(ld->mem, n * sizeof(*c->layouts));
	if (c->layouts == NULL) {
		ld_pop(ld, old);
		return -1;
	}
	for (el = list->child; el != NULL; el = el->next, i++) {
		o2 = ld_idx(ld, i);
		bad |= layout_item(ld, el, c, i) != 0;
		ld_pop(ld, o2);
	}
	c->n_layouts = n;
	ld_pop(ld, old);
	if (bad)
		return -1;
	return cfg_layout_ptrs(ld->mem, c);
}

int cfg_layout_ptrs(struct arena *mem, struct config *c)
{
	size_t i;

	c->layout_ptrs =
	    arena_alloc(mem, (c->n_layouts + 1) * sizeof(*c->layout_ptrs));
	if (c->layout_ptrs == NULL)
		return -1;
	for (i = 0; i < c->n_layouts; i++)
		c->layout_ptrs[i] = &c->layouts[i];
	return 0;
}

/* --- value names -------------------------------------------------------- */

static void add_names(const struct tp_field *f, size_t n, const char **out,
                      size_t *k)
{
	size_t i;

	for (i = 0; i < n; i++)
		if (f[i].name != NULL && f[i].role == TP_ROLE_VALUE &&
		    f[i].type != TP_T_SKIP)
			out[(*k)++] = f[i].name;
}

/* Value names: role-less fields of every layout, then the values the
 * derive stage can add (from the library, so the two cannot drift). */
const char **cfg_value_names(struct ld *ld, const struct config *c, size_t *n)
{
	const struct tp_derived_info *d;
	const char **out;
	size_t i, k = 0;

	out = arena_alloc(ld->mem,
	                  (c->n_layouts * 2 * TP_MAX_FIELDS + TP_DV_N + 1) *
	                      sizeof(*out));
	*n = 0;
	if (out == NULL)
		return NULL;
	for (i = 0; i < c->n_layouts; i++) {
		add_names(c->layouts[i].fields, c->layouts[i].n_fields, out,
		          &k);
		if (c->layouts[i].has_records)
			add_names(c->layouts[i].records.fields,
			          c->layouts[i].records.n_fields, out, &k);
	}
	for (i = 0; i < TP_DV_N; i++) {
		d = tp_derived_describe((enum tp_derived)i);
		if (d != NULL && d->name != NULL)
			out[k++] = d->name;
	}
	*n = k;
	return out;
}

/* Is names[i] among names[0..i-1]?  (A field may share a derived
 * value's name, e.g. "ph".) */
static bool listed_before(const char *const *names, size_t i)
{
	size_t j;

	for (j = 0; j < i; j++)
		if (strcmp(names[j], names[i]) == 0)
			return true;
	return false;
}

static void put_name(char *list, size_t cap, const char *name)
{
	size_t len = strlen(list);

	if (len + 1 < cap)
		snprintf(list + len, cap - len, "%s%s", len ? " " : "", name);
}

int cfg_check_value(struct ld *ld, const cJSON *node, int at_key,
                    const char *name, const struct config *c)
{
	const char **names, *s;
	char list[400] = "";
	size_t n, i;

	if (!ld->layouts_ok)
		return 0;
	if (ld->vnames == NULL) /* once per config: arena memory */
		ld->vnames = cfg_value_names(ld, c, &ld->n_vnames);
	names = ld->vnames;
	n = ld->n_vnames;
	if (names == NULL)
		return -1;
	for (i = 0; i < n; i++) {
		if (strcmp(names[i], name) == 0)
			return 0;
		if (!listed_before(names, i))
			put_name(list, sizeof(list), names[i]);
	}
	s = opt_suggest(name, names, n);
	ld_err(ld, node, at_key, "unknown value \"%s\"%s%s%s valid: %s", name,
	       s ? "; did you mean \"" : "", s ? s : "", s ? "\"?" : ";", list);
	return -1;
}
