/* harness.c - pipit's emulated-board check: runs the exported network on
 * test inputs layer by layer, then the front end + network on a recording
 * pushed in chunks, and prints through semihosting:
 *   K ticks instructions   timer calibration on a loop of known length
 *   N k hex               logits of test input k (network only)
 *   L i ticks             layer i, timer ticks summed over the test inputs
 *   G k hex               logits of test input k on the fast kernels
 *   M i ticks             layer i on the fast kernels (pipit_rt_fast.c)
 *   V cases mismatches    pipit_requant_fast against pipit_requant
 *   C k hex               input k computed by the front end on the recording
 *   R k hex               the network's logits on it
 *   F ticks frames        front end (pipit_fe_push, every frame)
 *   P ticks inputs        pipit_fe_window copies into the network input
 *   Q ticks inputs        pipit_run on the recording's inputs
 *   S bytes               stack high-water mark
 *   E                     end
 * Generated parts: model.h (the network), fe.h (the front end), inputs.h. */
#include <string.h>

#include "fe.h"
#include "inputs.h"
#include "m4.h"
#include "model.h"
#include "pipit_rt_fast.h"

static PIPIT_M4_FE_STATE fe;
static int8_t pool[PIPIT_M4_POOL_BYTES] PIPIT_ALIGN4;
static char line[96];

static char *put_u32(char *p, uint32_t v) {
  char tmp[12];
  int n = 0;
  do {
    tmp[n++] = (char)('0' + v % 10u);
    v /= 10u;
  } while (v);
  while (n) *p++ = tmp[--n];
  return p;
}

static void put_nums(char tag, uint32_t a, uint32_t b) {
  char *p = line;
  *p++ = tag;
  *p++ = ' ';
  p = put_u32(p, a);
  *p++ = ' ';
  p = put_u32(p, b);
  *p++ = '\n';
  *p = 0;
  pipit_m4_puts(line);
}

static void put_hex(char tag, uint32_t k, const int8_t *v, int32_t n) {
  static const char hex[] = "0123456789abcdef";
  char *p = line;
  int32_t i;
  *p++ = tag;
  *p++ = ' ';
  p = put_u32(p, k);
  *p++ = ' ';
  for (i = 0; i < n; i++) {
    uint8_t b = (uint8_t)v[i];
    *p++ = hex[b >> 4];
    *p++ = hex[b & 15];
    if (p - line > (int)sizeof line - 4) {
      *p = 0;
      pipit_m4_puts(line);
      p = line;
    }
  }
  *p++ = '\n';
  *p = 0;
  pipit_m4_puts(line);
}

static uint32_t net_ticks, copy_ticks, fe_ticks, inputs;

static void on_events(int ev) {
  uint32_t t0;
  if (!(ev & PIPIT_FE_WINDOW)) return;
  t0 = pipit_m4_ticks();
  pipit_fe_window(&fe.fe, pipit_input(&PIPIT_M4_MODEL, pool));
  copy_ticks += pipit_m4_ticks() - t0;
  put_hex('C', inputs, pipit_input(&PIPIT_M4_MODEL, pool), PIPIT_M4_INPUT_SIZE);
  t0 = pipit_m4_ticks();
  if (pipit_run(&PIPIT_M4_MODEL, pool, sizeof pool) != PIPIT_OK) pipit_m4_exit(0);
  net_ticks += pipit_m4_ticks() - t0;
  put_hex('R', inputs, pipit_output(&PIPIT_M4_MODEL, pool), PIPIT_M4_OUTPUT_SIZE);
  inputs++;
}

