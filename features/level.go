package features

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/dsp/fourier"
)

// Pole frequencies and normalisation constants of the A and C frequency
// weightings, IEC 61672-1:2013 Annex E (E.4.1, E.4.2), read from the
// transcription in python-acoustics (acoustics/standards/iec_61672_1_2013.py),
// not from the standard itself.
const (
	iecF1    = 20.60   // Hz
	iecF2    = 107.7   // Hz
	iecF3    = 737.9   // Hz
	iecF4    = 12194.0 // Hz
	iecA1000 = -2.000  // dB
	iecC1000 = -0.062  // dB
)

// AWeightingDB returns the A-weighting at f Hz in dB, IEC 61672-1 eq. (E.6):
// A(f) = 20·lg[f4²·f⁴ / ((f²+f1²)·√(f²+f2²)·√(f²+f3²)·(f²+f4²))] − A1000.
func AWeightingDB(f float64) float64 {
	f2 := f * f
	num := iecF4 * iecF4 * f2 * f2
	den := (f2 + iecF1*iecF1) * math.Sqrt(f2+iecF2*iecF2) * math.Sqrt(f2+iecF3*iecF3) * (f2 + iecF4*iecF4)
	return 20*math.Log10(num/den) - iecA1000
}

// CWeightingDB returns the C-weighting at f Hz in dB, IEC 61672-1 eq. (E.1):
// C(f) = 20·lg[f4²·f² / ((f²+f1²)·(f²+f4²))] − C1000.
func CWeightingDB(f float64) float64 {
	f2 := f * f
	return 20*math.Log10(iecF4*iecF4*f2/((f2+iecF1*iecF1)*(f2+iecF4*iecF4))) - iecC1000
}

// ALevelDBFS returns the A-weighted equivalent level of samples at rateHz
// in dB relative to full scale: the power spectrum of the whole signal
// (one real DFT, rectangular window) is weighted bin by bin with
// AWeightingDB and summed, so that a full-scale sine at 1 kHz (peak 1,
// mean square ½) reads −3.01 dB FS.
//
// This is an indicative digital level, not a sound pressure level: pipit
// is not a sound level meter and does not know the microphone's
// sensitivity. Where a level bears on noise exposure, a certified
// instrument and local regulations and licensed practice decide.
func ALevelDBFS(samples []float32, rateHz int) (float64, error) {
	n := len(samples)
	if n < 2 || rateHz <= 0 {
		return 0, fmt.Errorf("features: A-weighted level needs at least 2 samples and a positive rate")
	}
	x := make([]float64, n)
	for i, v := range samples {
		x[i] = float64(v)
	}
	spec := realSpectrumPower(x)
	// Parseval: mean square = (|X0|² + 2Σ|Xk|² (+|X_{N/2}|²)) / N².
	var ms float64
	for k, p := range spec {
		f := float64(k) * float64(rateHz) / float64(n)
		w := 0.0
		if f > 0 {
			w = math.Pow(10, AWeightingDB(f)/10)
		}
		mult := 2.0
		if k == 0 || (n%2 == 0 && k == n/2) {
			mult = 1
		}
		ms += mult * p * w
	}
	ms /= float64(n) * float64(n)
	if ms <= 0 {
		return math.Inf(-1), nil
	}
	return 10 * math.Log10(ms), nil
}

// realSpectrumPower returns |X[k]|² for k = 0..N/2 of the unnormalised DFT
// of x, by gonum's real FFT (any length).
func realSpectrumPower(x []float64) []float64 {
	c := fourier.NewFFT(len(x)).Coefficients(nil, x)
	p := make([]float64, len(c))
	for k, v := range c {
		p[k] = real(v)*real(v) + imag(v)*imag(v)
	}
	return p
}
