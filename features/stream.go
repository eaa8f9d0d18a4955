package features

import (
	"fmt"
	"slices"

	"github.com/pipit-audio/pipit/internal/fft"
)

// Stream is a streaming log-mel extractor: it takes PCM at the configured
// rate in chunks of any size and emits each frame as soon as its last
// sample has arrived. Each frame is [Extractor.Frame] (float64) of the
// concatenated signal, including the leading and, after [Stream.Flush],
// trailing zero padding when PadEnds is set: the frames of
// [Extractor.Compute] on its frame path, and within about 1e-4 dB of them
// where Compute takes the AVX2 block path (TestBlockPathMatchesFramePath);
// [MatrixStream] equals Compute bit for bit. A Stream is not safe for
// concurrent use.
type Stream struct {
	ex      *Extractor
	buf     []float32 // (Window) samples of the frame being filled
	filled  int       // samples in buf
	skip    int       // samples to drop before filling (hop > window)
	seen    int       // real samples pushed
	emitted int       // frames emitted
}

// NewStream returns a Stream for cfg; errors wrap [ErrBadConfig].
func NewStream(cfg Config) (*Stream, error) {
	ex, err := NewExtractor(cfg)
	if err != nil {
		return nil, err
	}
	s := &Stream{ex: ex, buf: make([]float32, cfg.WindowSamples)}
	s.Reset()
	return s, nil
}

// Reset starts a new signal.
func (s *Stream) Reset() {
	s.filled, s.skip, s.seen, s.emitted = 0, 0, 0, 0
	if s.ex.cfg.PadEnds {
		for i := 0; i < s.ex.cfg.WindowSamples/2; i++ {
			s.push(0)
		}
	}
}

// Push adds pcm to the stream and appends every completed frame's Bands
// values to dst, returning the extended slice. It allocates only when dst
// lacks capacity.
func (s *Stream) Push(dst, pcm []float32) []float32 {
	for _, v := range pcm {
		s.seen++
		if s.push(v) {
			dst = s.emit(dst)
		}
	}
	return dst
}

// Flush ends the signal: with PadEnds set it feeds the trailing Window/2
// zeros, so that the total number of frames equals [Config.Frames] of all
// samples pushed, and appends the resulting frames to dst. Call
// [Stream.Reset] before pushing a new signal.
func (s *Stream) Flush(dst []float32) []float32 {
	if s.ex.cfg.PadEnds {
		want := s.ex.cfg.Frames(s.seen)
		for i := 0; i < s.ex.cfg.WindowSamples/2 && s.emitted < want; i++ {
			if s.push(0) {
				dst = s.emit(dst)
			}
		}
	}
	return dst
}

// push appends v to the frame buffer and reports whether a frame is due.
func (s *Stream) push(v float32) bool {
	if s.skip > 0 {
		s.skip--
		return false
	}
	s.buf[s.filled] = v
	s.filled++
	return s.filled == len(s.buf)
}

// emit computes the full frame in buf, appends it to dst and advances by
// one hop.
func (s *Stream) emit(dst []float32) []float32 {
	b := s.ex.cfg.Bands
	n := len(dst)
	if cap(dst)-n < b {
		grown := make([]float32, n, 2*cap(dst)+b)
		copy(grown, dst)
		dst = grown
	}
	dst = dst[:n+b]
	s.ex.Frame(dst[n:], s.buf)
	s.emitted++
	w, h := len(s.buf), s.ex.cfg.HopSamples
	if h >= w {
		s.filled, s.skip = 0, h-w
	} else {
		copy(s.buf, s.buf[h:])
		s.filled = w - h
	}
	return dst
}

// Emitted returns the number of frames emitted since the last Reset.
func (s *Stream) Emitted() int { return s.emitted }

// String describes the stream state (for debugging).
func (s *Stream) String() string {
	return fmt.Sprintf("features.Stream{seen: %d, emitted: %d}", s.seen, s.emitted)
}

