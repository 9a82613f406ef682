/*
 * fw.h - the output hooks of the bare-metal test images (startup.c):
 * text to the semihosting console, and exit.  Test images only.
 */
#ifndef TIDEPOST_FW_H
#define TIDEPOST_FW_H

#include <stdint.h>

void fw_puts(const char *s);
void fw_put_u32(uint32_t v);
__attribute__((noreturn)) void fw_exit(int code);

#endif
