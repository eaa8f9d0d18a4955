package fft

import (
	"fmt"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/dsp/fourier"
)

// TestRealMatchesGonum compares with gonum's fftpack-based real FFT, the
// independent reference, and with the textbook DFT for small sizes.
func TestRealMatchesGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	for _, n := range []int{4, 8, 16, 64, 256, 512, 1024, 4096} {
		r, err := NewReal(n)
		if err != nil {
			t.Fatal(err)
		}
		x := make([]float64, n)
		for i := range x {
			x[i] = rng.NormFloat64()
		}
		want := fourier.NewFFT(n).Coefficients(nil, x)
		got := make([]complex128, n/2+1)
		r.Coefficients(got, x)
		pow := make([]float64, n/2+1)
		r.Power(pow, x)
		tol := 1e-12 * float64(n)
		for k := range want {
			if cmplx.Abs(got[k]-want[k]) > tol {
				t.Fatalf("N=%d: X[%d] = %v, gonum %v", n, k, got[k], want[k])
			}
			if w := real(want[k])*real(want[k]) + imag(want[k])*imag(want[k]); math.Abs(pow[k]-w) > tol*(1+w) {
				t.Fatalf("N=%d: power[%d] = %g, gonum %g", n, k, pow[k], w)
			}
		}
		if n <= 64 {
			for k := 0; k <= n/2; k++ {
				var s complex128
				for i, v := range x {
					s += complex(v, 0) * cmplx.Exp(complex(0, -2*math.Pi*float64(k*i)/float64(n)))
				}
				if cmplx.Abs(got[k]-s) > 1e-9 {
					t.Fatalf("N=%d: X[%d] = %v, naive DFT %v", n, k, got[k], s)
				}
			}
		}
	}
	for _, bad := range []int{0, 2, 6, 100, 513} {
		if _, err := NewReal(bad); err == nil {
			t.Errorf("NewReal(%d) gave no error", bad)
		}
	}
}

func TestPowerDoesNotAllocate(t *testing.T) {
	r, _ := NewReal(512)
	x, dst := make([]float64, 512), make([]float64, 257)
	if n := testing.AllocsPerRun(100, func() { r.Power(dst, x) }); n != 0 {
		t.Errorf("Power allocates %v times", n)
	}
}

func BenchmarkRealPower(b *testing.B) {
	for _, n := range []int{256, 512, 1024} {
		x := make([]float64, n)
		for i := range x {
			x[i] = math.Sin(float64(i))
		}
		b.Run(fmt.Sprintf("pipit/N=%d", n), func(b *testing.B) {
			r, _ := NewReal(n)
			dst := make([]float64, n/2+1)
			for b.Loop() {
				r.Power(dst, x)
			}
		})
		b.Run(fmt.Sprintf("gonum/N=%d", n), func(b *testing.B) {
			f := fourier.NewFFT(n)
			dst := make([]complex128, n/2+1)
			for b.Loop() {
				f.Coefficients(dst, x)
			}
		})
	}
}
