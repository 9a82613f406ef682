/*
 * reportin.c - reading the report's inputs: NDJSON readings, the ring,
 * archived packets; see reportin.h.
 */
#include "reportin.h"

#include <errno.h>
#include <fcntl.h>
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "tidepost/layout.h"

#include "buf.h"
#include "emit.h"
#include "log.h"
#include "process.h"
#include "ring.h"
#include "ringview.h"

#define READ_BYTES (64 * 1024)
#define ID_MAX     160

struct reportin {
	const struct config *cfg;
	struct report *r; /* NULL: scan */
	struct reportin_scan *scan;
	struct progress *pg;
	bool has_framing;
	enum tp_framing framing;
	size_t fixed_n;
	uint64_t done; /* bytes or records this pass */
	struct reportin_counts counts;
	size_t logged;
	struct process *proc; /* packets, feeding pass */
	bool proc_failed;
	uint64_t ref;
	struct buf line;
	struct tp_packet pk;
	struct tp_reading rd;
	struct proc_out pout;
	uint8_t frame[TP_MAX_PACKET];
	uint8_t in[READ_BYTES];
	char ring_rec[RING_PAYLOAD_MAX + 1];
};

struct reportin *reportin_new(const struct config *cfg, struct report *r,
                              struct reportin_scan *scan, struct progress *pg,
                              bool has_framing, enum tp_framing framing,
                              size_t fixed_n)
{
	struct reportin *in = calloc(1, sizeof(*in));

	if (in == NULL)
		return NULL;
	in->cfg = cfg;
	in->r = r;
	in->scan = scan;
	in->pg = pg;
	in->has_framing = has_framing;
	in->framing = framing;
	in->fixed_n = fixed_n;
	buf_init(&in->line, REPORTIN_LINE_MAX);
	return in;
}

void reportin_free(struct reportin *in)
{
	if (in == NULL)
		return;
	process_free(in->proc);
	buf_free(&in->line);
	free(in);
}

uint64_t reportin_done(const struct reportin *in)
{
	return in->done;
}

const struct reportin_counts *reportin_counts(const struct reportin *in)
{
	return &in->counts;
}

static void tick(struct reportin *in, uint64_t n)
{
	uint64_t items =
	    in->r != NULL ? in->r->counts.readings : in->scan->readings;

	in->done += n;
	if (in->pg != NULL)
		progress_update(in->pg, in->done, items);
}

/* A bad line or frame: counted, the first few logged. */
static void bad(struct reportin *in, uint64_t *count, const char *where,
                uint64_t at, const char *what, const char *why)
{
	(*count)++;
	if (in->r == NULL || in->logged > REPORTIN_LOG_MAX)
		return; /* the scan pass counts; the feeding pass tells */
	if (in->pg != NULL)
		progress_clear(in->pg);
	if (in->logged++ == REPORTIN_LOG_MAX)
		log_warn("report: more bad input; not logged each (see the "
		         "summary)");
	else
		log_warn("report: %s: %s %" PRIu64 ": %s", where, what, at,
		         why);
}

/* ---- the sink: scan or feed ------------------------------------------ */

static bool sink_begin(struct reportin *in, const char *station, int64_t t,
                       const char *id)
{
	struct reportin_scan *s = in->scan;

	if (in->r != NULL)
		return report_begin(in->r, station, t, id);
	if ((s->only_station != NULL &&
	     strcmp(station, s->only_station) != 0) ||
	    (s->has_from && t < s->from) || (s->has_to && t > s->to))
		return false;
	if (!s->any || t < s->tmin)
		s->tmin = t;
	if (!s->any || t > s->tmax)
		s->tmax = t;
	s->any = true;
	s->readings++;
	return false;
}

/* ---- JSON readings --------------------------------------------------- */

static void json_units(struct reportin *in, const cJSON *q)
{
	const cJSON *e, *u, *s;

	if (in->r == NULL || !cJSON_IsObject(q))
		return;
	cJSON_ArrayForEach(e, q)
	{
		u = cJSON_GetObjectItemCaseSensitive(e, "unit");
		s = cJSON_GetObjectItemCaseSensitive(e, "standard_name");
		if (report_unit_add(in->r, e->string,
		                    cJSON_IsString(u) ? u->valuestring : NULL,
		                    cJSON_IsString(s) ? s->valuestring : NULL) <
		    0)
			break; /* table full: later units stay unknown */
	}
}

