/*
 * serial_probe.c - a tiny client of the real libserialport, used by the
 * integration harness (tests/integration/ptyrun.py) to prove that a pty
 * dressed up as /dev/ttyS0 really works through sp_open()/sp_blocking_read().
 *
 * It opens PORT at 9600 8N1 (no flow control), optionally writes some
 * bytes, then reads and prints what arrives, one line per read:
 *
 *	open: ok PORT            after sp_open and the 8N1 configuration
 *	wrote: N                 after -w HEX was written
 *	data: 41 42 0a           bytes received, in hex
 *	lost: hangup             the device went away (poll saw POLLHUP)
 *	lost: eof                read returned 0 without POLLHUP
 *	lost: sp_nonblocking_read: MESSAGE  a read failed (EIO ...)
 *	absent: sp_open: PORT: MESSAGE     (-r) a reopen attempt failed
 *	done: N bytes            normal end: N bytes seen, or the timeout hit
 *
 * With -r the probe keeps going after the device is lost: it closes the
 * port and retries sp_open every 100 ms until the device comes back or
 * the timeout ends, printing "open: ok" again on success (only the first
 * failed reopen of each gap is printed).  Errors that end the program go
 * to stderr as "serial_probe: ..." and exit 2; losing the device without
 * -r exits 3; bad usage exits 64.  stdout is line buffered so a harness
 * can follow it live.
 *
 * Usage: serial_probe [-p PORT] [-n BYTES] [-t TIMEOUT_MS] [-w HEX] [-r]
 * Defaults: /dev/ttyS0, 16 bytes, 5000 ms.
 */
#include <errno.h>
#include <limits.h>
#include <poll.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <libserialport.h>

struct probe {
	const char *path;
	long want;		/* stop after this many bytes */
	long timeout_ms;	/* overall run time */
	const char *hex_out;	/* bytes to write after open, or NULL */
	int reopen;		/* keep retrying after the device is lost */
	struct sp_port *port;	/* NULL while closed */
	long seen;		/* bytes read so far */
	int quiet;		/* this gap's "absent" line is out */
};

