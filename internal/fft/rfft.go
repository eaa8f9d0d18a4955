// Package fft is pipit's fast path for real FFTs of power-of-two length,
// the sizes every front end in practice uses. It computes the same
// unnormalised transform as gonum.org/v1/gonum/dsp/fourier's FFT
// (X[k] = Σ x[n]·e^(-2πikn/N)), which stays the reference in the tests
// and the path for every other length.
//
// Method: the N real samples are packed into N/2 complex ones
// z[n] = x[2n] + i·x[2n+1], transformed by an iterative radix-2
// decimation-in-time FFT with tabulated twiddles, and split into the
// spectrum of x with X[k] = E[k] + e^(-2πik/N)·O[k], where
// E[k] = (Z[k] + conj Z[N/2-k])/2 and O[k] = (Z[k] - conj Z[N/2-k])/(2i)
// (Oppenheim & Schafer, Discrete-Time Signal Processing, 3rd ed., §9.5 and
// problem 9.51).
package fft

import (
	"fmt"
	"math"
	"math/bits"
)

// Real computes real FFTs of one power-of-two length. It holds work
// buffers, so it is not safe for concurrent use.
type Real struct {
	n        int
	rev      []int32   // (N/2) bit-reversal permutation
	twr, twi []float64 // (N/2-1) stage twiddles, stage by stage
	spr, spi []float64 // (N/2+1) split twiddles e^(-2πik/N)
	re, im   []float64 // (N/2) work buffers
}

// NewReal returns a transform for length n, which must be a power of two
// of at least 4; it returns an error otherwise.
func NewReal(n int) (*Real, error) {
	if n < 4 || n&(n-1) != 0 {
		return nil, fmt.Errorf("fft: length %d is not a power of two ≥ 4", n)
	}
	m := n / 2
	r := &Real{n: n, rev: make([]int32, m), spr: make([]float64, m+1), spi: make([]float64, m+1),
		re: make([]float64, m), im: make([]float64, m)}
	shift := bits.UintSize - bits.Len(uint(m-1))
	for i := range r.rev {
		r.rev[i] = int32(bits.Reverse(uint(i)) >> shift)
	}
	for size := 2; size <= m; size <<= 1 {
		for j := 0; j < size/2; j++ {
			s, c := math.Sincos(-2 * math.Pi * float64(j) / float64(size))
			r.twr = append(r.twr, c)
			r.twi = append(r.twi, s)
		}
	}
	for k := 0; k <= m; k++ {
		s, c := math.Sincos(-2 * math.Pi * float64(k) / float64(n))
		r.spr[k], r.spi[k] = c, s
	}
	return r, nil
}

// Len returns the transform length N.
func (r *Real) Len() int { return r.n }

// Power writes |X[k]|² for k = 0..N/2 into dst (len N/2+1). It does not
// allocate and panics if len(x) != N or len(dst) != N/2+1.
func (r *Real) Power(dst, x []float64) {
	r.transform(x, dst)
	m := r.n / 2
	re, im := r.re[:m], r.im[:m]
	dst = dst[:m+1]
	// k = 0 and k = N/2: X = Re Z[0] ± Im Z[0].
	dst[0] = (re[0] + im[0]) * (re[0] + im[0])
	dst[m] = (re[0] - im[0]) * (re[0] - im[0])
	spr, spi := r.spr[:m], r.spi[:m]
	for k := 1; k < m; k++ {
		b := m - k
		zr, zi, cr, ci := re[k], im[k], re[b], -im[b]
		er, ei := 0.5*(zr+cr), 0.5*(zi+ci)
		or, oi := 0.5*(zi-ci), -0.5*(zr-cr)
		wr, wi := spr[k], spi[k]
		xr := er + wr*or - wi*oi
		xi := ei + wr*oi + wi*or
		dst[k] = xr*xr + xi*xi
	}
}

// Coefficients writes X[k] for k = 0..N/2 into dst (len N/2+1), in the
// layout of gonum's fourier.FFT.Coefficients. It does not allocate and
// panics on wrong lengths as [Real.Power].
func (r *Real) Coefficients(dst []complex128, x []float64) {
	if len(dst) != r.n/2+1 {
		panic(fmt.Sprintf("fft: Coefficients: len(dst)=%d, want %d", len(dst), r.n/2+1))
	}
	r.transform(x, nil)
	for k := range dst {
		xr, xi := r.bin(r.re, r.im, k)
		dst[k] = complex(xr, xi)
	}
}

// bin returns X[k] from the half-size transform Z in re, im.
func (r *Real) bin(re, im []float64, k int) (float64, float64) {
	m := r.n / 2
	a, b := k%m, (m-k)%m
	zr, zi := re[a], im[a]
	cr, ci := re[b], -im[b] // conj Z[m-k]
	er, ei := 0.5*(zr+cr), 0.5*(zi+ci)
	// O = (Z - conj Z[m-k]) / (2i) = (zi-ci)/2 - i·(zr-cr)/2
	or, oi := 0.5*(zi-ci), -0.5*(zr-cr)
	wr, wi := r.spr[k], r.spi[k]
	return er + wr*or - wi*oi, ei + wr*oi + wi*or
}

