/*
 * jsonpos.c - comment stripping, text checks and the position index of a
 * JSON document (see jsonpos.h).
 */
#include "jsonpos.h"

#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

struct walk {
	struct jpos *jp;
	jpos_report_fn *report;
	void *ctx;
	char path[JPOS_PATH_MAX];
	size_t plen;
	int problems;
	int oom;
};

/* A key seen in one object: its name and where its key starts. */
struct seen_key {
	const char *name;
	size_t off;
};

/* --- stripping ------------------------------------------------------ */

/* Blank a block comment starting at i ("/" "*"); keep newlines.  Returns
 * the index after it, or 0 when it is not closed. */
static size_t blank_block(char *t, size_t len, size_t i)
{
	size_t j = i + 2;

	t[i] = ' ';
	t[i + 1] = ' ';
	while (j + 1 < len && !(t[j] == '*' && t[j + 1] == '/')) {
		if (t[j] != '\n')
			t[j] = ' ';
		j++;
	}
	if (j + 1 >= len)
		return 0;
	t[j] = ' ';
	t[j + 1] = ' ';
	return j + 2;
}

/* Blank a line comment starting at i; the newline stays. */
static size_t blank_line(char *t, size_t len, size_t i)
{
	while (i < len && t[i] != '\n') {
		t[i] = ' ';
		i++;
	}
	return i;
}

/* Index after the string starting at t[i] == '"' (or len). */
static size_t skip_string_n(const char *t, size_t len, size_t i)
{
	i++;
	while (i < len && t[i] != '"') {
		if (t[i] == '\\')
			i++;
		i++;
	}
	return i < len ? i + 1 : len;
}

/* Strip comments and count nesting.  Returns -1 after a report. */
static int strip(struct jpos *jp, jpos_report_fn *report, void *ctx)
{
	char *t = jp->text;
	size_t i = 0, len = jp->len, start;
	int depth = 0;

	while (i < len) {
		start = i;
		if (t[i] == '"') {
			i = skip_string_n(t, len, i);
		} else if (t[i] == '/' && i + 1 < len && t[i + 1] == '/') {
			i = blank_line(t, len, i);
		} else if (t[i] == '/' && i + 1 < len && t[i + 1] == '*') {
			i = blank_block(t, len, i);
			if (i == 0) {
				report(ctx, start, "",
				       "unterminated /* comment;"
				       " a block comment ends with */");
				return -1;
			}
		} else {
			if (t[i] == '{' || t[i] == '[')
				depth++;
			else if ((t[i] == '}' || t[i] == ']') && depth > 0)
				depth--;
			if (depth > JPOS_MAX_DEPTH) {
				report(ctx, i, "",
				       "nesting deeper than 32 levels;"
				       " at most 32 nested objects and lists");
				return -1;
			}
			i++;
		}
	}
	return 0;
}

int jpos_prepare(struct jpos *jp, const char *text, size_t len,
                 jpos_report_fn *report, void *ctx)
{
	const char *nul;

	memset(jp, 0, sizeof(*jp));
	jp->orig = text;
	jp->len = len;
	nul = memchr(text, 0, len);
	if (nul != NULL) {
		report(ctx, (size_t)(nul - text), "",
		       "NUL byte (0x00) in the"
		       " text; JSON text may not contain NUL bytes");
		return -1;
	}
	jp->text = malloc(len + 1);
	if (jp->text == NULL) {
		report(ctx, 0, "", "out of memory");
		return -1;
	}
	memcpy(jp->text, text, len);
	jp->text[len] = '\0';
	if (len >= 3 && memcmp(text, "\xEF\xBB\xBF", 3) == 0)
		memset(jp->text, ' ', 3); /* a UTF-8 byte order mark */
	return strip(jp, report, ctx);
}

/* --- syntax errors -------------------------------------------------- */

static char prev_char(const char *t, size_t off)
{
	while (off > 0) {
		off--;
		if ((unsigned char)t[off] > 32)
			return t[off];
	}
	return '\0';
}

