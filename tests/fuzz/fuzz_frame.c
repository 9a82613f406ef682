/*
 * fuzz_frame.c - fuzz target for the framer (decoder/frame.c).
 *
 * Input: byte 0 picks N for fixed:N (1..64), bytes 1..4 seed the chunk
 * sizes, the rest is the byte stream.  For every framing the stream is
 * pushed twice, once whole and once in pseudo-random chunks of 1..N
 * bytes; both runs must deliver the same frames (count, lengths and
 * bytes, hashed) and the same broken count, because the framer is
 * resumable (frame.h).  Contract checks: `used` never exceeds what was
 * pushed, MORE means everything was consumed, a frame fits its buffer,
 * no call stalls without consuming.
 *
 * Round trip: the stream (up to TP_MAX_PACKET bytes) taken as one packet
 * is framed with tp_frame_encode in every framing (within
 * tp_frame_bound) and pushed back: exactly that packet must come out,
 * with nothing broken.
 *
 * Built by the Makefile with tests/fuzz/replay.c (corpus replay, any
 * compiler) and by tests/fuzz/run-fuzz.sh with libFuzzer.
 */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "tidepost/frame.h"
#include "tidepost/layout.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

#define FRAME_CAP TP_MAX_PACKET
#define ENC_CAP (2 * TP_MAX_PACKET + 64)

struct run {
	uint64_t frames;
	uint64_t broken_results;
	uint64_t broken;
	uint64_t hash;
};

static uint64_t fnv(uint64_t h, const uint8_t *p, size_t n)
{
	size_t i;

	for (i = 0; i < n; i++) {
		h ^= p[i];
		h *= 1099511628211ULL;
	}
	return h;
}

static uint32_t next_rand(uint32_t *s)
{
	/* xorshift32 (Marsaglia 2003); any nonzero state works */
	*s ^= *s << 13;
	*s ^= *s >> 17;
	*s ^= *s << 5;
	return *s;
}

static void note_bytes(struct run *r, const uint8_t *p, size_t n)
{
	uint8_t len[8];
	size_t i;

	for (i = 0; i < 8; i++)
		len[i] = (uint8_t)((uint64_t)n >> (8 * i));
	r->frames++;
	r->hash = fnv(r->hash, len, sizeof len);
	r->hash = fnv(r->hash, p, n);
}

static void note_frame(struct run *r, const struct tp_framer *f)
{
	if (f->len > f->cap)
		abort();
	note_bytes(r, tp_frame_data(f), f->len);
}

/* Push n bytes, in one or more calls, checking the push contract. */
static void push_all(struct tp_framer *f, struct run *r, const uint8_t *p,
                     size_t n)
{
	size_t done = 0;
	int stalls = 0;

	while (done < n) {
		size_t used = 0;
		enum tp_frame_result res;

		res = tp_frame_push(f, p + done, n - done, &used);
		if (used > n - done)
			abort();
		if (res == TP_FRAME_MORE && used != n - done)
			abort();
		if (res == TP_FRAME_READY)
			note_frame(r, f);
		else if (res == TP_FRAME_BROKEN)
			r->broken_results++;
		stalls = used == 0 ? stalls + 1 : 0;
		if (stalls > 2)
			abort(); /* no progress: the caller would spin */
		done += used;
	}
}

static void run_stream(enum tp_framing kind, size_t fixed_n,
                       const uint8_t *p, size_t n, uint32_t seed,
                       uint32_t max_chunk, struct run *r)
{
	static uint8_t buf[FRAME_CAP];
	struct tp_framer f;
	size_t off = 0;

	memset(r, 0, sizeof *r);
	r->hash = 14695981039346656037ULL;
	if (tp_frame_init(&f, kind, fixed_n, buf, sizeof buf) != TP_OK)
		abort();
	while (off < n) {
		size_t want = n - off;

		if (seed != 0) {
			size_t c = 1 + next_rand(&seed) % max_chunk;
			want = c < want ? c : want;
		}
		push_all(&f, r, p + off, want);
		off += want;
	}
	if (tp_frame_finish(&f) == TP_FRAME_READY)
		note_frame(r, &f);
	r->broken = f.broken;
	if (f.frames != r->frames)
		abort();
}

static void chunks_agree(enum tp_framing kind, size_t fixed_n,
                         const uint8_t *p, size_t n, uint32_t seed)
{
	struct run whole, cut;

	run_stream(kind, fixed_n, p, n, 0, 1, &whole);
	run_stream(kind, fixed_n, p, n, seed | 1, 1 + seed % 97, &cut);
	if (whole.frames != cut.frames || whole.broken != cut.broken ||
	    whole.hash != cut.hash)
		abort();
}

/* Frame p in `kind` and read it back: exactly p must come out. */
static void round_trip(enum tp_framing kind, const uint8_t *p, size_t n)
{
	static uint8_t enc[ENC_CAP], buf[FRAME_CAP];
	struct tp_framer f;
	struct run r, want;
	size_t len = 0;

	if (tp_frame_bound(kind, n) > sizeof enc)
		abort();
	if (tp_frame_encode(kind, p, n, enc, tp_frame_bound(kind, n), &len) !=
	    TP_OK)
		abort();
	if (len > tp_frame_bound(kind, n))
		abort();
	if (tp_frame_init(&f, kind, n, buf, sizeof buf) != TP_OK)
		abort();
	memset(&r, 0, sizeof r);
	r.hash = 14695981039346656037ULL;
	want = r;
	push_all(&f, &r, enc, len);
	if (tp_frame_finish(&f) == TP_FRAME_READY)
		note_frame(&r, &f);
	note_bytes(&want, p, n);
	if (r.frames != 1 || r.hash != want.hash || f.broken != 0)
		abort();
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	static const enum tp_framing kinds[] = {
		TP_FRAMING_COBS, TP_FRAMING_SLIP, TP_FRAMING_HEX,
		TP_FRAMING_WHOLE, TP_FRAMING_FIXED
	};
	const uint8_t *p;
	size_t n, i, fixed_n;
	uint32_t seed;

	if (size < 5)
		return 0;
	fixed_n = 1 + data[0] % 64;
	seed = (uint32_t)data[1] | (uint32_t)data[2] << 8 |
	       (uint32_t)data[3] << 16 | (uint32_t)data[4] << 24;
	p = data + 5;
	n = size - 5;
	for (i = 0; i < sizeof kinds / sizeof kinds[0]; i++)
		chunks_agree(kinds[i], fixed_n, p, n, seed);
	if (n == 0 || n > FRAME_CAP)
		return 0;
	for (i = 0; i < sizeof kinds / sizeof kinds[0]; i++)
		round_trip(kinds[i], p, n);
	return 0;
}
