/*
 * cfgio.c - inputs, outputs and alerts: where packets come from and
 * where readings and alerts go.  Secrets never come from the config text:
 * a literal token, an Authorization header or credentials in a URL are
 * errors (token_file / token_env instead), and TLS cannot be turned off.
 */
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "cfgload.h"

/* Members every reading has (WIRE.md); `extra` may not replace them. */
static const char *const reading_members[] = {"id",     "station", "seq",
                                              "layout", "time",    "received",
                                              "values", "flags",   NULL};

static bool listed(const char *s, const char *const *list, bool icase)
{
	size_t i;

	for (i = 0; list[i] != NULL; i++)
		if ((icase ? strcasecmp(s, list[i]) : strcmp(s, list[i])) == 0)
			return true;
	return false;
}

/* A default name "<kind><index>" (e.g. "http0"). */
static char *default_name(struct ld *ld, const char *kind, size_t i)
{
	char buf[48];

	snprintf(buf, sizeof(buf), "%s%zu", kind, i);
	return arena_strdup(ld->mem, buf);
}

/* A given name: charset, and unique among n earlier names. */
static int item_name(struct ld *ld, const cJSON *node, const char *name,
                     const char *const *earlier, size_t n)
{
	size_t old = ld_key(ld, "name"), i;
	int rc = 0;

	if (!cfg_name_ok(name, 32)) {
		ld_err(ld, node, 0,
		       "bad name \"%s\"; valid: [A-Za-z0-9_.-], "
		       "1..32 characters",
		       name);
		rc = -1;
	}
	for (i = 0; rc == 0 && i < n; i++) {
		if (earlier[i] != NULL && strcmp(earlier[i], name) == 0) {
			ld_err(ld, node, 0,
			       "duplicate name \"%s\" (also item "
			       "%zu); names are unique",
			       name, i);
			rc = -1;
		}
	}
	ld_pop(ld, old);
	return rc;
}

static bool env_name_ok(const char *s)
{
	size_t i;

	if ((s[0] >= '0' && s[0] <= '9') || s[0] == '\0')
		return false;
	for (i = 0; s[i] != '\0'; i++)
		if (!((s[i] >= 'a' && s[i] <= 'z') ||
		      (s[i] >= 'A' && s[i] <= 'Z') ||
		      (s[i] >= '0' && s[i] <= '9') || s[i] == '_'))
			return false;
	return true;
}

/* --- URLs and secrets ---------------------------------------------------- */

/* Is the host of "http://HOST[:PORT]/..." a loopback name or address
 * (localhost, 127.0.0.0/8, [::1])?  Plain http stays on this machine. */
static bool loopback_host(const char *h)
{
	size_t n = strcspn(h, ":/?#");
	size_t i;

	if (strncmp(h, "[::1]", 5) == 0)
		return h[5] == '\0' || strchr(":/?#", h[5]) != NULL;
	if (n == 9 && strncasecmp(h, "localhost", 9) == 0)
		return true;
	if (n < 9 || strncmp(h, "127.", 4) != 0)
		return false;
	for (i = 4; i < n; i++)
		if (!((h[i] >= '0' && h[i] <= '9') || h[i] == '.'))
			return false;
	return true;
}

static const char *url_problem(const char *u, bool plain_ok)
{
	const char *host, *end, *q;
	size_t i;

	for (i = 0; u[i] != '\0'; i++)
		if ((unsigned char)u[i] <= 32 || u[i] == 127)
			return "a blank or control character in the URL";
	if (strncasecmp(u, "https://", 8) == 0)
		host = u + 8;
	else if (strncasecmp(u, "http://", 7) == 0 &&
	         (plain_ok || loopback_host(u + 7)))
		host = u + 7;
	else if (strncasecmp(u, "http://", 7) == 0)
		return "plain http:// to another host sends readings "
		       "unencrypted; use https:// or set allow_plain_http";
	else
		return "not an https:// URL";
	end = host + strcspn(host, "/?#");
	if (end == host)
		return "no host in the URL";
	if (memchr(host, '@', (size_t)(end - host)) != NULL)
		return "credentials in the URL; secrets come from token_file"
		       " or token_env";
	q = strchr(host, '?');
	if (q != NULL &&
	    (strcasestr(q, "token=") || strcasestr(q, "key=") ||
	     strcasestr(q, "password=") || strcasestr(q, "secret=")))
		return "a secret in the URL query; secrets come from "
		       "token_file or token_env";
	return NULL;
}