// matrixStreamChunk is the most frames [MatrixStream] computes in one go
// (a multiple of fft.Lanes).
const matrixStreamChunk = 64

// MatrixStream gives the log-mel matrix of [Extractor.Compute] for a
// signal given in chunks, bit for bit: the same code computes the same
// frames in the same groups (on the AVX2 block path, fft.Lanes frames at a
// time in float32), on a buffer that keeps only the samples later frames
// still cover, so signals of any length pass through in bounded memory.
// Unlike [Stream], which computes each frame on its own in float64 as
// soon as it is complete, it may hold up to fft.Lanes − 1 complete frames
// until more samples or [MatrixStream.Flush] arrive. PCM must be at the
// configured rate. A MatrixStream is not safe for concurrent use.
type MatrixStream struct {
	ex      *Extractor
	buf     []float32 // signal samples from absolute index base on
	base    int       // absolute index of buf[0]
	seen    int       // samples pushed
	emitted int       // frames emitted (frame index of the next one)
	out     []float32 // (Bands, matrixStreamChunk) scratch
}

// NewMatrixStream returns a MatrixStream for cfg; errors wrap
// [ErrBadConfig].
func NewMatrixStream(cfg Config) (*MatrixStream, error) {
	ex, err := NewExtractor(cfg)
	if err != nil {
		return nil, err
	}
	return &MatrixStream{ex: ex, out: make([]float32, cfg.Bands*matrixStreamChunk)}, nil
}

// Push adds pcm and appends the frames it completes to dst, frame-major
// (Bands values per frame, frame t being column t of Compute's matrix),
// returning the extended slice.
func (s *MatrixStream) Push(dst, pcm []float32) []float32 {
	s.buf = append(s.buf, pcm...)
	s.seen += len(pcm)
	c := s.ex.cfg
	pad := 0
	if c.PadEnds {
		pad = c.WindowSamples / 2
	}
	// Frames t with t·hop − pad + Window ≤ seen have all their samples.
	ready := 0
	if s.seen+pad >= c.WindowSamples {
		ready = 1 + (s.seen+pad-c.WindowSamples)/c.HopSamples
	}
	// Whole groups of lanes only, so that every frame keeps its lane.
	if n := (ready - s.emitted) / fft.Lanes * fft.Lanes; n > 0 {
		dst = s.emit(dst, n)
	}
	return dst
}

// Flush ends the signal and appends its remaining frames, so that the
// frames emitted since [NewMatrixStream] are [Config.Frames] of all
// samples pushed (none for a signal shorter than one window, which
// Compute refuses).
func (s *MatrixStream) Flush(dst []float32) []float32 {
	if n := s.ex.cfg.Frames(s.seen) - s.emitted; n > 0 {
		dst = s.emit(dst, n)
	}
	return dst
}

// Emitted returns the number of frames emitted so far.
func (s *MatrixStream) Emitted() int { return s.emitted }

// Samples returns the number of samples pushed so far.
func (s *MatrixStream) Samples() int { return s.seen }

// emit computes the next n frames into dst and drops the samples that no
// later frame covers.
func (s *MatrixStream) emit(dst []float32, n int) []float32 {
	c := s.ex.cfg
	B := c.Bands
	for n > 0 {
		k := min(n, matrixStreamChunk)
		s.ex.computeRange(s.out, matrixStreamChunk, s.buf, s.base, s.emitted, k)
		at := len(dst)
		dst = slices.Grow(dst, k*B)[:at+k*B]
		for j := 0; j < k; j++ {
			col := dst[at+j*B : at+(j+1)*B]
			for m := range col {
				col[m] = s.out[m*matrixStreamChunk+j]
			}
		}
		s.emitted += k
		n -= k
	}
	pad := 0
	if c.PadEnds {
		pad = c.WindowSamples / 2
	}
	if keep := s.emitted*c.HopSamples - pad; keep > s.base {
		drop := min(keep-s.base, len(s.buf))
		m := copy(s.buf, s.buf[drop:])
		s.buf = s.buf[:m]
		s.base += drop
	}
	return dst
}
