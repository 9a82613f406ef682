/*
 * example.c - a station firmware's use of libtidepost, as a bare-metal
 * Cortex-M4 test image: a layout given as a static C table (no JSON),
 * readings encoded into a packet, the packet framed with COBS, the byte
 * stream cut into frames again by the resumable framer (fed in UART-sized
 * chunks, after a broken frame it must skip), decoded, and every value
 * compared with what was sent.  A corrupted copy must fail the CRC.
 *
 * The layout mirrors config/layouts/reef-v2.json (37-byte packets: an
 * 11-byte header, four 48-bit records, CRC-16/IBM-3740 big-endian at the
 * end).  The readings are invented demo values.
 *
 * Memory: the field tables are `static const` (flash).  The layout itself
 * is in RAM (.data): struct tp_check embeds struct tp_crc with its
 * 256-entry table, which tp_crc_init fills at start (1 KiB of RAM for a
 * 16-bit CRC; a firmware could instead build the table once at boot the
 * same way).  Packet, reading and frame buffers are static so the stack
 * stays small.  Exit status 0 means the round trip held; the failing step
 * is printed otherwise.  Built and run by tests/firmware/run.sh.
 */
#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <string.h>

#include "tidepost/check.h"
#include "tidepost/frame.h"
#include "tidepost/layout.h"
#include "tidepost/status.h"

#include "fw.h"

#define N_REC 4
#define PKT_LEN 37

/* CRC-16/IBM-3740 as listed in the CRC RevEng catalogue (Greg Cook):
 * width 16, poly 0x1021, init 0xFFFF, no reflection, xorout 0, check
 * 0x29B1.  Given by parameters so the image carries no catalogue;
 * tp_crc_init verifies the check value. */
static const struct tp_crc_params crc16 = {
	.name = "CRC-16/IBM-3740", .width = 16, .poly = 0x1021,
	.init = 0xFFFF, .xorout = 0, .check = 0x29B1,
};

static const struct tp_match match[] = {
	{ .at = 0, .type = TP_T_U8, .is = 2 },
};

static const struct tp_field header[] = {
	{ .name = "kind", .type = TP_T_U8, .bits = 8 },
	{ .name = "station", .type = TP_T_U16, .bits = 16,
	  .role = TP_ROLE_STATION },
	{ .name = "seq", .type = TP_T_U16, .bits = 16, .role = TP_ROLE_SEQ },
	{ .name = "time", .type = TP_T_U32, .bits = 32, .role = TP_ROLE_TIME },
	{ .name = "battery", .type = TP_T_U16, .bits = 16, .scale = 0.001,
	  .has_range = true, .range_min = 0, .range_max = 16, .unit = "V" },
};

static const struct tp_field record[] = {
	{ .name = "ph", .type = TP_T_BITS, .bits = 12, .scale = 0.001,
	  .offset = 6.5, .has_missing = true, .missing = 4095,
	  .has_range = true, .range_min = 6.5, .range_max = 9.0,
	  .standard_name = "sea_water_ph_reported_on_total_scale" },
	{ .name = "temperature", .type = TP_T_BITS, .bits = 12,
	  .is_signed = true, .scale = 0.01, .offset = 20,
	  .has_missing = true, .missing = 0x800, /* -2048 in 12 bits */
	  .has_range = true, .range_min = -2, .range_max = 40,
	  .unit = "degC", .standard_name = "sea_water_temperature" },
	{ .name = "conductivity", .type = TP_T_BITS, .bits = 14,
	  .scale = 0.005, .has_missing = true, .missing = 16383,
	  .has_range = true, .range_min = 0, .range_max = 80,
	  .unit = "mS/cm",
	  .standard_name = "sea_water_electrical_conductivity" },
	{ .name = "oxygen", .type = TP_T_BITS, .bits = 10, .scale = 0.5,
	  .has_missing = true, .missing = 1023, .has_range = true,
	  .range_min = 0, .range_max = 500, .unit = "umol/kg",
	  .standard_name = "moles_of_oxygen_per_unit_mass_in_sea_water" },
};

static struct tp_layout layout = {
	.name = "reef-v2",
	.order = TP_ORDER_BIG,
	.match = match,
	.n_match = 1,
	.length_min = PKT_LEN,
	.length_max = PKT_LEN,
	.check = { .kind = TP_CHECK_CRC, .at = -2, .order = TP_ORDER_BIG },
	.fields = header,
	.n_fields = 5,
	.has_records = true,
	.records = { .fields = record, .n_fields = 4, .count = N_REC,
	             .count_field = -1, .every_s = 900 },
};

#define V(x) { (x), TP_FLAG_PASS }
#define NONE { NAN, TP_FLAG_MISSING }

/* Invented readings: station 17, a 12.6 V battery, one oxygen reading
 * missing (sensor wiper cycle). */
static const struct tp_value hdr_in[5] = {
	V(2), V(17), V(4242), V(1717200000), V(12.6),
};
static const struct tp_value rec_in[N_REC * 4] = {
	V(8.051), V(27.43), V(55.120), V(201.5),
	V(8.047), V(27.51), V(55.135), V(199.0),
	V(8.040), V(27.60), V(55.150), NONE,
	V(8.036), V(27.58), V(55.105), V(196.5),
};

/* A broken COBS frame (block code 5 runs into the delimiter), idle fill,
 * then room for the real frame. */
