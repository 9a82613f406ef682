/*
 * cfgread.c - the table-driven reader: one JSON object checked and stored
 * by its option table (types, ranges, words, defaults, unknown keys with
 * suggestions, keys of another kind, missing required keys).  See
 * opt_apply in cfgload.h; the tables are in options.c.
 */
#include <math.h>
#include <stdint.h>
#include <string.h>
#include <strings.h>

#include "cfgload.h"

#define K(i) (1u << (i))

static size_t count_words(const char *const *w)
{
	size_t n = 0;

	while (w != NULL && w[n] != NULL)
		n++;
	return n;
}

/* Append one word, blank-separated. */
static void put_word(char *buf, size_t cap, const char *w)
{
	size_t len = strlen(buf);

	if (len + 1 < cap)
		snprintf(buf + len, cap - len, "%s%s", len ? " " : "", w);
}

/* --- the table-driven reader ----------------------------------------- */

/* Keys people write by habit that tidepost refuses on purpose. */
static const char *const secret_keys[] = {
    "token",  "password",      "secret", "api_key",
    "apikey", "authorization", "bearer", NULL};
static const char *const tls_off_keys[] = {
    "insecure",   "verify",    "verify_tls", "ssl_verify", "verify_peer",
    "tls_verify", "no_verify", "verify_ssl", NULL};

static bool in_list(const char *s, const char *const *list)
{
	size_t i;

	for (i = 0; list[i] != NULL; i++)
		if (strcasecmp(s, list[i]) == 0)
			return true;
	return false;
}

static void unknown_key(struct ld *ld, const struct opt_table *t,
                        const cJSON *c)
{
	const char *names[CFG_MAX_OPTS + 1], *s;
	char list[512];
	size_t i;

	if (in_list(c->string, secret_keys)) {
		ld_err(ld, c, 1,
		       "a secret may not be written in the config;"
		       " give token_file (a file) or token_env (a variable)");
		return;
	}
	if (in_list(c->string, tls_off_keys)) {
		ld_err(ld, c, 1,
		       "TLS certificate verification cannot be"
		       " turned off; to trust a private CA give ca_file");
		return;
	}
	list[0] = '\0';
	for (i = 0; i < t->n && i < CFG_MAX_OPTS; i++) {
		names[i] = t->opt[i].name;
		put_word(list, sizeof(list), names[i]);
	}
	s = opt_suggest(c->string, names, i);
	if (s != NULL)
		ld_err(ld, c, 1, "unknown key; did you mean \"%s\"?", s);
	else
		ld_err(ld, c, 1, "unknown key; valid: %s", list);
}

static void not_for_kind(struct ld *ld, const struct opt_table *t,
                         const struct opt *o, const cJSON *c, int kind)
{
	char users[96] = "";
	size_t i;

	for (i = 0; t->kinds[i] != NULL; i++)
		if (o->kinds & K(i))
			snprintf(users + strlen(users),
			         sizeof(users) - strlen(users), "%s%s",
			         users[0] ? " " : "", t->kinds[i]);
	ld_err(ld, c, 1, "not used by kind \"%s\"; used by: %s", t->kinds[kind],
	       users);
}

static void type_error(struct ld *ld, const struct opt *o, const cJSON *c)
{
	char valid[256], found[96];

	opt_describe(o, valid, sizeof(valid));
	ld_err(ld, c, 0, "found %s; expected %s",
	       ld_found(c, found, sizeof(found)), valid);
}

static int get_number(struct ld *ld, const struct opt *o, const cJSON *c,
                      double *d)
{
	char valid[256];

	if (!cJSON_IsNumber(c) || !isfinite(c->valuedouble)) {
		type_error(ld, o, c);
		return -1;
	}
	*d = c->valuedouble;
	opt_describe(o, valid, sizeof(valid));
	if (o->type != OPT_NUM && *d != floor(*d)) {
		ld_err(ld, c, 0, "%.15g is not a whole number; expected %s", *d,
		       valid);
		return -1;
	}
	if (*d < o->min || *d > o->max ||
	    ((o->flags & OPT_POSITIVE) && *d <= o->min) ||
	    ((o->flags & OPT_NONZERO) && *d == 0)) {
		ld_err(ld, c, 0, "%.15g is out of range; valid: %s", *d, valid);
		return -1;
	}
	return 0;
}

