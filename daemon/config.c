/*
 * config.c - loading the config file: files and text, messages, the
 * arena, the top level, ring and status (see config.h; the sections are
 * in cfglayout.c, cfgstation.c and cfgio.c, the tables in options.c).
 */
#include "config.h"

#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "cfgload.h"

#define ARENA_BLOCK 16384

struct arena_blk {
	struct arena_blk *next;
	size_t used, cap;
	_Alignas(16) unsigned char data[];
};

/* --- the arena ------------------------------------------------------- */

void *arena_alloc(struct arena *a, size_t n)
{
	struct arena_blk *b = a->head;
	size_t need = (n + 15) & ~(size_t)15, cap;
	void *p;

	if (need < n)
		goto out_fail;
	if (b == NULL || b->cap - b->used < need) {
		cap = need > ARENA_BLOCK ? need : ARENA_BLOCK;
		b = calloc(1, sizeof(*b) + cap);
		if (b == NULL)
			goto out_fail;
		b->cap = cap;
		b->next = a->head;
		a->head = b;
	}
	p = b->data + b->used;
	b->used += need;
	return p;
out_fail:
	a->failed = 1;
	return NULL;
}

char *arena_strdup(struct arena *a, const char *s)
{
	size_t n = strlen(s) + 1;
	char *p = arena_alloc(a, n);

	if (p != NULL)
		memcpy(p, s, n);
	return p;
}

void arena_free(struct arena *a)
{
	struct arena_blk *b, *next;

	if (a == NULL)
		return;
	for (b = a->head; b != NULL; b = next) {
		next = b->next;
		free(b);
	}
	a->head = NULL;
}

char *cfg_join(struct arena *mem, const char *dir, const char *name)
{
	size_t ld = strlen(dir), ln = strlen(name);
	char *p;

	while (ln >= 2 && name[0] == '.' && name[1] == '/') {
		name += 2;
		ln -= 2;
	}
	p = arena_alloc(mem, ld + ln + 2);
	if (p == NULL)
		return NULL;
	memcpy(p, dir, ld);
	if (ld > 0 && dir[ld - 1] != '/')
		p[ld++] = '/';
	memcpy(p + ld, name, ln + 1);
	return p;
}

/* --- messages -------------------------------------------------------- */

size_t cfg_nerr(const struct cfg_errors *e)
{
	return e->n + e->dropped;
}

void cfg_err_plain(struct cfg_errors *e, const char *fmt, ...)
{
	char buf[640];
	va_list ap;

	if (e->n >= CFG_MAX_ERRORS) {
		e->dropped++;
		return;
	}
	va_start(ap, fmt);
	vsnprintf(buf, sizeof(buf), fmt, ap);
	va_end(ap);
	e->msg[e->n] = strdup(buf);
	if (e->msg[e->n] == NULL)
		e->dropped++;
	else
		e->n++;
}

void cfg_errors_free(struct cfg_errors *e)
{
	size_t i;

	if (e == NULL)
		return;
	for (i = 0; i < e->n && i < CFG_MAX_ERRORS; i++)
		free(e->msg[i]);
	e->n = 0;
	e->dropped = 0;
}

size_t ld_key(struct ld *ld, const char *key)
{
	size_t old = ld->plen, room = sizeof(ld->path) - old;
	int k = snprintf(ld->path + old, room, "%s%s", old ? "." : "", key);

	ld->plen = (k < 0 || (size_t)k >= room) ? sizeof(ld->path) - 1
	                                        : old + (size_t)k;
	return old;
}

size_t ld_idx(struct ld *ld, size_t i)
{
	size_t old = ld->plen, room = sizeof(ld->path) - old;
	int k = snprintf(ld->path + old, room, "[%zu]", i);

	ld->plen = (k < 0 || (size_t)k >= room) ? sizeof(ld->path) - 1
	                                        : old + (size_t)k;
	return old;
}

void ld_pop(struct ld *ld, size_t old)
{
	ld->plen = old;
	ld->path[old] = '\0';
}

static const char *shown_path(const char *p)
{
	return p[0] != '\0' ? p : "(top level)";
}

