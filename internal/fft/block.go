package fft

import (
	"fmt"
	"math"
	"math/bits"
)

// Lanes is the number of frames a [Block] transforms at once: one float32
// per frame in each 256-bit vector.
const Lanes = 8

// Block computes the power (or magnitude) spectra of [Lanes] windowed
// real frames of one power-of-two length N at once, in float32. Every
// array it works on is point-major and lane-minor: element (k, l) of a
// (K, Lanes) array is at k·Lanes + l, so the butterflies of all frames run
// in one vector instruction with a broadcast twiddle.
//
// Method, per frame: the N windowed samples are packed into N/2 complex
// ones z[n] = x[2n]·w[2n] + i·x[2n+1]·w[2n+1], transformed by an iterative
// radix-2 decimation-in-frequency FFT (natural order in, bit-reversed
// order out; Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd
// ed., §9.5) and split into X[k] = E[k] + e^(-2πik/N)·O[k] as in
// [Real]. The result is the same transform as [Real.Power], rounded to
// float32 at each step.
//
// On amd64 with AVX2 and FMA the load (with an 8×8 transpose), the
// stages, the split and the band sums run in assembly; PIPIT_NOASM=1
// selects the portable Go path, which computes the same values up to
// rounding (tested). A Block holds work buffers and is not safe for
// concurrent use.
type Block struct {
	n, m     int
	win      []float32 // (N) window, zero outside its span
	twr, twi []float32 // (M-1) stage twiddles W_2h^j, stages h = M/2, M/4, .., 1
	tw4      []float32 // radix-4 passes h = M/2, M/8, ..: (h/2, 6) w, w², w³ of W_2h^j
	spr, spi []float32 // (M+1) split twiddles e^(-2πik/N)
	rev      []int32   // (M) bit reversal of log2(M) bits
	re, im   []float32 // (M, Lanes) work arrays
}

// NewBlock returns a Block for length n (a power of two, at least 16)
// whose frames are multiplied by window (len n) before the transform.
func NewBlock(n int, window []float64) (*Block, error) {
	if n < 16 || n&(n-1) != 0 {
		return nil, fmt.Errorf("fft: block length %d is not a power of two ≥ 16", n)
	}
	if len(window) != n {
		return nil, fmt.Errorf("fft: window of %d samples for a block of length %d", len(window), n)
	}
	m := n / 2
	b := &Block{n: n, m: m, win: make([]float32, n), rev: make([]int32, m),
		spr: make([]float32, m+1), spi: make([]float32, m+1),
		re: make([]float32, m*Lanes), im: make([]float32, m*Lanes)}
	for i, w := range window {
		b.win[i] = float32(w)
	}
	for h := m / 2; h >= 1; h /= 2 {
		for j := 0; j < h; j++ {
			s, c := math.Sincos(-math.Pi * float64(j) / float64(h))
			b.twr = append(b.twr, float32(c))
			b.twi = append(b.twi, float32(s))
		}
	}
	for h := m / 2; h >= 2; h /= 4 {
		for j := 0; j < h/2; j++ {
			for p := 1; p <= 3; p++ {
				s, c := math.Sincos(-math.Pi * float64(p*j) / float64(h))
				b.tw4 = append(b.tw4, float32(c), float32(s))
			}
		}
	}
	shift := bits.UintSize - bits.Len(uint(m-1))
	for i := range b.rev {
		b.rev[i] = int32(bits.Reverse(uint(i)) >> shift)
	}
	for k := 0; k <= m; k++ {
		s, c := math.Sincos(-2 * math.Pi * float64(k) / float64(n))
		b.spr[k], b.spi[k] = float32(c), float32(s)
	}
	return b, nil
}

// Len returns the transform length N.
func (b *Block) Len() int { return b.n }