/* url, token_file/token_env of an http output or alert target. */
static int http_common(struct ld *ld, const cJSON **seen,
                       const struct opt_table *t, const char *url,
                       bool plain_ok, const char *token_env)
{
	const cJSON *u = opt_seen(t, seen, "url");
	const cJSON *te = opt_seen(t, seen, "token_env");
	const char *why = url != NULL ? url_problem(url, plain_ok) : NULL;
	size_t old;
	int bad = 0;

	if (why != NULL) {
		old = ld_key(ld, "url");
		ld_err(ld, u, 0, "%s; valid: https://HOST/PATH", why);
		ld_pop(ld, old);
		bad = 1;
	}
	if (te != NULL && opt_seen(t, seen, "token_file") != NULL) {
		old = ld_key(ld, "token_env");
		ld_err(ld, te, 1,
		       "both token_file and token_env given; give "
		       "one");
		ld_pop(ld, old);
		bad = 1;
	} else if (token_env != NULL && !env_name_ok(token_env)) {
		old = ld_key(ld, "token_env");
		ld_err(ld, te, 0,
		       "bad variable name \"%s\"; valid: "
		       "[A-Za-z_][A-Za-z0-9_]*",
		       token_env);
		ld_pop(ld, old);
		bad = 1;
	}
	return bad ? -1 : 0;
}

/* --- inputs ----------------------------------------------------------------
 */

static int input_framing(struct ld *ld, const cJSON *node, struct cfg_input *in)
{
	static const char *const names[] = {"cobs", "slip", "hex", "whole",
	                                    "fixed:N"};
	const char *s;
	char found[96];
	size_t old;
	int rc = 0;

	in->framing =
	    in->kind == CFG_IN_SPOOL ? TP_FRAMING_WHOLE : TP_FRAMING_COBS;
	if (node == NULL)
		return 0;
	old = ld_key(ld, "framing");
	if (!cJSON_IsString(node)) {
		ld_err(ld, node, 0,
		       "found %s; valid: cobs slip hex whole "
		       "fixed:N",
		       ld_found(node, found, sizeof(found)));
		rc = -1;
	} else if (tp_framing_parse(node->valuestring, &in->framing,
	                            &in->fixed_n) != TP_OK) {
		s = opt_suggest(node->valuestring, names, 5);
		ld_err(ld, node, 0,
		       "unknown framing \"%s\"%s%s%s valid: cobs"
		       " slip hex whole fixed:N (N bytes, 1..%d)",
		       node->valuestring, s ? "; did you mean \"" : "",
		       s ? s : "", s ? "\"?" : ";", TP_MAX_PACKET);
		rc = -1;
	}
	ld_pop(ld, old);
	return rc;
}