void ld_err(struct ld *ld, const cJSON *node, int at_key, const char *fmt, ...)
{
	char what[512];
	unsigned line, col;
	va_list ap;

	if (ld->errs->n >= CFG_MAX_ERRORS) {
		ld->errs->dropped++;
		return;
	}
	va_start(ap, fmt);
	vsnprintf(what, sizeof(what), fmt, ap);
	va_end(ap);
	if (node == NULL) {
		cfg_err_plain(ld->errs, "%s: %s: %s", ld->file,
		              shown_path(ld->path), what);
		return;
	}
	jpos_linecol(&ld->pos, jpos_offset(&ld->pos, node, at_key), &line,
	             &col);
	cfg_err_plain(ld->errs, "%s:%u:%u: %s: %s", ld->file, line, col,
	              shown_path(ld->path), what);
}

/* jsonpos reports: paths are relative to the document, so the current
 * prefix (e.g. "layouts[2]" for a layout file) goes first. */
static void report(void *ctx, size_t off, const char *path, const char *what)
{
	struct ld *ld = ctx;
	char full[JPOS_PATH_MAX * 2];
	unsigned line, col;

	snprintf(full, sizeof(full), "%s%s%s", ld->path,
	         ld->plen && path[0] && path[0] != '[' ? "." : "", path);
	jpos_linecol(&ld->pos, off, &line, &col);
	cfg_err_plain(ld->errs, "%s:%u:%u: %s: %s", ld->file, line, col,
	              shown_path(full), what);
}

const char *ld_found(const cJSON *c, char *buf, size_t cap)
{
	if (cJSON_IsString(c))
		snprintf(buf, cap, "string \"%.40s%s\"", c->valuestring,
		         strlen(c->valuestring) > 40 ? "..." : "");
	else if (cJSON_IsNumber(c))
		snprintf(buf, cap, "number %.15g", c->valuedouble);
	else if (cJSON_IsBool(c))
		snprintf(buf, cap, "%s", cJSON_IsTrue(c) ? "true" : "false");
	else if (cJSON_IsNull(c))
		snprintf(buf, cap, "null");
	else if (cJSON_IsArray(c))
		snprintf(buf, cap, "a list");
	else if (cJSON_IsObject(c))
		snprintf(buf, cap, "an object");
	else
		snprintf(buf, cap, "nothing");
	return buf;
}

/* --- small readers ----------------------------------------------------- */

char *ld_path(struct ld *ld, const cJSON *node, const char *p)
{
	char *r;

	if (strlen(p) >= PATH_MAX) {
		ld_err(ld, node, 0, "path of %zu bytes; at most %d", strlen(p),
		       PATH_MAX - 1);
		return NULL;
	}
	if (p[0] == '/' || ld->dir == NULL)
		r = arena_strdup(ld->mem, p);
	else
		r = cfg_join(ld->mem, ld->dir, p);
	return r;
}

bool cfg_name_ok(const char *s, size_t max)
{
	size_t n = strlen(s), i;

	if (n == 0 || n > max)
		return false;
	for (i = 0; i < n; i++)
		if (!((s[i] >= 'a' && s[i] <= 'z') ||
		      (s[i] >= 'A' && s[i] <= 'Z') ||
		      (s[i] >= '0' && s[i] <= '9') || s[i] == '_' ||
		      s[i] == '.' || s[i] == '-'))
			return false;
	return true;
}

/* Parse "0x1F", "-12", "31" (the whole string) into sign and magnitude. */
static int parse_int_text(const char *s, bool *neg, uint64_t *mag)
{
	unsigned base = 10, d;
	uint64_t v = 0;

	*neg = s[0] == '-';
	if (*neg)
		s++;
	if (s[0] == '0' && (s[1] == 'x' || s[1] == 'X')) {
		base = 16;
		s += 2;
	}
	if (*s == '\0')
		return -1;
	for (; *s != '\0'; s++) {
		if (*s >= '0' && *s <= '9')
			d = (unsigned)(*s - '0');
		else if (base == 16 && *s >= 'a' && *s <= 'f')
			d = (unsigned)(*s - 'a' + 10);
		else if (base == 16 && *s >= 'A' && *s <= 'F')
			d = (unsigned)(*s - 'A' + 10);
		else
			return -1;
		if (v > (UINT64_MAX - d) / base)
			return -1;
		v = v * base + d;
	}
	*mag = v;
	return 0;
}

