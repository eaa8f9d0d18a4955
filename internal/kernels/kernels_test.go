package kernels

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

func randSlice(rng *rand.Rand, n int) []float32 {
	s := make([]float32, n)
	for i := range s {
		s[i] = float32(rng.NormFloat64())
	}
	return s
}

// tolerance for float32 sums of up to a few hundred terms of unit-variance
// products, compared with float64 references.
const tol = 1e-4

func near(a float32, b float64) bool {
	return math.Abs(float64(a)-b) <= tol*(1+math.Abs(b))
}

func TestGemmAgainstNaive(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, sz := range [][3]int{{1, 1, 1}, {2, 3, 4}, {5, 7, 3}, {17, 9, 33}, {64, 16, 144}, {3, 1, 8}} {
		m, n, k := sz[0], sz[1], sz[2]
		t.Run(fmt.Sprintf("%dx%dx%d", m, n, k), func(t *testing.T) {
			c0 := randSlice(rng, m*n)
			// NT: A (M,K), B (N,K)
			a, b := randSlice(rng, m*k), randSlice(rng, n*k)
			c := append([]float32(nil), c0...)
			GemmNT(m, n, k, a, b, c)
			for i := 0; i < m; i++ {
				for j := 0; j < n; j++ {
					s := float64(c0[i*n+j])
					for p := 0; p < k; p++ {
						s += float64(a[i*k+p]) * float64(b[j*k+p])
					}
					if !near(c[i*n+j], s) {
						t.Fatalf("GemmNT C[%d][%d] = %g, want %g", i, j, c[i*n+j], s)
					}
				}
			}
			// NN: A (M,K), B (K,N)
			b = randSlice(rng, k*n)
			c = append([]float32(nil), c0...)
			GemmNN(m, n, k, a, b, c)
			for i := 0; i < m; i++ {
				for j := 0; j < n; j++ {
					s := float64(c0[i*n+j])
					for p := 0; p < k; p++ {
						s += float64(a[i*k+p]) * float64(b[p*n+j])
					}
					if !near(c[i*n+j], s) {
						t.Fatalf("GemmNN C[%d][%d] = %g, want %g", i, j, c[i*n+j], s)
					}
				}
			}
			// TN: A (K,M), B (K,N)
			a = randSlice(rng, k*m)
			c = append([]float32(nil), c0...)
			GemmTN(m, n, k, a, b, c)
			for i := 0; i < m; i++ {
				for j := 0; j < n; j++ {
					s := float64(c0[i*n+j])
					for p := 0; p < k; p++ {
						s += float64(a[p*m+i]) * float64(b[p*n+j])
					}
					if !near(c[i*n+j], s) {
						t.Fatalf("GemmTN C[%d][%d] = %g, want %g", i, j, c[i*n+j], s)
					}
				}
			}
		})
	}
}

var geoms = []ConvGeom{
	{H: 5, W: 7, C: 3, KH: 3, KW: 3, SH: 1, SW: 1, PadTop: 1, PadLeft: 1, OH: 5, OW: 7},
	{H: 6, W: 9, C: 2, KH: 3, KW: 2, SH: 2, SW: 3, PadTop: 1, PadLeft: 0, OH: 3, OW: 3},
	{H: 4, W: 4, C: 1, KH: 2, KW: 2, SH: 2, SW: 2, OH: 2, OW: 2},
	{H: 7, W: 5, C: 4, KH: 1, KW: 3, SH: 1, SW: 2, PadTop: 0, PadLeft: 1, OH: 7, OW: 3},
	// channel counts of 8k take the depthwise row kernels: "same" padding
	// at stride 2 with the odd pixel at the end, stride 1, valid, and a
	// width with no interior column at all
	{H: 20, W: 31, C: 16, KH: 3, KW: 3, SH: 2, SW: 2, PadTop: 0, PadLeft: 1, OH: 10, OW: 16},
	{H: 5, W: 8, C: 32, KH: 3, KW: 3, SH: 1, SW: 1, PadTop: 1, PadLeft: 1, OH: 5, OW: 8},
	{H: 6, W: 6, C: 8, KH: 2, KW: 3, SH: 1, SW: 2, OH: 5, OW: 2},
	{H: 3, W: 2, C: 24, KH: 3, KW: 3, SH: 1, SW: 1, PadTop: 1, PadLeft: 1, OH: 3, OW: 2},
	// one channel, three wide: the first-convolution path of Im2col
	{H: 40, W: 61, C: 1, KH: 3, KW: 3, SH: 2, SW: 2, PadTop: 0, PadLeft: 1, OH: 20, OW: 31},
	{H: 4, W: 2, C: 1, KH: 2, KW: 3, SH: 1, SW: 1, PadTop: 1, PadLeft: 1, OH: 4, OW: 2},
}

// naiveConvAt returns x at padded position (ih, iw, c) or 0.
func at(g ConvGeom, x []float32, ih, iw, c int) float32 {
	if ih < 0 || ih >= g.H || iw < 0 || iw >= g.W {
		return 0
	}
	return x[(ih*g.W+iw)*g.C+c]
}

