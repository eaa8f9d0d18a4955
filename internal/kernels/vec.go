package kernels

import "math"

// The element-wise and per-channel kernels below run on whole batches of
// channels-last activations: a slice of rows·c values is rows positions
// of c channels. With AVX2 and c a multiple of 8 they take the assembly
// path (vec_amd64.s); otherwise a portable loop computes the same formula.
// Each portable loop and its assembly twin evaluate the same expression
// with one rounding per fused multiply-add; the portable loops compute
// that multiply-add in float64 and round to float32, which can differ
// from a single rounding by one unit in the last place in rare cases.

// Clamp sets dst[i] = min(max(src[i], lo), hi) for i < len(src): ReLU
// with lo = 0, hi = +Inf; ReLU6 with hi = 6. It panics if dst is shorter
// than src.
func Clamp(dst, src []float32, lo, hi float32) {
	checkLen("Clamp dst", len(dst), len(src))
	if len(src) == 0 {
		return
	}
	if useSIMD {
		clampAVX2(&dst[0], &src[0], len(src), lo, hi)
		return
	}
	dst = dst[:len(src)]
	for i, v := range src {
		dst[i] = min32(max32(v, lo), hi)
	}
}

// MaskSet sets dst[i] = g[i] where lo < x[i] < hi and 0 elsewhere, for
// i < len(x): the backward pass of [Clamp] (the subgradient at the kinks
// is 0). It panics on short slices.
func MaskSet(dst, g, x []float32, lo, hi float32) {
	checkLen("MaskSet dst", len(dst), len(x))
	checkLen("MaskSet g", len(g), len(x))
	if len(x) == 0 {
		return
	}
	if useSIMD {
		maskSetAVX2(&dst[0], &g[0], &x[0], len(x), lo, hi)
		return
	}
	dst, g = dst[:len(x)], g[:len(x)]
	for i, v := range x {
		if v > lo && v < hi {
			dst[i] = g[i]
		} else {
			dst[i] = 0
		}
	}
}

// ChanAffine sets dst[r·c+ch] = min(max(src[r·c+ch]·scale[ch] + shift[ch],
// lo), hi) over the len(src)/c rows of src: an inference batch norm, with
// a fused ReLU when lo = 0. It panics if len(src) is not a multiple of c
// or a slice is short.
func ChanAffine(dst, src, scale, shift []float32, c int, lo, hi float32) {
	rows := chanRows("ChanAffine", len(src), c)
	checkLen("ChanAffine dst", len(dst), len(src))
	checkLen("ChanAffine scale", len(scale), c)
	checkLen("ChanAffine shift", len(shift), c)
	if rows == 0 {
		return
	}
	if useSIMD && c%8 == 0 {
		chanAffineAVX2(&dst[0], &src[0], &scale[0], &shift[0], rows, c, lo, hi)
		return
	}
	scale, shift = scale[:c], shift[:c]
	for q := 0; q < len(src); q += c {
		xs, os := src[q:q+c], dst[q:q+c]
		for ch, v := range xs {
			os[ch] = min32(max32(fma32(v, scale[ch], shift[ch]), lo), hi)
		}
	}
}

// ChanDot adds, per channel over the len(a)/c rows, Σ a to sa[ch] and
// Σ a·(b − mu[ch]) to sab[ch], the differences in float32 and the products
// and sums in float64. With a = b and mu = 0 it gives a batch's first two
// moments; with a = ∂L/∂y and b = x the two sums of batch norm's backward
// pass. The SIMD path sums each channel's rows in order, like the portable
// one. It panics on short slices.
func ChanDot(a, b, mu []float32, c int, sa, sab []float64) {
	rows := chanRows("ChanDot", len(a), c)
	checkLen("ChanDot b", len(b), len(a))
	checkLen("ChanDot mu", len(mu), c)
	checkLen("ChanDot sa", len(sa), c)
	checkLen("ChanDot sab", len(sab), c)
	if rows == 0 {
		return
	}
	if useSIMD && c%8 == 0 {
		chanDotAVX2(&a[0], &b[0], &mu[0], rows, c, &sa[0], &sab[0])
		return
	}
	for ch := 0; ch < c; ch++ {
		var s, sp float64
		m := mu[ch]
		for q := ch; q < len(a); q += c {
			v := float64(a[q])
			s += v
			sp = math.FMA(v, float64(b[q]-m), sp)
		}
		sa[ch] += s
		sab[ch] += sp
	}
}

// ChanLinear sets dst[r·c+ch] = a[ch]·g[r·c+ch] + (b[ch]·(x[r·c+ch] −
// mu[ch]) + k[ch]) over the len(g)/c rows, with two fused multiply-adds:
// batch norm's input gradient. It panics on short slices.
func ChanLinear(dst, g, x, a, mu, b, k []float32, c int) {
	rows := chanRows("ChanLinear", len(g), c)
	checkLen("ChanLinear dst", len(dst), len(g))
	checkLen("ChanLinear x", len(x), len(g))
	for _, s := range [][]float32{a, mu, b, k} {
		checkLen("ChanLinear coefficients", len(s), c)
	}
	if rows == 0 {
		return
	}
	if useSIMD && c%8 == 0 {
		chanLinearAVX2(&dst[0], &g[0], &x[0], &a[0], &mu[0], &b[0], &k[0], rows, c)
		return
	}
	for q := 0; q < len(g); q += c {
		gs, xs, ds := g[q:q+c], x[q:q+c], dst[q:q+c]
		for ch, v := range gs {
			ds[ch] = fma32(a[ch], v, fma32(b[ch], xs[ch]-mu[ch], k[ch]))
		}
	}
}

func chanRows(name string, n, c int) int {
	if c < 1 || n%c != 0 {
		panic("kernels: " + name + ": length is not a multiple of the channel count")
	}
	return n / c
}

// fma32 is x·y + z rounded once, as VFMADD does.
func fma32(x, y, z float32) float32 {
	return float32(math.FMA(float64(x), float64(y), float64(z)))
}

// max32 and min32 follow MAXPS/MINPS: the second operand when either is NaN.
func max32(v, lo float32) float32 {
	if v > lo {
		return v
	}
	return lo
}

func min32(v, hi float32) float32 {
	if v < hi {
		return v
	}
	return hi
}

// Axpy adds a·x[i] to y[i] for i < len(x) (augmentation mixes noise into
// audio with it). It panics if y is shorter than x.
func Axpy(a float32, x, y []float32) {
	checkLen("Axpy y", len(y), len(x))
	if len(x) == 0 {
		return
	}
	if useSIMD {
		axpyAVX2(a, &x[0], &y[0], len(x))
		return
	}
	y = y[:len(x)]
	for i, v := range x {
		y[i] += a * v
	}
}

// Dot returns Σ x[i]·y[i] for i < len(x), summed in float32 (the SIMD path
// in two 8-lane partial sums). It panics if y is shorter than x.
func Dot(x, y []float32) float32 {
	checkLen("Dot y", len(y), len(x))
	if len(x) == 0 {
		return 0
	}
	if useSIMD {
		return dotAVX2(&x[0], &y[0], len(x))
	}
	y = y[:len(x)]
	var s float32
	for i, v := range x {
		s += v * y[i]
	}
	return s
}
