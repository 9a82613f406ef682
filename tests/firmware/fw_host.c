/*
 * fw_host.c - the fw.h hooks on the build machine, so science.c can also
 * be built natively and its results compared with the Cortex-M4 image's
 * (tests/firmware/run.sh).  Test helper only.
 */
#include <stdio.h>
#include <stdlib.h>

#include "fw.h"

void fw_puts(const char *s)
{
	fputs(s, stdout);
}

void fw_put_u32(uint32_t v)
{
	printf("%lu", (unsigned long)v);
}

void fw_exit(int code)
{
	exit(code);
}
