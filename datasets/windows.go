package datasets

import (
	"fmt"
	"math"

	"github.com/pipit-audio/pipit/features"
)

// Padding of clips shorter than one model window ([WindowConfig].Pad).
const (
	PadZeros  = "zeros"  // append silence
	PadRepeat = "repeat" // repeat the clip from its start until long enough
)

// WindowConfig says how clips are cut into model inputs.
//
// A window is Frames consecutive log-mel frames. Windows start every
// HopFrames() = max(1, round(Frames·(1−Overlap))) frames, so a clip of T
// frames (T ≥ Frames) gives 1 + ⌊(T − Frames)/HopFrames⌋ windows, window k
// starting at frame k·HopFrames (at k·HopFrames·hop/rate seconds); frames
// after the last whole window are not used. A clip shorter than one window
// is first padded in the sample domain to [WindowConfig.Samples] samples,
// with zeros or by repetition, and gives one window; [Load] refuses clips
// shorter than [MinClipSamples], a quarter of a window.
type WindowConfig struct {
	Frames  int     `json:"frames"`
	Overlap float64 `json:"overlap"` // in [0, 1); 0, 0.25, 0.5, 0.75 are the usual
	Pad     string  `json:"pad"`     // PadZeros or PadRepeat
}

// Check validates w.
func (w WindowConfig) Check() error {
	switch {
	case w.Frames < 1 || w.Frames > 1<<16:
		return corpusErr("window of %d frames", w.Frames)
	case !(w.Overlap >= 0 && w.Overlap < 1):
		return corpusErr("window overlap %g outside [0, 1)", w.Overlap)
	case w.Pad != PadZeros && w.Pad != PadRepeat:
		return corpusErr("window padding %q (want %q or %q)", w.Pad, PadZeros, PadRepeat)
	}
	return nil
}

// HopFrames returns the distance between window starts in frames.
func (w WindowConfig) HopFrames() int {
	return max(1, int(math.Round(float64(w.Frames)*(1-w.Overlap))))
}

// Starts returns the first frame of each window of a clip with total frames.
func (w WindowConfig) Starts(total int) []int {
	if total <= w.Frames {
		return []int{0}
	}
	hop := w.HopFrames()
	n := 1 + (total-w.Frames)/hop
	s := make([]int, n)
	for k := range s {
		s[k] = k * hop
	}
	return s
}

// Samples returns the samples one window covers under the front end fe:
// (Frames−1)·hop + window (without centring; with centring the first and
// last half windows are padding and (Frames−1)·hop samples suffice).
func (w WindowConfig) Samples(fe features.Config) int {
	if fe.PadEnds {
		return (w.Frames - 1) * fe.HopSamples
	}
	return (w.Frames-1)*fe.HopSamples + fe.WindowSamples
}

// padClip extends x to at least n samples per w.Pad.
func padClip(x []float32, n int, pad string) []float32 {
	if len(x) >= n {
		return x
	}
	out := make([]float32, n)
	copy(out, x)
	if pad == PadRepeat && len(x) > 0 {
		for i := len(x); i < n; i++ {
			out[i] = x[i%len(x)]
		}
	}
	return out
}

// String describes w.
func (w WindowConfig) String() string {
	return fmt.Sprintf("%d frames, %.0f%% overlap, %s padding", w.Frames, 100*w.Overlap, w.Pad)
}
