/*
 * postbody.c - see postbody.h.
 */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "emit.h"
#include "postbody.h"

#define ONE_MAX     (64u * 1024u)  /* one reading after transforms */
#define QUANT_MAX   (128u * 1024u) /* the quantities members */
#define DEFAULT_MAX (256u * 1024u)

static const char BATCH_HEAD[] = "{\"readings\":[";
static const char BATCH_MID[] = "],\"quantities\":{";
static const char BATCH_END[] = "}}";

const char *postbody_content_type(enum cfg_format f)
{
	return f == CFG_FMT_NDJSON ? "application/x-ndjson"
	                           : "application/json";
}

static bool layout_find(const struct tp_field *fs, size_t n, const char *name,
                        const char **unit, const char **std)
{
	size_t i;

	for (i = 0; i < n; i++) {
		if (!emit_is_value(&fs[i]) || strcmp(fs[i].name, name) != 0)
			continue;
		*unit = fs[i].unit;
		*std = fs[i].standard_name;
		return true;
	}
	return false;
}

bool postbody_quantity(const struct config *cfg, const char *name,
                       const char **unit, const char **standard_name)
{
	const struct tp_layout *l;
	size_t i;

	*unit = *standard_name = NULL;
	for (i = 0; cfg != NULL && i < cfg->n_layouts; i++) {
		l = &cfg->layouts[i];
		if (layout_find(l->fields, l->n_fields, name, unit,
		                standard_name))
			return true;
		if (l->has_records &&
		    layout_find(l->records.fields, l->records.n_fields, name,
		                unit, standard_name))
			return true;
	}
	return false;
}

int postbody_init(struct postbody *pb, const struct cfg_output *o,
                  const struct config *cfg, size_t max_bytes, char *err,
                  size_t errcap)
{
	size_t i;

	memset(pb, 0, sizeof *pb);
	pb->o = o;
	pb->cfg = cfg;
	pb->format = o->format;
	pb->transform = o->n_rename > 0 || o->n_extra > 0;
	pb->max_bytes = max_bytes > 0 ? max_bytes : DEFAULT_MAX;
	buf_init(&pb->body, pb->max_bytes + ONE_MAX + QUANT_MAX);
	buf_init(&pb->one, ONE_MAX);
	buf_init(&pb->quant, QUANT_MAX);
	pb->names = calloc(POSTBODY_NAMES_MAX, sizeof(*pb->names));
	pb->extra = calloc(o->n_extra + 1, sizeof(*pb->extra));
	if (pb->names == NULL || pb->extra == NULL) {
		snprintf(err, errcap, "post: %s: out of memory", o->name);
		goto out_free;
	}
	for (i = 0; i < o->n_extra; i++) {
		pb->extra[i] = cJSON_Parse(o->extra[i].value);
		if (pb->extra[i] == NULL) {
			snprintf(err, errcap,
			         "post: %s: extra.%s: not a JSON"
			         " value",
			         o->name, o->extra[i].key);
			goto out_free;
		}
	}
	postbody_begin(pb);
	return 0;
out_free:
	postbody_free(pb);
	errno = EINVAL;
	return -1;
}

void postbody_free(struct postbody *pb)
{
	size_t i;

	if (pb == NULL)
		return;
	for (i = 0; pb->extra != NULL && pb->o != NULL && i < pb->o->n_extra;
	     i++)
		cJSON_Delete(pb->extra[i]);
	free(pb->extra);
	free(pb->names);
	buf_free(&pb->body);
	buf_free(&pb->one);
	buf_free(&pb->quant);
	memset(pb, 0, sizeof *pb);
}

void postbody_begin(struct postbody *pb)
{
	buf_reset(&pb->body);
	buf_reset(&pb->quant);
	pb->n = 0;
	pb->n_names = 0;
	pb->hint = 0;
	pb->finished = false;
	if (pb->format == CFG_FMT_BATCH)
		buf_adds(&pb->body, BATCH_HEAD);
}