static const uint8_t junk[] = { 0x05, 0x11, 0x22, 0x00, 0x00 };

static uint8_t packet[PKT_LEN + 8];
static uint8_t stream[sizeof(junk) + PKT_LEN + PKT_LEN / 254 + 2];
static uint8_t framebuf[64];
static struct tp_framer framer;
static struct tp_packet pk;
static struct tp_reading rd;

static int fail(const char *step, enum tp_status s)
{
	fw_puts("firmware: FAIL: ");
	fw_puts(step);
	fw_puts(": ");
	fw_puts(tp_strerror(s));
	fw_puts("\n");
	return 1;
}

/* Feed the stream in 5-byte chunks (a UART FIFO's worth); expect one
 * broken frame, then the packet. */
static int deframe(size_t stream_len, const uint8_t **frame, size_t *len)
{
	size_t pos = 0, used, chunk;
	enum tp_frame_result r;

	if (tp_frame_init(&framer, TP_FRAMING_COBS, 0, framebuf,
	                  sizeof(framebuf)) != TP_OK)
		return fail("frame init", TP_ERR_ARG);
	while (pos < stream_len) {
		chunk = stream_len - pos < 5 ? stream_len - pos : 5;
		r = tp_frame_push(&framer, stream + pos, chunk, &used);
		pos += used;
		if (r == TP_FRAME_READY)
			break;
	}
	if (framer.frames != 1 || framer.broken != 1)
		return fail("deframe: frames/broken counts", TP_ERR_FRAME);
	*frame = tp_frame_data(&framer);
	*len = framer.len;
	return 0;
}

static bool close_to(struct tp_value got, struct tp_value want, double q)
{
	if (want.flag == TP_FLAG_MISSING)
		return got.flag == TP_FLAG_MISSING && isnan(got.v);
	return got.flag == TP_FLAG_PASS && fabs(got.v - want.v) <= q;
}

static int check_records(void)
{
	uint32_t k;
	size_t j;

	for (k = 0; k < N_REC; k++) {
		if (tp_decode_record(&pk, k, &rd) != TP_OK)
			return fail("decode record", TP_ERR_ARG);
		if (rd.time_s != 1717200000 + 900 * (int64_t)k)
			return fail("record time", TP_ERR_RANGE);
		for (j = 0; j < 4; j++) {
			/* half a quantum, plus rounding slack */
			double q = record[j].scale * 0.5 + 1e-9;

			if (!close_to(rd.values[5 + j], rec_in[k * 4 + j], q))
				return fail("record value", TP_ERR_RANGE);
		}
	}
	return 0;
}

static int check_header(void)
{
	if (!pk.has_station || pk.station != 17 || !pk.has_seq ||
	    pk.seq != 4242 || !pk.has_time || pk.time_s != 1717200000 ||
	    pk.n_records != N_REC)
		return fail("header roles", TP_ERR_RANGE);
	if (!close_to(pk.header[4], hdr_in[4], 0.0005 + 1e-9))
		return fail("battery", TP_ERR_RANGE);
	return 0;
}

static int encode(size_t *stream_len)
{
	size_t len = 0, flen = 0;
	enum tp_status s;

	s = tp_encode_packet(&layout, hdr_in, rec_in, N_REC, packet,
	                     sizeof(packet), &len);
	if (s != TP_OK)
		return fail("encode", s);
	if (len != PKT_LEN)
		return fail("encode: length", TP_ERR_LENGTH);
	memcpy(stream, junk, sizeof(junk));
	s = tp_frame_encode(TP_FRAMING_COBS, packet, len, stream + sizeof(junk),
	                    sizeof(stream) - sizeof(junk), &flen);
	if (s != TP_OK)
		return fail("cobs encode", s);
	*stream_len = sizeof(junk) + flen;
	return 0;
}

static int corrupt_must_fail(const uint8_t *frame, size_t len)
{
	static uint8_t bad[PKT_LEN];
	enum tp_status s;

	memcpy(bad, frame, len);
	bad[20] ^= 0x10; /* one bit inside record 1 */
	s = tp_decode_packet(&layout, bad, len, &pk);
	if (s != TP_ERR_CHECK)
		return fail("corrupted packet not refused", s);
	return 0;
}

int main(void)
{
	struct tp_layout_problem pb;
	const uint8_t *frame = NULL;
	size_t stream_len = 0, len = 0;
	enum tp_status s;

	s = tp_crc_init(&layout.check.crc, &crc16);
	if (s != TP_OK)
		return fail("crc init", s);
	s = tp_layout_validate(&layout, &pb);
	if (s != TP_OK)
		return fail(pb.what, s);
	if (encode(&stream_len) || deframe(stream_len, &frame, &len))
		return 1;
	if (len != PKT_LEN || memcmp(frame, packet, len) != 0)
		return fail("deframed bytes differ", TP_ERR_FRAME);
	if (tp_layout_select((const struct tp_layout *const[]){ &layout }, 1,
	                     frame, len) != 0)
		return fail("select", TP_ERR_MATCH);
	s = tp_decode_packet(&layout, frame, len, &pk);
	if (s != TP_OK)
		return fail("decode", s);
	if (check_header() || check_records() || corrupt_must_fail(frame, len))
		return 1;
	fw_puts("firmware: round trip ok: ");
	fw_put_u32((uint32_t)len);
	fw_puts("-byte packet, 4 records, COBS, CRC-16/IBM-3740\n");
	return 0;
}
