/*
 * reportout.h - writing a finished struct report: one self-contained
 * HTML page (inline CSS and SVG, no script, nothing fetched; well-formed
 * XHTML-compatible markup, so XML tools parse it), or a tidy CSV summary.
 *
 * Owns nothing beyond one text buffer per call (capped at
 * REPORTOUT_CHUNK_MAX; each section is written out as it is finished).
 *
 * The page, per station: a heading, the battery trend and forecast in
 * words, a summary table (one row per value: unit, count, min, mean,
 * max, share flagged 3 and 4, share missing, first and last time), one
 * time-series panel per value (svg.h), and pH against oxygen as a
 * scatter with Pearson's r.  Shares are of the readings that carry the
 * value (numbers and nulls).  The battery panel's time axis is stretched
 * to show the forecast cutoff time when that lies within one report span
 * after the end; a later forecast is given in words only.
 *
 * CSV (RFC 4180, CRLF): station,value,unit,count,min,mean,max,flagged_3,
 * flagged_4,missing,first,last - count = readings with a number, min /
 * mean / max over those not flagged 4 (empty when none), flagged_N and
 * missing as counts, first/last RFC 3339.
 *
 * Called by cmd_report.c.
 */
#ifndef TIDEPOST_REPORTOUT_H
#define TIDEPOST_REPORTOUT_H

#include <stdbool.h>
#include <stdint.h>
#include <stdio.h>

#include "report.h"
#include "reportin.h"

#define REPORTOUT_CHUNK_MAX (16 * 1024 * 1024)

struct reportout_info {
	const char *inputs;  /* what was read, in words */
	bool range_given;    /* --from/--to (else the data's range) */
	int64_t generated_s; /* when the report was made */
	const struct reportin_counts *in; /* may be NULL */
};

/* The page / the CSV to fp.  0, or -1 on a write error (errno) or a
 * section over REPORTOUT_CHUNK_MAX (EMSGSIZE). */
int reportout_html(FILE *fp, const struct report *r,
                   const struct reportout_info *info)
    __attribute__((warn_unused_result));
int reportout_csv(FILE *fp, const struct report *r)
    __attribute__((warn_unused_result));

/* The words used for a value ("ph" -> "pH") and a unit ("degC" ->
 * "°C"); others are returned as they are.  Static strings. */
const char *reportout_label(const char *name);
const char *reportout_unit(const char *unit);

#endif
