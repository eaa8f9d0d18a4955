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
// mean square ½) reads −3.01 dB FS. Digital silence (every sample zero)
// has no level: −Inf. [ALevelMeter] gives the same level for a signal
// given in chunks.
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
	return msToDB(aWeightedMeanSquare(x, rateHz, fourier.NewFFT(n), nil, nil)), nil
}

// msToDB returns 10·lg ms, −Inf for ms ≤ 0.
func msToDB(ms float64) float64 {
	if ms <= 0 {
		return math.Inf(-1)
	}
	return 10 * math.Log10(ms)
}

// aWeightedMeanSquare returns the A-weighted mean square of x at rateHz,
// Σ_k w(f_k)·|X_k|² / N² over the bins of its real DFT (fft, of len(x)),
// by Parseval. weights, if of the right length, holds w for each bin
// (aWeights); coeffs is reused when large enough.
func aWeightedMeanSquare(x []float64, rateHz int, fft *fourier.FFT, weights []float64, coeffs []complex128) float64 {
	n := len(x)
	c := fft.Coefficients(coeffs, x)
	if len(weights) != len(c) {
		weights = aWeights(n, rateHz)
	}
	// Parseval: mean square = (|X0|² + 2Σ|Xk|² (+|X_{N/2}|²)) / N².
	var ms float64
	for k, v := range c {
		p := real(v)*real(v) + imag(v)*imag(v)
		mult := 2.0
		if k == 0 || (n%2 == 0 && k == n/2) {
			mult = 1
		}
		ms += mult * p * weights[k]
	}
	return ms / (float64(n) * float64(n))
}

// aWeights returns the A-weighting power factor of each bin k = 0..n/2 of
// an n-point DFT at rateHz (0 at DC).
func aWeights(n, rateHz int) []float64 {
	w := make([]float64, n/2+1)
	for k := range w {
		if f := float64(k) * float64(rateHz) / float64(n); f > 0 {
			w[k] = math.Pow(10, AWeightingDB(f)/10)
		}
	}
	return w
}

// ALevelBlockSamples is the block length of [ALevelMeter]: 2²⁰ samples,
// 65.5 s at 16 kHz and 21.8 s at 48 kHz.
const ALevelBlockSamples = 1 << 20

// ALevelMeter is [ALevelDBFS] for a signal given in chunks, in bounded
// memory: the signal is cut into consecutive blocks of
// [ALevelBlockSamples] samples (the last one shorter), each block's mean
// square is A-weighted in the frequency domain as ALevelDBFS weights the
// whole signal, and the level is that of the blocks' mean squares
// averaged with their lengths as weights. A signal of at most one block
// gives exactly ALevelDBFS. In a longer one the last, shorter block is
// zero-padded to a whole block for its DFT (its energy unchanged), so
// that no block length with a large prime factor makes the DFT slow and
// the same transform serves every block; the level then differs from
// ALevelDBFS of the whole signal by the blocks' edges only
// (TestALevelMeter). The level is indicative, as ALevelDBFS says.
type ALevelMeter struct {
	rateHz  int
	block   []float64 // samples of the block being filled
	n       int64     // samples pushed
	energy  float64   // Σ over finished blocks of length × mean square
	blocks  int       // finished blocks
	firstMS float64   // mean square of the first block
	fft     *fourier.FFT
	weights []float64
	coeffs  []complex128
	ended   bool
	level   float64
}

// NewALevelMeter returns an ALevelMeter for a signal at rateHz.
func NewALevelMeter(rateHz int) (*ALevelMeter, error) {
	if rateHz <= 0 {
		return nil, fmt.Errorf("features: A-weighted level needs a positive rate, not %d Hz", rateHz)
	}
	return &ALevelMeter{rateHz: rateHz}, nil
}

// Push adds samples.
func (m *ALevelMeter) Push(x []float32) {
	for len(x) > 0 && !m.ended {
		if m.block == nil {
			m.block = make([]float64, 0, min(ALevelBlockSamples, max(len(x), 1<<12)))
		}
		k := min(len(x), ALevelBlockSamples-len(m.block))
		for _, v := range x[:k] {
			m.block = append(m.block, float64(v))
		}
		m.n += int64(k)
		x = x[k:]
		if len(m.block) == ALevelBlockSamples {
			if m.fft == nil {
				m.fft = fourier.NewFFT(ALevelBlockSamples)
				m.weights = aWeights(ALevelBlockSamples, m.rateHz)
				m.coeffs = make([]complex128, ALevelBlockSamples/2+1)
			}
			m.finish(aWeightedMeanSquare(m.block, m.rateHz, m.fft, m.weights, m.coeffs), len(m.block))
		}
	}
}

// finish adds the current block, of A-weighted mean square ms over n
// samples, and empties it.
func (m *ALevelMeter) finish(ms float64, n int) {
	if m.blocks == 0 {
		m.firstMS = ms
	}
	m.energy += float64(n) * ms
	m.blocks++
	m.block = m.block[:0]
}

// LevelDBFS ends the signal and returns its level in dB re full scale
// (−Inf for digital silence); a signal of fewer than 2 samples is an
// error, as for ALevelDBFS. Samples pushed after it are ignored.
func (m *ALevelMeter) LevelDBFS() (float64, error) {
	if m.n < 2 {
		return 0, fmt.Errorf("features: A-weighted level needs at least 2 samples and a positive rate")
	}
	if m.ended {
		return m.level, nil
	}
	m.ended = true
	switch {
	case m.blocks == 0: // the whole signal is one block: ALevelDBFS
		m.finish(aWeightedMeanSquare(m.block, m.rateHz, fourier.NewFFT(len(m.block)), nil, nil), len(m.block))
	case len(m.block) > 0: // the last block, zero-padded to a whole block
		y := append(m.block, make([]float64, ALevelBlockSamples-len(m.block))...)
		m.finish(aWeightedMeanSquare(y, m.rateHz, m.fft, m.weights, m.coeffs), ALevelBlockSamples)
	}
	m.level = msToDB(m.energy / float64(m.n))
	if m.blocks == 1 {
		m.level = msToDB(m.firstMS) // exactly ALevelDBFS
	}
	return m.level, nil
}