static int get_word(struct ld *ld, const struct opt *o, const cJSON *c,
                    int *idx)
{
	char valid[256];
	const char *s;
	size_t i, n = count_words(o->words);

	if (!cJSON_IsString(c)) {
		type_error(ld, o, c);
		return -1;
	}
	for (i = 0; i < n; i++) {
		if (strcmp(c->valuestring, o->words[i]) == 0) {
			*idx = (int)i;
			return 0;
		}
	}
	opt_describe(o, valid, sizeof(valid));
	/* "u17" is no typo of "u16": no guesses for words with digits */
	s = strpbrk(c->valuestring, "0123456789") != NULL
	        ? NULL
	        : opt_suggest(c->valuestring, o->words, n);
	if (s != NULL)
		ld_err(ld, c, 0,
		       "unknown %s \"%s\"; did you mean \"%s\"? "
		       "valid: %s",
		       o->name, c->valuestring, s, valid);
	else
		ld_err(ld, c, 0, "unknown %s \"%s\"; valid: %s", o->name,
		       c->valuestring, valid);
	return -1;
}

static int get_range(struct ld *ld, const struct opt *o, const cJSON *c,
                     struct cfg_range *r)
{
	const cJSON *a, *b;

	a = cJSON_IsArray(c) ? c->child : NULL;
	b = a != NULL ? a->next : NULL;
	if (a == NULL || b == NULL || b->next != NULL || !cJSON_IsNumber(a) ||
	    !cJSON_IsNumber(b) || !isfinite(a->valuedouble) ||
	    !isfinite(b->valuedouble)) {
		type_error(ld, o, c);
		return -1;
	}
	if (a->valuedouble > b->valuedouble) {
		ld_err(ld, c, 0,
		       "min %.15g is above max %.15g; expected"
		       " [min, max]",
		       a->valuedouble, b->valuedouble);
		return -1;
	}
	r->set = true;
	r->min = a->valuedouble;
	r->max = b->valuedouble;
	return 0;
}

static int get_string(struct ld *ld, const struct opt *o, const cJSON *c,
                      char **out)
{
	if (!cJSON_IsString(c) || c->valuestring[0] == '\0') {
		type_error(ld, o, c);
		return -1;
	}
	if (o->type == OPT_PATH)
		*out = ld_path(ld, c, c->valuestring);
	else
		*out = arena_strdup(ld->mem, c->valuestring);
	return *out != NULL ? 0 : -1;
}

/* Check and store one member; returns -1 after a report. */
static int store(struct ld *ld, const struct opt *o, const cJSON *c, void *dst)
{
	char *p = (char *)dst + (o->off == OPT_NOWHERE ? 0 : o->off);
	double d = 0;
	int w = 0;
	char *s = NULL;
	int rc = 0;

	switch (o->type) {
	case OPT_BOOL:
		if (!cJSON_IsBool(c)) {
			type_error(ld, o, c);
			return -1;
		}
		*(bool *)p = cJSON_IsTrue(c);
		return 0;
	case OPT_UINT:
	case OPT_INT:
	case OPT_NUM:
		rc = get_number(ld, o, c, &d);
		if (rc == 0 && o->type == OPT_UINT)
			*(uint32_t *)p = (uint32_t)d;
		else if (rc == 0 && o->type == OPT_INT)
			*(int32_t *)p = (int32_t)d;
		else if (rc == 0)
			*(double *)p = d;
		return rc;
	case OPT_STR:
	case OPT_PATH:
		rc = get_string(ld, o, c, &s);
		if (rc == 0)
			*(char **)p = s;
		return rc;
	case OPT_WORD:
		rc = get_word(ld, o, c, &w);
		if (rc == 0)
			*(int *)p = w;
		return rc;
	case OPT_RANGE:
		return get_range(ld, o, c, (struct cfg_range *)(void *)p);
	case OPT_NODE:
		return 0;
	}
	return 0;
}

