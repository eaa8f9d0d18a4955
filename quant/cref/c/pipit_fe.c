/* pipit_fe.c - see pipit_fe.h. C99, float32, no dynamic memory. */
#include "pipit_fe.h"

#include <math.h>
#include <string.h>

float pipit_fe_ln(float v) {
  /* v = f * 2^e with f in [sqrt(1/2), sqrt(2)); ln f = 2 atanh(s),
   * s = (f - 1)/(f + 1), |s| <= 0.1716, series to s^9: the first omitted
   * term 2 s^11 / 11 is below 7e-10 (Abramowitz & Stegun 4.1.28). */
  uint32_t bits;
  int32_t e;
  float f, s, s2, p;
  memcpy(&bits, &v, sizeof bits);
  e = (int32_t)((bits >> 23) & 0xffu) - 127;
  bits &= 0x007fffffu;
  if (bits > 0x3504f3u) { /* mantissa above sqrt(2): take f/2 and e + 1 */
    bits |= 0x3f000000u;
    e++;
  } else {
    bits |= 0x3f800000u;
  }
  memcpy(&f, &bits, sizeof f);
  s = (f - 1.0f) / (f + 1.0f);
  s2 = s * s;
  p = 2.0f / 9.0f;
  p = 2.0f / 7.0f + s2 * p;
  p = 2.0f / 5.0f + s2 * p;
  p = 2.0f / 3.0f + s2 * p;
  p = 2.0f + s2 * p;
  return s * p + (float)e * 0.693147180559945309f;
}

void pipit_fe_init(pipit_fe_t *fe, const pipit_fe_config_t *cfg, int16_t *ring, float *work, float *logmel, int8_t *feat) {
  fe->cfg = cfg;
  fe->ring = ring;
  fe->work = work;
  fe->logmel = logmel;
  fe->feat = feat;
  pipit_fe_reset(fe);
}

/* push1 stores one sample and reports whether a frame is due. */
static int push1(pipit_fe_t *fe, int16_t v) {
  const pipit_fe_config_t *c = fe->cfg;
  if (fe->skip > 0) {
    fe->skip--;
    return 0;
  }
  fe->ring[fe->pos] = v;
  fe->pos = fe->pos + 1 == c->window ? 0 : fe->pos + 1;
  fe->filled++;
  return fe->filled == c->window;
}

void pipit_fe_reset(pipit_fe_t *fe) {
  const pipit_fe_config_t *c = fe->cfg;
  int32_t i;
  fe->pos = fe->filled = fe->skip = fe->col = fe->have = 0;
  fe->countdown = c->frames;
  fe->flush_left = c->pad_ends ? c->window / 2 : 0;
  fe->seen = fe->emitted = 0;
  if (c->pad_ends)
    for (i = 0; i < c->window / 2; i++) (void)push1(fe, 0);
}

/* fft_power: complex FFT of the N/2 points packed in w (x[2n] + i x[2n+1]),
 * split into the real signal's spectrum, |X[k]|^2 left in w[0..N/2]. */
static void fft_power(const pipit_fe_config_t *c, float *w) {
  const int32_t n = c->fft, m = n / 2;
  const float *tw = c->twiddle;
  int32_t i, j, k, len;
  float nyq;
  /* bit-reversal permutation of the m complex points */
  for (i = 1, j = 0; i < m; i++) {
    int32_t bit = m >> 1;
    for (; j & bit; bit >>= 1) j ^= bit;
    j ^= bit;
    if (i < j) {
      float tr = w[2 * i], ti = w[2 * i + 1];
      w[2 * i] = w[2 * j];
      w[2 * i + 1] = w[2 * j + 1];
      w[2 * j] = tr;
      w[2 * j + 1] = ti;
    }
  }
  /* radix-2 decimation in time; stage twiddle e^(-2 pi i j/len) = table[j n/len] */
  for (len = 2; len <= m; len <<= 1) {
    const int32_t half = len / 2, step = n / len;
    for (j = 0; j < half; j++) {
      const float wr = tw[2 * j * step], wi = tw[2 * j * step + 1];
      for (i = j; i < m; i += len) {
        float *a = w + 2 * i, *b = w + 2 * (i + half);
        const float tr = wr * b[0] - wi * b[1], ti = wr * b[1] + wi * b[0];
        b[0] = a[0] - tr;
        b[1] = a[1] - ti;
        a[0] += tr;
        a[1] += ti;
      }
    }
  }
  /* split: X[k] = E + (-i) W^k O with E = (Z[k] + conj Z[m-k])/2,
   * O = (Z[k] - conj Z[m-k])/2; X[m-k] = conj E + (-i) conj(W^k O).
   * Sums are kept doubled and the power scaled by 1/4 (exact). */
  {
    const float r0 = w[0], i0 = w[1];
    w[0] = (r0 + i0) * (r0 + i0);
    nyq = (r0 - i0) * (r0 - i0);
  }
  for (k = 1; 2 * k <= m; k++) {
    const int32_t b = m - k;
    const float ar = w[2 * k], ai = w[2 * k + 1], br = w[2 * b], bi = -w[2 * b + 1];
    const float er = ar + br, ei = ai + bi, or_ = ar - br, oi = ai - bi;
    const float cr = tw[2 * k], ci = tw[2 * k + 1];
    const float p = cr * or_ - ci * oi, q = cr * oi + ci * or_;
    const float xr = er + q, xi = ei - p;
    w[2 * k] = 0.25f * (xr * xr + xi * xi);
    if (b != k) {
      const float yr = er - q, yi = ei + p;
      w[2 * b] = 0.25f * (yr * yr + yi * yi);
    }
  }
  for (k = 1; k < m; k++) w[k] = w[2 * k];
  w[m] = nyq;
}

