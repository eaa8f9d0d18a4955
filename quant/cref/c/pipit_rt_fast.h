/*
 * pipit_rt_fast.h - faster kernels for the same networks as pipit_rt.h,
 * computing the same bits. Convolution, pointwise and dense layers run as
 * dot products of 16-bit operand pairs: with the Cortex-M4 DSP extension
 * (__ARM_FEATURE_DSP, e.g. -mcpu=cortex-m4) each SMLAD instruction does two
 * multiply-accumulates, the int8 weights are widened in registers (SXTB16)
 * and four output channels share every input load; elsewhere portable C
 * does the same sums. Integer sums are exact whatever their order (the
 * export proves every accumulator fits in 32 bits), and the requantisation
 * is the reference's formula in fewer instructions, so results equal
 * pipit_run_layer's bit for bit. Other layers call the reference.
 *
 * RAM: one static scratch of PIPIT_FAST_SCRATCH int16 values (the widened
 * input patch of one output position, rounded up to a multiple of 4);
 * a layer whose patch is longer runs on the reference kernel.
 */
#ifndef PIPIT_RT_FAST_H
#define PIPIT_RT_FAST_H

#include "pipit_rt.h"

#ifndef PIPIT_FAST_SCRATCH
#define PIPIT_FAST_SCRATCH 1024
#endif

/* Runs layer i like pipit_run_layer, on the faster kernels where they apply. */
int pipit_run_layer_fast(const pipit_model_t *m, int i, int8_t *pool);
/* Runs every layer like pipit_run. */
int pipit_run_fast(const pipit_model_t *m, int8_t *pool, size_t pool_bytes);
/* The requantisation of the fast kernels, exposed for testing against
 * pipit_requant (equal for every acc, every m0 in [2^30, 2^31) and every
 * shift in -31..31). */
int32_t pipit_requant_fast(int32_t acc, int32_t m0, int32_t shift);

#endif
