/*
 * test_config.c - the config and layout loader: a table of bad configs,
 * each checked for the file name, the exact LINE:COL, the key path and a
 * useful fragment of the message; then good configs whose filled structs
 * are checked field by field.
 *
 * All configs, layouts and stations here are invented test data.
 * Columns are counted in characters (UTF-8 code points), from 1.
 */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <cmocka.h>

#include <errno.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "config.h"
#include "options.h"

static char tmp[128];           /* a fresh folder for file-based rows */

/* A config whose layout has the values ph, temperature, battery. */
#define HEAD "{\"layouts\": [{\"name\": \"a\", \"fields\": [" \
	"{\"name\": \"ph\", \"type\": \"u8\"}, " \
	"{\"name\": \"temperature\", \"type\": \"u8\"}, " \
	"{\"name\": \"battery\", \"type\": \"u16\"}]}],\n"
/* A layout skeleton: the field under test starts at 2:3. */
#define FLD(f) "{\"layouts\": [{\"name\": \"a\", \"fields\": [\n  " f \
	"\n]}]}"
/* A header field, then the records under test on line 2. */
#define REC(r) "{\"layouts\": [{\"name\": \"a\", \"fields\": [" \
	"{\"name\": \"n_rec\", \"type\": \"u8\"}],\n  \"records\": " r "}]}"
#define SER "{\"kind\": \"serial\", \"device\": \"/dev/ttyS0\""
#define HTTP "{\"kind\": \"http\", \"url\": \"https://example.org/in\""

struct bad_row {
	const char *why;
	const char *text;
	size_t len;          /* 0: strlen(text) */
	const char *at;      /* the message points at this (unique) text */
	const char *where;   /* or at this literal "LINE:COL" */
	const char *path;    /* key path in the message */
	const char *frag;    /* and this fragment */
};

