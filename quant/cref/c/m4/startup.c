/* startup.c - reset handler, vector table, semihosting output and a timer
 * for pipit's emulated Cortex-M4 runs (QEMU mps2-an386). Own code: it
 * copies .data, clears .bss, enables the FPU (CPACR CP10/CP11 full access,
 * ARMv7-M Architecture Reference Manual B3.2.20), paints the unused stack
 * so its high-water mark can be read after the run, calls main and leaves
 * QEMU through the semihosting SYS_EXIT call. */
#include <stdint.h>

#include "m4.h"

extern uint32_t _sidata, _sdata, _edata, _sbss, _ebss, _stack_bottom, _stack_top;
int main(void);
void pipit_m4_reset(void);

#define STACK_PAINT 0x5aa55aa5u

static int semihost(int op, const void *arg) {
  register int r0 __asm__("r0") = op;
  register const void *r1 __asm__("r1") = arg;
  __asm__ volatile("bkpt 0xab" : "+r"(r0) : "r"(r1) : "memory");
  return r0;
}

void pipit_m4_puts(const char *s) { (void)semihost(0x04, s); /* SYS_WRITE0 */ }

void pipit_m4_exit(int ok) {
  /* SYS_EXIT with ADP_Stopped_ApplicationExit (QEMU exits 0) or
   * ADP_Stopped_RunTimeErrorUnknown (QEMU exits 1) */
  (void)semihost(0x18, (const void *)(uintptr_t)(ok ? 0x20026u : 0x20023u));
  for (;;) {
  }
}

static void fault(void) {
  pipit_m4_puts("X fault\n");
  pipit_m4_exit(0);
}

/* CMSDK APB timer 0 of the MPS2 FPGA images, counting down at the 25 MHz
 * peripheral clock. */
#define TIMER0_CTRL (*(volatile uint32_t *)0x40000000u)
#define TIMER0_VALUE (*(volatile uint32_t *)0x40000004u)
#define TIMER0_RELOAD (*(volatile uint32_t *)0x40000008u)

uint32_t pipit_m4_ticks(void) { return 0xffffffffu - TIMER0_VALUE; }

uint32_t pipit_m4_stack_used(void) {
  const uint32_t *p = &_stack_bottom;
  while (p < &_stack_top && *p == STACK_PAINT) p++;
  return (uint32_t)((const char *)&_stack_top - (const char *)p);
}

void pipit_m4_reset(void) {
  uint32_t *d = &_sdata;
  const uint32_t *s = &_sidata;
  uint32_t *p, sp;
  while (d < &_edata) *d++ = *s++;
  for (d = &_sbss; d < &_ebss; d++) *d = 0;
  *(volatile uint32_t *)0xe000ed88u |= 0xfu << 20; /* CPACR: CP10, CP11 */
  __asm__ volatile("dsb\n isb" ::: "memory");
  __asm__ volatile("mov %0, sp" : "=r"(sp));
  for (p = &_stack_bottom; (uint32_t)(uintptr_t)p < sp - 64u; p++) *p = STACK_PAINT;
  TIMER0_RELOAD = 0xffffffffu;
  TIMER0_VALUE = 0xffffffffu;
  TIMER0_CTRL = 1u;
  pipit_m4_exit(main() == 0);
}

__attribute__((section(".vectors"), used)) static const void *const vectors[16] = {
    &_stack_top, (const void *)pipit_m4_reset, (const void *)fault, (const void *)fault,
    (const void *)fault, (const void *)fault, (const void *)fault, 0, 0, 0, 0,
    (const void *)fault, (const void *)fault, 0, (const void *)fault, (const void *)fault};
