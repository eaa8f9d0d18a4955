/* pipit_rt.c - see pipit_rt.h. C99, no dynamic memory, no floating point. */
#include "pipit_rt.h"

static int32_t rd32(const uint8_t *p) {
  uint32_t v = (uint32_t)p[0] | ((uint32_t)p[1] << 8) | ((uint32_t)p[2] << 16) | ((uint32_t)p[3] << 24);
  return (int32_t)v;
}

/* Q31 product rounded to nearest, ties toward +inf, saturating
 * (-2^31)*(-2^31); C99 division truncates toward zero, hence the nudge. */
int32_t pipit_mul_q31(int32_t a, int32_t b) {
  int64_t ab, nudge;
  if (a == INT32_MIN && b == INT32_MIN) return INT32_MAX;
  ab = (int64_t)a * (int64_t)b;
  nudge = ab >= 0 ? ((int64_t)1 << 30) : (1 - ((int64_t)1 << 30));
  return (int32_t)((ab + nudge) / ((int64_t)1 << 31));
}

/* x / 2^exponent rounded half away from zero, without shifting negative
 * numbers (implementation-defined in C99). */
int32_t pipit_shr_round(int32_t x, int exponent) {
  int64_t v = x, half;
  if (exponent <= 0) return x;
  half = (int64_t)1 << (exponent - 1);
  if (v >= 0) return (int32_t)((v + half) >> exponent);
  return (int32_t)(-((-v + half) >> exponent));
}

int32_t pipit_requant(int32_t acc, int32_t m0, int32_t shift) {
  if (shift < 0) {
    int64_t v = (int64_t)acc * ((int64_t)1 << (-shift));
    if (v > INT32_MAX) v = INT32_MAX;
    if (v < INT32_MIN) v = INT32_MIN;
    return pipit_mul_q31((int32_t)v, m0);
  }
  return pipit_shr_round(pipit_mul_q31(acc, m0), shift);
}

static int8_t clamp8(int32_t v, int32_t lo, int32_t hi) {
  if (v < lo) v = lo;
  if (v > hi) v = hi;
  return (int8_t)v;
}

static int32_t round_div(int32_t a, int32_t b) {
  if (a >= 0) return (a + b / 2) / b;
  return -((-a + b / 2) / b);
}

/* CRC-32 (IEEE 802.3, reflected polynomial 0xEDB88320), bit by bit: no
 * table, so no RAM or flash beyond the code. */
static uint32_t crc32_ieee(const uint8_t *p, int32_t n) {
  uint32_t c = 0xFFFFFFFFu;
  int32_t i;
  int k;
  for (i = 0; i < n; i++) {
    c ^= p[i];
    for (k = 0; k < 8; k++) c = (c >> 1) ^ (0xEDB88320u & (0u - (c & 1u)));
  }
  return ~c;
}

/* The cheap part of the check, run before every inference. */
static int check_header(const pipit_model_t *m) {
  static const char magic[8] = {'P', 'I', 'P', 'I', 'T', 'B', 'L', 'B'};
  int i;
  if (m->blob_bytes < 24) return PIPIT_ERR_BLOB;
  for (i = 0; i < 8; i++)
    if (m->blob[i] != (uint8_t)magic[i]) return PIPIT_ERR_BLOB;
  if (rd32(m->blob + 8) != PIPIT_BLOB_VERSION || rd32(m->blob + 12) != m->blob_bytes) return PIPIT_ERR_BLOB;
  return PIPIT_OK;
}

/* [off, off + len) lies inside [0, size). */
static int inside(int32_t off, int64_t len, int32_t size) { return off >= 0 && len >= 0 && (int64_t)off + len <= (int64_t)size; }