static int input_layouts(struct ld *ld, const cJSON *list,
                         const struct config *c, struct cfg_input *in)
{
	const char *names[CFG_MAX_LAYOUTS], *s;
	const cJSON *el;
	size_t n, i, k = 0, old = ld_key(ld, "layouts");
	int bad = 0;

	n = cJSON_IsArray(list) ? (size_t)cJSON_GetArraySize(list) : 0;
	in->layouts = arena_alloc(ld->mem, (n + 1) * sizeof(*in->layouts));
	if (n == 0 || in->layouts == NULL) {
		ld_err(ld, list, 0, "expected a list of layout names");
		ld_pop(ld, old);
		return -1;
	}
	for (i = 0; i < c->n_layouts; i++)
		names[i] = c->layouts[i].name;
	for (el = list->child; el != NULL && ld->layouts_ok; el = el->next) {
		for (i = 0; cJSON_IsString(el) && i < c->n_layouts; i++)
			if (strcmp(names[i], el->valuestring) == 0)
				break;
		if (cJSON_IsString(el) && i < c->n_layouts) {
			in->layouts[k++] = i;
			continue;
		}
		s = cJSON_IsString(el)
		        ? opt_suggest(el->valuestring, names, c->n_layouts)
		        : NULL;
		ld_err(ld, el, 0,
		       "\"%s\" is not a layout name%s%s%s valid: the"
		       " names of the layouts",
		       cJSON_IsString(el) ? el->valuestring : "",
		       s ? "; did you mean \"" : "", s ? s : "",
		       s ? "\"?" : ";");
		bad = 1;
	}
	in->n_layouts = k;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int spool_dirs(struct ld *ld, const cJSON *el, const cJSON **seen,
                      struct cfg_input *in)
{
	const cJSON *d = opt_seen(&opt_input, seen, "done");
	const cJSON *p = opt_seen(&opt_input, seen, "pattern");
	size_t old;
	int bad = 0;

	if (d != NULL && in->delete_done) {
		old = ld_key(ld, "done");
		ld_err(ld, d, 1, "done and delete_done both given; give one");
		ld_pop(ld, old);
		bad = 1;
	}
	if (in->pattern != NULL && strchr(in->pattern, '/') != NULL) {
		old = ld_key(ld, "pattern");
		ld_err(ld, p, 0,
		       "a '/' in the pattern; it matches file names"
		       " inside dir");
		ld_pop(ld, old);
		bad = 1;
	}
	if (in->dir == NULL)
		return -1;
	if (in->done == NULL && !in->delete_done)
		in->done = cfg_join(ld->mem, in->dir, "done");
	if (in->rejected == NULL)
		in->rejected = cfg_join(ld->mem, in->dir, "rejected");
	if (in->pattern == NULL)
		in->pattern = arena_strdup(ld->mem, "*");
	(void)el;
	return bad ? -1 : 0;
}

/* The same device, folder or stdin twice is a mistake. */
static int input_clash(struct ld *ld, const cJSON *el, const struct config *c,
                       const struct cfg_input *in)
{
	const struct cfg_input *o;
	size_t i;

	for (i = 0; i < c->n_inputs; i++) {
		o = &c->inputs[i];
		if (o->kind != in->kind)
			continue;
		if (in->kind == CFG_IN_STDIN ||
		    (in->device && o->device &&
		     !strcmp(in->device, o->device)) ||
		    (in->dir && o->dir && !strcmp(in->dir, o->dir))) {
			ld_err(ld, el, 0,
			       "the same %s as inputs[%zu]; each "
			       "source is read by one input",
			       in->kind == CFG_IN_STDIN ? "stdin"
			       : in->dir                ? "dir"
			                                : "device",
			       i);
			return -1;
		}
	}
	return 0;
}

static int input(struct ld *ld, const cJSON *el, struct config *c,
                 struct cfg_input *in)
{
	static const char *const kinds[] = {"serial", "tcp", "spool", "stdin"};
	const cJSON *seen[CFG_MAX_OPTS], *n;
	const char *names[CFG_MAX_ITEMS];
	int kind = opt_peek_kind(&opt_input, el), bad;
	size_t i;

	bad = opt_apply(ld, &opt_input, el, in, kind, seen) != 0;
	if (kind < 0)
		return -1;
	for (i = 0; i < c->n_inputs; i++)
		names[i] = c->inputs[i].name;
	if (in->name != NULL)
		bad |= item_name(ld, opt_seen(&opt_input, seen, "name"),
		                 in->name, names, c->n_inputs) != 0;
	else
		in->name = default_name(ld, kinds[kind], c->n_inputs);
	bad |=
	    input_framing(ld, opt_seen(&opt_input, seen, "framing"), in) != 0;
	if (in->kind == CFG_IN_SPOOL)
		bad |= spool_dirs(ld, el, seen, in) != 0;
	n = opt_seen(&opt_input, seen, "layouts");
	bad |= n != NULL && input_layouts(ld, n, c, in) != 0;
	if (!bad)
		bad |= input_clash(ld, el, c, in) != 0;
	return bad ? -1 : 0;
}

int cfg_inputs(struct ld *ld, const cJSON *list, struct config *c)
{
	const cJSON *el;
	size_t n, old = ld_key(ld, "inputs"), o2;
	int bad = 0;

	n = cJSON_IsArray(list) ? (size_t)cJSON_GetArraySize(list) : 0;
	if (!cJSON_IsArray(list) || n > CFG_MAX_ITEMS) {
		ld_err(ld, list, 0, "expected a list of inputs (at most %d)",
		       CFG_MAX_ITEMS);
		ld_pop(ld, old);
		return -1;
	}
	c->inputs = arena_alloc(ld->mem, (n + 1) * sizeof(*c->inputs));
	if (c->inputs == NULL) {
		ld_pop(ld, old);
		return -1;
	}
	for (el = list->child; el != NULL; el = el->next) {
		o2 = ld_idx(ld, c->n_inputs);
		bad |= input(ld, el, c, &c->inputs[c->n_inputs]) != 0;
		c->n_inputs++;
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

/* --- outputs ---------------------------------------------------------------
 */

/* Check one header; returns a problem or NULL.  *at_key: the problem is
 * the name (else the value). */
static const char *header_problem(const char *name, const char *value,
                                  int *at_key)
{
	static const char *const secret[] = {
	    "Authorization", "Proxy-Authorization", "Cookie", NULL};
	static const char *const own[] = {
	    "Content-Type",      "Content-Length",  "Host",
	    "Transfer-Encoding", "Idempotency-Key", NULL};
	size_t i;

	*at_key = 1;
	for (i = 0; name[i] != '\0'; i++)
		if (!strchr("!#$%&'*+-.^_`|~", name[i]) &&
		    !((name[i] >= 'a' && name[i] <= 'z') ||
		      (name[i] >= 'A' && name[i] <= 'Z') ||
		      (name[i] >= '0' && name[i] <= '9')))
			return "not a header name (RFC 9110 token characters)";
	if (listed(name, secret, true))
		return "a secret may not be written in the config; give "
		       "token_file or token_env (sent as a bearer token)";
	if (listed(name, own, true))
		return "tidepost sets this header itself";
	*at_key = 0;
	if (value != NULL && strpbrk(value, "\r\n") != NULL)
		return "CR or LF in a header value; a header value is one line";
	return NULL;
}

/* An object of string members into pairs (rename, headers). */
static int pairs(struct ld *ld, const cJSON *obj, const char *key,
                 struct cfg_pair **out, size_t *n_out)
{
	const cJSON *m;
	size_t n, k = 0, old = ld_key(ld, key), o2;
	int bad = 0;

	n = cJSON_IsObject(obj) ? (size_t)cJSON_GetArraySize(obj) : 0;
	*out = arena_alloc(ld->mem, (n + 1) * sizeof(**out));
	if (!cJSON_IsObject(obj) || n > CFG_MAX_ITEMS || *out == NULL) {
		ld_err(ld, obj, 0,
		       "expected an object of names to strings "
		       "(at most %d)",
		       CFG_MAX_ITEMS);
		ld_pop(ld, old);
		return -1;
	}
	for (m = obj->child; m != NULL; m = m->next) {
		o2 = ld_key(ld, m->string);
		if (!cJSON_IsString(m) || m->valuestring[0] == '\0') {
			ld_err(ld, m, 0, "expected a non-empty string");
			bad = 1;
		} else {
			(*out)[k].key = arena_strdup(ld->mem, m->string);
			(*out)[k++].value =
			    arena_strdup(ld->mem, m->valuestring);
		}
		ld_pop(ld, o2);
	}
	*n_out = k;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int check_headers(struct ld *ld, const cJSON *obj,
                         const struct cfg_output *o)
{
	const char *why;
	const cJSON *m;
	size_t i, old = ld_key(ld, "headers"), o2;
	int bad = 0, at_key;

	for (i = 0, m = obj->child; i < o->n_headers && m; i++, m = m->next) {
		why = header_problem(o->headers[i].key, o->headers[i].value,
		                     &at_key);
		if (why == NULL)
			continue;
		o2 = ld_key(ld, m->string);
		ld_err(ld, m, at_key, "%s", why);
		ld_pop(ld, o2);
		bad = 1;
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int check_rename(struct ld *ld, const cJSON *obj, const struct config *c,
                        const struct cfg_output *o)
{
	const cJSON *m;
	size_t i, j, old = ld_key(ld, "rename"), o2;
	int bad = 0;

	for (i = 0, m = obj->child; i < o->n_rename && m; i++, m = m->next) {
		o2 = ld_key(ld, m->string);
		bad |= cfg_check_value(ld, m, 1, o->rename[i].key, c) != 0;
		for (j = 0; j < i; j++) {
			if (strcmp(o->rename[j].value, o->rename[i].value))
				continue;
			ld_err(ld, m, 0,
			       "\"%s\" is also the new name of \"%s\";"
			       " new names are unique",
			       o->rename[i].value, o->rename[j].key);
			bad = 1;
		}
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int extra(struct ld *ld, const cJSON *obj, struct cfg_output *o)
{
	const cJSON *m;
	char *txt;
	size_t n, old = ld_key(ld, "extra"), o2;
	int bad = 0;

	n = cJSON_IsObject(obj) ? (size_t)cJSON_GetArraySize(obj) : 0;
	o->extra = arena_alloc(ld->mem, (n + 1) * sizeof(*o->extra));
	if (!cJSON_IsObject(obj) || n > CFG_MAX_ITEMS || o->extra == NULL) {
		ld_err(ld, obj, 0,
		       "expected an object of JSON members (at "
		       "most %d)",
		       CFG_MAX_ITEMS);
		ld_pop(ld, old);
		return -1;
	}
	for (m = obj->child; m != NULL; m = m->next) {
		o2 = ld_key(ld, m->string);
		if (listed(m->string, reading_members, false)) {
			ld_err(ld, m, 1,
			       "every reading has this member; extra"
			       " members need other names");
			bad = 1;
		} else {
			txt = cJSON_PrintUnformatted(m);
			o->extra[o->n_extra].key =
			    arena_strdup(ld->mem, m->string);
			o->extra[o->n_extra++].value =
			    txt != NULL ? arena_strdup(ld->mem, txt) : NULL;
			cJSON_free(txt);
		}
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int output_limits(struct ld *ld, const cJSON **seen,
                         const struct cfg_output *o)
{
	const char *key = NULL, *what = NULL;
	size_t old;

	if (o->connect_timeout_s > o->timeout_s) {
		key = "connect_timeout_s";
		what = "above timeout_s; the connection is part of the request";
	} else if (o->backoff_base_s > o->backoff_cap_s) {
		key = "backoff_base_s";
		what = "above backoff_cap_s; expected base <= cap";
	}
	if (key == NULL)
		return 0;
	old = ld_key(ld, key);
	ld_err(ld, opt_seen(&opt_output, seen, key), 0, "%s", what);
	ld_pop(ld, old);
	return -1;
}

static int output(struct ld *ld, const cJSON *el, struct config *c,
                  struct cfg_output *o)
{
	const cJSON *seen[CFG_MAX_OPTS], *n;
	const char *names[CFG_MAX_ITEMS];
	int kind = opt_peek_kind(&opt_output, el), bad;
	size_t i;

	bad = opt_apply(ld, &opt_output, el, o, kind, seen) != 0;
	if (kind < 0)
		return -1;
	for (i = 0; i < c->n_outputs; i++)
		names[i] = c->outputs[i].name;
	if (o->name != NULL)
		bad |= item_name(ld, opt_seen(&opt_output, seen, "name"),
		                 o->name, names, c->n_outputs) != 0;
	else
		o->name =
		    default_name(ld, kind ? "file" : "http", c->n_outputs);
	if (kind == CFG_OUT_HTTP) {
		bad |= http_common(ld, seen, &opt_output, o->url,
		                   o->allow_plain_http, o->token_env) != 0;
		bad |= output_limits(ld, seen, o) != 0;
	}
	n = opt_seen(&opt_output, seen, "headers");
	if (n != NULL &&
	    pairs(ld, n, "headers", &o->headers, &o->n_headers) == 0)
		bad |= check_headers(ld, n, o) != 0;
	else
		bad |= n != NULL;
	n = opt_seen(&opt_output, seen, "rename");
	if (n != NULL && pairs(ld, n, "rename", &o->rename, &o->n_rename) == 0)
		bad |= check_rename(ld, n, c, o) != 0;
	else
		bad |= n != NULL;
	n = opt_seen(&opt_output, seen, "extra");
	bad |= n != NULL && extra(ld, n, o) != 0;
	return bad ? -1 : 0;
}

int cfg_outputs(struct ld *ld, const cJSON *list, struct config *c)
{
	const cJSON *el;
	size_t n, old = ld_key(ld, "outputs"), o2;
	int bad = 0;

	n = cJSON_IsArray(list) ? (size_t)cJSON_GetArraySize(list) : 0;
	if (!cJSON_IsArray(list) || n > CFG_MAX_ITEMS) {
		ld_err(ld, list, 0, "expected a list of outputs (at most %d)",
		       CFG_MAX_ITEMS);
		ld_pop(ld, old);
		return -1;
	}
	c->outputs = arena_alloc(ld->mem, (n + 1) * sizeof(*c->outputs));
	if (c->outputs == NULL) {
		ld_pop(ld, old);
		return -1;
	}
	for (el = list->child; el != NULL; el = el->next) {
		o2 = ld_idx(ld, c->n_outputs);
		bad |= output(ld, el, c, &c->outputs[c->n_outputs]) != 0;
		c->n_outputs++;
		ld_pop(ld, o2);
	}
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

/* --- alerts ----------------------------------------------------------------
 */

static int alert_argv(struct ld *ld, const cJSON *list, struct cfg_alert_to *t)
{
	const cJSON *el;
	size_t n, k = 0, old = ld_key(ld, "argv");
	int bad = 0;

	n = cJSON_IsArray(list) ? (size_t)cJSON_GetArraySize(list) : 0;
	t->argv = arena_alloc(ld->mem, (n + 1) * sizeof(*t->argv));
	if (n == 0 || n > 64 || t->argv == NULL) {
		ld_err(ld, list, 0,
		       "expected a list of 1..64 strings, the "
		       "first an absolute path");
		ld_pop(ld, old);
		return -1;
	}
	for (el = list->child; el != NULL; el = el->next, k++) {
		if (!cJSON_IsString(el) ||
		    (k == 0 && el->valuestring[0] != '/')) {
			size_t o2 = ld_idx(ld, k);

			ld_err(ld, el, 0, "%s",
			       k == 0
			           ? "expected an absolute "
			             "path (the command is run without a shell)"
			           : "expected a string");
			ld_pop(ld, o2);
			bad = 1;
			continue;
		}
		t->argv[k] = arena_strdup(ld->mem, el->valuestring);
	}
	t->argc = n;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}

static int alert_to(struct ld *ld, const cJSON *el, struct cfg_alert_to *t)
{
	const cJSON *seen[CFG_MAX_OPTS], *n;
	int kind = opt_peek_kind(&opt_alert_to, el), bad;

	bad = opt_apply(ld, &opt_alert_to, el, t, kind, seen) != 0;
	if (kind < 0)
		return -1;
	if (kind == CFG_ALERT_HTTP)
		bad |= http_common(ld, seen, &opt_alert_to, t->url,
		                   t->allow_plain_http, t->token_env) != 0;
	n = opt_seen(&opt_alert_to, seen, "argv");
	bad |= n != NULL && alert_argv(ld, n, t) != 0;
	return bad ? -1 : 0;
}

int cfg_alerts(struct ld *ld, const cJSON *obj, struct config *c)
{
	const cJSON *seen[CFG_MAX_OPTS], *list, *el;
	size_t n, k = 0, old = ld_key(ld, "alerts"), o2;
	int bad = 0;

	if (obj == NULL) {
		opt_defaults(&opt_alerts, &c->alerts);
		ld_pop(ld, old);
		return 0;
	}
	bad = opt_apply(ld, &opt_alerts, obj, &c->alerts, -1, seen) != 0;
	list = opt_seen(&opt_alerts, seen, "to");
	n = cJSON_IsArray(list) ? (size_t)cJSON_GetArraySize(list) : 0;
	if (list != NULL && (!cJSON_IsArray(list) || n > CFG_MAX_ITEMS)) {
		o2 = ld_key(ld, "to");
		ld_err(ld, list, 0, "expected a list of alert targets");
		ld_pop(ld, o2);
		bad = 1;
		n = 0;
	}
	c->alerts.to = arena_alloc(ld->mem, (n + 1) * sizeof(*c->alerts.to));
	for (el = n ? list->child : NULL; el && c->alerts.to; el = el->next) {
		o2 = ld_key(ld, "to");
		ld_idx(ld, k);
		bad |= alert_to(ld, el, &c->alerts.to[k++]) != 0;
		ld_pop(ld, o2);
	}
	c->alerts.n_to = k;
	ld_pop(ld, old);
	return bad ? -1 : 0;
}