/* station as text: a string, or a number written as an integer. */
static const char *json_station(const cJSON *o, char *tmp, size_t cap)
{
	const cJSON *s = cJSON_GetObjectItemCaseSensitive(o, "station");

	if (cJSON_IsString(s) && s->valuestring[0] != '\0')
		return s->valuestring;
	if (cJSON_IsNumber(s) && s->valuedouble >= 0 &&
	    s->valuedouble <= 4294967295.0) {
		snprintf(tmp, cap, "%.0f", s->valuedouble);
		return tmp;
	}
	return NULL;
}

static void json_values(struct reportin *in, const cJSON *vals,
                        const cJSON *flags)
{
	const cJSON *v, *f;
	int flag;

	cJSON_ArrayForEach(v, vals)
	{
		f = cJSON_IsObject(flags)
		        ? cJSON_GetObjectItemCaseSensitive(flags, v->string)
		        : NULL;
		flag = cJSON_IsNumber(f) ? (int)f->valuedouble : 2;
		if (cJSON_IsNumber(v))
			report_value(in->r, v->string, v->valuedouble, flag);
		else if (cJSON_IsNull(v))
			report_value(in->r, v->string, NAN, 9);
	}
}

/* One reading object.  NULL, or what is wrong with it. */
static const char *json_reading(struct reportin *in, const cJSON *o)
{
	const cJSON *t = cJSON_GetObjectItemCaseSensitive(o, "time");
	const cJSON *id = cJSON_GetObjectItemCaseSensitive(o, "id");
	const cJSON *vals = cJSON_GetObjectItemCaseSensitive(o, "values");
	const char *station;
	char tmp[EMIT_NUM_MAX];
	int64_t ts;

	if (!cJSON_IsObject(o))
		return "not a JSON object";
	station = json_station(o, tmp, sizeof(tmp));
	if (station == NULL)
		return "no \"station\"";
	if (!cJSON_IsString(t) || emit_parse_time(t->valuestring, &ts) < 0)
		return "no RFC 3339 \"time\"";
	if (!cJSON_IsObject(vals))
		return "no \"values\" object";
	if (!sink_begin(in, station, ts,
	                cJSON_IsString(id) ? id->valuestring : NULL))
		return NULL;
	json_values(in, vals, cJSON_GetObjectItemCaseSensitive(o, "flags"));
	report_end(in->r);
	return NULL;
}

/* One line (or ring record) of JSON text. */
static void json_text(struct reportin *in, const char *text, size_t len,
                      const char *where, const char *what, uint64_t at)
{
	const cJSON *rs, *e;
	const char *why = NULL;
	cJSON *o;

	o = cJSON_ParseWithLength(text, len);
	if (o == NULL) {
		bad(in, &in->counts.bad_lines, where, at, what, "not JSON");
		return;
	}
	rs = cJSON_GetObjectItemCaseSensitive(o, "readings");
	json_units(in, cJSON_GetObjectItemCaseSensitive(o, "quantities"));
	if (cJSON_IsArray(rs)) {
		cJSON_ArrayForEach(e, rs)
		{
			if (why == NULL)
				why = json_reading(in, e);
		}
	} else if (!cJSON_HasObjectItem(o, "quantities") ||
	           cJSON_HasObjectItem(o, "values")) {
		why = json_reading(in, o);
	}
	if (why != NULL)
		bad(in, &in->counts.bad_lines, where, at, what, why);
	cJSON_Delete(o);
}

static bool blank(const char *s, size_t n)
{
	size_t i;

	for (i = 0; i < n; i++) {
		if (s[i] != ' ' && s[i] != '\t' && s[i] != '\r')
			return false;
	}
	return true;
}

/* The next line of fp into in->line (without '\n').  1 a line, 0 end.
 * A line past the cap is read to its end and flagged in *too_long. */
static int next_line(struct reportin *in, FILE *fp, bool *too_long)
{
	int c;
	uint64_t n = 0;

	buf_reset(&in->line);
	*too_long = false;
	for (;;) {
		c = getc_unlocked(fp);
		if (c == EOF)
			break;
		n++;
		if (c == '\n')
			break;
		buf_addc(&in->line, (char)c);
	}
	tick(in, n);
	*too_long = buf_failed(&in->line);
	return n > 0 ? 1 : 0;
}

