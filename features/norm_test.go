package features

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat"
)

func TestBandStatsAgainstGonum(t *testing.T) {
	// Two matrices of 3 bands; the accumulated statistics must equal
	// gonum's stat.Mean / stat.PopStdDev over the pooled frames of each band.
	a := []float32{1, 2, 3, 4, 10, 20, 30, 40, -1, -1, -1, -1} // 3 × 4
	b := []float32{5, 6, 50, 60, 2, -3}                        // 3 × 2
	acc := NewBandStatsAccumulator(3)
	if err := acc.Add(a, 4); err != nil {
		t.Fatal(err)
	}
	if err := acc.Add(b, 2); err != nil {
		t.Fatal(err)
	}
	s, err := acc.Stats()
	if err != nil {
		t.Fatal(err)
	}
	for band := 0; band < 3; band++ {
		var pooled []float64
		for _, v := range a[band*4 : band*4+4] {
			pooled = append(pooled, float64(v))
		}
		for _, v := range b[band*2 : band*2+2] {
			pooled = append(pooled, float64(v))
		}
		mean, std := stat.PopMeanStdDev(pooled, nil)
		if math.Abs(s.Mean[band]-mean) > 1e-12 || math.Abs(s.Std[band]-std) > 1e-12 {
			t.Errorf("band %d: mean %g std %g, gonum %g %g", band, s.Mean[band], s.Std[band], mean, std)
		}
	}
	if s.Frames != 6 {
		t.Errorf("Frames = %d, want 6", s.Frames)
	}
	// Apply normalises band 0 of a to zero mean over the pooled frames.
	m := append([]float32(nil), a...)
	s.Apply(m)
	if want := float32((1 - s.Mean[0]) / s.Std[0]); m[0] != want {
		t.Errorf("Apply: m[0] = %g, want %g", m[0], want)
	}
	// A constant band has std MinStd, not 0.
	if s.Std[2] < MinStd {
		t.Errorf("Std[2] = %g < MinStd", s.Std[2])
	}
}

func TestBandStatsFileRoundTrip(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "stats.json")
	acc := NewBandStatsAccumulator(2)
	acc.Add([]float32{1, 2, 3, 4}, 2)
	s, _ := acc.Stats()
	if err := s.WriteFile(p); err != nil {
		t.Fatal(err)
	}
	back, err := ReadBandStatsFile(p)
	if err != nil {
		t.Fatal(err)
	}
	if back.Mean[1] != s.Mean[1] || back.Std[0] != s.Std[0] || back.Frames != 2 {
		t.Errorf("round trip %+v, want %+v", back, s)
	}
	os.WriteFile(p, []byte(`{"version": 1, "mean": [0, 1], "std": [1]}`), 0o644)
	if _, err := ReadBandStatsFile(p); err == nil || !strings.Contains(err.Error(), p) {
		t.Errorf("mismatched lengths: error %v, want one naming %s", err, p)
	}
	if _, err := NewBandStatsAccumulator(2).Stats(); err == nil {
		t.Error("Stats of nothing gave no error")
	}
	if err := NewBandStatsAccumulator(2).Add([]float32{1, 2, 3}, 2); err == nil {
		t.Error("Add with wrong shape gave no error")
	}
}
