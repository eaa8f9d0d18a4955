package features

import (
	"math"
	"testing"
)

// TestCostOnDevice checks the front end's cost model against figures
// derived by hand from the operation counts in the DeviceCost doc comment
// (the C code in quant/cref/c/pipit_fe.c), and that --hop, --bands,
// --window and --rate move them as they should. The mel weight count is
// the one input not derived by hand: it is counted from MelFilterbank.
func TestCostOnDevice(t *testing.T) {
	nnz := func(c Config) int64 {
		n := 0
		for _, f := range MelFilterbank(c.MelScale, c.Bands, c.FFTSize, c.SampleRateHz, c.FMinHz, c.FMaxHz, false) {
			n += len(f.Weights)
		}
		return int64(n)
	}
	def := DefaultConfig()
	hop := def
	hop.HopSamples = 512
	bands := def
	bands.Bands = 20
	win := def
	win.WindowSamples, win.FFTSize = 256, 256
	rate := def
	rate.SampleRateHz, rate.FMaxHz = 8000, 4000
	cases := []struct {
		name     string
		cfg      Config
		frames   int
		perFrame int64   // flops, by hand
		perSec   float64 // frames per second, by hand
		ram      int
		tables   int64 // without the mel weights (4 bytes each)
	}{
		// window 512 + FFT 5·256·8 = 10240 + split 4 + 16 + 22·127 = 2814
		// + log 15·40 + 40 + 1 = 641 + normalise 5·40 = 200; 16000/256 frames/s;
		// RAM 2·512 + 4·512 + 4·40 + 40·61 + 56; tables 4·512 + 4·512 + 4·40 + 8·40 + 84.
		{"default", def, 61, 512 + 10240 + 2814 + 641 + 200, 62.5, 1024 + 2048 + 160 + 2440 + 56, 2048 + 2048 + 160 + 320 + 84},
		// same per frame, half the frames: 16000/512; 31 frames per second of audio
		{"hop 512", hop, 31, 512 + 10240 + 2814 + 641 + 200, 31.25, 1024 + 2048 + 160 + 1240 + 56, 2048 + 2048 + 160 + 320 + 84},
		// log 15·20 + 20 + 1 = 321, normalise 100
		{"bands 20", bands, 61, 512 + 10240 + 2814 + 321 + 100, 62.5, 1024 + 2048 + 80 + 1220 + 56, 2048 + 2048 + 80 + 160 + 84},
		// window 256 + FFT 5·128·7 = 4480 + split 4 + 16 + 22·63 = 1406
		{"window 256", win, 61, 256 + 4480 + 1406 + 641 + 200, 62.5, 512 + 1024 + 160 + 2440 + 56, 1024 + 1024 + 160 + 320 + 84},
		// 8000/256 frames/s
		{"rate 8000", rate, 30, 512 + 10240 + 2814 + 641 + 200, 31.25, 1024 + 2048 + 160 + 1200 + 56, 2048 + 2048 + 160 + 320 + 84},
	}
	for _, c := range cases {
		d, err := CostOnDevice(c.cfg, c.frames)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		wantFlops := c.perFrame + 2*nnz(c.cfg)
		if d.FlopsPerFrame != wantFlops || d.FramesPerSecond != c.perSec || math.Abs(d.FlopsPerSecond-c.perSec*float64(wantFlops)) > 1e-6 {
			t.Errorf("%s: %d flops/frame at %g frames/s (%g flops/s), want %d at %g", c.name, d.FlopsPerFrame, d.FramesPerSecond, d.FlopsPerSecond, wantFlops, c.perSec)
		}
		if d.RAMBytes != c.ram || int64(d.TableBytes) != c.tables+4*nnz(c.cfg) {
			t.Errorf("%s: RAM %d, tables %d; want %d, %d", c.name, d.RAMBytes, d.TableBytes, c.ram, c.tables+4*nnz(c.cfg))
		}
	}
	// The lever: doubling the hop halves the front end's flops per second.
	a, _ := CostOnDevice(def, 61)
	b, _ := CostOnDevice(hop, 31)
	if b.FlopsPerSecond*2 != a.FlopsPerSecond {
		t.Errorf("hop 512: %g flops/s, want half of %g", b.FlopsPerSecond, a.FlopsPerSecond)
	}
	bad := def
	bad.FFTSize = 600
	if _, err := CostOnDevice(bad, 61); err == nil {
		t.Error("FFT size 600 accepted by the C front end's cost model")
	}
}
