/* pipit_rt_fast.c - see pipit_rt_fast.h. C99, no dynamic memory, no
 * floating point. */
#include "pipit_rt_fast.h"

#include <string.h>

#if defined(__ARM_FEATURE_DSP) && defined(__ARM_FEATURE_SIMD32)
#include <arm_acle.h>
#define PIPIT_DSP 1
#endif

static int16_t scratch[PIPIT_FAST_SCRATCH] PIPIT_ALIGN4;

#if !(defined(__BYTE_ORDER__) && defined(__ORDER_LITTLE_ENDIAN__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__)
static int32_t rd32(const uint8_t *p) {
  uint32_t v = (uint32_t)p[0] | ((uint32_t)p[1] << 8) | ((uint32_t)p[2] << 16) | ((uint32_t)p[3] << 24);
  return (int32_t)v;
}
#endif

#ifdef PIPIT_DSP
static uint32_t ld32(const void *p) { /* an unaligned load: one LDR on Cortex-M4 */
  uint32_t v;
  memcpy(&v, p, 4);
  return v;
}

/* SXTB16 with its built-in rotation by 8 bits: bytes 1 and 3, sign-extended. */
static inline uint32_t sxtb16_ror8(uint32_t v) {
  uint32_t r;
  __asm__("sxtb16 %0, %1, ror #8" : "=r"(r) : "r"(v));
  return r;
}


#endif

/* pipit_requant in fewer instructions. For m0 > 0 (every exported
 * multiplier is in [2^30, 2^31)) the saturating case of pipit_mul_q31
 * cannot occur, and its nudged truncating division equals
 * floor((acc*m0 + 2^30) / 2^31) for both signs: for a negative product
 * p, trunc((p + 1 - 2^30) / 2^31) = floor((p + 2^30) / 2^31). The rounding
 * shift takes |x| as an unsigned value (|INT32_MIN| = 2^31 fits), adds
 * half and shifts, and restores the sign. Arithmetic right shifts of
 * negative values are implementation-defined in C99; GCC and Clang
 * define them as arithmetic, and other compilers take the reference. */
static inline int32_t requant(int32_t acc, int32_t m0, int32_t shift) {
#if defined(__GNUC__) || defined(__clang__)
  int32_t q;
  uint32_t s, ax, r;
  if (shift < 0 || m0 <= 0) return pipit_requant(acc, m0, shift);
  q = (int32_t)(((int64_t)acc * m0 + ((int64_t)1 << 30)) >> 31);
  if (shift == 0) return q;
  s = (uint32_t)(q >> 31);
  ax = ((uint32_t)q ^ s) - s;
  r = (ax + (1u << (shift - 1))) >> shift;
  return (int32_t)((r ^ s) - s);
#else
  return pipit_requant(acc, m0, shift);
#endif
}

int32_t pipit_requant_fast(int32_t acc, int32_t m0, int32_t shift) { return requant(acc, m0, shift); }

/* The blob's int32 sections are 4-byte aligned little-endian arrays: read
 * them in place on a little-endian target, byte by byte elsewhere. */
#if defined(__BYTE_ORDER__) && defined(__ORDER_LITTLE_ENDIAN__) && __BYTE_ORDER__ == __ORDER_LITTLE_ENDIAN__
#define PIPIT_I32(p, i) (((const int32_t *)(const void *)(p))[i])
#else
#define PIPIT_I32(p, i) rd32((p) + 4 * (i))
#endif

/* The widened operand layout: each group of 4 values v0..v3 is stored as
 * the int16 sequence v0, v2, v1, v3, i.e. the two 32-bit words that SXTB16
 * makes of a packed int8 word and of that word rotated by 8 bits. */
static const int32_t slot[4] = {0, 2, 1, 3};
#define PIPIT_SLOT(k) (((k) & ~3) + slot[(k) & 3])

