package kernels

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// withPaths runs f with the SIMD path (where the CPU has it) and with the
// portable path, restoring the setting afterwards.
func withPaths(t *testing.T, f func(t *testing.T, simd bool)) {
	saved := useSIMD
	defer func() { useSIMD = saved }()
	paths := []bool{false}
	if saved {
		paths = append(paths, true)
	}
	for _, p := range paths {
		useSIMD = p
		t.Run(fmt.Sprintf("simd=%v", p), func(t *testing.T) { f(t, p) })
	}
}

// ulpNear reports whether a and b are within two float32 units in the
// last place (or 1e-30 absolute, for values near zero).
func ulpNear(a, b float32) bool {
	if a == b {
		return true
	}
	d := math.Abs(float64(a) - float64(b))
	u := math.Abs(float64(math.Nextafter32(max(abs32(a), abs32(b)), float32(math.Inf(1)))) - float64(max(abs32(a), abs32(b))))
	return d <= 2*u || d < 1e-30
}

func abs32(v float32) float32 { return float32(math.Abs(float64(v))) }

// Lengths that exercise the 16-, 8- and one-lane paths; channel counts a
// multiple of 8 (assembly) and not (portable fallback).
var vecLens = []int{0, 1, 7, 8, 9, 16, 17, 31, 100, 1027}
var chanShapes = [][2]int{{1, 8}, {3, 16}, {37, 32}, {5, 64}, {4, 3}, {9, 1}, {2, 24}, {0, 16}}

func TestClampAndMaskSet(t *testing.T) {
	inf := float32(math.Inf(1))
	withPaths(t, func(t *testing.T, _ bool) {
		rng := rand.New(rand.NewPCG(3, 3))
		for _, n := range vecLens {
			x, g := randSlice(rng, n), randSlice(rng, n)
			for _, hi := range []float32{inf, 0.5} {
				dst := randSlice(rng, n)
				Clamp(dst, x, 0, hi)
				m := randSlice(rng, n)
				MaskSet(m, g, x, 0, hi)
				for i, v := range x {
					want := v
					if want < 0 {
						want = 0
					}
					if want > hi {
						want = hi
					}
					if dst[i] != want {
						t.Fatalf("Clamp n=%d hi=%g: [%d] = %g, want %g", n, hi, i, dst[i], want)
					}
					wm := float32(0)
					if v > 0 && v < hi {
						wm = g[i]
					}
					if m[i] != wm {
						t.Fatalf("MaskSet n=%d hi=%g: [%d] = %g, want %g", n, hi, i, m[i], wm)
					}
				}
			}
		}
	})
}

func TestChanKernelsAgainstNaive(t *testing.T) {
	withPaths(t, func(t *testing.T, _ bool) {
		rng := rand.New(rand.NewPCG(4, 4))
		for _, sh := range chanShapes {
			rows, c := sh[0], sh[1]
			n := rows * c
			x, g := randSlice(rng, n), randSlice(rng, n)
			scale, shift, mu := randSlice(rng, c), randSlice(rng, c), randSlice(rng, c)
			a, b, k := randSlice(rng, c), randSlice(rng, c), randSlice(rng, c)
			// ChanAffine with and without a clamp
			for _, lh := range [][2]float32{{float32(math.Inf(-1)), float32(math.Inf(1))}, {0, 1}} {
				dst := make([]float32, n)
				ChanAffine(dst, x, scale, shift, c, lh[0], lh[1])
				for i := range dst {
					ch := i % c
					want := float32(math.Min(math.Max(float64(x[i])*float64(scale[ch])+float64(shift[ch]), float64(lh[0])), float64(lh[1])))
					if !ulpNear(dst[i], want) {
						t.Fatalf("ChanAffine %v: [%d] = %g, want %g", sh, i, dst[i], want)
					}
				}
			}
			// ChanDot accumulates
			sa, sab := make([]float64, c), make([]float64, c)
			for ch := range sa {
				sa[ch], sab[ch] = 1, 2
			}
			ChanDot(g, x, mu, c, sa, sab)
			for ch := 0; ch < c; ch++ {
				ws, wsp := 1.0, 2.0
				for r := 0; r < rows; r++ {
					ws += float64(g[r*c+ch])
					wsp += float64(g[r*c+ch]) * float64(x[r*c+ch]-mu[ch])
				}
				if math.Abs(sa[ch]-ws) > 1e-12*(1+math.Abs(ws)) || math.Abs(sab[ch]-wsp) > 1e-12*(1+math.Abs(wsp)) {
					t.Fatalf("ChanDot %v ch %d: %g %g, want %g %g", sh, ch, sa[ch], sab[ch], ws, wsp)
				}
			}
			// ChanLinear
			dst := make([]float32, n)
			ChanLinear(dst, g, x, a, mu, b, k, c)
			for i := range dst {
				ch := i % c
				want := float64(a[ch])*float64(g[i]) + float64(b[ch])*float64(x[i]-mu[ch]) + float64(k[ch])
				if math.Abs(float64(dst[i])-want) > 1e-6*(1+math.Abs(want)) {
					t.Fatalf("ChanLinear %v: [%d] = %g, want %g", sh, i, dst[i], want)
				}
			}
		}
	})
}

