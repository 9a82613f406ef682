/*
 * jsonpos.h - the text side of a JSON document: comment stripping, the
 * checks cJSON does not make, and where every value and key sits.
 *
 * cJSON keeps no positions, so after cJSON has parsed the stripped text
 * we walk the text and the tree side by side (both are in document
 * order) and record, for every node, the byte offset of its value and of
 * its key.  Messages turn an offset into LINE:COL against the original
 * text; stripping keeps every byte offset, so the two agree.
 *
 * Checks made here: NUL bytes, unterminated block comments and nesting
 * deeper than JPOS_MAX_DEPTH (jpos_prepare, before cJSON sees the text);
 * duplicate keys and invalid UTF-8 in strings and keys (jpos_index, with
 * the key path, e.g. `layouts[0].fields[3].name`).
 *
 * Owns: the stripped copy and the index, freed by jpos_free.  The
 * original text and the cJSON tree belong to the caller and must outlive
 * the struct jpos.  Called by the config loader only.
 */
#ifndef TIDEPOST_JSONPOS_H
#define TIDEPOST_JSONPOS_H

#include <stddef.h>
#include <stdint.h>

#include <cjson/cJSON.h>

#define JPOS_MAX_DEPTH 32
#define JPOS_PATH_MAX  256 /* key paths longer than this are cut */

/* Called once per problem: byte offset, key path ("" when none), text. */
typedef void jpos_report_fn(void *ctx, size_t off, const char *path,
                            const char *what);

struct jpos_ent {
	uintptr_t node;   /* the cJSON node */
	uint32_t val_off; /* first byte of its value */
	uint32_t key_off; /* opening quote of its key, or val_off */
};

struct jpos {
	const char *orig; /* the text as read (not owned) */
	size_t len;
	char *text;           /* stripped copy, len + 1 bytes, NUL-ended */
	struct jpos_ent *ent; /* sorted by node once indexed */
	size_t n, cap;
};

/* Copy text (len bytes, any content) and strip comments.  Returns 0, or
 * -1 after reporting the problem (or on allocation failure, reported as
 * "out of memory").  jp is initialised here in any case. */
int jpos_prepare(struct jpos *jp, const char *text, size_t len,
                 jpos_report_fn *report, void *ctx)
    __attribute__((warn_unused_result));

/* Describe the cJSON parse failure at byte offset off of jp->text (the
 * character found and, where it is obvious, the likely cause). */
void jpos_syntax(const struct jpos *jp, size_t off, jpos_report_fn *report,
                 void *ctx);

/* Index root (parsed from jp->text), reporting duplicate keys and bad
 * UTF-8.  Returns the number of problems reported, or -1 on allocation
 * failure. */
int jpos_index(struct jpos *jp, const cJSON *root, jpos_report_fn *report,
               void *ctx) __attribute__((warn_unused_result));

/* Offset of node's value (key == 0) or key (key != 0); 0 if unknown. */
size_t jpos_offset(const struct jpos *jp, const cJSON *node, int key);

/* 1-based line and column (in characters) of byte offset off. */
void jpos_linecol(const struct jpos *jp, size_t off, unsigned *line,
                  unsigned *col);

/* Is s (n bytes) valid UTF-8 (RFC 3629)?  Returns n, or the offset of
 * the first bad byte. */
size_t jpos_utf8_check(const char *s, size_t n);

/* Free the copy and the index; jp may be zeroed or prepared. */
void jpos_free(struct jpos *jp);

#endif