func (r *Real) transform(x []float64, dst []float64) {
	m := r.n / 2
	if len(x) != r.n || (dst != nil && len(dst) != m+1) {
		panic(fmt.Sprintf("fft: len(x)=%d len(dst)=%d, want %d and %d", len(x), len(dst), r.n, m+1))
	}
	re, im := r.re[:m], r.im[:m]
	// Stage of size 2 fused with the bit-reversed load (twiddle 1).
	rev := r.rev[:m]
	for i := 0; i < m; i += 2 {
		a, b := 2*int(rev[i]), 2*int(rev[i+1])
		ar, ai, br, bi := x[a], x[a+1], x[b], x[b+1]
		re[i], im[i] = ar+br, ai+bi
		re[i+1], im[i+1] = ar-br, ai-bi
	}
	if m >= 4 {
		// Stage of size 4: twiddles 1 and -i.
		for s := 0; s < m; s += 4 {
			r0, i0, r1, i1 := re[s], im[s], re[s+1], im[s+1]
			r2, i2, r3, i3 := re[s+2], im[s+2], re[s+3], im[s+3]
			re[s], im[s] = r0+r2, i0+i2
			re[s+2], im[s+2] = r0-r2, i0-i2
			// t = -i·(r3 + i·i3) = i3 - i·r3
			re[s+1], im[s+1] = r1+i3, i1-r3
			re[s+3], im[s+3] = r1-i3, i1+r3
		}
	}
	// Remaining stages two at a time (radix 2², three complex products per
	// four points), then one radix-2 stage if their count is odd.
	size := 8
	for ; 2*size <= m; size *= 4 {
		r.radix4(re, im, size)
	}
	if size <= m {
		r.radix2(re, im, size)
	}
}

// stage returns the twiddles W_size^j, j < size/2, of one stage; stage s
// starts at offset s/2-1 of the tables.
func (r *Real) stage(size int) ([]float64, []float64) {
	o := size/2 - 1
	return r.twr[o : o+size/2], r.twi[o : o+size/2]
}

// radix2 runs the stage that combines blocks of size/2 into blocks of size.
func (r *Real) radix2(re, im []float64, size int) {
	half := size >> 1
	twr, twi := r.stage(size)
	for start := 0; start < len(re); start += size {
		ar, ai := re[start:start+half], im[start:start+half]
		br, bi := re[start+half:start+size], im[start+half:start+size]
		br, bi = br[:len(ar)], bi[:len(ar)]
		twr, twi := twr[:len(ar)], twi[:len(ar)]
		for j := range ar {
			wr, wi := twr[j], twi[j]
			tr := wr*br[j] - wi*bi[j]
			ti := wr*bi[j] + wi*br[j]
			br[j], bi[j] = ar[j]-tr, ai[j]-ti
			ar[j] += tr
			ai[j] += ti
		}
	}
}

// radix4 runs the stages of size and 2·size in one pass. With h = size/2,
// w1 = W_size^j and w2 = W_2size^j (so W_2size^(j+h) = -i·w2), points
// a0..a3 at j, j+h, j+2h, j+3h become, after the first stage,
// b0,1 = a0 ± w1·a1 and b2,3 = a2 ± w1·a3, and after the second
// c0,2 = b0 ± w2·b2 and c1,3 = b1 ± (-i·w2)·b3.
func (r *Real) radix4(re, im []float64, size int) {
	h := size >> 1
	w1r, w1i := r.stage(size)
	w2r, w2i := r.stage(2 * size)
	w1r, w1i, w2r, w2i = w1r[:h], w1i[:h], w2r[:h], w2i[:h]
	for start := 0; start < len(re); start += 2 * size {
		r0, i0 := re[start:start+h], im[start:start+h]
		r1, i1 := re[start+h:start+2*h], im[start+h:start+2*h]
		r2, i2 := re[start+2*h:start+3*h], im[start+2*h:start+3*h]
		r3, i3 := re[start+3*h:start+4*h], im[start+3*h:start+4*h]
		r1, i1, r2, i2, r3, i3 = r1[:len(r0)], i1[:len(r0)], r2[:len(r0)], i2[:len(r0)], r3[:len(r0)], i3[:len(r0)]
		for j := range r0 {
			ar, ai := w1r[j], w1i[j]
			t1r := ar*r1[j] - ai*i1[j]
			t1i := ar*i1[j] + ai*r1[j]
			t3r := ar*r3[j] - ai*i3[j]
			t3i := ar*i3[j] + ai*r3[j]
			b0r, b0i := r0[j]+t1r, i0[j]+t1i
			b1r, b1i := r0[j]-t1r, i0[j]-t1i
			b2r, b2i := r2[j]+t3r, i2[j]+t3i
			b3r, b3i := r2[j]-t3r, i2[j]-t3i
			cr, ci := w2r[j], w2i[j]
			ur := cr*b2r - ci*b2i
			ui := cr*b2i + ci*b2r
			// v = -i·w2·b3: w2·b3 = (pr, pi) → (pi, -pr)
			pr := cr*b3r - ci*b3i
			pi := cr*b3i + ci*b3r
			vr, vi := pi, -pr
			r0[j], i0[j] = b0r+ur, b0i+ui
			r2[j], i2[j] = b0r-ur, b0i-ui
			r1[j], i1[j] = b1r+vr, b1i+vi
			r3[j], i3[j] = b1r-vr, b1i-vi
		}
	}
}
