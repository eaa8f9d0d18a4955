package kernels

import (
	"math/rand/v2"
	"testing"
)

// TestSIMDAgainstPortable runs the matrix products with the assembly path
// and with the portable path on the same random inputs (including lengths
// that exercise the 16-, 8- and 1-lane tails) and requires agreement to
// float32 summation tolerance.
func TestSIMDAgainstPortable(t *testing.T) {
	if !useSIMD {
		t.Skip("no AVX2/FMA on this CPU (or PIPIT_NOASM=1)")
	}
	defer func() { useSIMD = true }()
	rng := rand.New(rand.NewPCG(9, 9))
	for _, sz := range [][3]int{{5, 17, 16}, {3, 33, 41}, {7, 16, 144}, {2, 100, 23}, {4, 25, 9}} {
		m, n, k := sz[0], sz[1], sz[2]
		a, b := randSlice(rng, m*k), randSlice(rng, n*k)
		bn := randSlice(rng, k*n)
		at := randSlice(rng, k*m)
		for _, f := range []struct {
			name string
			run  func(c []float32)
		}{
			{"NT", func(c []float32) { GemmNT(m, n, k, a, b, c) }},
			{"NN", func(c []float32) { GemmNN(m, n, k, a, bn, c) }},
			{"TN", func(c []float32) { GemmTN(m, n, k, at, bn, c) }},
		} {
			useSIMD = true
			fast := make([]float32, m*n)
			f.run(fast)
			useSIMD = false
			slow := make([]float32, m*n)
			f.run(slow)
			for i := range fast {
				if !near(fast[i], float64(slow[i])) {
					t.Fatalf("Gemm%s %v: SIMD %g, portable %g at %d", f.name, sz, fast[i], slow[i], i)
				}
			}
		}
	}
	// depthwise with channel counts that use the vector path and its tail
	for _, g := range []ConvGeom{
		{H: 6, W: 7, C: 19, KH: 3, KW: 3, SH: 2, SW: 1, PadTop: 1, PadLeft: 1, OH: 3, OW: 7},
		{H: 5, W: 5, C: 8, KH: 3, KW: 3, SH: 1, SW: 1, PadTop: 1, PadLeft: 1, OH: 5, OW: 5},
	} {
		x, w := randSlice(rng, g.H*g.W*g.C), randSlice(rng, g.KH*g.KW*g.C)
		dout := randSlice(rng, g.OH*g.OW*g.C)
		var res [2][3][]float32
		for k, simd := range []bool{true, false} {
			useSIMD = simd
			out, dx, dw := make([]float32, len(dout)), make([]float32, len(x)), make([]float32, len(w))
			DepthwiseForward(g, x, w, out)
			DepthwiseBackward(g, x, w, dout, dx, dw)
			res[k] = [3][]float32{out, dx, dw}
		}
		for part := 0; part < 3; part++ {
			for i := range res[0][part] {
				if !near(res[0][part][i], float64(res[1][part][i])) {
					t.Fatalf("depthwise C=%d part %d: SIMD %g, portable %g", g.C, part, res[0][part][i], res[1][part][i])
				}
			}
		}
	}
	useSIMD = true
	x, y := randSlice(rng, 37), randSlice(rng, 37)
	var want float64
	for i := range x {
		want += float64(x[i]) * float64(y[i])
	}
	if got := dotAVX2(&x[0], &y[0], len(x)); !near(got, want) {
		t.Errorf("dotAVX2 = %g, want %g", got, want)
	}
}