/* Widens n int8 values (n a multiple of 4) minus zp into dst. */
static void widen(int16_t *dst, const int8_t *src, int32_t zp, int32_t n) {
  int32_t k;
#ifdef PIPIT_DSP
  const uint32_t zp2 = ((uint32_t)(uint16_t)zp << 16) | (uint16_t)zp;
  for (k = 0; k < n; k += 4) {
    uint32_t v = ld32(src + k), e = (uint32_t)__ssub16(__sxtb16(v), zp2), o = (uint32_t)__ssub16(sxtb16_ror8(v), zp2);
    memcpy(dst + k, &e, 4);
    memcpy(dst + k + 2, &o, 4);
  }
#else
  for (k = 0; k < n; k++) dst[PIPIT_SLOT(k)] = (int16_t)(src[k] - zp);
#endif
}

/* a0 += sum_k x[k]*w0[k] and a1 += sum_k x[k]*w1[k] for k < n (n a
 * multiple of 4), x widened as above, w0 and w1 int8 rows read 4 bytes at
 * a time. On the DSP path, per 4 values of k: the operand pair's two
 * words, then per row one LDR, two SXTB16 (the second with its built-in
 * rotation) and two SMLADs; two rows at a time is what fits the
 * registers. */
static inline void dot2(int32_t *a0p, int32_t *a1p, const int16_t *x, const int8_t *w0, const int8_t *w1, int32_t n) {
  int32_t a0 = *a0p, a1 = *a1p;
#ifdef PIPIT_DSP
  const int16_t *end = x + n;
  while (x < end) {
    uint32_t xe, xo, v0, v1;
    memcpy(&xe, x, 4);
    memcpy(&xo, x + 2, 4);
    v0 = ld32(w0);
    v1 = ld32(w1);
    a0 = __smlad(__sxtb16(v0), xe, a0);
    a1 = __smlad(__sxtb16(v1), xe, a1);
    a0 = __smlad(sxtb16_ror8(v0), xo, a0);
    a1 = __smlad(sxtb16_ror8(v1), xo, a1);
    x += 4, w0 += 4, w1 += 4;
  }
#else
  int32_t k;
  for (k = 0; k < n; k++) {
    a0 += (int32_t)x[PIPIT_SLOT(k)] * w0[k];
    a1 += (int32_t)x[PIPIT_SLOT(k)] * w1[k];
  }
#endif
  *a0p = a0, *a1p = a1;
}

static int8_t clamp8(int32_t v, int32_t lo, int32_t hi) {
  if (v < lo) v = lo;
  if (v > hi) v = hi;
  return (int8_t)v;
}

/* All output channels of one output position from the widened patch x
 * (n values, rows of the weights wstride apart), two at a time (an odd
 * last channel pairs with itself and keeps one sum). */
static void outputs(const pipit_model_t *m, const pipit_layer_t *l, const int16_t *x, int32_t n, int32_t wstride, int8_t *y) {
  const int32_t OC = l->out_shape[2], zp = l->out_zp, lo = l->clamp_lo, hi = l->clamp_hi;
  const int8_t *w = (const int8_t *)(m->blob + l->weights_offset);
  const uint8_t *bias = m->blob + l->bias_offset, *mult = m->blob + l->mult_offset, *shift = m->blob + l->shift_offset;
  int32_t o;
  for (o = 0; o < OC; o += 2) {
    const int32_t o1 = o + 1 < OC ? o + 1 : o;
    int32_t a0 = PIPIT_I32(bias, o), a1 = PIPIT_I32(bias, o1);
    dot2(&a0, &a1, x, w + o * wstride, w + o1 * wstride, n);
    y[o] = clamp8(requant(a0, PIPIT_I32(mult, o), PIPIT_I32(shift, o)) + zp, lo, hi);
    y[o1] = clamp8(requant(a1, PIPIT_I32(mult, o1), PIPIT_I32(shift, o1)) + zp, lo, hi);
  }
}

