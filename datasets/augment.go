package datasets

import (
	"math"
	"math/rand/v2"

	"github.com/pipit-audio/pipit/internal/kernels"
)

// Augment describes the random changes made to training windows. Every
// draw comes from the RNG [Set.Sample] seeds per (seed, epoch, window), so
// runs are reproducible.
type Augment struct {
	ShiftSeconds float64 `json:"shift_seconds"` // shift the window by up to ± this, zero-filled at the clip's ends
	GainDB       float64 `json:"gain_db"`       // scale by up to ± this
	NoiseProb    float64 `json:"noise_prob"`    // probability of mixing in pink noise (a random stretch of 2^18 samples drawn once per set)
	MinSNRdB     float64 `json:"min_snr_db"`    // SNR range of the window over that noise
	MaxSNRdB     float64 `json:"max_snr_db"`
	// Time and frequency masks on the normalised log-mel (SpecAugment,
	// Park et al. 2019, arXiv:1904.08779): each of TimeMasks masks sets up
	// to TimeMaskFrames consecutive frames to 0 (the band mean after
	// normalisation); likewise FreqMasks for up to FreqMaskBands bands.
	TimeMasks, TimeMaskFrames int
	FreqMasks, FreqMaskBands  int
}

// DefaultAugment returns pipit's default training augmentation.
func DefaultAugment() *Augment {
	return &Augment{ShiftSeconds: 0.1, GainDB: 6, NoiseProb: 0.5, MinSNRdB: 5, MaxSNRdB: 30,
		TimeMasks: 1, TimeMaskFrames: 6, FreqMasks: 1, FreqMaskBands: 4}
}

// noiseBank is a long stretch of pink noise drawn once, from which the
// noise of each augmented window is a random segment: drawing 2 normal
// variates per sample for every window would cost more than the training
// step itself. cum[i] is Σ_{j<i} x[j]², so a segment's power costs two
// lookups.
type noiseBank struct {
	x   []float64
	x32 []float32 // x in float32, what is mixed in
	cum []float64
}

// noiseBankSamples is the bank's length: 2^18 samples, 16.4 s at 16 kHz.
const noiseBankSamples = 1 << 18

func newNoiseBank(seed uint64) *noiseBank {
	x := pinkNoise(noiseBankSamples, rand.New(rand.NewPCG(seed, 0x9015eba4c)))
	cum := make([]float64, len(x)+1)
	for i, v := range x {
		cum[i+1] = cum[i] + v*v
	}
	x32 := make([]float32, len(x))
	for i, v := range x {
		x32[i] = float32(v)
	}
	return &noiseBank{x: x, x32: x32, cum: cum}
}

// segment returns a random n-sample stretch of the bank and its mean
// power (a fresh draw when n exceeds the bank).
func (b *noiseBank) segment(n int, rng *rand.Rand) ([]float32, float64) {
	if b == nil || n > len(b.x) {
		x := pinkNoise(n, rng)
		x32 := make([]float32, n)
		for i, v := range x {
			x32[i] = float32(v)
		}
		return x32, power(x)
	}
	o := rng.IntN(len(b.x) - n + 1)
	return b.x32[o : o+n], (b.cum[o+n] - b.cum[o]) / float64(n)
}

// audio writes an augmented copy of clip[start : start+len(dst)] into dst,
// taking noise from bank.
func (a *Augment) audio(dst, clip []float32, start, rateHz int, rng *rand.Rand, bank *noiseBank) {
	shift := 0
	if a.ShiftSeconds > 0 {
		m := int(a.ShiftSeconds * float64(rateHz))
		shift = rng.IntN(2*m+1) - m
	}
	g := float32(1)
	if a.GainDB > 0 {
		g = float32(math.Pow(10, (2*rng.Float64()-1)*a.GainDB/20))
	}
	// dst[i] = g·clip[start+shift+i], zero outside the clip
	lo := min(max(0, -(start+shift)), len(dst))
	hi := max(lo, min(len(dst), len(clip)-(start+shift)))
	clear(dst[:lo])
	clear(dst[hi:])
	body := dst[lo:hi:hi]
	if hi > lo {
		src := clip[start+shift+lo : start+shift+hi]
		for i, v := range src {
			body[i] = v * g
		}
	}
	if a.NoiseProb > 0 && rng.Float64() < a.NoiseProb {
		p := float64(kernels.Dot(body, body)) // Σ dst² (the zeros add nothing)
		if p > 0 {
			noise, pn := bank.segment(len(dst), rng)
			snr := a.MinSNRdB + rng.Float64()*(a.MaxSNRdB-a.MinSNRdB)
			k := math.Sqrt(p / float64(len(dst)) / pn / math.Pow(10, snr/10))
			kernels.Axpy(float32(k), noise, dst)
		}
	}
}

// masks applies the time and frequency masks to a (bands, frames) input.
func (a *Augment) masks(x []float32, bands, frames int, rng *rand.Rand) {
	for k := 0; k < a.TimeMasks && a.TimeMaskFrames > 0; k++ {
		w := rng.IntN(a.TimeMaskFrames + 1)
		t0 := rng.IntN(max(1, frames-w+1))
		for b := 0; b < bands; b++ {
			clear(x[b*frames+t0 : b*frames+min(frames, t0+w)])
		}
	}
	for k := 0; k < a.FreqMasks && a.FreqMaskBands > 0; k++ {
		w := rng.IntN(a.FreqMaskBands + 1)
		b0 := rng.IntN(max(1, bands-w+1))
		clear(x[b0*frames : min(bands, b0+w)*frames])
	}
}
