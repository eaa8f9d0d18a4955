//go:build !amd64

package kernels

// useSIMD is false off amd64: only the portable path exists.
const useSIMD = false

func dotAVX2(x, y *float32, n int) float32 { panic("kernels: no SIMD path on this architecture") }

func axpyAVX2(a float32, x, y *float32, n int) { panic("kernels: no SIMD path on this architecture") }

func fmaAVX2(dst, x, y *float32, n int) { panic("kernels: no SIMD path on this architecture") }

func clampAVX2(dst, src *float32, n int, lo, hi float32) { panic("kernels: no SIMD path") }

func maskSetAVX2(dst, gr, x *float32, n int, lo, hi float32) { panic("kernels: no SIMD path") }

func chanAffineAVX2(dst, src, scale, shift *float32, rows, c int, lo, hi float32) {
	panic("kernels: no SIMD path")
}

func chanDotAVX2(a, b, mu *float32, rows, c int, sa, sab *float64) { panic("kernels: no SIMD path") }

func chanLinearAVX2(dst, gr, x, a, mu, b, k *float32, rows, c int) { panic("kernels: no SIMD path") }