static const char *renamed(const struct cfg_output *o, const char *name)
{
	size_t i;

	for (i = 0; i < o->n_rename; i++)
		if (strcmp(o->rename[i].key, name) == 0)
			return o->rename[i].value;
	return name;
}

/* Rename the members of obj (values or flags), keeping their order. */
static int rename_members(const struct cfg_output *o, cJSON *obj)
{
	cJSON *fresh, *c;

	if (!cJSON_IsObject(obj) || o->n_rename == 0)
		return 0;
	fresh = cJSON_CreateObject();
	if (fresh == NULL)
		return -1;
	while (obj->child != NULL) {
		c = cJSON_DetachItemViaPointer(obj, obj->child);
		if (!cJSON_AddItemToObject(fresh, renamed(o, c->string), c)) {
			cJSON_Delete(c);
			cJSON_Delete(fresh);
			return -1;
		}
	}
	obj->child = fresh->child;
	fresh->child = NULL;
	cJSON_Delete(fresh);
	return 0;
}

static int transform(struct postbody *pb, cJSON *root)
{
	const struct cfg_output *o = pb->o;
	cJSON *dup;
	size_t i;

	if (rename_members(o,
	                   cJSON_GetObjectItemCaseSensitive(root, "values")) ||
	    rename_members(o, cJSON_GetObjectItemCaseSensitive(root, "flags")))
		return -1;
	for (i = 0; i < o->n_extra; i++) {
		if (cJSON_GetObjectItemCaseSensitive(root, o->extra[i].key))
			continue; /* never replace the reading's own */
		dup = cJSON_Duplicate(pb->extra[i], 1);
		if (dup == NULL ||
		    !cJSON_AddItemToObject(root, o->extra[i].key, dup)) {
			cJSON_Delete(dup);
			return -1;
		}
	}
	return 0;
}

/* Is name among pb->names?  Readings of a batch name their values in
 * the same order, so the name after the last one found is tried first:
 * one comparison per name instead of a search. */
static bool have_name(struct postbody *pb, const char *name)
{
	size_t i;

	if (pb->hint < pb->n_names && strcmp(pb->names[pb->hint], name) == 0) {
		pb->hint++;
		return true;
	}
	for (i = 0; i < pb->n_names; i++) {
		if (strcmp(pb->names[i], name) == 0) {
			pb->hint = i + 1;
			return true;
		}
	}
	return false;
}

/* One "name":{"unit":..,"standard_name":..} member for a new name. */
static void add_quantity(struct postbody *pb, const char *name)
{
	const char *sent = renamed(pb->o, name), *unit, *std;

	if (have_name(pb, sent) || strlen(sent) > POSTBODY_NAME_MAX ||
	    pb->n_names == POSTBODY_NAMES_MAX)
		return;
	/* remembered with or without a quantity, so it is looked up once */
	memcpy(pb->names[pb->n_names++], sent, strlen(sent) + 1);
	pb->hint = pb->n_names;
	if (!postbody_quantity(pb->cfg, name, &unit, &std) ||
	    (unit == NULL && std == NULL))
		return;
	if (pb->quant.len > 0)
		buf_addc(&pb->quant, ',');
	emit_json_string(&pb->quant, sent);
	buf_addc(&pb->quant, ':');
	buf_addc(&pb->quant, '{');
	if (unit != NULL) {
		buf_adds(&pb->quant, "\"unit\":");
		emit_json_string(&pb->quant, unit);
	}
	if (std != NULL) {
		buf_adds(&pb->quant, unit != NULL ? "," : "");
		buf_adds(&pb->quant, "\"standard_name\":");
		emit_json_string(&pb->quant, std);
	}
	buf_addc(&pb->quant, '}');
}

static void add_quantities(struct postbody *pb, const cJSON *values)
{
	const cJSON *c;

	cJSON_ArrayForEach(c, values)
	{
		add_quantity(pb, c->string);
	}
}

