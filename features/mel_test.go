package features

import (
	"math"
	"testing"
)

func TestHzToMel(t *testing.T) {
	// Values computed in float64 from the published formulas: HTK mel =
	// 2595·log10(1+f/700) (HTK Book §5.4 "Filterbank Analysis"; the
	// equation number 5.13 is from memory; HTK 3.4.1 HSigP.c computes the
	// same scale as 1127·ln(1+f/700)) and Slaney's Auditory Toolbox scale
	// (M. Slaney, Auditory Toolbox v2, Interval Research Tech. Report
	// 1998-010, mfcc.m: linear 200/3 Hz per mel below 1 kHz, 27 log steps
	// from 1 kHz to 6.4 kHz; continuous form of D. P. W. Ellis, hz2mel.m,
	// LabROSA rastamat, 2005).
	cases := []struct {
		hz, htk, slaney float64
	}{
		{0, 0, 0},
		{100, 150.4891024071, 1.5},
		{500, 607.4459196566, 7.5},
		{700, 781.1728387480, 10.5},
		{1000, 999.9855371396, 15},
		{2000, 1521.3595541556, 25.0818801573},
		{4000, 2146.0645275062, 35.1637603146},
		{6400, 2610.9860010890, 42},
		{8000, 2840.0230467083, 45.2456404719},
		{16000, 3574.9198287910, 55.3275206292},
	}
	for _, c := range cases {
		if got := HzToMel(MelHTK, c.hz); math.Abs(got-c.htk) > 1e-9 {
			t.Errorf("HzToMel(htk, %g) = %.10f, want %.10f", c.hz, got, c.htk)
		}
		if got := HzToMel(MelSlaney, c.hz); math.Abs(got-c.slaney) > 1e-9 {
			t.Errorf("HzToMel(slaney, %g) = %.10f, want %.10f", c.hz, got, c.slaney)
		}
		for _, s := range []string{MelHTK, MelSlaney} {
			if back := MelToHz(s, HzToMel(s, c.hz)); math.Abs(back-c.hz) > 1e-8*(1+c.hz) {
				t.Errorf("MelToHz(%s, HzToMel(%g)) = %g", s, c.hz, back)
			}
		}
	}
	// Inverse check values: the inverses of the same formulas (HTK:
	// 700·(10^(m/2595) − 1); Slaney: Ellis, mel2hz.m), computed in float64.
	inv := []struct {
		scale   string
		mel, hz float64
	}{
		{MelHTK, 1000, 1000.021816457},
		{MelHTK, 2000, 3428.677394901},
		{MelSlaney, 10, 666.6666667},
		{MelSlaney, 20, 1410.2385678},
	}
	for _, c := range inv {
		if got := MelToHz(c.scale, c.mel); math.Abs(got-c.hz) > 1e-6 {
			t.Errorf("MelToHz(%s, %g) = %.9f, want %.9f", c.scale, c.mel, got, c.hz)
		}
	}
}

func TestMelFilterbankShape(t *testing.T) {
	// Slaney's mfcc.m (Auditory Toolbox): area-normalised triangles have
	// height 2/(upper-lower); its first filter spans 133.33..266.67 Hz with
	// height 2/133.33 = 0.015 (read in Slaney's own Python port,
	// python_auditory_toolbox, function Mfcc). Our edges come from the
	// continuous scale, so with fmin=133.3333 Hz and the 13 linear bands
	// spaced 66.67 Hz the first triangle is the same.
	fmin := 400.0 / 3
	mMin := HzToMel(MelSlaney, fmin)
	// Choose fmax so the mel spacing is exactly 1 (66.67 Hz below 1 kHz):
	// 40 bands need 41 steps.
	fmax := MelToHz(MelSlaney, mMin+41)
	fb := MelFilterbank(MelSlaney, 40, 4096, 16000, fmin, fmax, true)
	f0 := fb[0]
	if math.Abs(f0.LowHz-133.3333) > 1e-3 || math.Abs(f0.CentreHz-200) > 1e-3 || math.Abs(f0.HighHz-266.6667) > 1e-3 {
		t.Errorf("filter 0 corners %.4f/%.4f/%.4f Hz, want 133.3333/200/266.6667", f0.LowHz, f0.CentreHz, f0.HighHz)
	}
	peak := 0.0
	for _, w := range f0.Weights {
		peak = math.Max(peak, w)
	}
	// The sampled peak is below the continuous one unless a bin falls on
	// 200 Hz; at 16000/4096 = 3.906 Hz per bin, 200 Hz is 51.2 bins, so the
	// nearest bin is 0.2 bin off the apex: height·(1 - 0.78/66.67).
	if want := 0.015 * (1 - 0.78125/66.6667); math.Abs(peak-want) > 2e-5 {
		t.Errorf("filter 0 peak %.6f, want %.6f", peak, want)
	}
	// Unit area: Σ w · Δf ≈ 1 for every band well above one bin wide.
	for m, f := range fb {
		var area float64
		for _, w := range f.Weights {
			area += w * 16000 / 4096
		}
		if math.Abs(area-1) > 0.01 {
			t.Errorf("band %d area %.4f, want 1", m, area)
		}
	}
	// Without normalisation every triangle peaks at ≤ 1 and the bands tile:
	// the sum of adjacent triangles is 1 between the first and last centre.
	fb = MelFilterbank(MelHTK, 40, 512, 16000, 0, 8000, false)
	sum := make([]float64, 257)
	for _, f := range fb {
		for i, w := range f.Weights {
			if w > 1 {
				t.Fatalf("unnormalised weight %g > 1", w)
			}
			sum[f.Start+i] += w
		}
	}
	for k := range sum {
		hz := float64(k) * 16000 / 512
		if hz > fb[0].CentreHz && hz < fb[39].CentreHz && math.Abs(sum[k]-1) > 1e-9 {
			t.Errorf("bin %d (%.0f Hz): triangles sum to %.6f, want 1", k, hz, sum[k])
		}
	}
}