static const struct bad_row bad_rows[] = {
	/* The brief's own example: an unknown type word, with the list of
	 * valid words; position counted by hand (line 2, column 25). */
	{ "unknown type word", FLD("{\"name\": \"y\", \"type\": \"u17\"}"), 0,
	  NULL, "2:25", "layouts[0].fields[0].type",
	  "unknown type \"u17\"; valid: u8 i8 u16 i16 u24 i24 u32 i32 u64 "
	  "i64 f32 f64 (or \"bits\": 1..64)" },
	/* A typo of a known key points at the key and suggests it. */
	{ "unknown key, close", FLD("{\"name\": \"y\", \"type\": \"u8\", "
	  "\"scael\": 2}"), 0, "\"scael\"", NULL,
	  "layouts[0].fields[0].scael",
	  "unknown key; did you mean \"scale\"?" },
	/* An unknown key far from every key lists the valid ones. */
	{ "unknown key, far", HEAD " \"zzqqxx\": 1}", 0, "\"zzqqxx\"", NULL,
	  "zzqqxx", "unknown key; valid: layouts stations" },
	/* Keys are case-sensitive; a prefix still gets a suggestion. */
	{ "unknown key, prefix", FLD("{\"name\": \"y\", \"type\": \"u8\", "
	  "\"stand\": \"x\"}"), 0, "\"stand\"", NULL,
	  "layouts[0].fields[0].stand", "did you mean \"standard_name\"?" },
	/* Wrong JSON type: says what was found and what is valid. */
	{ "wrong type", FLD("{\"name\": \"y\", \"type\": \"u8\", "
	  "\"scale\": \"big\"}"), 0, "\"big\"", NULL,
	  "layouts[0].fields[0].scale",
	  "found string \"big\"; expected a number" },
	/* bits 65 is past the widest field. */
	{ "bits 65", FLD("{\"name\": \"y\", \"bits\": 65}"), 0, "65", NULL,
	  "layouts[0].fields[0].bits",
	  "65 is out of range; valid: a whole number 1..64" },
	/* bits 0 is not a field. */
	{ "bits 0", FLD("{\"name\": \"y\", \"bits\": 0}"), 0, "0}", NULL,
	  "layouts[0].fields[0].bits", "0 is out of range" },
	/* Integers must be integers. */
	{ "bits 1.5", FLD("{\"name\": \"y\", \"bits\": 1.5}"), 0, "1.5",
	  NULL, "layouts[0].fields[0].bits", "1.5 is not a whole number" },
	/* A missing required key points at the enclosing object. */
	{ "missing name", FLD("{\"type\": \"u8\"}"), 0, "{\"type\"", NULL,
	  "layouts[0].fields[0].name", "missing required key" },
	/* Neither type nor bits. */
	{ "missing type", FLD("{\"name\": \"y\"}"), 0, "{\"name\": \"y\"",
	  NULL, "layouts[0].fields[0].type",
	  "give \"type\" (u8 i8" },
	/* cJSON keeps both copies of a key; we refuse it at the second. */
	{ "duplicate key", FLD("{\"name\": \"y\", \"type\": \"u8\", "
	  "\"type\": \"u16\"}"), 0, "\"type\": \"u16\"", NULL,
	  "layouts[0].fields[0].type", "duplicate key (first at 2:17)" },
	/* A misspelt catalogue name gets the nearest catalogue name. */
	{ "bad CRC name", "{\"layouts\": [{\"name\": \"a\", \"fields\": "
	  "[{\"name\": \"x\", \"type\": \"u8\"}],\n \"check\": {\"crc\": "
	  "\"CRC-16/XMODM\"}}]}", 0, "\"CRC-16/XMODM\"", NULL,
	  "layouts[0].check.crc", "did you mean \"CRC-16/XMODEM\"?" },
	/* "CCITT" alone is ambiguous (CRC RevEng catalogue notes). */
	{ "ambiguous CCITT", "{\"layouts\": [{\"name\": \"a\", \"fields\": "
	  "[{\"name\": \"x\", \"type\": \"u8\"}],\n \"check\": {\"crc\": "
	  "\"CCITT\"}}]}", 0, "\"CCITT\"", NULL,
	  "layouts[0].check.crc", "names several CRCs" },
	/* A polynomial wider than the width. */
	{ "bad CRC poly", "{\"layouts\": [{\"name\": \"a\", \"fields\": "
	  "[{\"name\": \"x\", \"type\": \"u8\"}],\n \"check\": {\"crc\": "
	  "{\"width\": 16, \"poly\": \"0x11021\"}}}]}", 0, "\"0x11021\"",
	  NULL, "layouts[0].check.crc.poly",
	  "0x11021 does not fit in 16 bits" },
	/* CRC widths are 8..32 (check.h). */
	{ "bad CRC width", "{\"layouts\": [{\"name\": \"a\", \"fields\": "
	  "[{\"name\": \"x\", \"type\": \"u8\"}],\n \"check\": {\"crc\": "
	  "{\"width\": 7, \"poly\": 7}}}]}", 0, "7,", NULL,
	  "layouts[0].check.crc.width", "valid: a whole number 8..32" },
	/* The count names a header field that does not exist. */
	{ "count field unknown", REC("{\"count\": \"nrec\", \"fields\": "
	  "[{\"name\": \"v\", \"type\": \"u8\"}]}"), 0, "\"nrec\"", NULL,
	  "layouts[0].records.count", "did you mean \"n_rec\"?" },
	/* February has no 30th. */
	{ "bad epoch", FLD("{\"name\": \"t\", \"type\": \"u32\", \"role\": "
	  "\"time\", \"epoch\": \"2000-02-30T00:00:00Z\"}"), 0,
	  "\"2000-02-30", NULL, "layouts[0].fields[0].epoch",
	  "bad epoch \"2000-02-30T00:00:00Z\"" },
	/* A local time without offset is not RFC 3339. */
	{ "epoch without zone", FLD("{\"name\": \"t\", \"type\": \"u32\", "
	  "\"role\": \"time\", \"epoch\": \"2000-01-01T00:00:00\"}"), 0,
	  "\"2000-01-01", NULL, "layouts[0].fields[0].epoch",
	  "expected an RFC 3339 time" },
	/* NUL bytes are refused with their position (line 2, column 4). */
	{ "NUL byte", "{\n  \"\0layouts\": []}", 19, NULL, "2:4", "(top level)",
	  "NUL byte (0x00)" },
	/* Invalid UTF-8 in a string: the bad byte's position, counted in
	 * characters after the two-byte "\xC3\xA9" (column 45, not 46). */
	{ "bad UTF-8", HEAD " \"stations\": {\"7\": {\"name\": \"s\", "
	  "\"title\": \"\xC3\xA9\xC3(\"}}}", 0, NULL, "2:45",
	  "stations.7.title", "invalid UTF-8 (byte 0xC3)" },
	/* 40 nested lists: past the cap of 32. */
	{ "too deep", "{\"layouts\": [[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[[["
	  "]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]]}", 0, NULL, "1:44",
	  "(top level)", "nesting deeper than 32" },
	/* A missing comma: cJSON's error position, explained. */
	{ "missing comma", "{\"layouts\": []\n  \"stations\": {}}", 0,
	  "\"stations\"", NULL, "(top level)", "a ',' is missing" },
	/* A trailing comma. */
	{ "trailing comma", "{\"layouts\": [1, 2,\n]}", 0, "]}", NULL,
	  "(top level)", "trailing comma before ']'" },
	/* Comments: quotes, braces and a block comment spanning lines do
	 * not disturb lines or columns; "//" inside a string stays. */
	{ "comments", "// a \"quoted\" {comment}\n"
	  "{ /* block\n   comment } */ \"layouts\": [{\"description\": \"a//b\", \"name\": \"a\", "
	  "/* x */ \"fields\": [{\"name\": \"x\",\n \"bitz\": 3}]}]}", 0,
	  "\"bitz\"", NULL, "layouts[0].fields[0].bitz",
	  "did you mean \"bits\"?" },
	/* An unterminated block comment. */
	{ "open comment", "{\"layouts\": [] /* never closed\n}", 0,
	  "/* never", NULL, "(top level)", "unterminated /* comment" },
	/* A qc setting for a value no layout has. */
	{ "unknown qc value", HEAD " \"stations\": {\"7\": {\"name\": \"s\","
	  " \"qc\": {\"phh\": {\"spike\": 0.1}}}}}", 0, "\"phh\"", NULL,
	  "stations.7.qc.phh", "unknown value \"phh\"; did you mean \"ph\"?" },
	/* CR/LF in a header value would split the request. */
	{ "CR/LF in header", HEAD " \"outputs\": [" HTTP ", \"headers\": "
	  "{\"X-Site\": \"a\\r\\nX-Evil: 1\"}}]}", 0, "\"a\\r", NULL,
	  "outputs[0].headers.X-Site", "CR or LF in a header value" },
	/* A token written into the config text. */
	{ "literal token", HEAD " \"outputs\": [" HTTP ", \"token\": "
	  "\"s3cr3t\"}]}", 0, "\"token\"", NULL, "outputs[0].token",
	  "a secret may not be written in the config" },
	/* An Authorization header is a secret too. */
	{ "authorization header", HEAD " \"outputs\": [" HTTP ", \"headers\""
	  ": {\"Authorization\": \"Bearer x\"}}]}", 0, "\"Authorization\"",
	  NULL, "outputs[0].headers.Authorization", "a secret may not" },
	/* TLS verification has no off switch. */
	{ "TLS off", HEAD " \"outputs\": [" HTTP ", \"insecure\": true}]}",
	  0, "\"insecure\"", NULL, "outputs[0].insecure",
	  "cannot be turned off" },
	/* Plain http needs an explicit opt-in. */
	{ "plain http", HEAD " \"outputs\": [{\"kind\": \"http\", \"url\": "
	  "\"http://example.org/in\"}]}", 0, "\"http://", NULL,
	  "outputs[0].url", "plain http://" },
	/* The framing string goes through tp_framing_parse. */
	{ "bad framing", HEAD " \"inputs\": [" SER ", \"framing\": "
	  "\"cobbs\"}]}", 0, "\"cobbs\"", NULL, "inputs[0].framing",
	  "unknown framing \"cobbs\"; did you mean \"cobs\"?" },
	/* fixed:0 is not a framing. */
	{ "framing fixed:0", HEAD " \"inputs\": [" SER ", \"framing\": "
	  "\"fixed:0\"}]}", 0, "\"fixed:0\"", NULL, "inputs[0].framing",
	  "valid: cobs slip hex whole fixed:N" },
	/* A tcp key on a serial input. */
	{ "key of another kind", HEAD " \"inputs\": [" SER ", \"port\": 9}]}",
	  0, "\"port\"", NULL, "inputs[0].port",
	  "not used by kind \"serial\"; used by: tcp" },
	/* A bad enum word with a suggestion. */
	{ "bad parity", HEAD " \"inputs\": [" SER ", \"parity\": \"evn\"}]}",
	  0, "\"evn\"", NULL, "inputs[0].parity",
	  "unknown parity \"evn\"; did you mean \"even\"? valid: none odd "
	  "even" },
	/* Station numbers are plain decimals. */
	{ "station 07", HEAD " \"stations\": {\"07\": {\"name\": \"s\"}}}", 0,
	  "\"07\"", NULL, "stations.07", "bad station number \"07\"" },
	/* Station names are unique. */
	{ "station name twice", HEAD " \"stations\": {\"1\": {\"name\": \"s\"}"
	  ", \"2\": {\"name\": \"s\" }}}", 0, "\"s\" }", NULL,
	  "stations.2.name", "duplicate station name \"s\" (also station 1)" },
	/* Negative missing for an unsigned field. */
	{ "negative missing, unsigned", FLD("{\"name\": \"y\", \"bits\": 12, "
	  "\"missing\": -1}"), 0, "-1", NULL, "layouts[0].fields[0].missing",
	  "-1 for an unsigned field; valid: 0..4095" },
	/* A signed 8-bit field cannot hold -129. */
	{ "missing too small", FLD("{\"name\": \"y\", \"type\": \"i8\", "
	  "\"missing\": -129}"), 0, "-129", NULL,
	  "layouts[0].fields[0].missing", "does not fit in 8 bits" },
	/* lat without lon. */
	{ "lat alone", HEAD " \"stations\": {\"7\": {\"name\": \"s\", \"lat\":"
	  " 1}}}", 0, "{\"name\": \"s\", \"lat\"", NULL, "stations.7.lon",
	  "lat and lon go together" },
	/* lat is in [-90, 90]. */
	{ "lat range", HEAD " \"stations\": {\"7\": {\"name\": \"s\", \"lat\":"
	  " 91, \"lon\": 0}}}", 0, "91", NULL, "stations.7.lat",
	  "91 is out of range; valid: a number -90..90" },
	/* The suspect range lies inside the fail range. */
	{ "suspect outside fail", HEAD " \"stations\": {\"7\": {\"name\": "
	  "\"s\", \"qc\": {\"ph\": {\"suspect\": [6, 9], \"fail\": [7, 8]}}}}}",
	  0, "[6, 9]", NULL, "stations.7.qc.ph.suspect",
	  "reaches outside fail [7, 8]" },
	/* [max, min] is a mistake. */
	{ "range reversed", FLD("{\"name\": \"y\", \"type\": \"u8\", "
	  "\"range\": [5, 1]}"), 0, "[5, 1]", NULL,
	  "layouts[0].fields[0].range", "min 5 is above max 1" },
	/* time_offset belongs in records. */
	{ "time_offset in header", FLD("{\"name\": \"y\", \"type\": \"u8\", "
	  "\"role\": \"time_offset\"}"), 0, "\"time_offset\"", NULL,
	  "layouts[0].fields[0].role", "role \"time_offset\" in the header" },
	/* Role word typo. */
	{ "role typo", FLD("{\"name\": \"y\", \"type\": \"u8\", \"role\": "
	  "\"staton\"}"), 0, "\"staton\"", NULL, "layouts[0].fields[0].role",
	  "did you mean \"station\"?" },
	/* Names are unique across header and records (one reading). */
	{ "name in header and records", REC("{\"count\": 2, \"fields\": "
	  "[{\"name\": \"n_rec\", \"type\": \"u8\"}]}"), 0,
	  "\"n_rec\", \"type\": \"u8\"}]}}", NULL,
	  "layouts[0].records.fields[0].name",
	  "duplicate name \"n_rec\" (also fields[0])" },
	/* Two layouts with one name. */
	{ "layout name twice", "{\"layouts\": [{\"name\": \"a\", \"fields\": "
	  "[{\"name\": \"x\", \"type\": \"u8\"}]},\n {\"name\": \"a\", "
	  "\"fields\": [{\"name\": \"x\", \"type\": \"u8\"}]}]}", 0,
	  "\"a\", \"fields\": [{\"name\": \"x\", \"type\": \"u8\"}]}]}", NULL,
	  "layouts[1].name", "duplicate layout name \"a\"" },
	/* A match value that does not fit its type. */
	{ "match too big", "{\"layouts\": [{\"name\": \"a\", \"fields\": "
	  "[{\"name\": \"x\", \"type\": \"u8\"}],\n \"match\": [{\"at\": 0, "
	  "\"type\": \"u8\", \"is\": 256}]}]}", 0, "256", NULL,
	  "layouts[0].match[0].is", "256 does not fit u8" },
	/* An input restricted to a layout that does not exist. */
	{ "input layout unknown", HEAD " \"inputs\": [" SER ", \"layouts\": "
	  "[\"b\"]}]}", 0, "\"b\"", NULL, "inputs[0].layouts",
	  "\"b\" is not a layout name; valid:" },
	/* The alert command runs without a shell: absolute path. */
	{ "relative argv", HEAD " \"alerts\": {\"to\": [{\"kind\": \"exec\", "
	  "\"argv\": [\"notify\"]}]}}", 0, "\"notify\"", NULL,
	  "alerts.to[0].argv[0]", "expected an absolute path" },
	/* extra may not replace reading members. */
	{ "extra id", HEAD " \"outputs\": [" HTTP ", \"extra\": {\"id\": 1}}]}",
	  0, "\"id\"", NULL, "outputs[0].extra.id", "every reading has this" },
	/* The top level must be an object. */
	{ "not an object", "[1, 2]", 0, NULL, "1:1", "(top level)",
	  "found a list; expected an object" },
	/* layouts is required. */
	{ "no layouts", "{\n}", 0, NULL, "1:1", "layouts",
	  "missing required key" },
	/* Empty text. */
	{ "empty", "  ", 0, NULL, "1:3", "(top level)",
	  "unexpected end of text" },
};

