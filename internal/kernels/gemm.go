// Package kernels holds pipit's float32 compute kernels: matrix products
// in the three layouts training needs, and the im2col/col2im transforms of
// channels-last convolution. Each has a portable pure-Go path and, on
// amd64 CPUs with AVX2 and FMA, an assembly path for the dot products and
// row updates (simd_amd64.s), chosen at run time (PIPIT_NOASM=1 forces the
// portable one). Both are checked against naive references in the tests.
// The two paths sum in different orders, so their results differ in the
// last bits; either is deterministic for a given machine.
//
// Matrices are row-major []float32 with the shapes given in each doc
// comment. No function allocates.
package kernels

import "fmt"

func checkLen(name string, got, want int) {
	if got < want {
		panic(fmt.Sprintf("kernels: %s: slice of %d elements, need %d", name, got, want))
	}
}

// GemmNT computes C += A·Bᵀ with A (M, K), B (N, K), C (M, N): every output
// is a dot product of two contiguous rows. It panics on short slices.
func GemmNT(m, n, k int, a, b, c []float32) {
	checkLen("GemmNT a", len(a), m*k)
	checkLen("GemmNT b", len(b), n*k)
	checkLen("GemmNT c", len(c), m*n)
	if useSIMD && k >= 16 {
		for i := 0; i < m; i++ {
			ci := c[i*n : i*n+n]
			for j := range ci {
				ci[j] += dotAVX2(&a[i*k], &b[j*k], k)
			}
		}
		return
	}
	i := 0
	for ; i+2 <= m; i += 2 {
		a0, a1 := a[i*k:i*k+k], a[(i+1)*k:(i+1)*k+k]
		c0, c1 := c[i*n:i*n+n], c[(i+1)*n:(i+1)*n+n]
		j := 0
		for ; j+2 <= n; j += 2 {
			b0, b1 := b[j*k:j*k+k], b[(j+1)*k:(j+1)*k+k]
			b0, b1 = b0[:len(a0)], b1[:len(a0)]
			a1 := a1[:len(a0)]
			var s00, s01, s10, s11 float32
			for p, x0 := range a0 {
				x1 := a1[p]
				y0, y1 := b0[p], b1[p]
				s00 += x0 * y0
				s01 += x0 * y1
				s10 += x1 * y0
				s11 += x1 * y1
			}
			c0[j] += s00
			c0[j+1] += s01
			c1[j] += s10
			c1[j+1] += s11
		}
		for ; j < n; j++ {
			b0 := b[j*k : j*k+k]
			var s0, s1 float32
			for p, y := range b0 {
				s0 += a0[p] * y
				s1 += a1[p] * y
			}
			c0[j] += s0
			c1[j] += s1
		}
	}
	for ; i < m; i++ {
		a0 := a[i*k : i*k+k]
		c0 := c[i*n : i*n+n]
		for j := range c0 {
			b0 := b[j*k : j*k+k]
			b0 = b0[:len(a0)]
			var s float32
			for p, x := range a0 {
				s += x * b0[p]
			}
			c0[j] += s
		}
	}
}

// tnScratch bounds the transposed product GemmTN keeps on the stack.
const tnScratch = 2048

// GemmNN computes C += A·B with A (M, K), B (K, N), C (M, N): with AVX2
// and N ≥ 8 by the register-blocked micro-kernels, otherwise as rank-one
// updates of C's rows (contiguous inner loops over N). It panics on short
// slices.
func GemmNN(m, n, k int, a, b, c []float32) {
	checkLen("GemmNN a", len(a), m*k)
	checkLen("GemmNN b", len(b), k*n)
	checkLen("GemmNN c", len(c), m*n)
	if useSIMD && n >= 8 {
		gemmBlocked(m, n, k, a, k, 1, b, n, c, n, true)
		return
	}
	for i := 0; i < m; i++ {
		ci := c[i*n : i*n+n]
		ai := a[i*k : i*k+k]
		p := 0
		for ; p+2 <= k; p += 2 {
			x0, x1 := ai[p], ai[p+1]
			b0, b1 := b[p*n:p*n+n], b[(p+1)*n:(p+1)*n+n]
			b0, b1 = b0[:len(ci)], b1[:len(ci)]
			for j := range ci {
				ci[j] += x0*b0[j] + x1*b1[j]
			}
		}
		for ; p < k; p++ {
			x := ai[p]
			if x == 0 {
				continue
			}
			bp := b[p*n : p*n+n]
			bp = bp[:len(ci)]
			for j := range ci {
				ci[j] += x * bp[j]
			}
		}
	}
}