static int64_t now_ms(void)
{
	struct timespec ts;

	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

/* Prints libserialport's last error for op, to f, with a prefix. */
static void report(FILE *f, const char *tag, const char *op, const char *path)
{
	char *msg = sp_last_error_message();

	if (path != NULL)
		fprintf(f, "%s: %s: %s: %s\n", tag, op, path,
		    msg != NULL ? msg : "unknown error");
	else
		fprintf(f, "%s: %s: %s\n", tag, op,
		    msg != NULL ? msg : "unknown error");
	sp_free_error_message(msg);
}

static int parse_long(const char *s, long lo, long hi, long *out)
{
	char *end = NULL;
	long v;

	errno = 0;
	v = strtol(s, &end, 10);
	if (errno != 0 || end == s || *end != '\0' || v < lo || v > hi)
		return -1;
	*out = v;
	return 0;
}

static int hex_nibble(char c)
{
	if (c >= '0' && c <= '9')
		return c - '0';
	if (c >= 'a' && c <= 'f')
		return c - 'a' + 10;
	if (c >= 'A' && c <= 'F')
		return c - 'A' + 10;
	return -1;
}

/* Decodes hex (no separators) into buf; returns the byte count or -1. */
static long parse_hex(const char *hex, unsigned char *buf, size_t cap)
{
	size_t n = strlen(hex);
	size_t i;

	if (n % 2 != 0 || n / 2 > cap)
		return -1;
	for (i = 0; i < n / 2; i++) {
		int hi = hex_nibble(hex[2 * i]);
		int lo = hex_nibble(hex[2 * i + 1]);

		if (hi < 0 || lo < 0)
			return -1;
		buf[i] = (unsigned char)(hi << 4 | lo);
	}
	return (long)(n / 2);
}

/* sp_open + 9600 8N1, no flow control.  0, or -1 with the port freed. */
static int port_open(struct probe *p, FILE *f, const char *tag)
{
	struct sp_port *port = NULL;
	const char *op = "sp_get_port_by_name";

	if (sp_get_port_by_name(p->path, &port) != SP_OK)
		goto out_fail;
	op = "sp_open";
	if (sp_open(port, SP_MODE_READ_WRITE) != SP_OK)
		goto out_fail;
	op = "sp_set_config";
	if (sp_set_baudrate(port, 9600) != SP_OK ||
	    sp_set_bits(port, 8) != SP_OK ||
	    sp_set_parity(port, SP_PARITY_NONE) != SP_OK ||
	    sp_set_stopbits(port, 1) != SP_OK ||
	    sp_set_flowcontrol(port, SP_FLOWCONTROL_NONE) != SP_OK)
		goto out_fail;
	p->port = port;
	printf("open: ok %s\n", p->path);
	return 0;
out_fail:
	if (f != NULL)
		report(f, tag, op, p->path);
	if (port != NULL) {
		sp_close(port);
		sp_free_port(port);
	}
	return -1;
}

static void port_close(struct probe *p)
{
	if (p->port == NULL)
		return;
	sp_close(p->port);
	sp_free_port(p->port);
	p->port = NULL;
}

static int write_hex(struct probe *p)
{
	unsigned char buf[512];
	long n = parse_hex(p->hex_out, buf, sizeof(buf));

	if (n < 0) {
		fprintf(stderr, "serial_probe: -w: not hex bytes: %s\n",
		    p->hex_out);
		return -1;
	}
	if (sp_blocking_write(p->port, buf, (size_t)n, 2000) != n) {
		report(stderr, "serial_probe", "sp_blocking_write", p->path);
		return -1;
	}
	if (sp_drain(p->port) != SP_OK) {
		report(stderr, "serial_probe", "sp_drain", p->path);
		return -1;
	}
	printf("wrote: %ld\n", n);
	return 0;
}

static void print_hex(const unsigned char *buf, int n)
{
	int i;

	fputs("data:", stdout);
	for (i = 0; i < n; i++)
		printf(" %02x", buf[i]);
	putchar('\n');
}

/*
 * One step of the read loop: poll the port's fd, then read what is there.
 * A hung-up tty (pty master closed, USB adapter pulled) polls as
 * POLLHUP/POLLERR and reads 0 bytes; libserialport 0.1.1's
 * sp_blocking_read() would report that as "0 bytes, timeout" and spin, so
 * the probe polls the handle itself, as the daemon's loop must.
 * Returns 1 go on, 0 device lost (with -r), -1 lost or failed.
 */
static int read_step(struct probe *p, int wait_ms)
{
	unsigned char buf[256];
	size_t cap = sizeof(buf);
	struct pollfd pfd = {-1, POLLIN, 0};
	int n;

	if (sp_get_port_handle(p->port, &pfd.fd) != SP_OK)
		return -1;
	if (poll(&pfd, 1, wait_ms) <= 0)
		return 1;
	if ((long)cap > p->want - p->seen)
		cap = (size_t)(p->want - p->seen);
	n = sp_nonblocking_read(p->port, buf, cap);
	if (n < 0) {
		report(stdout, "lost", "sp_nonblocking_read", NULL);
		return p->reopen ? 0 : -1;
	}
	if (n == 0) {
		printf("lost: %s\n", pfd.revents & POLLHUP ? "hangup" : "eof");
		return p->reopen ? 0 : -1;
	}
	print_hex(buf, n);
	p->seen += n;
	return 1;
}

/* Reads until want bytes, the deadline, or (without -r) a lost device. */
static int run(struct probe *p)
{
	int64_t deadline = now_ms() + p->timeout_ms;
	int64_t left;
	FILE *out;
	int rc = 1;

	while (p->seen < p->want) {
		left = deadline - now_ms();
		if (left <= 0)
			break;
		if (p->port == NULL) {
			out = p->quiet ? NULL : stdout;
			if (port_open(p, out, "absent") < 0)
				usleep(100000);
			p->quiet = p->port == NULL;
			continue;
		}
		rc = read_step(p, left > 100 ? 100 : (int)left);
		if (rc < 0)
			break;
		if (rc == 0)
			port_close(p);
	}
	printf("done: %ld bytes\n", p->seen);
	return rc < 0 ? -1 : 0;
}

static int parse_args(struct probe *p, int argc, char **argv)
{
	int c;

	while ((c = getopt(argc, argv, "p:n:t:w:r")) != -1) {
		switch (c) {
		case 'p':
			p->path = optarg;
			break;
		case 'n':
			if (parse_long(optarg, 0, LONG_MAX, &p->want) < 0)
				return -1;
			break;
		case 't':
			if (parse_long(optarg, 1, 3600000, &p->timeout_ms) < 0)
				return -1;
			break;
		case 'w':
			p->hex_out = optarg;
			break;
		case 'r':
			p->reopen = 1;
			break;
		default:
			return -1;
		}
	}
	return optind == argc ? 0 : -1;
}

int main(int argc, char **argv)
{
	struct probe p = {"/dev/ttyS0", 16, 5000, NULL, 0, NULL, 0, 0};
	int rc = 2;

	setvbuf(stdout, NULL, _IOLBF, 0);
	if (parse_args(&p, argc, argv) < 0) {
		fprintf(stderr, "usage: serial_probe [-p PORT] [-n BYTES] "
		    "[-t TIMEOUT_MS] [-w HEX] [-r]\n");
		return 64;
	}
	if (port_open(&p, stderr, "serial_probe") < 0)
		return 2;
	if (p.hex_out != NULL && write_hex(&p) < 0)
		goto out_close;
	rc = run(&p) == 0 ? 0 : 3;
out_close:
	port_close(&p);
	return rc;
}