/* LINE:COL of the first occurrence of `at` in text (characters). */
static void where_of(const char *text, const char *at, char *buf, size_t cap)
{
	const char *p = strstr(text, at), *q;
	unsigned line = 1, col = 1;

	assert_non_null(p);
	assert_null(strstr(p + 1, at));     /* the marker is unique */
	for (q = text; q < p; q++) {
		if (*q == '\n') {
			line++;
			col = 1;
		} else if (((unsigned char)*q & 0xC0) != 0x80) {
			col++;
		}
	}
	snprintf(buf, cap, "%u:%u", line, col);
}

static void dump(const struct cfg_errors *e)
{
	size_t i;

	for (i = 0; i < e->n; i++)
		fprintf(stderr, "    got: %s\n", e->msg[i]);
}

/* Does some message start with `prefix` and contain `frag`? */
static bool has_msg(const struct cfg_errors *e, const char *prefix,
                    const char *frag)
{
	size_t i;

	for (i = 0; i < e->n; i++)
		if (strncmp(e->msg[i], prefix, strlen(prefix)) == 0 &&
		    strstr(e->msg[i], frag) != NULL)
			return true;
	return false;
}

static void test_bad_rows(void **state)
{
	static struct config sentinel;
	const struct bad_row *r;
	struct cfg_errors e;
	struct config *c;
	char where[32], prefix[512];
	size_t i, len;
	int failed = 0;

	(void)state;
	for (i = 0; i < sizeof(bad_rows) / sizeof(bad_rows[0]); i++) {
		r = &bad_rows[i];
		len = r->len ? r->len : strlen(r->text);
		if (r->at != NULL)
			where_of(r->text, r->at, where, sizeof(where));
		else
			snprintf(where, sizeof(where), "%s", r->where);
		snprintf(prefix, sizeof(prefix), "t.json:%s: %s: ", where,
		         r->path);
		c = &sentinel;              /* must be reset to NULL */
		if (config_load_buffer("t.json", r->text, len, tmp, &c, &e) ==
		    0) {
			fprintf(stderr, "row \"%s\": loaded\n", r->why);
			config_free(c);
			failed++;
			continue;
		}
		if (getenv("TEST_CONFIG_DUMP") != NULL)
			dump(&e);           /* to read every message */
		if (c != NULL || !has_msg(&e, prefix, r->frag)) {
			fprintf(stderr, "row \"%s\": want \"%s...%s\"\n",
			        r->why, prefix, r->frag);
			dump(&e);
			failed++;
		}
		cfg_errors_free(&e);
	}
	assert_int_equal(failed, 0);
}

