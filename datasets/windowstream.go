package datasets

import (
	"slices"

	"github.com/pipit-audio/pipit/features"
)

// WindowStream cuts a recording given in PCM chunks into the same
// normalised model windows as [CutRecording] gives for the whole
// recording, bit for bit (its frames come from [features.MatrixStream]),
// keeping only the samples and frames the next window needs, so
// recordings of any length pass through in bounded memory. PCM must be at
// the front end's rate. It is not safe for concurrent use.
type WindowStream struct {
	fe    features.Config
	w     WindowConfig
	stats *features.BandStats
	st    *features.MatrixStream
	need  int       // samples one window covers (w.Samples(fe))
	head  []float32 // the first need samples, for padding a short recording
	seen  int       // samples pushed
	fr    []float32 // frames from frame index base on, frame-major (F, M)
	base  int       // frame index of fr[0]
	total int       // frames produced
	next  int       // first frame of the next window
	count int       // windows emitted
	hop   int       // window hop in frames
}

// NewWindowStream returns a WindowStream for front end fe, windows w and
// normalisation stats (nil: none).
func NewWindowStream(fe features.Config, w WindowConfig, stats *features.BandStats) (*WindowStream, error) {
	if err := w.Check(); err != nil {
		return nil, err
	}
	st, err := features.NewMatrixStream(fe)
	if err != nil {
		return nil, err
	}
	return &WindowStream{fe: fe, w: w, stats: stats, st: st, need: w.Samples(fe), hop: w.HopFrames()}, nil
}

// WindowSec returns the seconds one window covers.
func (s *WindowStream) WindowSec() float64 {
	return float64(s.need) / float64(s.fe.SampleRateHz)
}

// HopSec returns the seconds between window starts.
func (s *WindowStream) HopSec() float64 {
	return float64(s.hop*s.fe.HopSamples) / float64(s.fe.SampleRateHz)
}

// Windows returns the number of windows emitted so far.
func (s *WindowStream) Windows() int { return s.count }

// Push adds pcm and appends every completed window — Bands × Frames
// values, band-major as in [Recording].Inputs — to dst and its start time
// in seconds to starts.
func (s *WindowStream) Push(dst []float32, starts []float64, pcm []float32) ([]float32, []float64) {
	if len(s.head) < s.need {
		s.head = append(s.head, pcm[:min(len(pcm), s.need-len(s.head))]...)
	}
	s.seen += len(pcm)
	s.fr = s.st.Push(s.fr, pcm)
	return s.cut(dst, starts)
}

// Flush ends the recording and appends the last windows. A recording
// shorter than one window is padded as [CutRecording] pads it (zeros or
// repetition) and gives one window.
func (s *WindowStream) Flush(dst []float32, starts []float64) ([]float32, []float64) {
	if s.seen < s.need {
		pad := padClip(s.head, s.need, s.w.Pad)[s.seen:]
		s.fr = s.st.Push(s.fr, pad)
	}
	s.fr = s.st.Flush(s.fr)
	return s.cut(dst, starts)
}

// cut emits the windows whose frames have all arrived and drops frames no
// later window needs.
func (s *WindowStream) cut(dst []float32, starts []float64) ([]float32, []float64) {
	M, F := s.fe.Bands, s.w.Frames
	s.total = s.base + len(s.fr)/M
	hopSec := float64(s.fe.HopSamples) / float64(s.fe.SampleRateHz)
	for s.next+F <= s.total {
		n := len(dst)
		dst = slices.Grow(dst, M*F)[:n+M*F]
		win := dst[n:]
		off := (s.next - s.base) * M
		for f := 0; f < F; f++ {
			frame := s.fr[off+f*M : off+(f+1)*M]
			for b, v := range frame {
				win[b*F+f] = v
			}
		}
		if s.stats != nil {
			s.stats.Apply(win)
		}
		starts = append(starts, float64(s.next)*hopSec)
		s.count++
		s.next += s.hop
	}
	if drop := s.next - s.base; drop > 0 {
		drop = min(drop, len(s.fr)/M)
		k := copy(s.fr, s.fr[drop*M:])
		s.fr = s.fr[:k]
		s.base += drop
	}
	return dst, starts
}
