package main

import (
	"encoding/json"
	"fmt"
	"math"
	"testing"

	"github.com/pipit-audio/pipit/features"
)

// TestBudgetWholePath checks that pipit budget counts the C front end
// beside the network and that --hop, --bands, --window and --rate move
// the front end's compute by the hand-derived amounts. Per frame at the
// defaults (features.DeviceCost doc): window 512 + FFT 5·256·8 = 10240 +
// split 2814 + log 641 + normalise 200 + 2 per mel weight; the default
// filterbank stores 493 weights (arm-none-eabi-nm: pipit_net_fe_mel is
// 1972 bytes in the emulated-board build), so 15393 flops at 62.5 frames/s.
func TestBudgetWholePath(t *testing.T) {
	nnz := func(c features.Config) float64 {
		n := 0
		for _, f := range features.MelFilterbank(c.MelScale, c.Bands, c.FFTSize, c.SampleRateHz, c.FMinHz, c.FMaxHz, false) {
			n += len(f.Weights)
		}
		return float64(n)
	}
	b20 := features.DefaultConfig()
	b20.Bands = 20
	w256 := features.DefaultConfig()
	w256.WindowSamples, w256.FFTSize = 256, 256
	cases := []struct {
		args     []string
		flopsSec float64
		inputW   int
	}{
		{nil, 62.5 * 15393, 61},
		{[]string{"--hop", "512"}, 31.25 * 15393, 31}, // half the frames
		{[]string{"--rate", "8000"}, 31.25 * (15393 - 2*493 + 2*nnz(func() features.Config { c := features.DefaultConfig(); c.SampleRateHz, c.FMaxHz = 8000, 4000; return c }())), 30},
		{[]string{"--bands", "20"}, 62.5 * (512 + 10240 + 2814 + 321 + 100 + 2*nnz(b20)), 61},   // log 15·20+20+1, normalise 5·20
		{[]string{"--window", "256"}, 62.5 * (256 + 4480 + 1406 + 641 + 200 + 2*nnz(w256)), 62}, // FFT 5·128·7, split 4+16+22·63
	}
	var first budgetReport
	for i, c := range cases {
		out, err := run(t, append([]string{"budget", "--arch", "separable", "--json"}, c.args...)...)
		if err != nil {
			t.Fatal(err)
		}
		var rep budgetReport
		if err := json.Unmarshal([]byte(out), &rep); err != nil {
			t.Fatal(err)
		}
		if math.Abs(rep.FrontEnd.FlopsPerSecond-c.flopsSec) > 1e-6 {
			t.Errorf("%v: front end %g flop/s, want %g", c.args, rep.FrontEnd.FlopsPerSecond, c.flopsSec)
		}
		var w int
		if _, err := fmtSscan(rep.Input, &w); err != nil || w != c.inputW {
			t.Errorf("%v: network input %s, want W = %d", c.args, rep.Input, c.inputW)
		}
		wp := rep.WholePath
		if wp.ComputePerSecond != rep.MACsPerSecond+rep.FrontEnd.FlopsPerSecond || wp.RAMBytes != rep.RAMBytes+int64(rep.FrontEnd.RAMBytes) ||
			wp.FlashBytes != rep.FlashBytes+int64(rep.FrontEnd.TableBytes)+wp.CodeBytes || rep.Fits != wp.Fits {
			t.Errorf("%v: whole path %+v does not add up", c.args, wp)
		}
		if i == 0 {
			first = rep
			if rep.MACs != 475072 || !wp.Fits {
				t.Errorf("defaults: %d MACs, fits %v", rep.MACs, wp.Fits)
			}
		}
	}
	// the network at the reference input is unchanged by the front end's presence
	if first.RAMBytes != 12480 || first.FlashBytes != 11872 {
		t.Errorf("defaults: network RAM %d, flash %d; want the README's 12480 and 11872", first.RAMBytes, first.FlashBytes)
	}
}

// fmtSscan reads W from an "HxWxC" shape.
func fmtSscan(shape string, w *int) (int, error) {
	var h, c int
	return fmt.Sscanf(shape, "%dx%dx%d", &h, w, &c)
}