/* --- file based rows -------------------------------------------------- */

static void put_file(const char *path, const char *text)
{
	FILE *f = fopen(path, "w");

	assert_non_null(f);
	assert_int_equal(fputs(text, f) >= 0, 1);
	assert_int_equal(fclose(f), 0);
}

/* A layout file that does not exist: named, with the resolved path, at
 * the string that names it. */
static void test_layout_file_missing(void **state)
{
	const char *text = "{\"layouts\": [\"layouts/nope.json\"]}";
	struct cfg_errors e;
	struct config *c;
	char prefix[PATH_MAX + 64], frag[PATH_MAX + 64];

	(void)state;
	snprintf(prefix, sizeof(prefix), "t.json:1:14: layouts[0]: ");
	snprintf(frag, sizeof(frag), "cannot read layout file \"%s/layouts/"
	         "nope.json\": No such file or directory", tmp);
	assert_int_equal(config_load_buffer("t.json", text, strlen(text), tmp,
	                                    &c, &e), -1);
	if (!has_msg(&e, prefix, frag))
		dump(&e);
	assert_true(has_msg(&e, prefix, frag));
	assert_null(c);
	cfg_errors_free(&e);
}

/* Relative layout paths resolve against the config file's folder, not
 * the working folder; a problem in the layout file names that file and
 * uses the key path layouts[i]. */
