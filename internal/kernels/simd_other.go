//go:build !amd64

package kernels

// useSIMD is false off amd64: only the portable path exists.
const useSIMD = false

func dotAVX2(x, y *float32, n int) float32 { panic("kernels: no SIMD path on this architecture") }

func axpyAVX2(a float32, x, y *float32, n int) { panic("kernels: no SIMD path on this architecture") }

func fmaAVX2(dst, x, y *float32, n int) { panic("kernels: no SIMD path on this architecture") }