int ld_integer(struct ld *ld, const cJSON *node, bool *neg, uint64_t *mag)
{
	char found[96];
	double d;

	if (cJSON_IsString(node)) {
		if (parse_int_text(node->valuestring, neg, mag) == 0)
			return 0;
	} else if (cJSON_IsNumber(node)) {
		d = node->valuedouble;
		if (isfinite(d) && d == floor(d) &&
		    fabs(d) < 18446744073709551616.0) {
			*neg = d < 0;
			*mag = (uint64_t)fabs(d);
			return 0;
		}
	}
	ld_err(ld, node, 0,
	       "found %s; expected a whole number, or a string"
	       " such as \"0x1021\"",
	       ld_found(node, found, sizeof(found)));
	return -1;
}

/* --- files ----------------------------------------------------------- */

char *cfg_read_file(const char *path, size_t cap, size_t *len)
{
	char *buf = NULL;
	size_t got = 0;
	ssize_t k;
	int fd, err = 0;

	fd = open(path, O_RDONLY | O_CLOEXEC);
	if (fd < 0)
		return NULL;
	buf = malloc(cap + 2);
	if (buf == NULL) {
		err = ENOMEM;
		goto out_close;
	}
	while (got <= cap) {
		k = read(fd, buf + got, cap + 1 - got);
		if (k < 0 && errno == EINTR)
			continue;
		if (k < 0)
			err = errno;
		if (k <= 0)
			break;
		got += (size_t)k;
	}
	if (err == 0 && got > cap)
		err = EFBIG;
out_close:
	close(fd);
	if (err != 0) {
		free(buf);
		errno = err;
		return NULL;
	}
	buf[got] = '\0';
	*len = got;
	return buf;
}

int cfg_with_text(struct ld *ld, const char *text, size_t len, cfg_doc_fn *fn,
                  void *arg)
{
	const char *end = NULL;
	cJSON *root;
	int rc = -1, problems;

	if (jpos_prepare(&ld->pos, text, len, report, ld) != 0)
		goto out_free;
	root = cJSON_ParseWithLengthOpts(ld->pos.text, len + 1, &end, 1);
	if (root == NULL) {
		jpos_syntax(&ld->pos,
		            end != NULL ? (size_t)(end - ld->pos.text) : len,
		            report, ld);
		goto out_free;
	}
	problems = jpos_index(&ld->pos, root, report, ld);
	if (problems >= 0)
		rc = fn(ld, root, arg);
	if (problems != 0)
		rc = -1;
	cJSON_Delete(root);
out_free:
	jpos_free(&ld->pos);
	return rc;
}

/* An absolute copy (malloc) of the folder holding path; NULL on error. */
static char *folder_of(const char *path)
{
	char cwd[PATH_MAX];
	const char *slash = strrchr(path, '/');
	int n = slash != NULL ? (int)(slash - path) : 0;
	size_t cap;
	char *r;

	if (slash == path)
		return strdup("/");
	if (path[0] == '/')
		return strndup(path, (size_t)n);
	if (getcwd(cwd, sizeof(cwd)) == NULL)
		return NULL;
	cap = strlen(cwd) + (size_t)n + 2;
	r = malloc(cap);
	if (r == NULL)
		return NULL;
	if (n > 0)
		snprintf(r, cap, "%s/%.*s", cwd, n, path);
	else
		snprintf(r, cap, "%s", cwd);
	return r;
}

/* --- the top level ----------------------------------------------------- */

static int section_ring(struct ld *ld, const cJSON *node, struct config *c)
{
	const cJSON *seen[CFG_MAX_OPTS];
	size_t old = ld_key(ld, "ring");
	int rc = 0;

	if (node != NULL)
		rc = opt_apply(ld, &opt_ring, node, &c->ring, -1, seen);
	else
		opt_defaults(&opt_ring, &c->ring);
	if (c->ring.path == NULL)
		c->ring.path = cfg_join(ld->mem, c->state_dir, "ring");
	ld_pop(ld, old);
	return rc;
}

