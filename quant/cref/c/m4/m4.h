/* m4.h - what startup.c gives the emulated-board harness. */
#ifndef PIPIT_M4_H
#define PIPIT_M4_H
#include <stdint.h>
void pipit_m4_puts(const char *s);        /* semihosting SYS_WRITE0 */
void pipit_m4_exit(int ok);               /* semihosting SYS_EXIT */
uint32_t pipit_m4_ticks(void);            /* 25 MHz timer ticks since reset */
uint32_t pipit_m4_stack_used(void);       /* stack high-water mark, bytes */
#endif