void jpos_syntax(const struct jpos *jp, size_t off, jpos_report_fn *report,
                 void *ctx)
{
	char what[160];
	char c, p;

	while (off < jp->len && (unsigned char)jp->text[off] <= 32)
		off++;
	if (off >= jp->len) {
		report(ctx, jp->len, "",
		       "unexpected end of text; the JSON is"
		       " incomplete (a missing '}' or ']'?)");
		return;
	}
	c = jp->text[off];
	p = prev_char(jp->text, off);
	if ((c == '}' || c == ']') && p == ',')
		snprintf(what, sizeof(what),
		         "trailing comma before '%c';"
		         " JSON allows no comma after the last item",
		         c);
	else if (c == '"' && p != '\0' && strchr("\"}]0123456789el", p))
		snprintf(what, sizeof(what),
		         "unexpected '\"'; a ',' is"
		         " missing between two items");
	else if (c == '\'')
		snprintf(what, sizeof(what),
		         "unexpected \"'\"; JSON strings"
		         " and keys use double quotes");
	else if ((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c == '_')
		snprintf(what, sizeof(what),
		         "unexpected '%c'; strings and"
		         " keys need double quotes (words allowed: true false"
		         " null)",
		         c);
	else if ((unsigned char)c > 32 && (unsigned char)c < 127)
		snprintf(what, sizeof(what),
		         "unexpected '%c'; expected a"
		         " JSON value, ',', ':' or a closing bracket",
		         c);
	else
		snprintf(what, sizeof(what),
		         "unexpected byte 0x%02X; expected"
		         " JSON text",
		         (unsigned)(unsigned char)c);
	report(ctx, off, "", what);
}

/* --- UTF-8 ---------------------------------------------------------- */

/* Length of the valid UTF-8 sequence at p (n bytes left), 0 if bad. */
static size_t seq_len(const unsigned char *p, size_t n)
{
	unsigned lo = 0x80, hi = 0xBF;
	size_t k, j;

	if (p[0] < 0x80)
		return 1;
	if (p[0] >= 0xC2 && p[0] <= 0xDF)
		k = 2;
	else if (p[0] >= 0xE0 && p[0] <= 0xEF)
		k = 3;
	else if (p[0] >= 0xF0 && p[0] <= 0xF4)
		k = 4;
	else
		return 0;
	if (p[0] == 0xE0)
		lo = 0xA0; /* overlong */
	else if (p[0] == 0xED)
		hi = 0x9F; /* UTF-16 surrogates */
	else if (p[0] == 0xF0)
		lo = 0x90; /* overlong */
	else if (p[0] == 0xF4)
		hi = 0x8F; /* above U+10FFFF */
	if (n < k || p[1] < lo || p[1] > hi)
		return 0;
	for (j = 2; j < k; j++)
		if ((p[j] & 0xC0) != 0x80)
			return 0;
	return k;
}

size_t jpos_utf8_check(const char *s, size_t n)
{
	size_t i = 0, k;

	while (i < n) {
		k = seq_len((const unsigned char *)s + i, n - i);
		if (k == 0)
			return i;
		i += k;
	}
	return n;
}

/* --- the index ------------------------------------------------------ */

static size_t ws(const char *t, size_t i)
{
	while (t[i] != '\0' && (unsigned char)t[i] <= 32)
		i++;
	return i;
}

static size_t scalar_end(const char *t, size_t i)
{
	while ((unsigned char)t[i] > 32 && t[i] != ',' && t[i] != ']' &&
	       t[i] != '}')
		i++;
	return i;
}

static int add(struct walk *w, const cJSON *node, size_t val, size_t key)
{
	struct jpos *jp = w->jp;
	struct jpos_ent *e;
	size_t cap;

	if (jp->n == jp->cap) {
		cap = jp->cap == 0 ? 64 : jp->cap * 2;
		if (cap > jp->len + 1)
			cap = jp->len + 1; /* a node takes >= 1 byte */
		if (cap <= jp->n) {
			w->oom = 1;
			return -1;
		}
		e = realloc(jp->ent, cap * sizeof(*e));
		if (e == NULL) {
			w->oom = 1;
			return -1;
		}
		jp->ent = e;
		jp->cap = cap;
	}
	jp->ent[jp->n].node = (uintptr_t)node;
	jp->ent[jp->n].val_off = (uint32_t)val;
	jp->ent[jp->n].key_off = (uint32_t)key;
	jp->n++;
	return 0;
}

/* Append ".key" or "[i]" to the path; returns the old length. */
static size_t push(struct walk *w, const char *key, int idx)
{
	size_t old = w->plen, room = sizeof(w->path) - old;
	int k;

	if (key != NULL)
		k = snprintf(w->path + old, room, "%s%s", old ? "." : "", key);
	else
		k = snprintf(w->path + old, room, "[%d]", idx);
	if (k < 0 || (size_t)k >= room)
		w->plen = sizeof(w->path) - 1;
	else
		w->plen = old + (size_t)k;
	return old;
}

static void pop(struct walk *w, size_t old)
{
	w->plen = old;
	w->path[old] = '\0';
}

/* Report invalid UTF-8 in the string literal at t[i] == '"'. */
static void check_string(struct walk *w, size_t i, const char *what)
{
	const char *t = w->jp->text;
	size_t end = skip_string_n(t, w->jp->len, i);
	size_t n = end > i + 1 ? end - i - 2 : 0, bad;
	char msg[128];

	bad = jpos_utf8_check(t + i + 1, n);
	if (bad == n)
		return;
	snprintf(msg, sizeof(msg),
	         "invalid UTF-8 (byte 0x%02X) in %s;"
	         " text must be UTF-8",
	         (unsigned)(unsigned char)t[i + 1 + bad], what);
	w->report(w->ctx, i + 1 + bad, w->path, msg);
	w->problems++;
}

static int cmp_key(const void *a, const void *b)
{
	const struct seen_key *x = a, *y = b;
	int c = strcmp(x->name, y->name);

	if (c != 0)
		return c;
	return x->off < y->off ? -1 : x->off > y->off;
}

/* Sort the keys of one object and report every repeated one. */
static void check_dups(struct walk *w, struct seen_key *k, size_t n)
{
	char msg[96];
	unsigned line, col;
	size_t i, first = 0, old;

	qsort(k, n, sizeof(*k), cmp_key);
	for (i = 1; i < n; i++) {
		if (strcmp(k[i].name, k[first].name) != 0) {
			first = i;
			continue;
		}
		jpos_linecol(w->jp, k[first].off, &line, &col);
		snprintf(msg, sizeof(msg),
		         "duplicate key (first at %u:%u);"
		         " each key may appear once",
		         line, col);
		old = push(w, k[i].name, 0);
		w->report(w->ctx, k[i].off, w->path, msg);
		pop(w, old);
		w->problems++;
	}
}

static size_t walk_value(struct walk *w, const cJSON *node, size_t i,
                         size_t key_off);

static size_t walk_object(struct walk *w, const cJSON *node, size_t i)
{
	const char *t = w->jp->text;
	const cJSON *c;
	struct seen_key *keys;
	size_t n = 0, old, key_off;

	keys = calloc((size_t)cJSON_GetArraySize(node) + 1, sizeof(*keys));
	if (keys == NULL) {
		w->oom = 1;
		return i;
	}
	i++;
	for (c = node->child; c != NULL && !w->oom; c = c->next) {
		key_off = ws(t, i);
		old = push(w, c->string, 0);
		check_string(w, key_off, "a key");
		keys[n].name = c->string;
		keys[n++].off = key_off;
		i = ws(t, skip_string_n(t, w->jp->len, key_off)) + 1;
		i = ws(t, walk_value(w, c, i, key_off));
		pop(w, old);
		if (t[i] == ',')
			i++;
	}
	check_dups(w, keys, n);
	free(keys);
	i = ws(t, i);
	return t[i] == '}' ? i + 1 : i;
}

static size_t walk_array(struct walk *w, const cJSON *node, size_t i)
{
	const char *t = w->jp->text;
	const cJSON *c;
	size_t old;
	int k = 0;

	i++;
	for (c = node->child; c != NULL && !w->oom; c = c->next) {
		old = push(w, NULL, k++);
		i = ws(t, walk_value(w, c, i, (size_t)-1));
		pop(w, old);
		if (t[i] == ',')
			i++;
	}
	i = ws(t, i);
	return t[i] == ']' ? i + 1 : i;
}

static size_t walk_value(struct walk *w, const cJSON *node, size_t i,
                         size_t key_off)
{
	const char *t = w->jp->text;

	i = ws(t, i);
	if (add(w, node, i, key_off == (size_t)-1 ? i : key_off) != 0)
		return i;
	if (cJSON_IsObject(node))
		return walk_object(w, node, i);
	if (cJSON_IsArray(node))
		return walk_array(w, node, i);
	if (cJSON_IsString(node)) {
		check_string(w, i, "a string");
		return skip_string_n(t, w->jp->len, i);
	}
	return scalar_end(t, i);
}

static int cmp_ent(const void *a, const void *b)
{
	const struct jpos_ent *x = a, *y = b;

	return x->node < y->node ? -1 : x->node > y->node;
}

int jpos_index(struct jpos *jp, const cJSON *root, jpos_report_fn *report,
               void *ctx)
{
	struct walk w;

	memset(&w, 0, sizeof(w));
	w.jp = jp;
	w.report = report;
	w.ctx = ctx;
	walk_value(&w, root, 0, (size_t)-1);
	if (w.oom) {
		report(ctx, 0, "", "out of memory");
		return -1;
	}
	qsort(jp->ent, jp->n, sizeof(*jp->ent), cmp_ent);
	return w.problems;
}

size_t jpos_offset(const struct jpos *jp, const cJSON *node, int key)
{
	struct jpos_ent k = {0, 0, 0}, *e;

	if (jp->n == 0 || node == NULL)
		return 0;
	k.node = (uintptr_t)node;
	e = bsearch(&k, jp->ent, jp->n, sizeof(*jp->ent), cmp_ent);
	if (e == NULL)
		return 0;
	return key ? e->key_off : e->val_off;
}

void jpos_linecol(const struct jpos *jp, size_t off, unsigned *line,
                  unsigned *col)
{
	size_t i;
	unsigned l = 1, c = 1;

	if (off > jp->len)
		off = jp->len;
	for (i = 0; i < off; i++) {
		if (jp->orig[i] == '\n') {
			l++;
			c = 1;
		} else if (((unsigned char)jp->orig[i] & 0xC0) != 0x80) {
			c++;
		}
	}
	*line = l;
	*col = c;
}

void jpos_free(struct jpos *jp)
{
	if (jp == NULL)
		return;
	free(jp->text);
	free(jp->ent);
	jp->text = NULL;
	jp->ent = NULL;
	jp->n = 0;
	jp->cap = 0;
}