int main(void) {
  static uint32_t layer_ticks[PIPIT_M4_LAYERS];
  uint32_t t0, t1, k;
  int32_t i, pos;
  int ev;
  /* calibration: 2 instructions per iteration (subs, bne) */
  {
    register uint32_t n __asm__("r4") = 500000u;
    t0 = pipit_m4_ticks();
    __asm__ volatile("1: subs %0, %0, #1\n bne 1b" : "+r"(n) : : "cc");
    t1 = pipit_m4_ticks();
    put_nums('K', t1 - t0, 1000000u);
  }
  if (pipit_check(&PIPIT_M4_MODEL) != PIPIT_OK) return 1;
  for (k = 0; k < PIPIT_TEST_INPUTS; k++) {
    memcpy(pipit_input(&PIPIT_M4_MODEL, pool), pipit_test_inputs[k], PIPIT_M4_INPUT_SIZE);
    for (i = 0; i < PIPIT_M4_LAYERS; i++) {
      t0 = pipit_m4_ticks();
      if (pipit_run_layer(&PIPIT_M4_MODEL, i, pool) != PIPIT_OK) return 1;
      layer_ticks[i] += pipit_m4_ticks() - t0;
    }
    put_hex('N', k, pipit_output(&PIPIT_M4_MODEL, pool), PIPIT_M4_OUTPUT_SIZE);
  }
  for (i = 0; i < PIPIT_M4_LAYERS; i++) put_nums('L', (uint32_t)i, layer_ticks[i]);
  for (i = 0; i < PIPIT_M4_LAYERS; i++) layer_ticks[i] = 0;
  for (k = 0; k < PIPIT_TEST_INPUTS; k++) {
    memcpy(pipit_input(&PIPIT_M4_MODEL, pool), pipit_test_inputs[k], PIPIT_M4_INPUT_SIZE);
    for (i = 0; i < PIPIT_M4_LAYERS; i++) {
      t0 = pipit_m4_ticks();
      if (pipit_run_layer_fast(&PIPIT_M4_MODEL, i, pool) != PIPIT_OK) return 1;
      layer_ticks[i] += pipit_m4_ticks() - t0;
    }
    put_hex('G', k, pipit_output(&PIPIT_M4_MODEL, pool), PIPIT_M4_OUTPUT_SIZE);
  }
  for (i = 0; i < PIPIT_M4_LAYERS; i++) put_nums('M', (uint32_t)i, layer_ticks[i]);
  {
    /* the fast requantisation on the target's own compiler output: an LCG
     * (Numerical Recipes' constants) over accumulators, multipliers in
     * [2^30, 2^31) and shifts 0..31, every eighth case an exact tie */
    uint32_t x = 12345u, n, bad = 0;
    for (n = 0; n < 200000u; n++) {
      int32_t acc, m0, sh;
      x = x * 1664525u + 1013904223u;
      acc = (int32_t)x;
      x = x * 1664525u + 1013904223u;
      m0 = (int32_t)(0x40000000u | (x >> 2));
      x = x * 1664525u + 1013904223u;
      sh = (int32_t)(x >> 27);
      if ((n & 7) == 0 && sh > 0 && sh < 30) {
        m0 = 0x40000000;
        acc = (int32_t)((uint32_t)(2 * ((acc >> (31 - (30 - sh))) | 1)) << (sh - 1));
      }
      if (pipit_requant_fast(acc, m0, sh) != pipit_requant(acc, m0, sh)) bad++;
    }
    put_nums('V', n, bad);
  }
  PIPIT_M4_FE_INIT(&fe);
  for (pos = 0; pos < PIPIT_TEST_PCM_SAMPLES; pos += PIPIT_TEST_CHUNK) {
    int32_t left = PIPIT_TEST_PCM_SAMPLES - pos < PIPIT_TEST_CHUNK ? PIPIT_TEST_PCM_SAMPLES - pos : PIPIT_TEST_CHUNK, used;
    const int16_t *p = pipit_test_pcm + pos;
    while (left > 0) {
      t0 = pipit_m4_ticks();
      ev = pipit_fe_push(&fe.fe, p, left, &used);
      fe_ticks += pipit_m4_ticks() - t0;
      p += used;
      left -= used;
      on_events(ev);
    }
  }
  for (;;) {
    t0 = pipit_m4_ticks();
    ev = pipit_fe_flush(&fe.fe);
    fe_ticks += pipit_m4_ticks() - t0;
    if (!ev) break;
    on_events(ev);
  }
  put_nums('F', fe_ticks, fe.fe.emitted);
  put_nums('P', copy_ticks, inputs);
  put_nums('Q', net_ticks, inputs);
  put_nums('S', pipit_m4_stack_used(), 0);
  pipit_m4_puts("E\n");
  return 0;
}
