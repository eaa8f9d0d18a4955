package features

import "math"

// Design of the resampling filter. The passband runs to ResamplePassband
// of the lower Nyquist frequency and the stopband starts at that Nyquist
// frequency, so nothing above it folds back. The Kaiser window is designed
// for resampleDesignDB of stopband attenuation with Kaiser's formulas
// (beta = 0.1102(A-8.7); length (A-7.95)/(2.285·Δω)), Oppenheim & Schafer,
// Discrete-Time Signal Processing, 3rd ed., §7.6. The measured figures are
// in resample_test.go and the README.
const (
	ResamplePassband = 0.9
	resampleDesignDB = 90.0
)

// Resampler converts a signal from one sample rate to another by
// band-limited interpolation with a Kaiser-windowed sinc (Smith, "Digital
// Audio Resampling", CCRMA). The rates are reduced to a ratio L/M; the L
// filter phases are tabulated once, so each output sample costs one dot
// product of Taps() input samples. A Resampler is safe for concurrent use.
type Resampler struct {
	inHz, outHz int
	up, down    int         // L and M: out/in = L/M in lowest terms
	half        int         // taps on each side of the centre
	phases      [][]float64 // (L, 2*half); phase p is for fractional offset p/L
}

// NewResampler builds the filter for inHz → outHz. Both rates must be
// positive and at most [MaxWAVRateHz]; the reduced ratio's numerator must
// not exceed 4096 phases (all pairs of the common rates 8, 11.025, 16,
// 22.05, 32, 44.1 and 48 kHz qualify). Errors wrap [ErrBadConfig].
func NewResampler(inHz, outHz int) (*Resampler, error) {
	if inHz <= 0 || outHz <= 0 || inHz > MaxWAVRateHz || outHz > MaxWAVRateHz {
		return nil, badConfig("resample %d Hz → %d Hz: rates must be in 1..%d", inHz, outHz, MaxWAVRateHz)
	}
	g := gcd(inHz, outHz)
	r := &Resampler{inHz: inHz, outHz: outHz, up: outHz / g, down: inHz / g}
	if r.up > 4096 {
		return nil, badConfig("resample %d Hz → %d Hz: ratio %d/%d needs too many filter phases", inHz, outHz, r.up, r.down)
	}
	if inHz == outHz {
		return r, nil
	}
	// Frequencies in cycles per input sample.
	nyqLow := 0.5 * math.Min(1, float64(outHz)/float64(inHz))
	pass, stop := ResamplePassband*nyqLow, nyqLow
	cut := 0.5 * (pass + stop)
	dw := 2 * math.Pi * (stop - pass)
	a := resampleDesignDB
	beta := 0.1102 * (a - 8.7)
	n := int(math.Ceil((a - 7.95) / (2.285 * dw)))
	r.half = n/2 + 1
	i0b := besselI0(beta)
	r.phases = make([][]float64, r.up)
	for p := range r.phases {
		frac := float64(p) / float64(r.up)
		taps := make([]float64, 2*r.half)
		var sum float64
		for j := range taps {
			// tap j multiplies x[i0 - half + 1 + j]; tau = t - k.
			tau := frac + float64(r.half-1-j)
			u := tau / float64(r.half)
			if u <= -1 || u >= 1 {
				continue
			}
			v := 2 * cut * sinc(2*cut*tau) * besselI0(beta*math.Sqrt(1-u*u)) / i0b
			taps[j] = v
			sum += v
		}
		for j := range taps { // unit DC gain in every phase
			taps[j] /= sum
		}
		r.phases[p] = taps
	}
	return r, nil
}

// Taps returns the filter length per output sample (0 when the rates are
// equal).
func (r *Resampler) Taps() int { return 2 * r.half }

// OutLen returns the number of output samples for n input samples:
// ceil(n·outHz/inHz).
func (r *Resampler) OutLen(n int) int {
	return int((int64(n)*int64(r.up) + int64(r.down) - 1) / int64(r.down))
}

// Resample writes the resampled x into dst[:OutLen(len(x))] and returns
// that slice; it allocates only when dst is too short. Samples outside x
// are taken as zero. dst must not alias x. Equal rates copy x.
func (r *Resampler) Resample(dst, x []float32) []float32 {
	n := r.OutLen(len(x))
	if cap(dst) < n {
		dst = make([]float32, n)
	}
	dst = dst[:n]
	if r.up == r.down {
		copy(dst, x)
		return dst
	}
	for o := range dst {
		num := int64(o) * int64(r.down) // t = num / up input samples
		i0 := int(num / int64(r.up))
		taps := r.phases[num%int64(r.up)]
		base := i0 - r.half + 1
		var acc float64
		lo, hi := 0, len(taps)
		if base < 0 {
			lo = -base
		}
		if base+hi > len(x) {
			hi = len(x) - base
		}
		for j := lo; j < hi; j++ {
			acc += taps[j] * float64(x[base+j])
		}
		dst[o] = float32(acc)
	}
	return dst
}

func sinc(x float64) float64 {
	if x == 0 {
		return 1
	}
	return math.Sin(math.Pi*x) / (math.Pi * x)
}

// besselI0 is the modified Bessel function of the first kind, order 0,
// by its power series Σ ((x/2)^k / k!)², summed until the term is below
// 1e-17 of the sum (Abramowitz & Stegun 9.6.12).
func besselI0(x float64) float64 {
	sum, term := 1.0, 1.0
	h := x / 2
	for k := 1; k < 500; k++ {
		term *= h / float64(k)
		t2 := term * term
		sum += t2
		if t2 < 1e-17*sum {
			break
		}
	}
	return sum
}

func gcd(a, b int) int {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}
