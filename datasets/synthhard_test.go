package datasets

import (
	"math"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"github.com/pipit-audio/pipit/features"
)

// TestRoomResponseDecay measures the reverberation time of roomResponse the
// way ISO 3382-2:2008 does: Schroeder's backward integration of the
// squared room response (Schroeder 1965, "New Method of Measuring
// Reverberation Time", JASA 37(3):409), a least-squares line through the
// decay curve from −5 to −25 dB, and T20 = 60 dB over its slope. Expected
// within 10 % (common practice): the noise of one realisation bends the
// curve a little. The direct-to-reverberant ratio is exact by
// construction and checked to 1e-9 dB.
func TestRoomResponseDecay(t *testing.T) {
	const fs = 16000.0
	for _, c := range []struct{ rt60, drr float64 }{{0.25, 0}, {0.4, 6}, {0.45, -4}} {
		rng := rand.New(rand.NewPCG(3, uint64(c.rt60*1000)))
		h := roomResponse(fs, c.rt60, c.drr, rng)
		var rev float64
		for _, v := range h[1:] {
			rev += v * v
		}
		if got := 10 * math.Log10(h[0]*h[0]/rev); math.Abs(got-c.drr) > 1e-9 {
			t.Errorf("RT60 %g: DRR %.6f dB, want %g", c.rt60, got, c.drr)
		}
		// decay curve of the reverberant part (the direct sound would put a
		// step at t = 0 that ISO 3382 skips by starting at −5 dB)
		edc := make([]float64, len(h))
		var s float64
		for i := len(h) - 1; i >= 1; i-- {
			s += h[i] * h[i]
			edc[i] = s
		}
		var sx, sy, sxx, sxy, n float64
		for i := 1; i < len(h); i++ {
			db := 10 * math.Log10(edc[i]/edc[1])
			if db <= -5 && db >= -25 {
				x := float64(i) / fs
				sx, sy, sxx, sxy, n = sx+x, sy+db, sxx+x*x, sxy+x*db, n+1
			}
		}
		slope := (n*sxy - sx*sy) / (n*sxx - sx*sx) // dB per second
		if t20 := -60 / slope; math.Abs(t20-c.rt60) > 0.1*c.rt60 {
			t.Errorf("RT60 %g s: T20 of the room response %.3f s", c.rt60, t20)
		}
	}
}

// TestConvolveFFT compares convolveFFT with the direct sum.
func TestConvolveFFT(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, sz := range [][2]int{{1, 1}, {37, 5}, {100, 100}, {256, 31}} {
		x, h := make([]float64, sz[0]), make([]float64, sz[1])
		for i := range x {
			x[i] = rng.NormFloat64()
		}
		for i := range h {
			h[i] = rng.NormFloat64()
		}
		got := convolveFFT(x, h)
		for i := range x {
			var want float64
			for k := 0; k <= i && k < len(h); k++ {
				want += h[k] * x[i-k]
			}
			if math.Abs(got[i]-want) > 1e-9 {
				t.Fatalf("%v: y[%d] = %g, direct sum %g", sz, i, got[i], want)
			}
		}
	}
}

// TestHardCorpus writes a small hard corpus and checks the skewed class
// counts, the 30 dB spread of peak levels, and that every clip can be
// regenerated alone from its seed.
func TestHardCorpus(t *testing.T) {
	dir := t.TempDir()
	cfg := SynthConfig{ClipsPerClass: 10, Seconds: 0.5, Seed: 3, Hard: true}
	c, err := Synthesize(dir, cfg, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Classes) != len(HardSynthClasses) {
		t.Fatalf("%d classes", len(c.Classes))
	}
	counts := make([]int, len(c.Classes))
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, cl := range c.Clips {
		counts[cl.Label]++
		a, err := features.ReadWAVFile(cl.Path)
		if err != nil {
			t.Fatal(err)
		}
		peak := 0.0
		for _, v := range a.Samples {
			peak = math.Max(peak, math.Abs(float64(v)))
		}
		db := 20 * math.Log10(peak)
		lo, hi = math.Min(lo, db), math.Max(hi, db)
		// 16-bit rounding moves a −33 dB peak by under 0.01 dB
		if db < hardMinLevelDB-0.01 || db > hardMaxLevelDB+0.01 {
			t.Errorf("%s: peak %.2f dB re full scale outside %g … %g", cl.Path, db, hardMinLevelDB, hardMaxLevelDB)
		}
	}
	// 10·0.4^(k/11): 10 for the first class, round(4) for the last
	if counts[0] != 10 || counts[len(counts)-1] != 4 {
		t.Errorf("class counts %v, want 10 … 4", counts)
	}
	for k := 1; k < len(counts); k++ {
		if counts[k] > counts[k-1] {
			t.Errorf("class counts %v do not fall", counts)
		}
	}
	if hi-lo < 20 {
		t.Errorf("peak levels span only %.1f dB over %d clips", hi-lo, len(c.Clips))
	}
	// clip 2 of class 5, regenerated alone
	rng := rand.New(rand.NewPCG(cfg.Seed, uint64(5)<<32|2))
	x := HardSynthClip(5, cfg, rng)
	name := HardSynthClasses[5]
	a, err := features.ReadWAVFile(filepath.Join(dir, name, name+"_002.wav"))
	if err != nil {
		t.Fatal(err)
	}
	for i, v := range x {
		if math.Abs(float64(v-a.Samples[i])) > 1.0/32768 {
			t.Fatalf("regenerated sample %d = %g, file %g", i, v, a.Samples[i])
		}
	}
}
