package features

import (
	"fmt"
	"math"
	"math/cmplx"
	"testing"

	"gonum.org/v1/gonum/dsp/fourier"
)

// The goal stated for the resampler: at least 70 dB of alias rejection.
const (
	wantAliasRejectionDB = 70.0
	wantPassbandRippleDB = 0.01 // common practice for audio front ends
)

var commonRates = []int{8000, 11025, 16000, 22050, 32000, 44100, 48000}

// phaseGains returns, for an input tone at f cycles per input sample, the
// complex gain of each filter phase: output sample n of a resampled
// e^{2πifk} is e^{2πif·t_n} · Σ_j taps_p[j]·e^{-2πif·τ_j}.
func phaseGain(r *Resampler, p int, f float64) complex128 {
	frac := float64(p) / float64(r.up)
	var g complex128
	for j, h := range r.phases[p] {
		tau := frac + float64(r.half-1-j)
		g += complex(h, 0) * cmplx.Exp(complex(0, -2*math.Pi*f*tau))
	}
	return g
}

// TestResampleFilterResponse measures, for every ordered pair of common
// rates, the passband ripple (tones up to ResamplePassband of the lower
// Nyquist frequency) and, when downsampling, the alias rejection (the
// worst gain for any tone between the output Nyquist frequency and the
// input Nyquist frequency, over every filter phase). The figures printed
// with -v are the ones quoted in the README.
func TestResampleFilterResponse(t *testing.T) {
	worstRipple, worstAlias := 0.0, math.Inf(1)
	for _, in := range commonRates {
		for _, out := range commonRates {
			if in == out {
				continue
			}
			r, err := NewResampler(in, out)
			if err != nil {
				t.Fatal(err)
			}
			nyqLow := 0.5 * math.Min(1, float64(out)/float64(in)) // cycles per input sample
			step := 1 + r.up/16                                   // sample the phases to keep the test fast
			ripple, alias := 0.0, 0.0
			for p := 0; p < r.up; p += step {
				for i := 0; i <= 40; i++ {
					f := ResamplePassband * nyqLow * float64(i) / 40
					ripple = math.Max(ripple, math.Abs(20*math.Log10(cmplx.Abs(phaseGain(r, p, f)))))
				}
				if out < in {
					for i := 0; i <= 80; i++ {
						f := nyqLow + (0.5-nyqLow)*float64(i)/80
						alias = math.Max(alias, cmplx.Abs(phaseGain(r, p, f)))
					}
				}
			}
			aliasDB := -20 * math.Log10(alias)
			if ripple > wantPassbandRippleDB {
				t.Errorf("%d→%d Hz: passband ripple %.4f dB, want ≤ %.2f", in, out, ripple, wantPassbandRippleDB)
			}
			if out < in && aliasDB < wantAliasRejectionDB {
				t.Errorf("%d→%d Hz: alias rejection %.1f dB, want ≥ %.0f", in, out, aliasDB, wantAliasRejectionDB)
			}
			worstRipple = math.Max(worstRipple, ripple)
			if out < in {
				worstAlias = math.Min(worstAlias, aliasDB)
			}
		}
	}
	t.Logf("all 42 pairs: worst passband ripple %.4f dB, worst alias rejection %.1f dB", worstRipple, worstAlias)
}

// TestResampleTones checks the resampler end to end on tones, with the
// spectrum read by gonum's FFT: a 1 kHz tone keeps its amplitude, and all
// other energy (images when upsampling, aliases when downsampling) stays
// 70 dB below it. Analysis windows hold a whole number of periods, so the
// rectangular window has no leakage.
func TestResampleTones(t *testing.T) {
	cases := []struct {
		in, out int
		toneHz  float64
	}{
		{16000, 48000, 1000}, // images at 15 and 17 kHz
		{8000, 44100, 1000},  // odd ratio 441/80
		{48000, 16000, 1000}, // plus an out-of-band tone, below
		{44100, 16000, 1000}, // ratio 160/441
		{22050, 11025, 1000}, // halving
		{16000, 11025, 1000}, // ratio 441/640
		{11025, 32000, 1000}, // ratio 1280/441
	}
	for _, c := range cases {
		t.Run(fmt.Sprintf("%d-%d", c.in, c.out), func(t *testing.T) {
			r, _ := NewResampler(c.in, c.out)
			x := make([]float32, c.in) // 1 s
			for n := range x {
				x[n] = float32(0.5 * math.Sin(2*math.Pi*c.toneHz*float64(n)/float64(c.in)))
				if c.out < c.in {
					// a tone above the output Nyquist frequency must vanish
					x[n] += float32(0.5 * math.Sin(2*math.Pi*0.6*float64(c.out)*float64(n)/float64(c.in)))
				}
			}
			y := r.Resample(nil, x)
			// Middle 0.5 s, away from the edge transients.
			q := c.out / gcd(c.out, int(c.toneHz)) // samples per whole number of periods
			seg := make([]float64, (c.out/2)/q*q)
			for i := range seg {
				seg[i] = float64(y[c.out/4+i])
			}
			spec := fourier.NewFFT(len(seg)).Coefficients(nil, seg)
			bin := int(c.toneHz * float64(len(seg)) / float64(c.out))
			amp := 2 * cmplx.Abs(spec[bin]) / float64(len(seg))
			if math.Abs(20*math.Log10(amp/0.5)) > wantPassbandRippleDB {
				t.Errorf("tone amplitude %.5f, want 0.5", amp)
			}
			var rest float64
			for k, v := range spec {
				if k != bin {
					rest = math.Max(rest, cmplx.Abs(v))
				}
			}
			if db := 20 * math.Log10(rest/cmplx.Abs(spec[bin])); db > -wantAliasRejectionDB {
				t.Errorf("largest other component %.1f dB, want ≤ -%.0f", db, wantAliasRejectionDB)
			}
		})
	}
}

func TestResamplerLengthsAndErrors(t *testing.T) {
	r, _ := NewResampler(44100, 16000)
	if got := r.OutLen(44100); got != 16000 {
		t.Errorf("OutLen(44100) = %d, want 16000", got)
	}
	if got := r.OutLen(1); got != 1 {
		t.Errorf("OutLen(1) = %d, want 1", got)
	}
	same, _ := NewResampler(16000, 16000)
	x := []float32{1, 2, 3}
	if y := same.Resample(nil, x); len(y) != 3 || y[2] != 3 {
		t.Errorf("equal-rate Resample = %v, want copy of %v", y, x)
	}
	for _, bad := range [][2]int{{0, 16000}, {16000, -1}, {16000, 2_000_000}, {999983, 16000}} {
		if _, err := NewResampler(bad[0], bad[1]); err == nil {
			t.Errorf("NewResampler(%d, %d) gave no error", bad[0], bad[1])
		}
	}
}

func BenchmarkResample(b *testing.B) {
	for _, p := range [][2]int{{44100, 16000}, {48000, 16000}, {8000, 16000}} {
		b.Run(fmt.Sprintf("%d-%d", p[0], p[1]), func(b *testing.B) {
			r, _ := NewResampler(p[0], p[1])
			x := make([]float32, p[0]*10)
			for i := range x {
				x[i] = float32(math.Sin(float64(i)))
			}
			dst := make([]float32, r.OutLen(len(x)))
			b.SetBytes(int64(4 * len(x)))
			b.ReportAllocs()
			for b.Loop() {
				dst = r.Resample(dst, x)
			}
		})
	}
}
