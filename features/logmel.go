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
	cfg      Config
	window   []float64 // (Window)
	filters  []MelFilter
	fft      *fourier.FFT // any length; the reference path
	fast     *fft.Real    // power-of-two lengths; nil otherwise
	buf      []float64    // (FFTSize) windowed, zero-padded frame
	coeffs   []complex128 // (FFTSize/2+1)
	spec     []float64    // (FFTSize/2+1) power or magnitude
	offset   int          // (FFTSize-Window)/2
	res      map[int]*Resampler
	blk      *blockPath // Lanes frames at a time (AVX2); nil: one frame at a time
	frameBuf []float32  // (Window) and (Bands): the frame-path scratch of computeInto
	colBuf   []float32
}

// blockPath holds what [Extractor.Compute] needs to run fft.Lanes frames
// at a time through [fft.Block] and [fft.Bands] in float32.
type blockPath struct {
	fft     *fft.Block
	bands   *fft.Bands
	pow     []float32            // (FFTSize/2+1, Lanes) spectra
	mel     []float32            // (Bands, Lanes) band sums
	scratch [fft.Lanes][]float32 // (FFTSize) frames at the signal's edges, zero-padded
	frames  [fft.Lanes][]float32 // the frames of one block
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
	e := &Extractor{
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
	}
	if fft.BlockSIMD() {
		e.blk = newBlockPath(e)
	}
	return e, nil
}

// newBlockPath returns the block path for e's settings, or nil when the
// FFT size is not a power of two of at least 16.
func newBlockPath(e *Extractor) *blockPath {
	n := e.cfg.FFTSize
	padded := make([]float64, n) // the window at its offset, zeros around it
	copy(padded[e.offset:], e.window)
	blk, err := fft.NewBlock(n, padded)
	if err != nil {
		return nil
	}
	starts := make([]int, len(e.filters))
	weights := make([][]float64, len(e.filters))
	for m, f := range e.filters {
		starts[m], weights[m] = f.Start, f.Weights
	}
	b := &blockPath{fft: blk, bands: fft.NewBands(starts, weights),
		pow: make([]float32, (n/2+1)*fft.Lanes), mel: make([]float32, e.cfg.Bands*fft.Lanes)}
	for l := range b.scratch {
		b.scratch[l] = make([]float32, n)
	}
	return b
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
	e.computeInto(out, samples, nf)
	return tensor.New(tensor.WithShape(e.cfg.Bands, nf), tensor.WithBacking(out)), nil
}

// ComputeInto is [Extractor.Compute] into dst, which must hold at least
// Bands·Frames(len(samples)) values; it returns the frame count and
// allocates nothing after its first call (the training loop calls it for
// every augmented window).
func (e *Extractor) ComputeInto(dst, samples []float32) (int, error) {
	nf := e.cfg.Frames(len(samples))
	if nf == 0 {
		return 0, fmt.Errorf("features: signal of %d samples is shorter than one %d-sample window", len(samples), e.cfg.WindowSamples)
	}
	if len(dst) < e.cfg.Bands*nf {
		return 0, fmt.Errorf("features: ComputeInto: destination of %d values, need %d·%d", len(dst), e.cfg.Bands, nf)
	}
	e.computeInto(dst[:e.cfg.Bands*nf], samples, nf)
	return nf, nil
}

func (e *Extractor) computeInto(out, samples []float32, nf int) {
	e.computeRange(out, nf, samples, 0, 0, nf)
}

// computeRange computes frames first … first+nf−1 of a signal of which
// seg holds the samples from absolute index segStart on, writing frame
// first+j to column j of out, (Bands, stride). Samples before segStart or
// after seg are taken as zeros, so seg must hold every sample of the
// signal that those frames cover. With segStart = first = 0 and seg the
// whole signal it is [Extractor.Compute]; [MatrixStream] calls it on
// stretches of a longer signal, with first a multiple of fft.Lanes, so that
// every frame goes through the same lane of the same code.
func (e *Extractor) computeRange(out []float32, stride int, seg []float32, segStart, first, nf int) {
	pad := 0
	if e.cfg.PadEnds {
		pad = e.cfg.WindowSamples / 2
	}
	// Frame first+j starts at (first+j)·hop − pad in the signal, at
	// j·hop − pad' in seg with pad' below.
	pad += segStart - first*e.cfg.HopSamples
	if e.blk != nil {
		e.computeBlocks(out, stride, seg, nf, pad)
		return
	}
	if len(e.frameBuf) != e.cfg.WindowSamples {
		e.frameBuf, e.colBuf = make([]float32, e.cfg.WindowSamples), make([]float32, e.cfg.Bands)
	}
	samples := seg
	frame, col := e.frameBuf, e.colBuf
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
			out[m*stride+t] = v
		}
	}
}

// computeBlocks is [Extractor.Compute] fft.Lanes frames at a time: the
// same frames, window, spectrum, bands and compression, with the
// spectrum and band sums in float32 (TestBlockPathMatchesFramePath). out
// is (Bands, stride); frame t starts at sample t·hop − pad of samples.
func (e *Extractor) computeBlocks(out []float32, stride int, samples []float32, nf, pad int) {
	b := e.blk
	n := e.cfg.FFTSize
	magnitude := e.cfg.Spectrum == SpectrumMagnitude
	scale := 1.0
	if e.cfg.Log == LogDecibel {
		scale = 10 / math.Ln10
	}
	clip := e.cfg.Log == LogDecibel && e.cfg.FloorBelowPeakDB > 0
	for t0 := 0; t0 < nf; t0 += fft.Lanes {
		for l := range b.frames {
			// The FFT buffer of frame t starts offset samples before it.
			start := (t0+l)*e.cfg.HopSamples - pad - e.offset
			if t0+l < nf && e.offset == 0 && start >= 0 && start+n <= len(samples) {
				b.frames[l] = samples[start : start+n]
				continue
			}
			s := b.scratch[l]
			clear(s)
			if t0+l < nf { // the window's span, clipped to the signal
				lo, hi := max(start+e.offset, 0), min(start+e.offset+e.cfg.WindowSamples, len(samples))
				if lo < hi {
					copy(s[lo-start:], samples[lo:hi])
				}
			}
			b.frames[l] = s
		}
		b.fft.Power(b.pow, &b.frames, magnitude)
		b.bands.Apply(b.mel, b.pow)
		fft.LogScaled(b.mel, e.cfg.LogFloor, scale)
		if clip {
			fft.ClipBelowPeak(b.mel, e.cfg.FloorBelowPeakDB)
		}
		lanes := min(fft.Lanes, nf-t0)
		for m := 0; m < e.cfg.Bands; m++ {
			copy(out[m*stride+t0:m*stride+t0+lanes], b.mel[m*fft.Lanes:])
		}
	}
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