/* Is the k bytes at s the name have_name would try first (and the
 * output renames nothing)?  Then it is known, and the hint moves on:
 * most names of a batch are found here, without copying them. */
static bool next_name(struct postbody *pb, const char *s, size_t k)
{
	const char *n;

	if (pb->o->n_rename > 0 || pb->hint >= pb->n_names)
		return false;
	n = pb->names[pb->hint];
	if (memcmp(n, s, k) != 0 || n[k] != '\0')
		return false;
	pb->hint++;
	return true;
}

/* A character of a JSON number or of null (scan_values). */
static inline bool in_number(char c)
{
	return (c >= '0' && c <= '9') || c == '-' || c == '+' || c == '.' ||
	       c == 'e' || c == 'E' || c == 'n' || c == 'u' || c == 'l';
}

/*
 * The fast path for a reading tidepost wrote itself: the keys of its
 * "values" object, whose members are plain names (no escapes) holding
 * numbers or null.  Returns false when the text is not of that simple
 * shape; the caller then parses it with cJSON (names added so far are
 * not added twice: add_quantity skips known names).
 */
static bool scan_values(struct postbody *pb, const char *json, size_t len)
{
	static const char key[] = "\"values\":{";
	const char *p = memmem(json, len, key, sizeof(key) - 1);
	const char *end = json + len, *q;
	char name[POSTBODY_NAME_MAX + 1];
	size_t k;

	if (p == NULL)
		return false;
	for (p += sizeof(key) - 1; p < end && *p != '}'; p = q + 1) {
		if (*p != '"')
			return false;
		for (k = 0, p++; p + k < end && p[k] != '"'; k++)
			if (p[k] == '\\' || k == POSTBODY_NAME_MAX)
				return false;
		if (p + k + 1 >= end || p[k + 1] != ':' || k == 0)
			return false;
		if (!next_name(pb, p, k)) {
			memcpy(name, p, k);
			name[k] = '\0';
			add_quantity(pb, name);
		}
		q = p + k + 2;
		while (q < end && in_number(*q))
			q++;
		if (q >= end || (*q != ',' && *q != '}'))
			return false;
		if (*q == '}')
			q--;
	}
	return p < end;
}

static bool looks_like_object(const char *json, size_t len)
{
	size_t i = 0;

	while (i < len && strchr(" \t\r\n", json[i]) != NULL && json[i])
		i++;
	return i < len && json[i] == '{' && memchr(json, '\0', len) == NULL;
}

/* One JSON object whose braces and brackets balance outside strings, with
 * nothing after it but blanks?  Checked without allocating, to tell a
 * parse that ran out of memory from a text that is not JSON at all. */
static bool balanced_object(const char *json, size_t len)
{
	size_t i = 0, depth = 0;
	bool in_str = false;

	while (i < len && strchr(" \t\r\n", json[i]) != NULL && json[i])
		i++;
	if (i == len || json[i] != '{')
		return false;
	for (; i < len; i++) {
		char c = json[i];

		if (in_str) {
			if (c == '\\')
				i++;
			else if (c == '"')
				in_str = false;
		} else if (c == '"') {
			in_str = true;
		} else if (c == '{' || c == '[') {
			depth++;
		} else if ((c == '}' || c == ']') && depth-- == 1) {
			break;
		}
	}
	for (i = i < len ? i + 1 : i; i < len; i++)
		if (strchr(" \t\r\n", json[i]) == NULL || json[i] == '\0')
			return false;
	return depth == 0 && !in_str;
}

/* Put the reading as it will be sent into pb->one; new quantities into
 * pb->quant (batch format). */
