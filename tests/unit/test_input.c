/*
 * test_input.c - the inputs in-process, with the real poll loop, a real
 * ring file and a real seen set in a temp folder: which spool entries are
 * read (RELIABILITY.md T20: names, symlinks, FIFOs, big files, *.tmp,
 * dotfiles, extra hard links, folders), where files go after the commit
 * (done/, rejected/ with NAME.reason), files left in place when the ring
 * is full, a file dropped in while running (inotify), the replay folder's
 * framing suffixes, and the stream side (broken frames counted, the ring
 * refusing).
 *
 * The layout and every packet are invented test data.
 */
#include <errno.h>
#include <fcntl.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <arpa/inet.h>
#include <netinet/in.h>
#include <poll.h>
#include <sys/socket.h>

#include <cmocka.h>

#include "tidepost/frame.h"

#include "config.h"
#include "ingest.h"
#include "input.h"
#include "loop.h"
#include "ring.h"
#include "seen.h"

/* A small invented layout: kind 9, station u8, seq u16, time u32,
 * value u16; sum8 check at the end (10 bytes). */
static const char layout_json[] =
    "{ \"name\": \"tiny\", \"byte_order\": \"big\",\n"
    "  \"match\": [ { \"at\": 0, \"type\": \"u8\", \"is\": 9 } ],\n"
    "  \"check\": { \"crc\": \"sum8\", \"at\": -1 },\n"
    "  \"fields\": [\n"
    "    { \"name\": \"kind\", \"type\": \"u8\" },\n"
    "    { \"name\": \"station\", \"type\": \"u8\",\n"
    "      \"role\": \"station\" },\n"
    "    { \"name\": \"seq\", \"type\": \"u16\", \"role\": \"seq\" },\n"
    "    { \"name\": \"time\", \"type\": \"u32\", \"role\": \"time\",\n"
    "      \"epoch\": \"1970-01-01T00:00:00Z\" },\n"
    "    { \"name\": \"level\", \"type\": \"u8\" } ] }\n";

struct fx {
	char dir[64], spool[96];
	struct config *cfg;
	struct loop *loop;
	struct ring *ring;
	struct seen *seen;
	struct ingest *ing;
	struct ingest_src src;
	struct input *in;
};

static void on_commit(void *arg, bool ok, uint64_t n)
{
	struct fx *f = arg;

	(void)n;
	if (f->in != NULL)
		input_committed(f->in, ok);
}

static void put(const char *dir, const char *name, const void *p, size_t n)
{
	char path[512];
	int fd;

	if (snprintf(path, sizeof(path), "%s/%s", dir, name) >=
	    (int)sizeof(path))
		fail_msg("path too long");
	fd = open(path, O_WRONLY | O_CREAT | O_TRUNC, 0644);
	assert_true(fd >= 0);
	assert_int_equal(write(fd, p, n), (ssize_t)n);
	assert_int_equal(close(fd), 0);
}

static bool exists(const char *dir, const char *name)
{
	char path[512];
	struct stat sb;

	if (snprintf(path, sizeof(path), "%s/%s", dir, name) >=
	    (int)sizeof(path))
		fail_msg("path too long");
	return lstat(path, &sb) == 0;
}

/* A valid tiny packet (seq sq). */
static size_t tiny(uint16_t sq, uint8_t *p)
{
	uint32_t t = 1796020500u + sq;
	unsigned sum = 0;
	int i;

	p[0] = 9;
	p[1] = 7;
	p[2] = (uint8_t)(sq >> 8);
	p[3] = (uint8_t)sq;
	p[4] = (uint8_t)(t >> 24);
	p[5] = (uint8_t)(t >> 16);
	p[6] = (uint8_t)(t >> 8);
	p[7] = (uint8_t)t;
	p[8] = 42;
	for (i = 0; i < 9; i++)
		sum += p[i];
	p[9] = (uint8_t)sum;
	return 10;
}

static void write_config(struct fx *f, const char *inputs)
{
	char path[128], text[2048];
	struct cfg_errors errs;

	put(f->dir, "tiny.json", layout_json, strlen(layout_json));
	snprintf(text, sizeof(text),
	         "{ \"layouts\": [ \"tiny.json\" ],\n"
	         " \"state_dir\": \"state\", \"inputs\": [ %s ] }\n",
	         inputs);
	put(f->dir, "config.json", text, strlen(text));
	snprintf(path, sizeof(path), "%s/config.json", f->dir);
	memset(&errs, 0, sizeof(errs));
	if (config_load(path, &f->cfg, &errs) != 0)
		fail_msg("%s", errs.n ? errs.msg[0] : "config");
	cfg_errors_free(&errs);
}