static int section_status(struct ld *ld, const cJSON *node, struct config *c)
{
	const cJSON *seen[CFG_MAX_OPTS];
	size_t old = ld_key(ld, "status");
	int rc = 0;

	if (node != NULL)
		rc = opt_apply(ld, &opt_status, node, &c->status, -1, seen);
	else
		opt_defaults(&opt_status, &c->status);
	if (c->status.path == NULL)
		c->status.path = cfg_join(ld->mem, c->state_dir, "status.json");
	ld_pop(ld, old);
	return rc;
}

/* Each section reports its own problems and the loader goes on, so one
 * run shows every problem; the error count decides the outcome. */
static int config_root(struct ld *ld, const cJSON *root, void *arg)
{
	const cJSON *seen[CFG_MAX_OPTS], *n;
	struct config *c = arg;
	struct top_in in = {0};
	int bad;

	bad = opt_apply(ld, &opt_top, root, &in, -1, seen) != 0;
	if (!cJSON_IsObject(root))
		return -1;
	c->state_dir = in.state_dir != NULL
	                   ? in.state_dir
	                   : arena_strdup(ld->mem, "/var/lib/tidepost");
	if (c->state_dir == NULL)
		return -1;
	n = opt_seen(&opt_top, seen, "layouts");
	ld->layouts_ok = n != NULL && cfg_layouts(ld, n, c) == 0;
	bad |= !ld->layouts_ok;
	n = opt_seen(&opt_top, seen, "stations");
	bad |= n != NULL && cfg_stations(ld, n, c) != 0;
	n = opt_seen(&opt_top, seen, "inputs");
	bad |= n != NULL && cfg_inputs(ld, n, c) != 0;
	bad |= section_ring(ld, opt_seen(&opt_top, seen, "ring"), c) != 0;
	n = opt_seen(&opt_top, seen, "outputs");
	bad |= n != NULL && cfg_outputs(ld, n, c) != 0;
	bad |= cfg_alerts(ld, opt_seen(&opt_top, seen, "alerts"), c) != 0;
	bad |= section_status(ld, opt_seen(&opt_top, seen, "status"), c) != 0;
	return bad ? -1 : 0;
}

/* --- entry points ------------------------------------------------------ */

static int cmp_station(const void *a, const void *b)
{
	const struct cfg_station *x = a, *y = b;

	return x->number < y->number ? -1 : x->number > y->number;
}

/* Either hand c out or free it: never a partial config. */
static int finish(struct config *c, struct config **out,
                  struct cfg_errors *errs, int rc)
{
	struct arena *mem = c->priv;

	if (rc == 0 && cfg_nerr(errs) == 0 && mem->failed)
		cfg_err_plain(errs, "%s: out of memory",
		              c->path != NULL ? c->path : "layouts");
	if (rc != 0 || cfg_nerr(errs) > 0) {
		if (cfg_nerr(errs) == 0)
			cfg_err_plain(errs, "%s: could not be loaded",
			              c->path != NULL ? c->path : "layouts");
		config_free(c);
		return -1;
	}
	if (c->n_stations > 1)
		qsort(c->stations, c->n_stations, sizeof(*c->stations),
		      cmp_station);
	*out = c;
	return 0;
}

static struct config *config_new(void)
{
	struct config *c = calloc(1, sizeof(*c));

	if (c == NULL)
		return NULL;
	c->priv = calloc(1, sizeof(struct arena));
	if (c->priv == NULL) {
		free(c);
		return NULL;
	}
	return c;
}

static int load_text(const char *name, const char *text, size_t len,
                     const char *dir, struct config **out,
                     struct cfg_errors *errs)
{
	struct config *c = config_new();
	struct ld *ld;
	int rc = -1;