static enum postbody_rc render(struct postbody *pb, const char *json,
                               size_t len)
{
	cJSON *root;
	char *txt;

	buf_reset(&pb->one);
	if (!pb->transform && pb->format == CFG_FMT_BATCH &&
	    looks_like_object(json, len) && scan_values(pb, json, len)) {
		buf_add(&pb->one, json, len); /* byte for byte */
		return buf_failed(&pb->one) ? POSTBODY_NOMEM : POSTBODY_OK;
	}
	if (!pb->transform && pb->format != CFG_FMT_BATCH) {
		if (!looks_like_object(json, len))
			return POSTBODY_BAD;
		buf_add(&pb->one, json, len);
		return buf_failed(&pb->one) ? POSTBODY_NOMEM : POSTBODY_OK;
	}
	root = cJSON_ParseWithLength(json, len);
	if (root == NULL && balanced_object(json, len))
		return POSTBODY_NOMEM; /* our own readings parse: out of memory
		                        * is the likely cause, so retry later
		                        * rather than dead-letter real data */
	if (!cJSON_IsObject(root)) {
		cJSON_Delete(root);
		return POSTBODY_BAD;
	}
	if (pb->format == CFG_FMT_BATCH)
		add_quantities(
		    pb, cJSON_GetObjectItemCaseSensitive(root, "values"));
	if (!pb->transform) {
		buf_add(&pb->one, json, len); /* byte for byte */
	} else if (transform(pb, root) != 0 ||
	           (txt = cJSON_PrintUnformatted(root)) == NULL) {
		cJSON_Delete(root);
		return POSTBODY_NOMEM;
	} else {
		buf_adds(&pb->one, txt);
		cJSON_free(txt);
	}
	cJSON_Delete(root);
	return buf_failed(&pb->one) ? POSTBODY_NOMEM : POSTBODY_OK;
}

/* Bytes the body would have, finished, with pb->one added. */
static size_t size_with_one(const struct postbody *pb)
{
	size_t n = pb->body.len + pb->one.len;

	if (pb->format == CFG_FMT_BATCH)
		return n + (pb->n > 0) + strlen(BATCH_MID) + pb->quant.len +
		       strlen(BATCH_END);
	return n + (pb->format == CFG_FMT_NDJSON);
}

enum postbody_rc postbody_add(struct postbody *pb, const char *json, size_t len)
{
	size_t qlen = pb->quant.len, names = pb->n_names;
	enum postbody_rc rc;

	if (pb->finished || (pb->format == CFG_FMT_SINGLE && pb->n > 0))
		return POSTBODY_FULL;
	rc = render(pb, json, len);
	if (rc == POSTBODY_OK && pb->n > 0 && size_with_one(pb) > pb->max_bytes)
		rc = POSTBODY_FULL;
	if (rc != POSTBODY_OK) {
		buf_trim(&pb->quant, pb->quant.len - qlen);
		pb->n_names = names;
		return rc;
	}
	if (pb->format == CFG_FMT_BATCH && pb->n > 0)
		buf_addc(&pb->body, ',');
	buf_add(&pb->body, pb->one.data, pb->one.len);
	if (pb->format == CFG_FMT_NDJSON)
		buf_addc(&pb->body, '\n');
	pb->n++;
	return buf_failed(&pb->body) || buf_failed(&pb->quant) ? POSTBODY_NOMEM
	                                                       : POSTBODY_OK;
}

int postbody_finish(struct postbody *pb)
{
	if (!pb->finished && pb->format == CFG_FMT_BATCH) {
		buf_adds(&pb->body, BATCH_MID);
		buf_add(&pb->body, pb->quant.data, pb->quant.len);
		buf_adds(&pb->body, BATCH_END);
	}
	pb->finished = true;
	if (buf_failed(&pb->body) || buf_failed(&pb->quant)) {
		errno = ENOMEM;
		return -1;
	}
	return 0;
}

const char *postbody_data(const struct postbody *pb)
{
	return buf_str(&pb->body);
}

size_t postbody_len(const struct postbody *pb)
{
	return pb->body.len;
}

size_t postbody_count(const struct postbody *pb)
{
	return pb->n;
}
