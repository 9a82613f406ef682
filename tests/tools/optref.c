/*
 * optref.c - print the loader's option reference (every table of
 * daemon/options.c, as opt_print_reference writes it: Markdown) on
 * stdout.  man/gen-keys.py turns it into the key tables of
 * tidepost-config(5) and tidepost-layout(5), and tests/integration/
 * test_man.py checks the pages against it, so the manual and the keys
 * the loader accepts cannot drift apart.
 *
 * Usage: optref            exit 0, or 2 on a write error.
 */
#include <stdio.h>

#include "options.h"

int main(int argc, char **argv)
{
	if (argc > 1) {
		fprintf(stderr, "usage: %s (no arguments)\n", argv[0]);
		return 2;
	}
	if (opt_print_reference(stdout) != 0 || fflush(stdout) != 0) {
		perror("optref: stdout");
		return 2;
	}
	return 0;
}