static void open_all(struct fx *f, uint64_t ring_size)
{
	char path[128], err[256];

	snprintf(path, sizeof(path), "%s/ring", f->dir);
	f->loop = loop_new(NULL);
	assert_int_equal(
	    ring_open(path, ring_size, NULL, &f->ring, err, sizeof(err)), 0);
	assert_int_equal(seen_open(f->dir, 0, &f->seen, err, sizeof(err)), 0);
	f->ing = ingest_new(f->cfg, f->ring, f->seen, loop_clock(f->loop));
	ingest_set_listener(f->ing, on_commit, f);
	assert_int_equal(ingest_src_init(&f->src, f->cfg, NULL), 0);
	f->src.name = "test";
}

static int setup(void **state)
{
	struct fx *f = calloc(1, sizeof(*f));
	char inputs[256];

	snprintf(f->dir, sizeof(f->dir), "/tmp/tp-input-XXXXXX");
	assert_non_null(mkdtemp(f->dir));
	snprintf(f->spool, sizeof(f->spool), "%s/spool", f->dir);
	assert_int_equal(mkdir(f->spool, 0755), 0);
	snprintf(inputs, sizeof(inputs),
	         "{ \"kind\": \"spool\", \"dir\": "
	         "\"spool\", \"pattern\": \"*.sbd\" }");
	write_config(f, inputs);
	*state = f;
	return 0;
}

static int teardown(void **state)
{
	struct fx *f = *state;
	char cmd[128];

	input_free(f->in);
	ingest_src_free(&f->src);
	ingest_free(f->ing);
	seen_close(f->seen);
	(void)ring_close(f->ring);
	loop_free(f->loop);
	config_free(f->cfg);
	snprintf(cmd, sizeof(cmd), "rm -rf %s", f->dir);
	assert_int_equal(system(cmd), 0);
	free(f);
	return 0;
}

/* Turn the loop as run.c does (dispatch, then the group commit) until
 * the input is no longer busy, at most n turns. */
static void turn(struct fx *f, int n)
{
	while (n-- > 0) {
		assert_true(loop_run_once(f->loop, 50) >= 0);
		assert_int_equal(ingest_commit(f->ing), 0);
		if (input_state(f->in) != INPUT_BUSY)
			return;
	}
}

static void start_spool(struct fx *f, bool once)
{
	struct input_ctx ctx = {f->loop, f->ing, f->cfg, once};
	char err[256];

	if (input_new(&f->cfg->inputs[0], &ctx, &f->in, err, sizeof(err)))
		fail_msg("%s", err);
}

static uint64_t records(struct fx *f)
{
	struct ring_stat st;

	ring_stat(f->ring, &st);
	return st.newest_seq;
}

/* Every kind of entry of T20 planted before the start (one sweep). */
static void spool_entry_rules(void **state)
{
	static const struct {
		const char *name;
		int kind;            /* 0 good, 1 bad packet, 2 big, 3 symlink,
		                      * 4 fifo, 5 hard link */
		const char *ends_in; /* "spool", "done", "rejected" */
		const char *why;
	} rows[] = {
	    {"a1.sbd", 0, "done", "a good message file"},
	    {"a2.sbd", 0, "done", "another: both in one batch"},
	    {"crc.sbd", 1, "rejected", "a bad check: rejected + reason"},
	    {"big.sbd", 2, "rejected", "over 64 KiB: rejected unread"},
	    {"link.sbd", 3, "spool", "symlink out of the folder: left"},
	    {"fifo.sbd", 4, "spool", "a FIFO: never opened, no hang"},
	    {"hard.sbd", 5, "spool", "a second link to a file elsewhere"},
	    {"half.sbd.tmp", 0, "spool", "being written: ignored"},
	    {".dot.sbd", 0, "spool", "a dotfile: ignored"},
	    {"new\nline.sbd", 0, "spool", "newline in the name: left"},
	    {"esc\033[31m.sbd", 0, "spool", "escape chars: left"},
	    {"other.txt", 0, "spool", "not the pattern: left"},
	};
	struct fx *F = *state;
	size_t i, n = sizeof(rows) / sizeof(rows[0]);
	char path[512], other[128];
	static uint8_t big[70000];
	uint8_t p[64];

	memset(big, 9, sizeof(big));
	for (i = 0; i < n; i++) {
		size_t len = tiny((uint16_t)(i + 1), p);

		snprintf(path, sizeof(path), "%s/%s", F->spool, rows[i].name);
		switch (rows[i].kind) {
		case 1:
			p[9] ^= 1;
			put(F->spool, rows[i].name, p, len);
			break;
		case 0:
			put(F->spool, rows[i].name, p, len);
			break;
		case 2:
			put(F->spool, rows[i].name, big, sizeof(big));
			break;
		case 3:
			assert_int_equal(symlink("/etc/passwd", path), 0);
			break;
		case 4:
			assert_int_equal(mkfifo(path, 0644), 0);
			break;
		case 5:
			put(F->dir, "elsewhere", p, len);
			snprintf(other, sizeof(other), "%s/elsewhere", F->dir);
			assert_int_equal(link(other, path), 0);
			break;
		}
	}
	open_all(F, RING_SIZE_MIN);
	start_spool(F, true);
	turn(F, 20);
	assert_int_equal(input_state(F->in), INPUT_IDLE);
	assert_int_equal(records(F), 2); /* a1 and a2, nothing else */
	for (i = 0; i < n; i++) {
		char where[256];

		snprintf(where, sizeof(where), "%s%s%s", F->spool,
		         strcmp(rows[i].ends_in, "spool") ? "/" : "",
		         strcmp(rows[i].ends_in, "spool") ? rows[i].ends_in
		                                          : "");
		if (!exists(where, rows[i].name))
			fail_msg("%s: not in %s (%s)", rows[i].name,
			         rows[i].ends_in, rows[i].why);
	}
	snprintf(path, sizeof(path), "%s/rejected", F->spool);
	assert_true(exists(path, "crc.sbd.reason"));
	assert_true(exists(path, "big.sbd.reason"));
}