// Power writes, for each of the Lanes frames, |X[k]|² of the windowed
// frame (or |X[k]| when magnitude is set) for k = 0..N/2 into dst, which
// is (N/2+1, Lanes): bin k of frame l at k·Lanes + l. Each frames[l] must
// hold at least N samples. It does not allocate; it panics on short
// slices.
func (b *Block) Power(dst []float32, frames *[Lanes][]float32, magnitude bool) {
	m := b.m
	if len(dst) < (m+1)*Lanes {
		panic(fmt.Sprintf("fft: Block.Power: len(dst)=%d, want %d", len(dst), (m+1)*Lanes))
	}
	for l, f := range frames {
		if len(f) < b.n {
			panic(fmt.Sprintf("fft: Block.Power: frame %d has %d samples, want %d", l, len(f), b.n))
		}
	}
	if useAVX2 {
		var ptrs [Lanes]*float32
		for l := range frames {
			ptrs[l] = &frames[l][0]
		}
		loadAVX2(&b.re[0], &b.im[0], &ptrs, &b.win[0], b.n)
		h, off := m/2, 0
		for ; h >= 2; h /= 4 {
			dif4AVX2(&b.re[0], &b.im[0], &b.tw4[off], m, h)
			off += 6 * (h / 2)
		}
		if h == 1 { // an odd number of stages: the last one, W = 1
			difAVX2(&b.re[0], &b.im[0], &b.twr[m-2], &b.twi[m-2], m, 1)
		}
		mag := 0
		if magnitude {
			mag = 1
		}
		splitAVX2(&dst[0], &b.re[0], &b.im[0], &b.rev[0], &b.spr[0], &b.spi[0], m, mag)
	} else {
		b.load(frames)
		b.dif()
		b.split(dst, magnitude)
	}
	// Bins 0 and N/2: X = Re Z[0] ± Im Z[0] (Z[0] stays at position 0).
	for l := 0; l < Lanes; l++ {
		zr, zi := b.re[l], b.im[l]
		p0, pm := (zr+zi)*(zr+zi), (zr-zi)*(zr-zi)
		if magnitude {
			p0, pm = float32(math.Abs(float64(zr+zi))), float32(math.Abs(float64(zr-zi)))
		}
		dst[l], dst[m*Lanes+l] = p0, pm
	}
}

// load packs the windowed frames into re, im in natural order.
func (b *Block) load(frames *[Lanes][]float32) {
	win := b.win[:b.n]
	for l, f := range frames {
		f = f[:len(win)]
		for n := 0; n < b.m; n++ {
			b.re[n*Lanes+l] = f[2*n] * win[2*n]
			b.im[n*Lanes+l] = f[2*n+1] * win[2*n+1]
		}
	}
}

// dif runs the radix-2 decimation-in-frequency stages: for span h, points
// a = x[g+j] and c = x[g+j+h] become a + c and (a - c)·W_2h^j.
func (b *Block) dif() {
	re, im := b.re, b.im
	off := 0
	for h := b.m / 2; h >= 1; h /= 2 {
		for g := 0; g < b.m; g += 2 * h {
			for j := 0; j < h; j++ {
				wr, wi := b.twr[off+j], b.twi[off+j]
				p, q := (g+j)*Lanes, (g+j+h)*Lanes
				for l := 0; l < Lanes; l++ {
					ar, ai, cr, ci := re[p+l], im[p+l], re[q+l], im[q+l]
					re[p+l], im[p+l] = ar+cr, ai+ci
					dr, di := ar-cr, ai-ci
					re[q+l] = dr*wr - di*wi
					im[q+l] = dr*wi + di*wr
				}
			}
		}
		off += h
	}
}

// split forms bins 1..N/2-1 from the bit-reversed half-size transform:
// with Z[k] and conj Z[M-k], 2E = Z[k] + conj Z[M-k], 2O = (Z[k] - conj
// Z[M-k])/i and X = (2E + W·2O)/2.
func (b *Block) split(dst []float32, magnitude bool) {
	m := b.m
	for k := 1; k < m; k++ {
		p, q := int(b.rev[k])*Lanes, int(b.rev[m-k])*Lanes
		wr, wi := b.spr[k], b.spi[k]
		for l := 0; l < Lanes; l++ {
			zr, zi, cr, ci := b.re[p+l], b.im[p+l], b.re[q+l], -b.im[q+l]
			er, ei := zr+cr, zi+ci
			or, oi := zi-ci, cr-zr
			xr := er + (wr*or - wi*oi)
			xi := ei + (wr*oi + wi*or)
			v := 0.25 * (xr*xr + xi*xi)
			if magnitude {
				v = float32(math.Sqrt(float64(v)))
			}
			dst[k*Lanes+l] = v
		}
	}
}

// Bands is a set of sparse rows (the non-zero weights of mel triangles)
// applied to (K, Lanes) spectra by [Bands.Apply].
type Bands struct {
	span []int32   // (rows, 2) first bin, weight count
	w    []float32 // all weights, row after row
}