static void test_relative_paths(void **state)
{
	char dir[PATH_MAX], lay[PATH_MAX], cfg[PATH_MAX], want[PATH_MAX + 64];
	char cwd[PATH_MAX];
	struct cfg_errors e;
	struct config *c;

	(void)state;
	snprintf(dir, sizeof(dir), "%s/sub", tmp);
	assert_true(mkdir(dir, 0700) == 0 || errno == EEXIST);
	snprintf(lay, sizeof(lay), "%s/sub/lay", tmp);
	assert_true(mkdir(lay, 0700) == 0 || errno == EEXIST);
	snprintf(lay, sizeof(lay), "%s/sub/lay/l.json", tmp);
	snprintf(cfg, sizeof(cfg), "%s/sub/c.json", tmp);
	put_file(cfg, "{\"layouts\": [{\"name\": \"x\", \"fields\": [{\"name\""
	         ": \"v\", \"type\": \"u8\"}]}, \"lay/l.json\"],\n"
	         " \"inputs\": [{\"kind\": \"spool\", \"dir\": \"in\"}]}");
	put_file(lay, "{\"name\": \"l\",\n \"fields\": [{\"name\": \"v\", "
	         "\"type\": \"u9\"}]}");
	assert_non_null(getcwd(cwd, sizeof(cwd)));
	assert_int_equal(chdir("/"), 0);
	assert_int_equal(config_load(cfg, &c, &e), -1);
	snprintf(want, sizeof(want), "%s:2:35: layouts[1].fields[0].type: ",
	         lay);
	if (!has_msg(&e, want, "unknown type \"u9\""))
		dump(&e);
	assert_true(has_msg(&e, want, "unknown type \"u9\""));
	cfg_errors_free(&e);
	/* fixed: it loads, and the spool folder is resolved the same way */
	put_file(lay, "{\"name\": \"l\", \"fields\": [{\"name\": \"v\", "
	         "\"type\": \"u16\"}]}");
	assert_int_equal(config_load(cfg, &c, &e), 0);
	assert_int_equal(c->n_layouts, 2);
	assert_string_equal(c->layouts[1].name, "l");
	snprintf(want, sizeof(want), "%s/sub/in", tmp);
	assert_string_equal(c->inputs[0].dir, want);
	snprintf(want, sizeof(want), "%s/sub/in/done", tmp);
	assert_string_equal(c->inputs[0].done, want);
	config_free(c);
	assert_int_equal(chdir(cwd), 0);
}

/* `decode -l A -l B`: no layouts[i] prefix; names unique across files. */
static void test_load_layouts(void **state)
{
	char a[PATH_MAX], b[PATH_MAX], want[PATH_MAX + 64];
	const char *paths[2] = { a, b };
	struct cfg_errors e;
	struct config *c;

	(void)state;
	snprintf(a, sizeof(a), "%s/la.json", tmp);
	snprintf(b, sizeof(b), "%s/lb.json", tmp);
	put_file(a, "{\"name\": \"one\", \"fields\": [{\"name\": \"v\", "
	         "\"type\": \"u8\"}]}");
	put_file(b, "// second\n{\"name\": \"two\", \"fields\": [{\"name\": "
	         "\"v\", \"bits\": 99}]}");
	assert_int_equal(config_load_layouts(paths, 2, &c, &e), -1);
	snprintf(want, sizeof(want), "%s:2:50: fields[0].bits: ", b);
	if (!has_msg(&e, want, "99 is out of range"))
		dump(&e);
	assert_true(has_msg(&e, want, "99 is out of range"));
	cfg_errors_free(&e);
	put_file(b, "{\"name\": \"one\", \"fields\": [{\"name\": \"v\", "
	         "\"type\": \"u8\"}]}");
	assert_int_equal(config_load_layouts(paths, 2, &c, &e), -1);
	snprintf(want, sizeof(want), "%s:1:10: name: ", b);
	assert_true(has_msg(&e, want, "duplicate layout name \"one\""));
	cfg_errors_free(&e);
	put_file(b, "{\"name\": \"two\", \"fields\": [{\"name\": \"v\", "
	         "\"type\": \"u8\"}]}");
	assert_int_equal(config_load_layouts(paths, 2, &c, &e), 0);
	assert_int_equal(c->n_layouts, 2);
	assert_ptr_equal(c->layout_ptrs[1], &c->layouts[1]);
	assert_null(c->path);
	config_free(c);
	/* a missing file is named */
	snprintf(b, sizeof(b), "%s/none.json", tmp);
	assert_int_equal(config_load_layouts(paths, 2, &c, &e), -1);
	snprintf(want, sizeof(want), "%s: cannot read: ", b);
	assert_true(has_msg(&e, want, "No such file"));
	cfg_errors_free(&e);
}