static int check_layer(const pipit_model_t *m, const pipit_layer_t *l) {
  const int64_t in = (int64_t)l->in_shape[0] * l->in_shape[1] * l->in_shape[2];
  const int64_t out = (int64_t)l->out_shape[0] * l->out_shape[1] * l->out_shape[2];
  int64_t weights = 0, channels = 0;
  int i;
  for (i = 0; i < 3; i++)
    if (l->in_shape[i] < 1 || l->out_shape[i] < 1) return PIPIT_ERR_TABLE;
  if (!inside(l->in_offset, in, m->pool_bytes) || !inside(l->out_offset, out, m->pool_bytes)) return PIPIT_ERR_TABLE;
  switch (l->op) {
  case PIPIT_OP_CONV:
    channels = l->out_shape[2];
    weights = channels * l->kernel[0] * l->kernel[1] * l->in_shape[2];
    break;
  case PIPIT_OP_DEPTHWISE:
    channels = l->out_shape[2];
    weights = (int64_t)l->kernel[0] * l->kernel[1] * l->in_shape[2];
    if (l->in_shape[2] != channels) return PIPIT_ERR_TABLE;
    break;
  case PIPIT_OP_DENSE:
    channels = out;
    weights = in * out;
    break;
  case PIPIT_OP_MAXPOOL:
  case PIPIT_OP_AVGPOOL:
  case PIPIT_OP_GLOBALAVGPOOL:
    return PIPIT_OK;
  default:
    return PIPIT_ERR_TABLE;
  }
  if (l->weights_length != weights || !inside(l->weights_offset, weights, m->blob_bytes) || !inside(l->bias_offset, 4 * channels, m->blob_bytes) ||
      !inside(l->mult_offset, 4 * channels, m->blob_bytes) || !inside(l->shift_offset, 4 * channels, m->blob_bytes))
    return PIPIT_ERR_TABLE;
  return PIPIT_OK;
}

int pipit_check(const pipit_model_t *m) {
  int i, r;
  if ((r = check_header(m)) != PIPIT_OK) return r;
  if (crc32_ieee(m->blob + 20, m->blob_bytes - 20) != (uint32_t)rd32(m->blob + 16)) return PIPIT_ERR_CRC;
  if (m->num_layers < 1 || m->pool_bytes < 1) return PIPIT_ERR_TABLE;
  for (i = 0; i < m->num_layers; i++)
    if ((r = check_layer(m, &m->layers[i])) != PIPIT_OK) return r;
  return PIPIT_OK;
}

int8_t *pipit_input(const pipit_model_t *m, int8_t *pool) { return pool + m->layers[0].in_offset; }

const int8_t *pipit_output(const pipit_model_t *m, const int8_t *pool) {
  return pool + m->layers[m->num_layers - 1].out_offset;
}

static void run_conv(const pipit_model_t *m, const pipit_layer_t *l, const int8_t *x, int8_t *y, int depthwise) {
  const int32_t H = l->in_shape[0], W = l->in_shape[1], C = l->in_shape[2];
  const int32_t OH = l->out_shape[0], OW = l->out_shape[1], OC = l->out_shape[2];
  const int32_t KH = l->kernel[0], KW = l->kernel[1];
  const int8_t *w = (const int8_t *)(m->blob + l->weights_offset);
  int32_t oh, ow, o, kh, kw, c;
  for (oh = 0; oh < OH; oh++) {
    for (ow = 0; ow < OW; ow++) {
      for (o = 0; o < OC; o++) {
        int32_t acc = rd32(m->blob + l->bias_offset + 4 * o);
        for (kh = 0; kh < KH; kh++) {
          int32_t ih = oh * l->stride[0] - l->pad_top + kh;
          if (ih < 0 || ih >= H) continue;
          for (kw = 0; kw < KW; kw++) {
            int32_t iw = ow * l->stride[1] - l->pad_left + kw;
            const int8_t *xs;
            if (iw < 0 || iw >= W) continue;
            xs = x + (ih * W + iw) * C;
            if (depthwise) {
              acc += ((int32_t)xs[o] - l->in_zp) * (int32_t)w[(kh * KW + kw) * C + o];
            } else {
              const int8_t *ws = w + ((o * KH + kh) * KW + kw) * C;
              for (c = 0; c < C; c++) acc += ((int32_t)xs[c] - l->in_zp) * (int32_t)ws[c];
            }
          }
        }
        y[(oh * OW + ow) * OC + o] = clamp8(pipit_requant(acc, rd32(m->blob + l->mult_offset + 4 * o), rd32(m->blob + l->shift_offset + 4 * o)) + l->out_zp,
                                            l->clamp_lo, l->clamp_hi);
      }
    }
  }
}

