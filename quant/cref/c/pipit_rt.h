/*
 * pipit_rt.h - portable C99 reference runtime for networks exported by
 * `pipit export`. It is the executable specification of the export: it
 * reads only the blob and the layer table of the generated header, uses
 * only a caller-provided RAM pool of the planned size, and computes every
 * layer with integer arithmetic exactly as pipit's Go engine does
 * (quant/engine.go); the Go tests require bit-identical outputs.
 *
 * Layout: activations are channels-last (H, W, C), int8. Weights and the
 * int32 bias, multiplier and shift sections are read from the blob at the
 * offsets in the layer table, little-endian, byte by byte (no alignment or
 * endianness assumptions).
 */
#ifndef PIPIT_RT_H
#define PIPIT_RT_H

#include <stddef.h>
#include <stdint.h>

#if defined(__GNUC__) || defined(__clang__)
#define PIPIT_ALIGN4 __attribute__((aligned(4)))
#else
#define PIPIT_ALIGN4
#endif

enum {
  PIPIT_OP_CONV = 1,      /* convolution, also pointwise (1x1) */
  PIPIT_OP_DEPTHWISE = 2, /* depthwise, multiplier 1 */
  PIPIT_OP_DENSE = 3,
  PIPIT_OP_MAXPOOL = 4,
  PIPIT_OP_AVGPOOL = 5,
  PIPIT_OP_GLOBALAVGPOOL = 6
};

typedef struct {
  int32_t op;
  int32_t in_shape[3];  /* H, W, C */
  int32_t out_shape[3]; /* H, W, C */
  int32_t kernel[2];    /* KH, KW (convolution, depthwise, pooling) */
  int32_t stride[2];    /* SH, SW */
  int32_t pad_top, pad_left;
  int32_t in_zp, out_zp, clamp_lo, clamp_hi;
  int32_t weights_offset, weights_length; /* blob bytes; 0 for pooling */
  int32_t bias_offset, mult_offset, shift_offset;
  int32_t in_offset, out_offset; /* activation offsets in the RAM pool */
} pipit_layer_t;

typedef struct {
  const uint8_t *blob;
  int32_t blob_bytes;
  const pipit_layer_t *layers;
  int32_t num_layers;
  int32_t pool_bytes;
} pipit_model_t;

/* The blob format version this runtime reads (quant.BlobVersion; a Go
 * test keeps the two equal, and every generated model header refuses to
 * compile against a runtime of another version). */
#define PIPIT_BLOB_VERSION 1

/* Status codes. */
#define PIPIT_OK 0
#define PIPIT_ERR_LAYER (-1)  /* layer index or op out of range */
#define PIPIT_ERR_POOL (-2)   /* pool smaller than the plan */
#define PIPIT_ERR_BLOB (-3)   /* bad blob header: magic, version, length */
#define PIPIT_ERR_TABLE (-4)  /* a layer's shapes, blob sections or pool offsets out of range */
#define PIPIT_ERR_CRC (-5)    /* the blob's CRC-32 does not match: damaged */

/* Fixed-point helpers (docs/export-format.md, "Arithmetic"; Jacob et al.
 * 2018, eqs. 5-6):
 * pipit_mul_q31(a, b)      = floor((a*b + 2^30) / 2^31), (-2^31)^2 -> 2^31-1
 * pipit_shr_round(x, n)    = x / 2^n rounded half away from zero
 * pipit_requant(acc, m0, n) = pipit_shr_round(pipit_mul_q31(acc, m0), n),
 *                            n < 0: acc saturating-shifted left by -n first */
int32_t pipit_mul_q31(int32_t a, int32_t b);
int32_t pipit_shr_round(int32_t x, int exponent);
int32_t pipit_requant(int32_t acc, int32_t m0, int32_t shift);

/* Checks the whole model once, at start-up: the blob's magic, version
 * (PIPIT_BLOB_VERSION), length and CRC-32, and every layer of the table
 * (op, shapes, weight count, blob sections and pool offsets in range).
 * pipit_run then checks only the header, so an inference does not pay for
 * the CRC. */
int pipit_check(const pipit_model_t *m);
/* Where the input goes and the output comes from, inside the pool. */
int8_t *pipit_input(const pipit_model_t *m, int8_t *pool);
const int8_t *pipit_output(const pipit_model_t *m, const int8_t *pool);
/* Runs layer i (reading its input from the pool, writing its output). */
int pipit_run_layer(const pipit_model_t *m, int i, int8_t *pool);
/* Runs every layer; pool_bytes must be at least m->pool_bytes. It checks
 * the blob header (not the CRC or the table: call pipit_check first). */
int pipit_run(const pipit_model_t *m, int8_t *pool, size_t pool_bytes);

#endif