// TestChanKernelsPathsAgree requires the assembly and portable paths to
// give the same bits for ChanDot (same order, same float64 rounding) and
// to within one float32 rounding for the fused multiply-adds.
func TestChanKernelsPathsAgree(t *testing.T) {
	if !useSIMD {
		t.Skip("no AVX2/FMA on this CPU (or PIPIT_NOASM=1)")
	}
	defer func() { useSIMD = true }()
	rng := rand.New(rand.NewPCG(5, 5))
	rows, c := 203, 32
	x, g := randSlice(rng, rows*c), randSlice(rng, rows*c)
	mu, a, b, k := randSlice(rng, c), randSlice(rng, c), randSlice(rng, c), randSlice(rng, c)
	var sa [2][]float64
	var sab [2][]float64
	var lin, aff [2][]float32
	for p, simd := range []bool{true, false} {
		useSIMD = simd
		sa[p], sab[p] = make([]float64, c), make([]float64, c)
		ChanDot(g, x, mu, c, sa[p], sab[p])
		lin[p] = make([]float32, rows*c)
		ChanLinear(lin[p], g, x, a, mu, b, k, c)
		aff[p] = make([]float32, rows*c)
		ChanAffine(aff[p], x, a, b, c, 0, 6)
	}
	for ch := 0; ch < c; ch++ {
		if sa[0][ch] != sa[1][ch] || sab[0][ch] != sab[1][ch] {
			t.Fatalf("ChanDot ch %d: SIMD %v %v, portable %v %v", ch, sa[0][ch], sab[0][ch], sa[1][ch], sab[1][ch])
		}
	}
	for i := range lin[0] {
		if !ulpNear(lin[0][i], lin[1][i]) || !ulpNear(aff[0][i], aff[1][i]) {
			t.Fatalf("[%d]: ChanLinear %g / %g, ChanAffine %g / %g", i, lin[0][i], lin[1][i], aff[0][i], aff[1][i])
		}
	}
}

func TestAxpyAndDot(t *testing.T) {
	withPaths(t, func(t *testing.T, _ bool) {
		rng := rand.New(rand.NewPCG(6, 6))
		for _, n := range vecLens {
			x, y := randSlice(rng, n), randSlice(rng, n)
			y0 := append([]float32(nil), y...)
			Axpy(0.75, x, y)
			var want float64
			for i := range x {
				if d := float64(y[i]) - (float64(y0[i]) + 0.75*float64(x[i])); math.Abs(d) > 1e-6 {
					t.Fatalf("Axpy n=%d: [%d] off by %g", n, i, d)
				}
				want += float64(x[i]) * float64(y0[i])
			}
			if got := Dot(x, y0); !near(got, want) {
				t.Fatalf("Dot n=%d = %g, want %g", n, got, want)
			}
		}
	})
}