/* Size caps: 1 MiB for a config, 256 KiB for a layout file. */
static void test_size_caps(void **state)
{
	size_t n = CFG_MAX_CONFIG_BYTES + 1;
	char *big = malloc(n), path[PATH_MAX];
	const char *paths[1] = { path };
	struct cfg_errors e;
	struct config *c;
	FILE *f;

	(void)state;
	assert_non_null(big);
	memset(big, ' ', n);
	assert_int_equal(config_load_buffer("t.json", big, n, tmp, &c, &e),
	                 -1);
	assert_true(has_msg(&e, "t.json: ", "at most 1048576 bytes"));
	cfg_errors_free(&e);
	snprintf(path, sizeof(path), "%s/big.json", tmp);
	f = fopen(path, "w");
	assert_non_null(f);
	assert_int_equal(fwrite(big, 1, CFG_MAX_LAYOUT_BYTES + 1, f),
	                 CFG_MAX_LAYOUT_BYTES + 1);
	assert_int_equal(fclose(f), 0);
	assert_int_equal(config_load_layouts(paths, 1, &c, &e), -1);
	assert_true(has_msg(&e, path, "at most 256 KiB"));
	cfg_errors_free(&e);
	free(big);
}

/* Problems are all collected, up to CFG_MAX_ERRORS, then counted. */
static void test_error_cap(void **state)
{
	char text[8192];
	size_t len, i;
	struct cfg_errors e;
	struct config *c;

	(void)state;
	len = (size_t)snprintf(text, sizeof(text), "%s", HEAD);
	for (i = 0; i < 100; i++)
		len += (size_t)snprintf(text + len, sizeof(text) - len,
		                        " \"k%zu\": 1,", i);
	snprintf(text + len, sizeof(text) - len, " \"z\": 0}");
	assert_int_equal(config_load_buffer("t.json", text, strlen(text), tmp,
	                                    &c, &e), -1);
	assert_int_equal(e.n, CFG_MAX_ERRORS);
	assert_int_equal(e.dropped, 101 - CFG_MAX_ERRORS);
	cfg_errors_free(&e);
}

/* --- good configs ------------------------------------------------------ */

static struct config *load_ok(const char *text)
{
	struct cfg_errors e;
	struct config *c = NULL;

	if (config_load_buffer("t.json", text, strlen(text), tmp, &c, &e) != 0)
		dump(&e);
	assert_int_equal(e.n, 0);
	assert_non_null(c);
	cfg_errors_free(&e);
	return c;
}

/* Units: LAYOUT.md's common spellings become one canonical spelling;
 * other strings are kept.  Raw/scale/missing values as given. */
static void test_fields(void **state)
{
	static const struct { const char *unit, *canon; } u[] = {
		{ "\xC2\xB0" "C", "degC" },           /* degree sign */
		{ "Cel", "degC" },
		{ "mS cm-1", "mS/cm" },
		{ "S m-1", "S/m" },
		{ "\xC2\xB5mol/kg", "umol/kg" },      /* micro sign */
		{ "umol kg-1", "umol/kg" },
		{ "umol l-1", "umol/L" },
		{ "mmol/m3", "umol/L" },
		{ "mg/L", "mg/L" },
		{ "furlong", "furlong" },             /* kept as given */
	};
	char text[4096];
	size_t len, i, n = sizeof(u) / sizeof(u[0]);
	struct config *c;
	const struct tp_layout *l;

	(void)state;
	len = (size_t)snprintf(text, sizeof(text), "{\"layouts\": [{\"name\":"
	      " \"u\", \"fields\": [{\"name\": \"t\", \"type\": \"u32\", "
	      "\"role\": \"time\", \"unit\": \"min\", \"epoch\": "
	      "\"2000-01-01T00:00:00Z\"}, {\"name\": \"s\", \"bits\": 12, "
	      "\"signed\": true, \"scale\": 0.01, \"offset\": 20, "
	      "\"missing\": -1}, {\"skip_bits\": 4}");
	for (i = 0; i < n; i++)
		len += (size_t)snprintf(text + len, sizeof(text) - len,
		       ", {\"name\": \"v%zu\", \"type\": \"i16\", \"missing\": "
		       "\"0x8000\", \"unit\": \"%s\"}", i, u[i].unit);
	snprintf(text + len, sizeof(text) - len, "]}]}");
	c = load_ok(text);
	l = &c->layouts[0];
	assert_int_equal(l->n_fields, 3 + n);
	assert_int_equal(l->fields[0].role, TP_ROLE_TIME);
	assert_int_equal(l->fields[0].time_unit_s, 60);
	/* 2000-01-01T00:00:00Z is 946684800 s after the Unix epoch
	 * (GNU date: date -u -d 2000-01-01 +%s) */
	assert_int_equal(l->fields[0].epoch_s, 946684800);
	assert_int_equal(l->fields[1].type, TP_T_BITS);
	assert_true(l->fields[1].is_signed);
	assert_int_equal(l->fields[1].bits, 12);
	assert_true(l->fields[1].scale == 0.01);
	assert_true(l->fields[1].offset == 20);
	assert_true(l->fields[1].has_missing);
	assert_int_equal(l->fields[1].missing, 0xFFF);   /* -1 in 12 bits */
	assert_int_equal(l->fields[2].type, TP_T_SKIP);
	assert_int_equal(l->fields[2].bits, 4);
	for (i = 0; i < n; i++) {
		assert_int_equal(l->fields[3 + i].type, TP_T_I16);
		assert_int_equal(l->fields[3 + i].missing, 0x8000);
		assert_string_equal(l->fields[3 + i].unit, u[i].canon);
	}
	config_free(c);
}

/* The CRC table is built and usable: the catalogue check value of
 * "123456789" for CRC-16/IBM-3740 is 0x29B1 (CRC RevEng catalogue, as
 * quoted in SCIENCE.md), by name and by parameters alike. */
