//go:build !amd64

package fft

// useAVX2 is false off amd64: only the portable path exists.
const useAVX2 = false

// BlockSIMD reports whether [Block] and [Bands] run an assembly path
// (never, off amd64).
func BlockSIMD() bool { return false }

func loadAVX2(re, im *float32, frames *[Lanes]*float32, win *float32, n int) {
	panic("fft: no SIMD path on this architecture")
}

func difAVX2(re, im, twr, twi *float32, m, h int) { panic("fft: no SIMD path on this architecture") }

func dif4AVX2(re, im, tw *float32, m, h int) { panic("fft: no SIMD path on this architecture") }

func clipAVX2(v *float32, rows int, below float64) { panic("fft: no SIMD path on this architecture") }

func splitAVX2(dst, re, im *float32, rev *int32, spr, spi *float32, m, mag int) {
	panic("fft: no SIMD path on this architecture")
}

func bandsAVX2(dst, spec *float32, span *int32, w *float32, rows int) {
	panic("fft: no SIMD path on this architecture")
}

func logAVX2(v *float32, n int, floor, scale float64) {
	panic("fft: no SIMD path on this architecture")
}