/* The ring is full (no output acknowledges): a message file stays in
 * the folder, the input says BLOCKED, and nothing is lost or moved. */
static void full_ring_leaves_files(void **state)
{
	struct fx *f = *state;
	struct ingest_result res;
	uint8_t p[16];
	char name[160];
	uint16_t sq;
	size_t len;

	open_all(f, RING_SIZE_MIN);
	for (sq = 1; sq < 5000; sq++) {
		len = tiny(sq, p);
		if (ingest_packet(f->ing, &f->src, p, len, 0, &res) !=
		    INGEST_OK)
			break;
		assert_int_equal(ingest_commit(f->ing), 0);
	}
	assert_true(sq < 5000);
	len = tiny(60000, p);
	put(f->spool, "late.sbd", p, len);
	start_spool(f, true);
	turn(f, 5);
	assert_int_equal(input_state(f->in), INPUT_BLOCKED);
	assert_true(exists(f->spool, "late.sbd"));
	snprintf(name, sizeof(name), "%s/done", f->spool);
	assert_false(exists(name, "late.sbd"));
}

/* Running (inotify): a file written as NAME.tmp and renamed into place
 * is picked up without any timer, and goes to done/ after its commit. */
static void spool_picks_up_renamed_file(void **state)
{
	struct fx *f = *state;
	char from[256], to[256], done[128];
	uint8_t p[16];
	size_t len = tiny(77, p);
	int i;

	open_all(f, RING_SIZE_MIN);
	start_spool(f, false);
	turn(f, 3);
	assert_int_equal(input_state(f->in), INPUT_IDLE);
	put(f->spool, "m77.sbd.tmp", p, len);
	turn(f, 2);
	assert_int_equal(records(f), 0); /* .tmp is not read */
	snprintf(from, sizeof(from), "%s/m77.sbd.tmp", f->spool);
	snprintf(to, sizeof(to), "%s/m77.sbd", f->spool);
	assert_int_equal(rename(from, to), 0);
	snprintf(done, sizeof(done), "%s/done", f->spool);
	for (i = 0; i < 40 && !exists(done, "m77.sbd"); i++) {
		assert_true(loop_run_once(f->loop, 50) >= 0);
		assert_int_equal(ingest_commit(f->ing), 0);
	}
	assert_true(exists(done, "m77.sbd"));
	assert_int_equal(records(f), 1);
}

/* The replay folder: the framing is the file's last suffix; a file
 * without a known suffix is rejected with its reason; handled files are
 * deleted once committed. */