static void test_crc(void **state)
{
	static const char *const checks[] = {
		"\"crc\": \"CRC-16/IBM-3740\"",
		"\"crc\": \"crc-16/ccitt-false\"",     /* catalogue alias */
		"\"crc\": {\"width\": 16, \"poly\": \"0x1021\", \"init\": "
		"\"0xFFFF\"}, \"at\": 1, \"covers\": [0, 1], \"order\": "
		"\"little\"",
	};
	char text[1024];
	struct config *c;
	const struct tp_check *k;
	size_t i;

	(void)state;
	for (i = 0; i < 3; i++) {
		snprintf(text, sizeof(text), "{\"layouts\": [{\"name\": \"c\","
		         " \"fields\": [{\"name\": \"v\", \"type\": \"u8\"}], "
		         "\"check\": {%s}}]}", checks[i]);
		c = load_ok(text);
		k = &c->layouts[0].check;
		assert_int_equal(k->kind, TP_CHECK_CRC);
		assert_int_equal(k->crc.p.width, 16);
		assert_int_equal(tp_crc_compute(&k->crc, "123456789", 9),
		                 0x29B1);
		if (i < 2) {
			assert_int_equal(k->at, -2);  /* default: at the end */
			assert_false(k->has_covers);
			assert_int_equal(k->order, TP_ORDER_BIG);
		} else {
			assert_int_equal(k->at, 1);
			assert_true(k->has_covers);
			assert_int_equal(k->covers_to, 1);
			assert_int_equal(k->order, TP_ORDER_LITTLE);
		}
		config_free(c);
	}
	c = load_ok("{\"layouts\": [{\"name\": \"c\", \"fields\": [{\"name\":"
	            " \"v\", \"type\": \"u8\"}], \"check\": {\"crc\": "
	            "\"sum8\"}}]}");
	assert_int_equal(c->layouts[0].check.kind, TP_CHECK_SUM8);
	assert_int_equal(c->layouts[0].check.at, -1);
	config_free(c);
}

/* A minimal config works: defaults fill the rest. */
static void test_defaults(void **state)
{
	struct config *c;
	const struct cfg_input *in;
	const struct cfg_output *o;

	(void)state;
	c = load_ok(HEAD " \"inputs\": [{\"kind\": \"stdin\"}, {\"kind\": "
	            "\"spool\", \"dir\": \"/srv/in\", \"delete_done\": true}],"
	            " \"outputs\": [" HTTP "}, {\"kind\": \"file\", \"path\": "
	            "\"out.ndjson\"}]}");
	assert_string_equal(c->state_dir, "/var/lib/tidepost");
	assert_string_equal(c->ring.path, "/var/lib/tidepost/ring");
	assert_int_equal(c->ring.size_mb, 16);
	assert_string_equal(c->status.path, "/var/lib/tidepost/status.json");
	assert_null(c->status.metrics_path);
	assert_int_equal(c->n_inputs, 2);
	in = &c->inputs[0];
	assert_int_equal(in->kind, CFG_IN_STDIN);
	assert_int_equal(in->framing, TP_FRAMING_COBS);
	assert_string_equal(in->name, "stdin0");
	in = &c->inputs[1];
	assert_int_equal(in->framing, TP_FRAMING_WHOLE);
	assert_null(in->done);                  /* delete_done */
	assert_string_equal(in->rejected, "/srv/in/rejected");
	assert_string_equal(in->pattern, "*");
	o = &c->outputs[0];
	assert_string_equal(o->name, "http0");
	assert_int_equal(o->batch, 500);
	assert_int_equal(o->timeout_s, 30);
	assert_int_equal(o->format, CFG_FMT_BATCH);
	assert_false(o->allow_plain_http);
	o = &c->outputs[1];
	assert_int_equal(o->kind, CFG_OUT_FILE);
	assert_string_equal(o->name, "file1");
	assert_true(strncmp(o->path, tmp, strlen(tmp)) == 0);
	assert_int_equal(c->alerts.silent_after_s, 3600);
	assert_int_equal(c->alerts.n_to, 0);
	config_free(c);
}

/* Stations: every key lands in struct cfg_station; lookup by number. */
static void test_stations(void **state)
{
	const struct cfg_station *s;
	struct config *c;

	(void)state;
	c = load_ok(HEAD " \"stations\": {\"9\": {\"name\": \"b\"}, \"3\": {"
	            "\"name\": \"a\", \"title\": \"A\", \"lat\": -8.5, \"lon\":"
	            " 115.25, \"depth_m\": 2.5, \"expect_every_s\": 900, "
	            "\"silent_after_s\": 7200, \"alkalinity\": {\"value\": "
	            "2300}, \"qc\": {\"ph\": {\"suspect\": [7.6, 8.5], "
	            "\"fail\": [6, 9], \"spike\": 0.1, \"flat_n\": 3, "
	            "\"climatology\": [{\"months\": [12, 1], \"range\": [7.9, "
	            "8.2]}]}, \"salinity\": {\"rate_per_h\": 1}}, "
	            "\"battery\": {\"field\": \"battery\", \"warn_v\": 11.5, "
	            "\"cutoff_v\": 10}}}}");
	assert_int_equal(c->n_stations, 2);
	assert_null(config_station(c, 4));
	s = config_station(c, 9);
	assert_non_null(s);
	assert_string_equal(s->name, "b");
	assert_false(s->has_position);
	s = config_station(c, 3);
	assert_non_null(s);
	assert_string_equal(s->title, "A");
	assert_true(s->has_position && s->lat == -8.5 && s->lon == 115.25);
	assert_true(s->has_depth && s->depth_m == 2.5);
	assert_int_equal(s->expect_every_s, 900);
	assert_int_equal(s->silent_after_s, 7200);
	assert_int_equal(s->alkalinity.kind, CFG_ALK_VALUE);
	assert_true(s->alkalinity.value == 2300);
	assert_int_equal(s->n_qc, 2);
	assert_string_equal(s->qc[0].value, "ph");
	assert_true(s->qc[0].suspect.set && s->qc[0].suspect.max == 8.5);
	assert_true(s->qc[0].fail.set && s->qc[0].fail.min == 6);
	assert_true(s->qc[0].spike == 0.1);
	assert_int_equal(s->qc[0].flat_n, 3);
	assert_true(s->qc[0].climatology[11].set);
	assert_true(s->qc[0].climatology[0].min == 7.9);
	assert_false(s->qc[0].climatology[5].set);
	assert_string_equal(s->qc[1].value, "salinity");  /* derived */
	assert_true(s->battery.set);
	assert_int_equal(s->battery.forecast_h, 72);      /* default */
	assert_true(s->battery.cutoff_v == 10);
	config_free(c);
}

