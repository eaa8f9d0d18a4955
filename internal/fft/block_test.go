package fft

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/dsp/fourier"
)

// blockPaths runs f with the portable path and, where the CPU has it, the
// AVX2 path.
func blockPaths(t *testing.T, f func(t *testing.T)) {
	saved := useAVX2
	defer func() { useAVX2 = saved }()
	for _, simd := range []bool{false, true} {
		if simd && !saved {
			t.Log("no AVX2/FMA on this CPU (or PIPIT_NOASM=1): assembly path not tested")
			continue
		}
		useAVX2 = simd
		t.Run(fmt.Sprintf("simd=%v", simd), f)
	}
}

// TestBlockMatchesGonum checks each frame of a Block against gonum's
// float64 real FFT (fftpack) of the same windowed frame. The bar is
// float32 rounding: 1e-5 of the frame's largest bin in power, which is
// 6·10⁻⁶ in amplitude, about 100 float32 ulps (log2 N stages of ≤ 2 ulps).
func TestBlockMatchesGonum(t *testing.T) {
	blockPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(11, 12))
		for _, n := range []int{16, 32, 64, 256, 512, 1024, 4096} {
			win := make([]float64, n)
			for i := range win {
				win[i] = 0.5 - 0.5*math.Cos(2*math.Pi*float64(i)/float64(n))
			}
			b, err := NewBlock(n, win)
			if err != nil {
				t.Fatal(err)
			}
			var frames [Lanes][]float32
			for l := range frames {
				frames[l] = make([]float32, n+l) // longer frames are allowed
				for i := range frames[l] {
					frames[l][i] = float32(rng.NormFloat64() * float64(l+1))
				}
			}
			frames[3] = make([]float32, n) // an all-zero frame
			pow := make([]float32, (n/2+1)*Lanes)
			mag := make([]float32, (n/2+1)*Lanes)
			b.Power(pow, &frames, false)
			b.Power(mag, &frames, true)
			f := fourier.NewFFT(n)
			x := make([]float64, n)
			for l := range frames {
				for i := range x {
					x[i] = float64(frames[l][i]) * win[i]
				}
				want := f.Coefficients(nil, x)
				peak := 0.0
				for _, c := range want {
					peak = math.Max(peak, real(c)*real(c)+imag(c)*imag(c))
				}
				for k, c := range want {
					w := real(c)*real(c) + imag(c)*imag(c)
					if got := float64(pow[k*Lanes+l]); math.Abs(got-w) > 1e-5*peak {
						t.Fatalf("N=%d frame %d: power[%d] = %g, gonum %g (peak %g)", n, l, k, got, w, peak)
					}
					if got := float64(mag[k*Lanes+l]); math.Abs(got-math.Sqrt(w)) > 1e-5*math.Sqrt(peak) {
						t.Fatalf("N=%d frame %d: magnitude[%d] = %g, gonum %g", n, l, k, got, math.Sqrt(w))
					}
				}
			}
		}
	})
	for _, bad := range []int{8, 100, 513} {
		if _, err := NewBlock(bad, make([]float64, bad)); err == nil {
			t.Errorf("NewBlock(%d) gave no error", bad)
		}
	}
	if _, err := NewBlock(64, make([]float64, 63)); err == nil {
		t.Error("NewBlock with a short window gave no error")
	}
}

// TestBlockPathsAgree: the AVX2 and portable paths differ only by the
// rounding of fused multiply-adds and summation order.
func TestBlockPathsAgree(t *testing.T) {
	if !useAVX2 {
		t.Skip("no AVX2/FMA on this CPU (or PIPIT_NOASM=1)")
	}
	defer func() { useAVX2 = true }()
	rng := rand.New(rand.NewPCG(13, 14))
	n := 512
	win := make([]float64, n)
	for i := range win {
		win[i] = rng.Float64()
	}
	b, _ := NewBlock(n, win)
	var frames [Lanes][]float32
	for l := range frames {
		frames[l] = make([]float32, n)
		for i := range frames[l] {
			frames[l][i] = float32(rng.NormFloat64())
		}
	}
	var got [2][]float32
	for p, simd := range []bool{false, true} {
		useAVX2 = simd
		got[p] = make([]float32, (n/2+1)*Lanes)
		b.Power(got[p], &frames, false)
	}
	peak := float32(0)
	for _, v := range got[0] {
		peak = max(peak, v)
	}
	for i := range got[0] {
		if d := math.Abs(float64(got[0][i] - got[1][i])); d > 1e-6*float64(peak) {
			t.Fatalf("bin %d frame %d: portable %g, AVX2 %g", i/Lanes, i%Lanes, got[0][i], got[1][i])
		}
	}
}

