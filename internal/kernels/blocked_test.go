package kernels

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas32"
)

// TestGemmAgainstGonum checks GemmNN and GemmTN, on both paths, against
// gonum's blas32.Gemm (gonum v0.17.0, the reference BLAS in pure Go) over
// edge shapes: 1, odd, below and above the 6-row and 8/16-column blocks.
func TestGemmAgainstGonum(t *testing.T) {
	sizes := []int{1, 2, 5, 6, 7, 8, 9, 13, 16, 17, 24, 31, 33, 64}
	ks := []int{1, 3, 9, 16, 37, 144}
	withPaths(t, func(t *testing.T, _ bool) {
		rng := rand.New(rand.NewPCG(11, 12))
		for _, m := range sizes {
			for _, n := range sizes {
				k := ks[(m+n)%len(ks)]
				a, b := randSlice(rng, m*k), randSlice(rng, k*n)
				at := randSlice(rng, k*m)
				c0 := randSlice(rng, m*n)
				for _, tc := range []struct {
					name  string
					trans blas.Transpose
					a     []float32
					lda   int
					beta  float32
					run   func(c []float32)
				}{
					{"NN", blas.NoTrans, a, k, 1, func(c []float32) { GemmNN(m, n, k, a, b, c) }},
					{"NNSet", blas.NoTrans, a, k, 0, func(c []float32) { GemmNNSet(m, n, k, a, b, c) }},
					{"TN", blas.Trans, at, m, 1, func(c []float32) { GemmTN(m, n, k, at, b, c) }},
				} {
					got := append([]float32(nil), c0...)
					tc.run(got)
					want := blas32.General{Rows: m, Cols: n, Stride: n, Data: append([]float32(nil), c0...)}
					ar, ac := m, k
					if tc.trans == blas.Trans {
						ar, ac = k, m
					}
					blas32.Gemm(tc.trans, blas.NoTrans, 1,
						blas32.General{Rows: ar, Cols: ac, Stride: tc.lda, Data: tc.a},
						blas32.General{Rows: k, Cols: n, Stride: n, Data: b}, tc.beta, want)
					for i := range got {
						if !near(got[i], float64(want.Data[i])) {
							t.Fatalf("Gemm%s %dx%dx%d: [%d] = %g, gonum %g", tc.name, m, n, k, i, got[i], want.Data[i])
						}
					}
				}
			}
		}
	})
}

// TestGemmSplitInvariant checks the property the trainer's determinism
// rests on: computing a product in row blocks of any size gives the same
// bits as computing it whole.
func TestGemmSplitInvariant(t *testing.T) {
	withPaths(t, func(t *testing.T, _ bool) {
		rng := rand.New(rand.NewPCG(13, 14))
		m, n, k := 37, 40, 29
		a, b := randSlice(rng, m*k), randSlice(rng, k*n)
		whole := make([]float32, m*n)
		GemmNN(m, n, k, a, b, whole)
		for _, step := range []int{1, 4, 7, 12} {
			t.Run(fmt.Sprint(step), func(t *testing.T) {
				part := make([]float32, m*n)
				for i := 0; i < m; i += step {
					r := min(step, m-i)
					GemmNN(r, n, k, a[i*k:], b, part[i*n:])
				}
				for i := range whole {
					if whole[i] != part[i] {
						t.Fatalf("rows in blocks of %d: [%d] = %g, whole %g", step, i, part[i], whole[i])
					}
				}
			})
		}
	})
}