	ld = calloc(1, sizeof(*ld));
	if (c == NULL || ld == NULL) {
		cfg_err_plain(errs, "%s: out of memory", name);
		free(ld);
		config_free(c);
		return -1;
	}
	ld->file = name;
	ld->dir = dir;
	ld->errs = errs;
	ld->mem = c->priv;
	c->path = arena_strdup(ld->mem, name);
	if (len > CFG_MAX_CONFIG_BYTES)
		cfg_err_plain(errs,
		              "%s: %zu bytes; a config file may be at"
		              " most %d bytes (1 MiB)",
		              name, len, CFG_MAX_CONFIG_BYTES);
	else
		rc = cfg_with_text(ld, text, len, config_root, c);
	free(ld);
	return finish(c, out, errs, rc);
}

int config_load_buffer(const char *name, const char *text, size_t len,
                       const char *base_dir, struct config **out,
                       struct cfg_errors *errs)
{
	char cwd[PATH_MAX];

	memset(errs, 0, sizeof(*errs));
	*out = NULL;
	if (base_dir == NULL && getcwd(cwd, sizeof(cwd)) != NULL)
		base_dir = cwd;
	return load_text(name, text, len, base_dir, out, errs);
}

int config_load(const char *path, struct config **out, struct cfg_errors *errs)
{
	char *text, *dir;
	size_t len = 0;
	int rc;

	memset(errs, 0, sizeof(*errs));
	*out = NULL;
	text = cfg_read_file(path, CFG_MAX_CONFIG_BYTES, &len);
	if (text == NULL) {
		if (errno == EFBIG)
			cfg_err_plain(errs,
			              "%s: larger than %d bytes; a config"
			              " file may be at most 1 MiB",
			              path, CFG_MAX_CONFIG_BYTES);
		else
			cfg_err_plain(errs, "%s: cannot read: %s", path,
			              strerror(errno));
		return -1;
	}
	dir = folder_of(path);
	if (dir == NULL) {
		cfg_err_plain(errs, "%s: cannot find its folder: %s", path,
		              strerror(errno));
		free(text);
		return -1;
	}
	rc = load_text(path, text, len, dir, out, errs);
	free(dir);
	free(text);
	return rc;
}

/* One `-l FILE`: key paths have no prefix. */
static int layout_arg(const char *path, struct cfg_errors *errs,
                      struct config *c, size_t i)
{
	struct ld *ld = calloc(1, sizeof(*ld));
	int rc;

	if (ld == NULL) {
		cfg_err_plain(errs, "%s: out of memory", path);
		return -1;
	}
	ld->file = path;
	ld->errs = errs;
	ld->mem = c->priv;
	rc = cfg_layout_file(ld, NULL, NULL, &c->layouts[i], c->layouts, i);
	free(ld);
	return rc;
}

int config_load_layouts(const char *const *paths, size_t n, struct config **out,
                        struct cfg_errors *errs)
{
	struct config *c;
	size_t i;
	int rc = 0;

	memset(errs, 0, sizeof(*errs));
	*out = NULL;
	c = config_new();
	if (c == NULL) {
		cfg_err_plain(errs, "layouts: out of memory");
		return -1;
	}
	if (n == 0 || n > CFG_MAX_LAYOUTS) {
		cfg_err_plain(errs,
		              "layouts: %zu given; give 1..%d layout"
		              " files",
		              n, CFG_MAX_LAYOUTS);
		return finish(c, out, errs, -1);
	}
	c->layouts = arena_alloc(c->priv, n * sizeof(*c->layouts));
	if (c->layouts == NULL)
		return finish(c, out, errs, -1);
	for (i = 0; i < n; i++)
		if (layout_arg(paths[i], errs, c, i) != 0)
			rc = -1;
	c->n_layouts = n;
	if (rc == 0)
		rc = cfg_layout_ptrs(c->priv, c);
	return finish(c, out, errs, rc);
}

void config_free(struct config *c)
{
	if (c == NULL)
		return;
	arena_free(c->priv);
	free(c->priv);
	free(c);
}

const struct cfg_station *config_station(const struct config *c,
                                         uint32_t number)
{
	struct cfg_station key;

	memset(&key, 0, sizeof(key));
	if (c == NULL || c->n_stations == 0)
		return NULL;
	key.number = number;
	return bsearch(&key, c->stations, c->n_stations, sizeof(key),
	               cmp_station);
}