int reportin_readings(struct reportin *in, const char *path)
{
	FILE *fp = fopen(path, "re");
	uint64_t lineno = 0;
	bool too_long;
	int rc = 0;

	if (fp == NULL) {
		log_err("report: open: %s: %s", path, strerror(errno));
		in->counts.unreadable++;
		return -1;
	}
	while (next_line(in, fp, &too_long) == 1) {
		lineno++;
		if (too_long)
			bad(in, &in->counts.bad_lines, path, lineno, "line",
			    "longer than 1 MiB");
		else if (!blank(in->line.data == NULL ? "" : in->line.data,
		                in->line.len))
			json_text(in, in->line.data, in->line.len, path, "line",
			          lineno);
	}
	if (ferror(fp)) {
		log_err("report: read: %s: %s", path, strerror(errno));
		in->counts.unreadable++;
		rc = -1;
	}
	fclose(fp);
	return rc;
}

/* ---- the ring -------------------------------------------------------- */

static void ring_records(struct reportin *in, struct ring *ring,
                         const char *path)
{
	struct ring_stat st;
	struct ring_iter it;
	uint64_t seq;
	size_t len;
	int rc;

	ring_stat(ring, &st);
	ring_iter_init(&it, st.oldest_seq > 0 ? st.oldest_seq - 1 : 0);
	for (;;) {
		rc = ring_iter_next(ring, &it, in->ring_rec,
		                    sizeof(in->ring_rec) - 1, &len, &seq);
		if (rc == 0)
			break;
		if (rc < 0) {
			log_err("report: ring: %s: read after seq %" PRIu64
			        ": %s",
			        path, it.seq, strerror(errno));
			in->counts.unreadable++;
			break;
		}
		tick(in, 1);
		json_text(in, in->ring_rec, len, path, "seq", seq);
	}
}

/* The ring is opened read-only (ringview.h): never changed, and
 * readable while the daemon runs (then a snapshot). */
int reportin_ring(struct reportin *in, const char *path)
{
	struct ringview *view = ringview_new();
	struct ringio_ops ops;
	struct ring *ring = NULL;
	char err[256];

	if (view == NULL) {
		log_err("report: ring: %s: %s", path, strerror(ENOMEM));
		in->counts.unreadable++;
		return -1;
	}
	ops = ringview_ops(view);
	if (ring_open(path, 0, &ops, &ring, err, sizeof(err)) != 0) {
		log_err("%s", err);
		ringview_free(view);
		in->counts.unreadable++;
		return -1;
	}
	ring_records(in, ring, path);
	(void)ring_close(ring); /* its writes went to memory only */
	ringview_free(view);
	return 0;
}

/* ---- packets --------------------------------------------------------- */

static const char *station_text(const struct reportin *in, char *tmp,
                                size_t cap)
{
	uint32_t number = in->pk.has_station ? in->pk.station : 0;
	const struct cfg_station *st = config_station(in->cfg, number);

	if (st != NULL && st->name != NULL)
		return st->name;
	snprintf(tmp, cap, "%" PRIu32, number);
	return tmp;
}

/* The name of value slot i of in->rd, or NULL when it is no value. */
static const char *slot_name(const struct reportin *in,
                             const struct tp_layout *l, size_t i)
{
	const struct tp_derived_info *d;
	const struct tp_field *f;

	if (i < tp_layout_n_values(l)) {
		f = tp_layout_field(l, i);
		return emit_is_value(f) ? f->name : NULL;
	}
	d = process_derived(in->pout.plan, i);
	return d != NULL ? d->name : NULL;
}

/* QC and derived values, as the daemon makes them (feeding pass). */
static void run_process(struct reportin *in, const struct tp_layout *l,
                        const char *id)
{
	in->pout.plan = NULL;
	if (in->r == NULL || in->proc_failed)
		return;
	if (in->proc == NULL)
		in->proc = process_new(in->cfg);
	if (in->proc == NULL ||
	    process_reading(in->proc, in->pk.has_station ? in->pk.station : 0,
	                    l, &in->rd, ++in->ref, id, &in->pout) < 0) {
		log_warn("report: QC and derived values: %s; values are "
		         "shown as decoded",
		         strerror(errno ? errno : ENOMEM));
		in->proc_failed = true;
		in->pout.plan = NULL;
	}
}

