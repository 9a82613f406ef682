/*
 * startup.c - the smallest start-up a bare Cortex-M4 image needs for the
 * firmware-size check: a vector table, a reset handler (FPU on, .data
 * copied, .bss zeroed, main called) and two ARM semihosting calls so the
 * test image can report and exit under QEMU (`-semihosting`).
 *
 * Semihosting (ARM, "Semihosting for AArch32 and AArch64", SYS_WRITE0 =
 * 0x04, SYS_EXIT = 0x18 with ADP_Stopped_ApplicationExit = 0x20026) traps
 * through `bkpt 0xab`.  On a board without a debugger that breakpoint
 * faults: this file belongs to the test image only, station firmware has
 * its own start-up.  Not part of libtidepost; its size is reported apart.
 */
#include <stdint.h>

#include "fw.h"

extern uint32_t _data_start, _data_end, _data_load, _bss_start, _bss_end;
extern uint32_t _stack_top;

int main(void);
void Reset_Handler(void);
void Default_Handler(void);

#define CPACR (*(volatile uint32_t *)0xE000ED88u)

static int semihost(int op, const void *arg)
{
	register int r0 __asm__("r0") = op;
	register const void *r1 __asm__("r1") = arg;

	__asm__ volatile("bkpt 0xab" : "+r"(r0) : "r"(r1) : "memory");
	return r0;
}

void fw_puts(const char *s)
{
	semihost(0x04, s);
}

void fw_put_u32(uint32_t v)
{
	char buf[11];
	int i = 10;

	buf[i] = '\0';
	do {
		buf[--i] = (char)('0' + v % 10);
		v /= 10;
	} while (v != 0);
	fw_puts(buf + i);
}

void fw_exit(int code)
{
	/* A failure is reported as a non-"application exit" reason, which
	 * QEMU turns into exit status 1. */
	uintptr_t reason = code == 0 ? 0x20026 : 0x20023;

	semihost(0x18, (const void *)reason);
	for (;;)
		;
}

void Default_Handler(void)
{
	fw_puts("firmware: fault\n");
	fw_exit(2);
}

void Reset_Handler(void)
{
	uint32_t *src = &_data_load;
	uint32_t *dst;

	/* CP10 and CP11 full access before any floating-point instruction
	 * (ARMv7-M ARM, B3.2.20). */
	CPACR |= 0xFu << 20;
	__asm__ volatile("dsb\n\tisb" ::: "memory");
	for (dst = &_data_start; dst < &_data_end; dst++)
		*dst = *src++;
	for (dst = &_bss_start; dst < &_bss_end; dst++)
		*dst = 0;
	fw_exit(main());
}

/* Initial stack pointer, then reset, NMI, HardFault, MemManage, BusFault,
 * UsageFault; the test image needs no other exception. */
__attribute__((section(".isr_vector"), used))
static const uintptr_t vectors[] = {
	(uintptr_t)&_stack_top,
	(uintptr_t)Reset_Handler,
	(uintptr_t)Default_Handler,
	(uintptr_t)Default_Handler,
	(uintptr_t)Default_Handler,
	(uintptr_t)Default_Handler,
	(uintptr_t)Default_Handler,
};
