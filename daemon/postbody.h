/*
 * postbody.h - request bodies of the HTTP output (WIRE.md "HTTP output
 * body"), built from ring payloads (one reading as a JSON object each).
 *
 * Formats:
 *   batch   {"readings":[R,...],"quantities":{NAME:{"unit":U,
 *           "standard_name":S},...}}  (application/json)
 *   ndjson  R\nR\n...                 (application/x-ndjson)
 *   single  R                         (application/json; one reading)
 * `quantities` has one member per value name present in the batch that
 * a configured layout describes (its unit and/or standard_name; a field
 * with neither, and a name no layout has - e.g. a derived value - gets
 * no member), keyed by the name as sent (after rename), in order of
 * first appearance.
 *
 * Transformations: `rename` renames members of "values" and "flags";
 * `extra` adds members to every reading, but never replaces one the
 * reading already has (an id or time is never overwritten).  Without
 * rename/extra a reading's text is copied byte for byte; with them it is
 * parsed and printed again by cJSON (numbers keep their shortest form).
 *
 * Size: the whole body stays within max_bytes, except that the first
 * reading is always taken (a lone reading larger than that is sent
 * alone; the server may answer 413).  Deterministic: the same readings
 * give the same bytes, so a retry or a rebuild after a restart sends an
 * identical body.
 *
 * Owns its buffers (freed by postbody_free).  Called by post.c.
 */
#ifndef TIDEPOST_POSTBODY_H
#define TIDEPOST_POSTBODY_H

#include <stdbool.h>
#include <stddef.h>

#include "buf.h"
#include "config.h"

#define POSTBODY_NAMES_MAX 256 /* distinct value names per body */
#define POSTBODY_NAME_MAX  127

struct cJSON;

struct postbody {
	const struct cfg_output *o; /* not owned; outlives this */
	const struct config *cfg;   /* layouts; may be NULL */
	enum cfg_format format;
	struct cJSON **extra; /* parsed extra values (n_extra) */
	bool transform;       /* rename or extra in use */
	size_t max_bytes;
	struct buf body;  /* the body being built */
	struct buf one;   /* one reading, as it will be sent */
	struct buf quant; /* members of "quantities" */
	size_t n;         /* readings in body */
	size_t n_names;
	char (*names)[POSTBODY_NAME_MAX + 1]; /* names seen (sent form) */
	size_t hint; /* where the next name is likely found in names */
	bool finished;
};

enum postbody_rc {
	POSTBODY_OK = 0,
	POSTBODY_FULL, /* would pass max_bytes: not added */
	POSTBODY_BAD,  /* not a JSON object reading: not added */
	POSTBODY_NOMEM /* out of memory or over a buffer cap */
};

/* Set up for output o (format, rename, extra) with the layouts of cfg.
 * max_bytes: body cap (o->batch_bytes; 0 -> 256 KiB).  0, or -1 with a
 * message in err (an extra value that is not JSON, out of memory). */
int postbody_init(struct postbody *pb, const struct cfg_output *o,
                  const struct config *cfg, size_t max_bytes, char *err,
                  size_t errcap) __attribute__((warn_unused_result));
void postbody_free(struct postbody *pb);

/* Start an empty body. */
void postbody_begin(struct postbody *pb);

/* Add one reading (len bytes of JSON, no NUL needed). */
enum postbody_rc postbody_add(struct postbody *pb, const char *json, size_t len)
    __attribute__((warn_unused_result));

/* Close the body.  0, or -1 if a buffer cap was hit (ENOMEM). */
int postbody_finish(struct postbody *pb) __attribute__((warn_unused_result));

/* The finished body (valid until the next begin or free). */
const char *postbody_data(const struct postbody *pb);
size_t postbody_len(const struct postbody *pb);
size_t postbody_count(const struct postbody *pb);

/* "application/json" or "application/x-ndjson". */
const char *postbody_content_type(enum cfg_format f);

/* The unit and standard name a layout of cfg gives value `name` (either
 * may be NULL).  false when no layout has such a value. */
bool postbody_quantity(const struct config *cfg, const char *name,
                       const char **unit, const char **standard_name);

#endif
