package features

import "fmt"

// Stream is a streaming log-mel extractor: it takes PCM at the configured
// rate in chunks of any size and emits each frame as soon as its last
// sample has arrived. The frames equal those of [Extractor.Compute] on the
// concatenated signal (the same code computes both), including the
// leading and, after [Stream.Flush], trailing zero padding when PadEnds is
// set. A Stream is not safe for concurrent use.
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
