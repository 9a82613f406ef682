/*
 * input.c - what every input shares: dispatch by kind, the stream side
 * (framer -> ingest), backoff, rate-limited logs, safe names; see
 * input.h.
 */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "input.h"
#include "log.h"

#define BAD_LOG_MS 60000 /* bad frames of a stream: a line a minute */

int input_new(const struct cfg_input *ci, const struct input_ctx *ctx,
              struct input **out, char *err, size_t errcap)
{
	*out = NULL;
	switch (ci->kind) {
	case CFG_IN_SERIAL:
		return input_serial_new(ci, ctx, out, err, errcap);
	case CFG_IN_TCP:
		return input_tcp_new(ci, ctx, out, err, errcap);
	case CFG_IN_SPOOL:
		return input_spool_new(ci, ctx, false, out, err, errcap);
	case CFG_IN_STDIN:
		return input_stdin_new(ci, ctx, out, err, errcap);
	}
	snprintf(err, errcap, "input: %s: unknown kind", ci->name);
	return -1;
}

int input_replay_new(const char *dir, const struct input_ctx *ctx,
                     struct input **out, char *err, size_t errcap)
{
	struct cfg_input ci;

	memset(&ci, 0, sizeof(ci));
	ci.kind = CFG_IN_SPOOL;
	ci.name = (char *)"replay";
	ci.framing = TP_FRAMING_WHOLE;
	ci.dir = (char *)dir;
	ci.delete_done = true;
	ci.pattern = (char *)"*";
	/* input_spool_new copies what it keeps of a replay entry */
	return input_spool_new(&ci, ctx, true, out, err, errcap);
}

void input_committed(struct input *in, bool ok)
{
	if (in->ops->committed != NULL)
		in->ops->committed(in, ok);
}

enum input_state input_state(const struct input *in)
{
	return in->ops->state(in);
}

const char *input_name(const struct input *in)
{
	return in->name;
}

void input_free(struct input *in)
{
	if (in != NULL)
		in->ops->free(in);
}

int input_base_init(struct input *in, const struct input_ops *ops,
                    const struct cfg_input *ci, const struct input_ctx *ctx)
{
	in->ops = ops;
	in->ci = ci;
	in->ctx = *ctx;
	in->name = ci->name;
	return ingest_src_init(&in->src, ctx->cfg, ci);
}

void input_base_fini(struct input *in)
{
	ingest_src_free(&in->src);
}

bool ratelog_allow(struct ratelog *r, int64_t now_ms, int64_t period_ms,
                   uint64_t *held)
{
	if (r->any && now_ms - r->last_ms < period_ms) {
		r->held++;
		return false;
	}
	*held = r->held;
	r->held = 0;
	r->any = true;
	r->last_ms = now_ms;
	return true;
}

int stream_init(struct stream *s, const struct cfg_input *ci)
{
	memset(s, 0, sizeof(*s));
	if (tp_frame_init(&s->fr, ci->framing, ci->fixed_n, s->frame,
	                  sizeof(s->frame)) != TP_OK)
		return -1;
	return 0;
}

static void stream_bad(struct input *in, struct stream *s, const char *why)
{
	int64_t now = clock_mono_ms(loop_clock(in->ctx.loop));
	uint64_t held = 0;

	if (!ratelog_allow(&s->bad_log, now, BAD_LOG_MS, &held))
		return;
	if (held > 0)
		log_warn("input: %s: offset %" PRIu64 ": %s (and %" PRIu64
		         " more bad frames in the last minute; %" PRIu64
		         " broken, %" PRIu64 " rejected since start)",
		         in->name, s->fr.frame_start, why, held, s->broken,
		         s->rejected);
	else
		log_warn("input: %s: offset %" PRIu64 ": %s", in->name,
		         s->fr.frame_start, why);
}

/* One framer result.  true: the ring refused. */
static bool stream_result(struct input *in, struct stream *s,
                          enum tp_frame_result r)
{
	struct ingest_result res;
	enum ingest_rc rc;
	int64_t now_s;

	if (r == TP_FRAME_BROKEN) {
		s->broken++;
		stream_bad(in, s, "broken frame");
		return false;
	}
	if (r != TP_FRAME_READY || s->fr.len == 0)
		return false;
	s->frames++;
	now_s = clock_real_ms(loop_clock(in->ctx.loop)) / 1000;
	rc = ingest_packet(in->ctx.ing, &in->src, tp_frame_data(&s->fr),
	                   s->fr.len, now_s, &res);
	if (rc == INGEST_REJECTED) {
		s->rejected++;
		stream_bad(in, s, res.reason);
	}
	if (rc == INGEST_FULL || rc == INGEST_DOWN) {
		s->refused += res.refused;
		return true;
	}
	return false;
}

bool stream_feed(struct input *in, struct stream *s, const uint8_t *p, size_t n)
{
	enum tp_frame_result r;
	size_t off = 0, used;
	bool refused = false;

	while (off < n) {
		used = 0;
		r = tp_frame_push(&s->fr, p + off, n - off, &used);
		off += used;
		refused |= stream_result(in, s, r);
		if (r == TP_FRAME_MORE && used == 0)
			break;
	}
	return refused;
}

bool stream_finish(struct input *in, struct stream *s)
{
	return stream_result(in, s, tp_frame_finish(&s->fr));
}

uint32_t input_backoff_s(uint32_t base_s, uint32_t fails)
{
	uint32_t d = base_s ? base_s : 1;

	while (fails > 1 && d < INPUT_BACKOFF_MAX_S) {
		d *= 2;
		fails--;
	}
	if (d > INPUT_BACKOFF_MAX_S && base_s <= INPUT_BACKOFF_MAX_S)
		d = INPUT_BACKOFF_MAX_S;
	return d < base_s ? base_s : d;
}

void input_escape_name(const char *name, char *out, size_t cap)
{
	static const char hex[] = "0123456789abcdef";
	size_t o = 0;
	const unsigned char *p = (const unsigned char *)name;

	for (; *p != '\0' && o + 5 < cap && o < 200; p++) {
		if (*p >= 0x20 && *p < 0x7f && *p != '\\') {
			out[o++] = (char)*p;
			continue;
		}
		out[o++] = '\\';
		out[o++] = 'x';
		out[o++] = hex[*p >> 4];
		out[o++] = hex[*p & 15];
	}
	if (*p != '\0' && o + 4 <= cap) {
		memcpy(out + o, "...", 3);
		o += 3;
	}
	if (cap > 0)
		out[o < cap ? o : cap - 1] = '\0';
}
