package datasets

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/pipit-audio/pipit/features"
)

// TestWindowStreamMatchesCutRecording: windows cut from PCM chunks equal
// CutRecording's on the whole recording, bit for bit, for long and short
// recordings, with and without centring, both paddings and several overlaps.
func TestWindowStreamMatchesCutRecording(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	stats := &features.BandStats{Mean: make([]float64, 40), Std: make([]float64, 40)}
	for b := range stats.Mean {
		stats.Mean[b], stats.Std[b] = float64(-40+b), float64(1+b%5)
	}
	for _, c := range []struct {
		seconds float64
		center  bool
		overlap float64
		pad     string
	}{{5.3, false, 0.5, PadZeros}, {4.1, true, 0.75, PadZeros}, {0.4, false, 0.5, PadRepeat}, {0.7, true, 0, PadZeros}, {3, false, 0, PadRepeat}} {
		fe := features.DefaultConfig()
		fe.PadEnds = c.center
		w := WindowConfig{Frames: 61, Overlap: c.overlap, Pad: c.pad}
		x := make([]float32, int(c.seconds*16000))
		for i := range x {
			x[i] = float32(0.3*math.Sin(float64(i)*0.05) + 0.1*rng.NormFloat64())
		}
		rec, err := CutRecording(&features.Audio{SampleRateHz: 16000, Samples: x}, fe, w, stats)
		if err != nil {
			t.Fatal(err)
		}
		ws, err := NewWindowStream(fe, w, stats)
		if err != nil {
			t.Fatal(err)
		}
		var got []float32
		var starts []float64
		for i := 0; i < len(x); {
			n := 1 + rng.IntN(5000)
			got, starts = ws.Push(got, starts, x[i:min(i+n, len(x))])
			i += n
		}
		got, starts = ws.Flush(got, starts)
		if ws.Windows() != rec.N || len(starts) != rec.N || math.Abs(ws.WindowSec()-rec.WindowSec) > 1e-12 {
			t.Fatalf("%+v: %d windows of %.3f s, CutRecording %d of %.3f s", c, ws.Windows(), ws.WindowSec(), rec.N, rec.WindowSec)
		}
		for i := range starts {
			if starts[i] != rec.StartSec[i] {
				t.Fatalf("%+v: window %d starts at %.3f s, CutRecording %.3f s", c, i, starts[i], rec.StartSec[i])
			}
		}
		for i := range got {
			if math.Float32bits(got[i]) != math.Float32bits(rec.Inputs[i]) {
				t.Fatalf("%+v: value %d is %g, CutRecording %g", c, i, got[i], rec.Inputs[i])
			}
		}
	}
}