// TestBandsMatchNaive compares Bands.Apply with a dense float64 sum, on
// rows of length 0, 1, 2 and odd and even lengths.
func TestBandsMatchNaive(t *testing.T) {
	blockPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(15, 16))
		const bins = 40
		lens := []int{0, 1, 2, 3, 7, 8, 13, 40}
		var starts []int
		var weights [][]float64
		for _, n := range lens {
			s := rng.IntN(bins - n + 1)
			w := make([]float64, n)
			for i := range w {
				w[i] = rng.Float64()
			}
			starts, weights = append(starts, s), append(weights, w)
		}
		spec := make([]float32, bins*Lanes)
		for i := range spec {
			spec[i] = float32(rng.Float64() * 100)
		}
		dst := make([]float32, len(lens)*Lanes)
		NewBands(starts, weights).Apply(dst, spec)
		for r := range lens {
			for l := 0; l < Lanes; l++ {
				var want float64
				for i, w := range weights[r] {
					want += float64(float32(w)) * float64(spec[(starts[r]+i)*Lanes+l])
				}
				if got := float64(dst[r*Lanes+l]); math.Abs(got-want) > 1e-6*(1+want) {
					t.Fatalf("row %d (len %d) lane %d: %g, want %g", r, lens[r], l, got, want)
				}
			}
		}
	})
}

func TestBlockDoesNotAllocate(t *testing.T) {
	b, _ := NewBlock(512, make([]float64, 512))
	var frames [Lanes][]float32
	for l := range frames {
		frames[l] = make([]float32, 512)
	}
	dst := make([]float32, 257*Lanes)
	if n := testing.AllocsPerRun(100, func() { b.Power(dst, &frames, false) }); n != 0 {
		t.Errorf("Block.Power allocates %v times", n)
	}
}

// BenchmarkBlockPower: 8 frames of 512 points per op.
func BenchmarkBlockPower(b *testing.B) {
	blk, _ := NewBlock(512, make([]float64, 512))
	var frames [Lanes][]float32
	for l := range frames {
		frames[l] = make([]float32, 512)
		for i := range frames[l] {
			frames[l][i] = float32(math.Sin(float64(i + l)))
		}
	}
	dst := make([]float32, 257*Lanes)
	for b.Loop() {
		blk.Power(dst, &frames, false)
	}
}

// TestLogScaledAgainstMathLog: each result is within one float32 rounding
// of float32(scale·math.Log(max(v, floor))), on both paths, over
// 1e-26..1e26 and at the edges (values at, below and around the floor,
// zero, negative, NaN, √2 and its neighbours).
func TestLogScaledAgainstMathLog(t *testing.T) {
	blockPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(17, 18))
		v := []float32{0, -1, float32(math.NaN()), 1e-10, 1e-11, 1, float32(math.Sqrt2), math.Nextafter32(float32(math.Sqrt2), 0),
			math.Nextafter32(float32(math.Sqrt2), 2), 0.5, 2, math.MaxFloat32, math.SmallestNonzeroFloat32}
		for len(v) < 10003 { // not a multiple of 4: the tail runs too
			v = append(v, float32(math.Exp(rng.Float64()*120-60)))
		}
		for _, c := range []struct{ floor, scale float64 }{{1e-10, 10 / math.Ln10}, {1e-30, 1}, {1e-6, 1}} {
			got := append([]float32(nil), v...)
			LogScaled(got, c.floor, c.scale)
			for i, x := range v {
				xf := float64(x)
				if !(xf > c.floor) {
					xf = c.floor
				}
				want := c.scale * math.Log(xf)
				if d := math.Abs(float64(got[i]) - want); d > 1e-9*c.scale+math.Abs(want)*0x1p-24 {
					t.Fatalf("floor %g scale %g: LogScaled(%g) = %g, math.Log gives %g", c.floor, c.scale, x, got[i], want)
				}
			}
		}
	})
}

// TestClipBelowPeak: per lane, values end at least the lane's maximum
// minus the margin, larger values are untouched (direct check of the
// definition on one row, three rows and 40).
func TestClipBelowPeak(t *testing.T) {
	blockPaths(t, func(t *testing.T) {
		rng := rand.New(rand.NewPCG(19, 20))
		for _, rows := range []int{1, 3, 40} {
			v := make([]float32, rows*Lanes)
			for i := range v {
				v[i] = float32(rng.Float64()*200 - 150)
			}
			got := append([]float32(nil), v...)
			ClipBelowPeak(got, 80)
			for l := 0; l < Lanes; l++ {
				peak := float32(math.Inf(-1))
				for r := 0; r < rows; r++ {
					peak = max(peak, v[r*Lanes+l])
				}
				lo := float32(float64(peak) - 80)
				for r := 0; r < rows; r++ {
					if want := max(v[r*Lanes+l], lo); got[r*Lanes+l] != want {
						t.Fatalf("rows %d: [%d, %d] = %g, want %g (peak %g)", rows, r, l, got[r*Lanes+l], want, peak)
					}
				}
			}
		}
	})
}