/* frame computes the frame held in ring (oldest sample at pos). */
static void frame(pipit_fe_t *fe) {
  const pipit_fe_config_t *c = fe->cfg;
  float *w = fe->work;
  const int32_t W = c->window, M = c->bands, F = c->frames;
  int32_t i, mb, r = fe->pos;
  const float *mel = c->mel;
  float peak = -3.0e38f;
  for (i = 0; i < c->offset; i++) w[i] = 0.0f;
  for (i = 0; i < W; i++) {
    w[c->offset + i] = (float)fe->ring[r] * c->win[i];
    r = r + 1 == W ? 0 : r + 1;
  }
  for (i = c->offset + W; i < c->fft; i++) w[i] = 0.0f;
  fft_power(c, w);
  if (c->magnitude)
    for (i = 0; i <= c->fft / 2; i++) w[i] = sqrtf(w[i]);
  for (mb = 0; mb < M; mb++) {
    const float *s = w + c->band_start[mb];
    const int32_t len = c->band_len[mb];
    float v = 0.0f;
    for (i = 0; i < len; i++) v += mel[i] * s[i];
    mel += len;
    if (!(v > c->floor)) v = c->floor; /* also maps NaN to the floor */
    v = pipit_fe_ln(v);
    if (c->decibel) {
      v *= 4.34294481903251828f; /* 10 / ln 10 */
      if (v > peak) peak = v;
    }
    fe->logmel[mb] = v;
  }
  if (c->decibel && c->floor_below_peak > 0.0f) {
    const float lo = peak - c->floor_below_peak;
    for (mb = 0; mb < M; mb++)
      if (fe->logmel[mb] < lo) fe->logmel[mb] = lo;
  }
  for (mb = 0; mb < M; mb++) {
    float q = (fe->logmel[mb] - c->mean[mb]) * c->inv_std[mb] * c->inv_scale;
    int32_t t;
    if (q > 1000.0f) q = 1000.0f; /* keeps the conversion defined; saturated below */
    if (q < -1000.0f) q = -1000.0f;
    t = (int32_t)q; /* truncates toward zero; round half away from zero: */
    if (q - (float)t >= 0.5f) t++;
    if ((float)t - q >= 0.5f) t--;
    t += c->zero_point;
    if (t > 127) t = 127;
    if (t < -128) t = -128;
    fe->feat[mb * F + fe->col] = (int8_t)t;
  }
  fe->col = fe->col + 1 == F ? 0 : fe->col + 1;
  if (fe->have < F) fe->have++;
  fe->emitted++;
}

/* after_frame advances the ring by one hop and returns the events. */
static int after_frame(pipit_fe_t *fe) {
  const pipit_fe_config_t *c = fe->cfg;
  int ev = PIPIT_FE_FRAME;
  frame(fe);
  if (c->hop >= c->window) {
    fe->filled = 0;
    fe->skip = c->hop - c->window;
  } else {
    fe->filled = c->window - c->hop;
  }
  if (--fe->countdown == 0) {
    ev |= PIPIT_FE_WINDOW;
    fe->countdown = c->hop_frames;
  }
  return ev;
}

int pipit_fe_push(pipit_fe_t *fe, const int16_t *pcm, int32_t n, int32_t *used) {
  int32_t i;
  for (i = 0; i < n; i++) {
    fe->seen++;
    if (push1(fe, pcm[i])) {
      *used = i + 1;
      return after_frame(fe);
    }
  }
  *used = n;
  return 0;
}

int pipit_fe_flush(pipit_fe_t *fe) {
  const pipit_fe_config_t *c = fe->cfg;
  /* frames of the padded signal (features.Config.Frames) */
  const uint32_t total = fe->seen + 2u * (uint32_t)(c->window / 2);
  const uint32_t want = total < (uint32_t)c->window ? 0u : 1u + (total - (uint32_t)c->window) / (uint32_t)c->hop;
  while (fe->flush_left > 0 && fe->emitted < want) {
    fe->flush_left--;
    if (push1(fe, 0)) return after_frame(fe);
  }
  fe->flush_left = 0;
  return 0;
}

void pipit_fe_window(const pipit_fe_t *fe, int8_t *dst) {
  const int32_t M = fe->cfg->bands, F = fe->cfg->frames, c0 = fe->col;
  int32_t mb;
  for (mb = 0; mb < M; mb++) {
    const int8_t *row = fe->feat + mb * F;
    memcpy(dst + mb * F, row + c0, (size_t)(F - c0));
    memcpy(dst + mb * F + (F - c0), row, (size_t)c0);
  }
}