func TestIm2colAndAdjoint(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 2))
	for gi, g := range geoms {
		x := randSlice(rng, g.H*g.W*g.C)
		cols := make([]float32, g.ColSize())
		for i := range cols {
			cols[i] = float32(math.NaN()) // every value must be written, padding too
		}
		Im2col(g, x, cols)
		rowLen := g.KH * g.KW * g.C
		for oh := 0; oh < g.OH; oh++ {
			for ow := 0; ow < g.OW; ow++ {
				for kh := 0; kh < g.KH; kh++ {
					for kw := 0; kw < g.KW; kw++ {
						for c := 0; c < g.C; c++ {
							got := cols[(oh*g.OW+ow)*rowLen+(kh*g.KW+kw)*g.C+c]
							want := at(g, x, oh*g.SH-g.PadTop+kh, ow*g.SW-g.PadLeft+kw, c)
							if got != want {
								t.Fatalf("geom %d: cols at (%d,%d,%d,%d,%d) = %g, want %g", gi, oh, ow, kh, kw, c, got, want)
							}
						}
					}
				}
			}
		}
		// Adjoint: <Im2col(x), y> == <x, Col2im(y)> for random y.
		y := randSlice(rng, g.ColSize())
		dx := make([]float32, len(x))
		Col2im(g, y, dx)
		var lhs, rhs float64
		for i := range y {
			lhs += float64(cols[i]) * float64(y[i])
		}
		for i := range x {
			rhs += float64(x[i]) * float64(dx[i])
		}
		if math.Abs(lhs-rhs) > 1e-4*(1+math.Abs(lhs)) {
			t.Errorf("geom %d: <Im2col x, y> = %g, <x, Col2im y> = %g", gi, lhs, rhs)
		}
	}
}

func TestDepthwiseAgainstNaive(t *testing.T) {
	withPaths(t, testDepthwiseAgainstNaive)
}

func testDepthwiseAgainstNaive(t *testing.T, _ bool) {
	rng := rand.New(rand.NewPCG(3, 3))
	for gi, g := range geoms {
		x := randSlice(rng, g.H*g.W*g.C)
		w := randSlice(rng, g.KH*g.KW*g.C)
		out := make([]float32, g.OH*g.OW*g.C)
		DepthwiseForward(g, x, w, out)
		dout := randSlice(rng, len(out))
		dx := make([]float32, len(x))
		dw := make([]float32, len(w))
		DepthwiseBackward(g, x, w, dout, dx, dw)
		wantDx := make([]float64, len(x))
		wantDw := make([]float64, len(w))
		for oh := 0; oh < g.OH; oh++ {
			for ow := 0; ow < g.OW; ow++ {
				for c := 0; c < g.C; c++ {
					var s float64
					d := float64(dout[(oh*g.OW+ow)*g.C+c])
					for kh := 0; kh < g.KH; kh++ {
						for kw := 0; kw < g.KW; kw++ {
							ih, iw := oh*g.SH-g.PadTop+kh, ow*g.SW-g.PadLeft+kw
							xv := float64(at(g, x, ih, iw, c))
							wv := float64(w[(kh*g.KW+kw)*g.C+c])
							s += xv * wv
							wantDw[(kh*g.KW+kw)*g.C+c] += d * xv
							if ih >= 0 && ih < g.H && iw >= 0 && iw < g.W {
								wantDx[(ih*g.W+iw)*g.C+c] += d * wv
							}
						}
					}
					if got := out[(oh*g.OW+ow)*g.C+c]; !near(got, s) {
						t.Fatalf("geom %d: out = %g, want %g", gi, got, s)
					}
				}
			}
		}
		for i := range dx {
			if !near(dx[i], wantDx[i]) {
				t.Fatalf("geom %d: dx[%d] = %g, want %g", gi, i, dx[i], wantDx[i])
			}
		}
		for i := range dw {
			if !near(dw[i], wantDw[i]) {
				t.Fatalf("geom %d: dw[%d] = %g, want %g", gi, i, dw[i], wantDw[i])
			}
		}
	}
}

var sink float32

func BenchmarkGemmNT(b *testing.B) {
	// conv2 of the pooled network per sample: (20·30 positions) × 144 × 32
	for _, s := range [][3]int{{600, 32, 144}, {2440, 16, 9}, {32, 32, 64}} {
		b.Run(fmt.Sprintf("M=%d,N=%d,K=%d", s[0], s[1], s[2]), func(b *testing.B) {
			rng := rand.New(rand.NewPCG(4, 4))
			a, bb, c := randSlice(rng, s[0]*s[2]), randSlice(rng, s[1]*s[2]), make([]float32, s[0]*s[1])
			b.SetBytes(int64(2 * s[0] * s[1] * s[2])) // "bytes" = flops, so MB/s reads as MFLOP/s
			for b.Loop() {
				GemmNT(s[0], s[1], s[2], a, bb, c)
			}
			sink = c[0]
		})
	}
}