static void run_dense(const pipit_model_t *m, const pipit_layer_t *l, const int8_t *x, int8_t *y) {
  const int32_t in = l->in_shape[0] * l->in_shape[1] * l->in_shape[2], out = l->out_shape[2];
  const int8_t *w = (const int8_t *)(m->blob + l->weights_offset);
  int32_t o, i;
  for (o = 0; o < out; o++) {
    int32_t acc = rd32(m->blob + l->bias_offset + 4 * o);
    for (i = 0; i < in; i++) acc += ((int32_t)x[i] - l->in_zp) * (int32_t)w[o * in + i];
    y[o] = clamp8(pipit_requant(acc, rd32(m->blob + l->mult_offset + 4 * o), rd32(m->blob + l->shift_offset + 4 * o)) + l->out_zp, l->clamp_lo, l->clamp_hi);
  }
}

static void run_pool(const pipit_layer_t *l, const int8_t *x, int8_t *y, int is_max) {
  const int32_t H = l->in_shape[0], W = l->in_shape[1], C = l->in_shape[2];
  const int32_t OH = l->out_shape[0], OW = l->out_shape[1];
  int32_t oh, ow, c, ih, iw;
  for (oh = 0; oh < OH; oh++) {
    int32_t h0 = oh * l->stride[0] - l->pad_top, h1 = h0 + l->kernel[0];
    if (h0 < 0) h0 = 0;
    if (h1 > H) h1 = H;
    for (ow = 0; ow < OW; ow++) {
      int32_t w0 = ow * l->stride[1] - l->pad_left, w1 = w0 + l->kernel[1];
      if (w0 < 0) w0 = 0;
      if (w1 > W) w1 = W;
      for (c = 0; c < C; c++) {
        int32_t best = -128, sum = 0;
        for (ih = h0; ih < h1; ih++)
          for (iw = w0; iw < w1; iw++) {
            int32_t v = x[(ih * W + iw) * C + c];
            if (v > best) best = v;
            sum += v;
          }
        y[(oh * OW + ow) * C + c] = (int8_t)(is_max ? best : round_div(sum, (h1 - h0) * (w1 - w0)));
      }
    }
  }
}

static void run_gap(const pipit_layer_t *l, const int8_t *x, int8_t *y) {
  const int32_t hw = l->in_shape[0] * l->in_shape[1], C = l->in_shape[2];
  int32_t c, q;
  for (c = 0; c < C; c++) {
    int32_t sum = 0;
    for (q = 0; q < hw; q++) sum += x[q * C + c];
    y[c] = (int8_t)round_div(sum, hw);
  }
}

int pipit_run_layer(const pipit_model_t *m, int i, int8_t *pool) {
  const pipit_layer_t *l;
  const int8_t *x;
  int8_t *y;
  if (i < 0 || i >= m->num_layers) return PIPIT_ERR_LAYER;
  l = &m->layers[i];
  x = pool + l->in_offset;
  y = pool + l->out_offset;
  switch (l->op) {
  case PIPIT_OP_CONV: run_conv(m, l, x, y, 0); break;
  case PIPIT_OP_DEPTHWISE: run_conv(m, l, x, y, 1); break;
  case PIPIT_OP_DENSE: run_dense(m, l, x, y); break;
  case PIPIT_OP_MAXPOOL: run_pool(l, x, y, 1); break;
  case PIPIT_OP_AVGPOOL: run_pool(l, x, y, 0); break;
  case PIPIT_OP_GLOBALAVGPOOL: run_gap(l, x, y); break;
  default: return PIPIT_ERR_LAYER;
  }
  return PIPIT_OK;
}

int pipit_run(const pipit_model_t *m, int8_t *pool, size_t pool_bytes) {
  int i, r;
  if (pool_bytes < (size_t)m->pool_bytes) return PIPIT_ERR_POOL;
  if ((r = check_header(m)) != PIPIT_OK) return r;
  for (i = 0; i < m->num_layers; i++)
    if ((r = pipit_run_layer(m, i, pool)) != PIPIT_OK) return r;
  return PIPIT_OK;
}