void opt_defaults(const struct opt_table *t, void *dst)
{
	const struct opt *o;
	char *p;
	size_t i;

	for (i = 0; i < t->n; i++) {
		o = &t->opt[i];
		if (o->off == OPT_NOWHERE)
			continue;
		p = (char *)dst + o->off;
		if (o->type == OPT_BOOL)
			*(bool *)p = o->def != 0;
		else if (o->type == OPT_UINT)
			*(uint32_t *)p = (uint32_t)o->def;
		else if (o->type == OPT_INT)
			*(int32_t *)p = (int32_t)o->def;
		else if (o->type == OPT_NUM)
			*(double *)p = o->def;
		else if (o->type == OPT_WORD)
			*(int *)p = (int)o->def;
	}
}

static bool applies(const struct opt *o, int kind)
{
	return kind < 0 || o->kinds == 0 || (o->kinds & K(kind)) != 0;
}

static int check_required(struct ld *ld, const struct opt_table *t,
                          const cJSON *obj, int kind, const cJSON **seen)
{
	char valid[256];
	size_t i, old;
	int bad = 0;

	for (i = 0; i < t->n; i++) {
		if (!(t->opt[i].flags & OPT_REQUIRED) || seen[i] != NULL ||
		    !applies(&t->opt[i], kind) ||
		    (kind < 0 && t->opt[i].kinds != 0))
			continue;
		opt_describe(&t->opt[i], valid, sizeof(valid));
		old = ld_key(ld, t->opt[i].name);
		ld_err(ld, obj, 0, "missing required key; expected %s (%s)",
		       valid, t->opt[i].doc);
		ld_pop(ld, old);
		bad = 1;
	}
	return bad ? -1 : 0;
}

static int apply_member(struct ld *ld, const struct opt_table *t,
                        const cJSON *c, void *dst, int kind, const cJSON **seen)
{
	const struct opt *o = opt_find(t, c->string);
	size_t i, old = ld_key(ld, c->string);
	int rc = 0;

	if (o == NULL) {
		unknown_key(ld, t, c);
		rc = -1;
	} else if (!applies(o, kind)) {
		not_for_kind(ld, t, o, c, kind);
		rc = -1;
	} else {
		i = opt_index(t, o);
		if (seen[i] == NULL) { /* a repeat is reported by jsonpos */
			seen[i] = c;
			rc = store(ld, o, c, dst);
		}
	}
	ld_pop(ld, old);
	return rc;
}

int opt_apply(struct ld *ld, const struct opt_table *t, const cJSON *obj,
              void *dst, int kind, const cJSON **seen)
{
	char found[96];
	const cJSON *c;
	int bad = 0;

	memset(seen, 0, t->n * sizeof(*seen));
	if (!cJSON_IsObject(obj)) {
		ld_err(ld, obj, 0, "found %s; expected an object (%s)",
		       ld_found(obj, found, sizeof(found)), t->where);
		return -1;
	}
	opt_defaults(t, dst);
	for (c = obj->child; c != NULL; c = c->next)
		if (apply_member(ld, t, c, dst, kind, seen) != 0)
			bad = 1;
	if (check_required(ld, t, obj, kind, seen) != 0)
		bad = 1;
	return bad ? -1 : 0;
}

int opt_peek_kind(const struct opt_table *t, const cJSON *obj)
{
	const cJSON *k = cJSON_GetObjectItemCaseSensitive(obj, "kind");
	size_t i;

	if (t->kinds == NULL || !cJSON_IsString(k))
		return -1;
	for (i = 0; t->kinds[i] != NULL; i++)
		if (strcmp(t->kinds[i], k->valuestring) == 0)
			return (int)i;
	return -1;
}

const cJSON *opt_seen(const struct opt_table *t, const cJSON **seen,
                      const char *name)
{
	const struct opt *o = opt_find(t, name);

	return o != NULL ? seen[opt_index(t, o)] : NULL;
}
