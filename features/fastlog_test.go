package features

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestLnPositiveAgainstMathLog(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 10))
	worst := 0.0
	check := func(v float64) {
		if d := math.Abs(lnPositive(v) - math.Log(v)); d > worst {
			worst = d
		}
	}
	for i := 0; i < 200000; i++ {
		check(math.Exp(rng.Float64()*120 - 60)) // 1e-26 .. 1e26
	}
	for _, v := range []float64{1e-300, 1e-10, 0.5, math.Sqrt2 / 2, math.Nextafter(math.Sqrt2/2, 0), 1, 2, math.Sqrt2, 1e10, 1e300} { // normal numbers only: Config.Validate keeps LogFloor ≥ 1e-30
		check(v)
	}
	if worst > 1e-9 {
		t.Errorf("max |lnPositive - math.Log| = %g, want ≤ 1e-9", worst)
	}
}

func BenchmarkLn(b *testing.B) {
	x := make([]float64, 1024)
	for i := range x {
		x[i] = math.Exp(float64(i)/50 - 10)
	}
	var sink float64
	b.Run("lnPositive", func(b *testing.B) {
		for b.Loop() {
			for _, v := range x {
				sink += lnPositive(v)
			}
		}
	})
	b.Run("math.Log", func(b *testing.B) {
		for b.Loop() {
			for _, v := range x {
				sink += math.Log(v)
			}
		}
	})
	_ = sink
}