static void replay_folder_suffixes(void **state)
{
	static const struct {
		const char *name;
		enum tp_framing framing;
		int packets; /* in the file; -1: no framing suffix */
	} rows[] = {
	    {"r1.cobs", TP_FRAMING_COBS, 2},      /* two COBS frames */
	    {"r2.hex", TP_FRAMING_HEX, 1},        /* a hex line */
	    {"r3.slip", TP_FRAMING_SLIP, 1},      /* a SLIP frame */
	    {"r4.fixed-10", TP_FRAMING_FIXED, 3}, /* 3 x 10 bytes */
	    {"r5.data", TP_FRAMING_WHOLE, -1},    /* unknown suffix */
	};
	struct fx *f = *state;
	struct input_ctx ctx;
	char dir[128], err[256];
	uint8_t file[512], p[16];
	size_t i, n, len, k;
	uint16_t sq = 1;

	open_all(f, RING_SIZE_MIN);
	snprintf(dir, sizeof(dir), "%s/replay", f->dir);
	assert_int_equal(mkdir(dir, 0700), 0);
	for (i = 0; i < sizeof(rows) / sizeof(rows[0]); i++) {
		int np = rows[i].packets < 0 ? 1 : rows[i].packets;

		for (n = 0, k = 0; k < (size_t)np; k++) {
			len = tiny(sq++, p);
			assert_int_equal(
			    tp_frame_encode(rows[i].framing, p, len, file + n,
			                    sizeof(file) - n, &len),
			    TP_OK);
			n += len;
		}
		put(dir, rows[i].name, file, n);
	}
	ctx = (struct input_ctx){f->loop, f->ing, f->cfg, true};
	if (input_replay_new(dir, &ctx, &f->in, err, sizeof(err)) != 0)
		fail_msg("%s", err);
	turn(f, 20);
	assert_int_equal(records(f), 7);
	for (i = 0; i < 4; i++)
		assert_false(exists(dir, rows[i].name));
	snprintf(dir + strlen(dir), sizeof(dir) - strlen(dir), "/rejected");
	assert_true(exists(dir, "r5.data"));
	assert_true(exists(dir, "r5.data.reason"));
}

/* A TCP input: packets between garbage are taken (the framer resyncs),
 * the peer going away is noticed and the input connects again. */
static void tcp_reads_and_reconnects(void **state)
{
	struct fx *f = *state;
	struct sockaddr_in sa;
	socklen_t sl = sizeof(sa);
	char inputs[256];
	uint8_t out[256], p[16];
	size_t n = 0, len;
	int ls, c = -1, i, one = 1;

	ls = socket(AF_INET, SOCK_STREAM, 0);
	assert_true(ls >= 0);
	(void)setsockopt(ls, SOL_SOCKET, SO_REUSEADDR, &one, sizeof(one));
	memset(&sa, 0, sizeof(sa));
	sa.sin_family = AF_INET;
	sa.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
	assert_int_equal(bind(ls, (struct sockaddr *)&sa, sizeof(sa)), 0);
	assert_int_equal(listen(ls, 4), 0);
	assert_int_equal(getsockname(ls, (struct sockaddr *)&sa, &sl), 0);
	config_free(f->cfg);
	snprintf(inputs, sizeof(inputs),
	         "{ \"kind\": \"tcp\", \"host\": "
	         "\"127.0.0.1\", \"port\": %u, \"reconnect_s\": 1 }",
	         (unsigned)ntohs(sa.sin_port));
	write_config(f, inputs);
	open_all(f, RING_SIZE_MIN);
	start_spool(f, false);
	memcpy(out, "\x13\x37garbage", 10); /* noise, then a delimiter */
	n = 10;
	len = tiny(1, p);
	assert_int_equal(tp_frame_encode(TP_FRAMING_COBS, p, len, out + n,
	                                 sizeof(out) - n, &len),
	                 TP_OK);
	n += len;
	len = tiny(2, p);
	assert_int_equal(tp_frame_encode(TP_FRAMING_COBS, p, len, out + n,
	                                 sizeof(out) - n, &len),
	                 TP_OK);
	n += len;
	for (i = 0; i < 2; i++) {
		struct pollfd pf = {ls, POLLIN, 0};
		int k;

		for (k = 0; k < 60 && poll(&pf, 1, 0) == 0; k++)
			turn(f, 1);
		c = accept(ls, NULL, NULL);
		assert_true(c >= 0);
		assert_int_equal(write(c, out, n), (ssize_t)n);
		for (k = 0;
		     k < 40 && records(f) + ingest_stats(f->ing)->duplicates <
		                   2 + 2 * (unsigned)i;
		     k++)
			turn(f, 1);
		assert_int_equal(records(f), 2); /* 2nd round: duplicates */
		close(c);                        /* the peer goes away */
	}
	assert_int_equal(ingest_stats(f->ing)->duplicates, 2);
	close(ls);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
	    cmocka_unit_test_setup_teardown(spool_entry_rules, setup, teardown),
	    cmocka_unit_test_setup_teardown(full_ring_leaves_files, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(spool_picks_up_renamed_file, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(replay_folder_suffixes, setup,
	                                    teardown),
	    cmocka_unit_test_setup_teardown(tcp_reads_and_reconnects, setup,
	                                    teardown),
	};

	return cmocka_run_group_tests(tests, NULL, NULL);
}