/* A convolution (pointwise included) or dense layer on the fast kernels,
 * or 0 if it does not fit them (then the reference runs it). The patch is
 * K = KH*KW*C values rounded up to a multiple of 4 with zeros; a zero
 * operand contributes nothing, so the extra weight bytes read past a row
 * (the next row's, or the bytes after the last row, which must lie inside
 * the blob) do not matter. Taps outside the input are zeros too, as the
 * reference skips them. */
static int run_fast(const pipit_model_t *m, const pipit_layer_t *l, const int8_t *x, int8_t *y) {
  const int32_t H = l->in_shape[0], W = l->in_shape[1], C = l->in_shape[2];
  const int32_t OH = l->out_shape[0], OW = l->out_shape[1], OC = l->out_shape[2];
  const int32_t KH = l->op == PIPIT_OP_DENSE ? 1 : l->kernel[0], KW = l->op == PIPIT_OP_DENSE ? 1 : l->kernel[1];
  const int32_t K = l->op == PIPIT_OP_DENSE ? H * W * C : KH * KW * C, Kp = (K + 3) & ~3;
  int32_t oh, ow, kh, kw, k;
  if (Kp > PIPIT_FAST_SCRATCH || (int64_t)l->weights_offset + (int64_t)OC * K + (Kp - K) > m->blob_bytes) return 0;
  if (l->op == PIPIT_OP_DENSE) {
    memset(scratch, 0, sizeof(int16_t) * (size_t)Kp);
    for (k = 0; k < K; k++) scratch[PIPIT_SLOT(k)] = (int16_t)(x[k] - l->in_zp);
    outputs(m, l, scratch, Kp, K, y);
    return 1;
  }
  for (oh = 0; oh < OH; oh++) {
    for (ow = 0; ow < OW; ow++) {
      const int32_t ih0 = oh * l->stride[0] - l->pad_top, iw0 = ow * l->stride[1] - l->pad_left;
      if (KH == 1 && KW == 1 && C % 4 == 0 && ih0 >= 0 && ih0 < H && iw0 >= 0 && iw0 < W) {
        widen(scratch, x + (ih0 * W + iw0) * C, l->in_zp, C); /* pointwise */
      } else {
        for (k = K; k < Kp; k++) scratch[PIPIT_SLOT(k)] = 0;
        for (kh = 0, k = 0; kh < KH; kh++) {
          const int32_t ih = ih0 + kh;
          for (kw = 0; kw < KW; kw++) {
            const int32_t iw = iw0 + kw;
            int32_t c;
            if (ih < 0 || ih >= H || iw < 0 || iw >= W) {
              for (c = 0; c < C; c++, k++) scratch[PIPIT_SLOT(k)] = 0;
            } else {
              const int8_t *xs = x + (ih * W + iw) * C;
              for (c = 0; c < C; c++, k++) scratch[PIPIT_SLOT(k)] = (int16_t)(xs[c] - l->in_zp);
            }
          }
        }
      }
      outputs(m, l, scratch, Kp, K, y + (oh * OW + ow) * OC);
    }
  }
  return 1;
}

int pipit_run_layer_fast(const pipit_model_t *m, int i, int8_t *pool) {
  const pipit_layer_t *l;
  if (i < 0 || i >= m->num_layers) return PIPIT_ERR_LAYER;
  l = &m->layers[i];
  if ((l->op == PIPIT_OP_CONV || l->op == PIPIT_OP_DENSE) && run_fast(m, l, pool + l->in_offset, pool + l->out_offset)) return PIPIT_OK;
  return pipit_run_layer(m, i, pool);
}

int pipit_run_fast(const pipit_model_t *m, int8_t *pool, size_t pool_bytes) {
  int i, r;
  if (pool_bytes < (size_t)m->pool_bytes) return PIPIT_ERR_POOL;
  if ((r = pipit_check(m)) != PIPIT_OK) return r;
  for (i = 0; i < m->num_layers; i++)
    if ((r = pipit_run_layer_fast(m, i, pool)) != PIPIT_OK) return r;
  return PIPIT_OK;
}
