/*
 * ptyshim.c - LD_PRELOAD shim that lets the real libserialport 0.1.1 open
 * a pseudo-terminal as if it were a UART.  Test-only; never linked into
 * tidepost.
 *
 * sp_open() reads the modem lines (TIOCMGET) and sets DTR/RTS (TIOCMBIS,
 * TIOCMBIC); a pty answers ENOTTY to these, so sp_open fails.  This shim
 * wraps ioctl(): when the fd is a pty slave (Unix98 majors 136-143) or a
 * pty master (/dev/ptmx, major 5 minor 2) and the request is one of the
 * modem-line calls, it answers from a small emulated line state instead of
 * the kernel.  Every other call, and these calls on any other fd, go to the
 * real ioctl() unchanged (found with dlsym(RTLD_NEXT)).
 *
 * Emulated state: the output lines DTR and RTS start low and follow
 * TIOCMSET/TIOCMBIS/TIOCMBIC; the input lines the "device" drives (CTS,
 * DSR, CD) read as asserted, RI as clear, so a program that waits for a
 * carrier or for CTS sees a device that is present.  The state is
 * process-wide (one emulated port is all the tests need).
 *
 * Environment: PTYSHIM_TRACE=1 prints each emulated call to stderr.
 * Build: cc -shared -fPIC -o BUILD/shim/ptyshim.so tests/shim/ptyshim.c -ldl
 * (never with -fsanitize: a preloaded library must not pull in a
 * sanitizer runtime; a sanitized program under test needs
 * ASAN_OPTIONS=verify_asan_link_order=0, which ptyrun.py sets).
 */
#ifndef _GNU_SOURCE
#define _GNU_SOURCE		/* RTLD_NEXT */
#endif
#include <dlfcn.h>
#include <errno.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <sys/ioctl.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>
#include <termios.h>

typedef int (*ioctl_fn)(int, unsigned long, ...);

#define INPUT_LINES (TIOCM_CTS | TIOCM_DSR | TIOCM_CAR)
#define OUTPUT_LINES (TIOCM_DTR | TIOCM_RTS)

static int out_lines;		/* DTR/RTS as last set by the program */

static ioctl_fn real_ioctl(void)
{
	static ioctl_fn fn;

	if (fn == NULL)
		fn = (ioctl_fn)dlsym(RTLD_NEXT, "ioctl");
	return fn;
}

static int is_pty(int fd)
{
	struct stat st;
	unsigned int maj;

	if (fstat(fd, &st) != 0 || !S_ISCHR(st.st_mode))
		return 0;
	maj = major(st.st_rdev);
	if (maj >= 136 && maj <= 143)
		return 1;
	return maj == 5 && minor(st.st_rdev) == 2;
}

static int is_modem_request(unsigned long req)
{
	return req == TIOCMGET || req == TIOCMSET || req == TIOCMBIS ||
	    req == TIOCMBIC;
}

static void trace(const char *what, int fd, int value)
{
	const char *env = getenv("PTYSHIM_TRACE");

	if (env != NULL && env[0] == '1')
		fprintf(stderr, "ptyshim: %s fd %d lines 0x%03x\n", what, fd,
		    value);
}

/* Applies one modem-line request to the emulated state. */
static int emulate(int fd, unsigned long req, int *arg)
{
	int cur = __atomic_load_n(&out_lines, __ATOMIC_SEQ_CST);

	if (arg == NULL) {
		errno = EFAULT;
		return -1;
	}
	if (req == TIOCMGET) {
		*arg = cur | INPUT_LINES;
		trace("TIOCMGET", fd, *arg);
		return 0;
	}
	if (req == TIOCMSET)
		cur = *arg & OUTPUT_LINES;
	else if (req == TIOCMBIS)
		cur |= *arg & OUTPUT_LINES;
	else
		cur &= ~(*arg & OUTPUT_LINES);
	__atomic_store_n(&out_lines, cur, __ATOMIC_SEQ_CST);
	trace(req == TIOCMSET ? "TIOCMSET" : req == TIOCMBIS ? "TIOCMBIS" :
	    "TIOCMBIC", fd, cur);
	return 0;
}

int ioctl(int fd, unsigned long req, ...)
{
	va_list ap;
	void *arg;
	ioctl_fn fn;

	va_start(ap, req);
	arg = va_arg(ap, void *);
	va_end(ap);
	if (is_modem_request(req) && is_pty(fd))
		return emulate(fd, req, arg);
	fn = real_ioctl();
	if (fn == NULL) {
		errno = ENOSYS;
		return -1;
	}
	return fn(fd, req, arg);
}
