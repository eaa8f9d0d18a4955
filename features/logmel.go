package features

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/dsp/fourier"
	"gorgonia.org/tensor"

	"github.com/pipit-audio/pipit/internal/fft"
)

// Extractor computes log-mel frames for one [Config]. It holds the window,
// the FFT plan, the filterbank and work buffers, so after construction
// [Extractor.Frame] allocates nothing. An Extractor is not safe for
// concurrent use; make one per goroutine.
type Extractor struct {
	cfg     Config
	window  []float64 // (Window)
	filters []MelFilter
	fft     *fourier.FFT // any length; the reference path
	fast    *fft.Real    // power-of-two lengths; nil otherwise
	buf     []float64    // (FFTSize) windowed, zero-padded frame
	coeffs  []complex128 // (FFTSize/2+1)
	spec    []float64    // (FFTSize/2+1) power or magnitude
	offset  int          // (FFTSize-Window)/2
	res     map[int]*Resampler
}

// NewExtractor validates cfg and builds an Extractor. Errors wrap
// [ErrBadConfig].
func NewExtractor(cfg Config) (*Extractor, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	w, err := WindowFunc(cfg.Window, cfg.WindowSamples, !cfg.SymmetricWindow)
	if err != nil {
		return nil, err
	}
	nb := cfg.FFTSize/2 + 1
	fast, _ := fft.NewReal(cfg.FFTSize) // nil unless a power of two
	return &Extractor{
		fast:    fast,
		cfg:     cfg,
		window:  w,
		filters: MelFilterbank(cfg.MelScale, cfg.Bands, cfg.FFTSize, cfg.SampleRateHz, cfg.FMinHz, cfg.FMaxHz, cfg.MelNorm == MelNormArea),
		fft:     fourier.NewFFT(cfg.FFTSize),
		buf:     make([]float64, cfg.FFTSize),
		coeffs:  make([]complex128, nb),
		spec:    make([]float64, nb),
		offset:  (cfg.FFTSize - cfg.WindowSamples) / 2,
		res:     map[int]*Resampler{},
	}, nil
}

// Config returns the extractor's configuration.
func (e *Extractor) Config() Config { return e.cfg }

// Frame computes the log-mel values of one frame into dst (len Bands).
// frame holds Window samples at the configured rate. It does not
// allocate; it panics if len(frame) != Window or len(dst) != Bands.
func (e *Extractor) Frame(dst, frame []float32) {
	if len(frame) != e.cfg.WindowSamples || len(dst) != e.cfg.Bands {
		panic(fmt.Sprintf("features: Extractor.Frame: len(frame)=%d len(dst)=%d, want %d and %d", len(frame), len(dst), e.cfg.WindowSamples, e.cfg.Bands))
	}
	buf := e.buf
	if e.offset > 0 { // zero padding around the window; otherwise all overwritten
		clear(buf)
	}
	win := buf[e.offset : e.offset+len(e.window)]
	for i, w := range e.window {
		win[i] = float64(frame[i]) * w
	}
	if e.fast != nil {
		e.fast.Power(e.spec, buf)
		if e.cfg.Spectrum == SpectrumMagnitude {
			for k, p := range e.spec {
				e.spec[k] = math.Sqrt(p)
			}
		}
	} else {
		e.fft.Coefficients(e.coeffs, buf)
		if e.cfg.Spectrum == SpectrumPower {
			for k, c := range e.coeffs {
				re, im := real(c), imag(c)
				e.spec[k] = re*re + im*im
			}
		} else {
			for k, c := range e.coeffs {
				e.spec[k] = math.Hypot(real(c), imag(c))
			}
		}
	}
	floor := e.cfg.LogFloor
	db := e.cfg.Log == LogDecibel
	peak := math.Inf(-1)
	for m, f := range e.filters {
		var v float64
		s := e.spec[f.Start : f.Start+len(f.Weights)]
		for i, w := range f.Weights {
			v += w * s[i]
		}
		if !(v > floor) { // also maps NaN to the floor
			v = floor
		}
		v = lnPositive(v)
		if db {
			v *= 10 / math.Ln10
			if v > peak {
				peak = v
			}
		}
		dst[m] = float32(v)
	}
	if db && e.cfg.FloorBelowPeakDB > 0 {
		lo := float32(peak - e.cfg.FloorBelowPeakDB)
		for m, v := range dst {
			if v < lo {
				dst[m] = lo
			}
		}
	}
}

// Spectrum returns the power or magnitude spectrum (FFTSize/2+1 bins)
// computed by the last call to [Extractor.Frame]; the slice is reused.
func (e *Extractor) Spectrum() []float64 { return e.spec }

// Filters returns the extractor's mel filterbank (not to be modified).
func (e *Extractor) Filters() []MelFilter { return e.filters }

// Compute returns the log-mel matrix of samples, which must already be at
// the configured rate, as a (Bands, Frames) float32 tensor: element (m, t)
// is band m of frame t at index m·Frames + t. Frames is [Config.Frames] of
// len(samples); a signal shorter than one window is an error.
func (e *Extractor) Compute(samples []float32) (*tensor.Dense, error) {
	nf := e.cfg.Frames(len(samples))
	if nf == 0 {
		return nil, fmt.Errorf("features: signal of %d samples is shorter than one %d-sample window", len(samples), e.cfg.WindowSamples)
	}
	out := make([]float32, e.cfg.Bands*nf)
	frame := make([]float32, e.cfg.WindowSamples)
	col := make([]float32, e.cfg.Bands)
	pad := 0
	if e.cfg.PadEnds {
		pad = e.cfg.WindowSamples / 2
	}
	for t := 0; t < nf; t++ {
		start := t*e.cfg.HopSamples - pad
		if start >= 0 && start+len(frame) <= len(samples) {
			e.Frame(col, samples[start:start+len(frame)])
		} else {
			for i := range frame {
				j := start + i
				if j >= 0 && j < len(samples) {
					frame[i] = samples[j]
				} else {
					frame[i] = 0
				}
			}
			e.Frame(col, frame)
		}
		for m, v := range col {
			out[m*nf+t] = v
		}
	}
	return tensor.New(tensor.WithShape(e.cfg.Bands, nf), tensor.WithBacking(out)), nil
}

// ComputeAudio resamples a to the configured rate when needed (see
// [Resampler]) and returns [Extractor.Compute] of the result.
func (e *Extractor) ComputeAudio(a *Audio) (*tensor.Dense, error) {
	x := a.Samples
	if a.SampleRateHz != e.cfg.SampleRateHz {
		r, ok := e.res[a.SampleRateHz]
		if !ok {
			var err error
			r, err = NewResampler(a.SampleRateHz, e.cfg.SampleRateHz)
			if err != nil {
				return nil, err
			}
			e.res[a.SampleRateHz] = r
		}
		x = r.Resample(nil, x)
	}
	return e.Compute(x)
}
