//go:build !amd64

package kernels

// useSIMD is false off amd64: only the portable path exists.
const useSIMD = false

func dotAVX2(x, y *float32, n int) float32 { panic("kernels: no SIMD path on this architecture") }

func fmaAVX2(dst, x, y *float32, n int) { panic("kernels: no SIMD path on this architecture") }

func clampAVX2(dst, src *float32, n int, lo, hi float32) { panic("kernels: no SIMD path") }

func maskSetAVX2(dst, gr, x *float32, n int, lo, hi float32) { panic("kernels: no SIMD path") }

func chanAffineAVX2(dst, src, scale, shift *float32, rows, c int, lo, hi float32) {
	panic("kernels: no SIMD path")
}

func chanDotAVX2(a, b, mu *float32, rows, c int, sa, sab *float64) { panic("kernels: no SIMD path") }

func chanLinearAVX2(dst, gr, x, a, mu, b, k *float32, rows, c int) { panic("kernels: no SIMD path") }

func gemm1x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm2x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm3x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm4x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm5x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm6x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm1x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm2x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm3x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm4x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm5x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func gemm6x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int) {
	panic("kernels: no SIMD path")
}

func dwFwdRowAVX2(out, x, w *float32, n, c, xstep int, xoffs, woffs *int, ntaps int) {
	panic("kernels: no SIMD path")
}

func dwBackRowAVX2(d, x, w, dx, dw *float32, n, c, xstep int, xoffs, woffs *int, ntaps int) {
	panic("kernels: no SIMD path")
}

func axpyAVX2(a float32, x, y *float32, n int) { panic("kernels: no SIMD path") }