// NewBands returns the rows whose row r has weights[r][i] at bin
// starts[r]+i.
func NewBands(starts []int, weights [][]float64) *Bands {
	s := &Bands{}
	for r, ws := range weights {
		s.span = append(s.span, int32(starts[r]), int32(len(ws)))
		for _, w := range ws {
			s.w = append(s.w, float32(w))
		}
	}
	return s
}

// Apply writes dst[r·Lanes+l] = Σ_i w_r[i]·spec[(start_r+i)·Lanes+l] for
// every row r. dst is (rows, Lanes) and spec (K, Lanes) with K covering
// every row's bins; it panics otherwise.
func (s *Bands) Apply(dst, spec []float32) {
	rows := len(s.span) / 2
	if len(dst) < rows*Lanes {
		panic(fmt.Sprintf("fft: Bands.Apply: len(dst)=%d, want %d", len(dst), rows*Lanes))
	}
	for r := 0; r < rows; r++ {
		if end := int(s.span[2*r]+s.span[2*r+1]) * Lanes; end > len(spec) {
			panic(fmt.Sprintf("fft: Bands.Apply: row %d reads to %d, len(spec)=%d", r, end, len(spec)))
		}
	}
	if rows == 0 {
		return
	}
	if useAVX2 {
		var w *float32
		if len(s.w) > 0 {
			w = &s.w[0]
		}
		bandsAVX2(&dst[0], &spec[0], &s.span[0], w, rows)
		return
	}
	k := 0
	for r := 0; r < rows; r++ {
		start, n := int(s.span[2*r]), int(s.span[2*r+1])
		var acc [Lanes]float32
		for i := 0; i < n; i++ {
			w := s.w[k+i]
			row := spec[(start+i)*Lanes : (start+i+1)*Lanes]
			for l := range acc {
				acc[l] += w * row[l]
			}
		}
		k += n
		copy(dst[r*Lanes:], acc[:])
	}
}

// ClipBelowPeak raises every value of the (rows, Lanes) array v to at
// least its lane's maximum minus below, the subtraction done in float64:
// v[r·Lanes+l] ← max(v[r·Lanes+l], float32(float64(peak_l) - below)).
// It panics if v is empty or not a whole number of rows.
func ClipBelowPeak(v []float32, below float64) {
	if len(v) == 0 || len(v)%Lanes != 0 {
		panic(fmt.Sprintf("fft: ClipBelowPeak: len(v)=%d, want a positive multiple of %d", len(v), Lanes))
	}
	rows := len(v) / Lanes
	if useAVX2 {
		clipAVX2(&v[0], rows, below)
		return
	}
	for l := 0; l < Lanes; l++ {
		peak := v[l]
		for r := 1; r < rows; r++ {
			peak = max(peak, v[r*Lanes+l])
		}
		lo := float32(float64(peak) - below)
		for r := 0; r < rows; r++ {
			v[r*Lanes+l] = max(v[r*Lanes+l], lo)
		}
	}
}

// LogScaled replaces each v[i] by float32(scale·ln(max(v[i], floor))),
// computed in float64 with an absolute error in the logarithm below 1e-9
// (TestLogScaledAgainstMathLog); NaN maps to the floor like any value
// below it. floor must be a normal positive float64 (the front end keeps
// it ≥ 1e-30) and the values finite. It does not allocate.
func LogScaled(v []float32, floor, scale float64) {
	n := 0
	if useAVX2 {
		n = len(v) &^ 3
		if n > 0 {
			logAVX2(&v[0], n, floor, scale)
		}
	}
	for i := n; i < len(v); i++ {
		x := float64(v[i])
		if !(x > floor) {
			x = floor
		}
		v[i] = float32(scale * lnNormal(x))
	}
}

// lnNormal returns ln x for a normal positive x, by the method of
// logAVX2: x = m·2^e with m in [√½, √2), ln m = 2·atanh(s),
// s = (m-1)/(m+1), to s⁹ (Abramowitz & Stegun 4.1.28; the first omitted
// term is below 7e-10).
func lnNormal(x float64) float64 {
	b := math.Float64bits(x)
	e := float64(int(b>>52) - 1023)
	m := math.Float64frombits(b&(1<<52-1) | 0x3ff0000000000000)
	if m >= math.Sqrt2 {
		m *= 0.5
		e++
	}
	s := (m - 1) / (m + 1)
	s2 := s * s
	return s*(2+s2*(2.0/3+s2*(2.0/5+s2*(2.0/7+s2*(2.0/9))))) + e*math.Ln2
}