static void packet_reading(struct reportin *in, const struct tp_layout *l,
                           const char *station)
{
	const struct tp_value *v;
	struct buf id;
	const char *name;
	size_t i;

	buf_init(&id, ID_MAX);
	emit_id(&id, station, in->pk.time_s, in->pk.has_seq ? in->pk.seq : 0,
	        in->rd.record);
	run_process(in, l, buf_str(&id));
	if (sink_begin(in, station, in->rd.time_s,
	               buf_failed(&id) ? NULL : buf_str(&id))) {
		for (i = 0; i < in->rd.n_values; i++) {
			name = slot_name(in, l, i);
			v = &in->rd.values[i];
			if (name != NULL)
				report_value(in->r, name, v->v, v->flag);
		}
		report_end(in->r);
	}
	buf_free(&id);
}

static void packet_frame(struct reportin *in, const char *path,
                         const struct tp_framer *fr, int64_t received_s)
{
	const struct tp_layout *l;
	char tmp[EMIT_NUM_MAX];
	const char *station;
	enum tp_status st;
	uint32_t k;
	int li;

	if (fr->len == 0)
		return;
	li = tp_layout_select(in->cfg->layout_ptrs, in->cfg->n_layouts,
	                      tp_frame_data(fr), fr->len);
	if (li < 0) {
		bad(in, &in->counts.bad_frames, path, fr->frame_start, "offset",
		    "no layout accepts the packet");
		return;
	}
	l = in->cfg->layout_ptrs[li];
	st = tp_decode_packet(l, tp_frame_data(fr), fr->len, &in->pk);
	if (st != TP_OK) {
		bad(in, &in->counts.bad_frames, path, fr->frame_start, "offset",
		    tp_strerror(st));
		return;
	}
	if (!in->pk.has_time)
		in->pk.time_s = received_s;
	station = station_text(in, tmp, sizeof(tmp));
	for (k = 0; k < in->pk.n_records; k++) {
		if (tp_decode_record(&in->pk, k, &in->rd) == TP_OK)
			packet_reading(in, l, station);
		else
			in->counts.bad_frames++;
	}
}

static void frame_result(struct reportin *in, const char *path,
                         const struct tp_framer *fr, int64_t received_s,
                         enum tp_frame_result res)
{
	if (res == TP_FRAME_READY)
		packet_frame(in, path, fr, received_s);
	else if (res == TP_FRAME_BROKEN)
		bad(in, &in->counts.bad_frames, path, fr->frame_start, "offset",
		    "broken frame");
}

static void packet_chunk(struct reportin *in, const char *path,
                         struct tp_framer *fr, int64_t received_s, size_t n)
{
	enum tp_frame_result res;
	size_t off = 0, used;

	while (off < n) {
		used = 0;
		res = tp_frame_push(fr, in->in + off, n - off, &used);
		off += used;
		frame_result(in, path, fr, received_s, res);
		if (res == TP_FRAME_MORE && used == 0)
			break;
	}
	tick(in, n);
}

static enum tp_framing framing_for(const struct reportin *in, const char *path)
{
	size_t n = strlen(path);

	if (in->has_framing)
		return in->framing;
	if (n > 4 && (strcasecmp(path + n - 4, ".sbd") == 0 ||
	              strcasecmp(path + n - 4, ".bin") == 0))
		return TP_FRAMING_WHOLE;
	return TP_FRAMING_COBS;
}

static int packet_stream(struct reportin *in, const char *path, int fd,
                         int64_t received_s)
{
	struct tp_framer fr;
	ssize_t n;

	if (tp_frame_init(&fr, framing_for(in, path), in->fixed_n, in->frame,
	                  sizeof(in->frame)) != TP_OK) {
		log_err("report: %s: framing cannot be set up", path);
		return -1;
	}
	for (;;) {
		n = read(fd, in->in, sizeof(in->in));
		if (n < 0 && errno == EINTR)
			continue;
		if (n < 0) {
			log_err("report: read: %s: %s", path, strerror(errno));
			return -1;
		}
		if (n == 0)
			break;
		packet_chunk(in, path, &fr, received_s, (size_t)n);
	}
	frame_result(in, path, &fr, received_s, tp_frame_finish(&fr));
	return 0;
}

int reportin_packets(struct reportin *in, const char *path)
{
	struct stat sb;
	int fd, rc;

	fd = open(path, O_RDONLY | O_CLOEXEC);
	if (fd < 0 || fstat(fd, &sb) < 0) {
		log_err("report: open: %s: %s", path, strerror(errno));
		if (fd >= 0)
			close(fd);
		in->counts.unreadable++;
		return -1;
	}
	rc = packet_stream(in, path, fd, (int64_t)sb.st_mtime);
	close(fd);
	if (rc < 0)
		in->counts.unreadable++;
	return rc;
}