/* The example config and its layout load, as shipped. */
static void test_example(void **state)
{
	const struct tp_layout *l;
	struct cfg_errors e;
	struct config *c;

	(void)state;
	if (config_load("config/example.json", &c, &e) != 0)
		dump(&e);
	assert_int_equal(e.n, 0);
	l = &c->layouts[0];
	assert_string_equal(l->name, "reef-v2");
	assert_int_equal(l->n_match, 1);
	assert_int_equal(l->length_min, 37);
	assert_true(l->has_records);
	assert_int_equal(l->records.count, 4);
	assert_int_equal(l->records.count_field, -1);
	assert_int_equal(l->records.fields[1].missing, 0x800); /* -2048 */
	assert_string_equal(l->records.fields[1].unit, "degC");
	assert_string_equal(l->records.fields[3].unit, "umol/kg");
	assert_int_equal(tp_layout_header_bits(l), 88);
	assert_int_equal(tp_layout_record_bits(l), 48);
	assert_string_equal(c->stations[0].name, "rf2");
	assert_string_equal(c->outputs[0].headers[0].key, "X-Project");
	assert_string_equal(c->outputs[0].extra[0].value,
	                    "\"invented-reef-net\"");
	assert_string_equal(c->alerts.to[1].argv[0],
	                    "/usr/local/bin/notify-team");
	assert_null(c->alerts.to[1].argv[1]);
	config_free(c);
}

/* The option tables: names unique per table, every key documented, the
 * reference printable; a few keys the design names are present. */
static void test_tables(void **state)
{
	const struct opt_table *const *t;
	size_t n, i, j, k;
	FILE *f;

	(void)state;
	t = opt_tables(&n);
	assert_true(n >= 15);
	for (i = 0; i < n; i++) {
		for (j = 0; j < t[i]->n; j++) {
			assert_non_null(t[i]->opt[j].doc);
			for (k = 0; k < j; k++)
				assert_string_not_equal(t[i]->opt[j].name,
				                        t[i]->opt[k].name);
		}
	}
	assert_non_null(opt_find(opt_table_find("field"), "standard_name"));
	assert_non_null(opt_find(opt_table_find("output"), "token_env"));
	assert_non_null(opt_find(opt_table_find("qc"), "flat_fail_n"));
	assert_null(opt_find(opt_table_find("output"), "token"));
	f = tmpfile();
	assert_non_null(f);
	assert_int_equal(opt_print_reference(f), 0);
	assert_true(ftell(f) > 2000);
	fclose(f);
	config_free(NULL);
	cfg_errors_free(NULL);
}

/* Records counted by a header field refer to it by index. */
static void test_count_field(void **state)
{
	struct config *c;

	(void)state;
	c = load_ok(REC("{\"count\": \"n_rec\", \"every_s\": 600, \"fields\": "
	                "[{\"name\": \"v\", \"type\": \"u8\"}, {\"name\": "
	                "\"dt\", \"type\": \"u16\", \"role\": \"time_offset\"}]}"));
	assert_int_equal(c->layouts[0].records.count_field, 0);
	assert_int_equal(c->layouts[0].records.every_s, 600);
	assert_int_equal(c->layouts[0].records.fields[1].role,
	                 TP_ROLE_TIME_OFFSET);
	config_free(c);
}

static int setup(void **state)
{
	(void)state;
	snprintf(tmp, sizeof(tmp), "/tmp/tp-test-config-XXXXXX");
	return mkdtemp(tmp) == NULL ? -1 : 0;
}

static int teardown(void **state)
{
	char cmd[PATH_MAX + 16];

	(void)state;
	snprintf(cmd, sizeof(cmd), "rm -rf '%s'", tmp);
	return system(cmd) == 0 ? 0 : -1;
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(test_bad_rows),
		cmocka_unit_test(test_layout_file_missing),
		cmocka_unit_test(test_relative_paths),
		cmocka_unit_test(test_load_layouts),
		cmocka_unit_test(test_size_caps),
		cmocka_unit_test(test_error_cap),
		cmocka_unit_test(test_fields),
		cmocka_unit_test(test_crc),
		cmocka_unit_test(test_defaults),
		cmocka_unit_test(test_stations),
		cmocka_unit_test(test_example),
		cmocka_unit_test(test_tables),
		cmocka_unit_test(test_count_field),
	};

	return cmocka_run_group_tests(tests, setup, teardown);
}