// GemmNNSet computes C = A·B with the shapes of [GemmNN], overwriting C
// (with AVX2 without reading it first). It panics on short slices.
func GemmNNSet(m, n, k int, a, b, c []float32) {
	checkLen("GemmNNSet a", len(a), m*k)
	checkLen("GemmNNSet b", len(b), k*n)
	checkLen("GemmNNSet c", len(c), m*n)
	if useSIMD && n >= 8 {
		gemmBlocked(m, n, k, a, k, 1, b, n, c, n, false)
		return
	}
	clear(c[:m*n])
	GemmNN(m, n, k, a, b, c)
}

// GemmWeights computes C = A·Wᵀ (or C += A·Wᵀ with add) for A (M, K),
// W (N, K) and C (M, N), given W and its transpose wT (K, N): the product
// of a layer's input with its weights. With AVX2 and N ≥ 8 it runs the
// blocked kernels on wT; otherwise the portable dot products of [GemmNT]
// on W, which suit the portable path's short output rows better.
func GemmWeights(m, n, k int, a, w, wT, c []float32, add bool) {
	if useSIMD && n >= 8 {
		checkLen("GemmWeights a", len(a), m*k)
		checkLen("GemmWeights wT", len(wT), k*n)
		checkLen("GemmWeights c", len(c), m*n)
		gemmBlocked(m, n, k, a, k, 1, wT, n, c, n, add)
		return
	}
	if !add {
		clear(c[:m*n])
	}
	GemmNT(m, n, k, a, w, c)
}

// GemmTN computes C += Aᵀ·B with A (K, M), B (K, N), C (M, N): the weight
// gradient of a layer, Σ over positions of dout ⊗ input; with AVX2 and
// N ≥ 8 by the register-blocked micro-kernels. It panics on short slices.
func GemmTN(m, n, k int, a, b, c []float32) {
	checkLen("GemmTN a", len(a), k*m)
	checkLen("GemmTN b", len(b), k*n)
	checkLen("GemmTN c", len(c), m*n)
	if useSIMD && n%8 != 0 && m%8 == 0 && m*n <= tnScratch {
		// a narrow C (the weight gradient of a first convolution, N = 9):
		// compute Cᵀ = Bᵀ·A, whose rows are full 8-wide panels, and add it
		// transposed.
		var buf [tnScratch]float32
		ct := buf[:n*m]
		gemmBlocked(n, m, k, b, 1, n, a, m, ct, m, false)
		for i := 0; i < m; i++ {
			ci := c[i*n : (i+1)*n]
			for j := range ci {
				ci[j] += ct[j*m+i]
			}
		}
		return
	}
	if useSIMD && n >= 8 {
		gemmBlocked(m, n, k, a, 1, m, b, n, c, n, true)
		return
	}
	p := 0
	for ; p+2 <= k; p += 2 {
		a0, a1 := a[p*m:p*m+m], a[(p+1)*m:(p+1)*m+m]
		b0, b1 := b[p*n:p*n+n], b[(p+1)*n:(p+1)*n+n]
		for i := range a0 {
			x0, x1 := a0[i], a1[i]
			ci := c[i*n : i*n+n]
			ci = ci[:len(b0)]
			b1 := b1[:len(b0)]
			for j, y := range b0 {
				ci[j] += x0*y + x1*b1[j]
			}
		}
	}
	for ; p < k; p++ {
		ap := a[p*m : p*m+m]
		bp := b[p*n : p*n+n]
		for i, x := range ap {
			if x == 0 {
				continue
			}
			ci := c[i*n : i*n+n]
			ci = ci[:len(bp)]
			for j, y := range bp {
				ci[j] += x * y
			}
		}
	}
}
