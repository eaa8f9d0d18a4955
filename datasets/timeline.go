package datasets

import (
	"fmt"

	"github.com/pipit-audio/pipit/features"
)

// Recording is a long recording cut into model windows for a timeline.
type Recording struct {
	Inputs    []float32 // (N, Bands, Frames) normalised model inputs
	StartSec  []float64 // (N) window start times
	WindowSec float64   // seconds one window covers
	N         int
}

// CutRecording extracts the log-mel of a (resampling it when needed),
// cuts it into windows per w (short recordings padded as in training) and
// normalises them with stats (nil: none).
func CutRecording(a *features.Audio, fe features.Config, w WindowConfig, stats *features.BandStats) (*Recording, error) {
	if err := w.Check(); err != nil {
		return nil, err
	}
	ex, err := features.NewExtractor(fe)
	if err != nil {
		return nil, err
	}
	x := a.Samples
	if a.SampleRateHz != fe.SampleRateHz {
		r, err := features.NewResampler(a.SampleRateHz, fe.SampleRateHz)
		if err != nil {
			return nil, err
		}
		x = r.Resample(nil, x)
	}
	x = padClip(x, w.Samples(fe), w.Pad)
	m, err := ex.Compute(x)
	if err != nil {
		return nil, err
	}
	M, T, F := fe.Bands, m.Shape()[1], w.Frames
	mat := m.Data().([]float32)
	starts := w.Starts(T)
	rec := &Recording{N: len(starts), Inputs: make([]float32, len(starts)*M*F),
		WindowSec: float64(w.Samples(fe)) / float64(fe.SampleRateHz)}
	hop := float64(fe.HopSamples) / float64(fe.SampleRateHz)
	for k, s := range starts {
		dst := rec.Inputs[k*M*F : (k+1)*M*F]
		for b := 0; b < M; b++ {
			n := copy(dst[b*F:(b+1)*F], mat[b*T+s:min((b+1)*T, b*T+s+F)])
			clear(dst[b*F+n : (b+1)*F])
		}
		if stats != nil {
			stats.Apply(dst)
		}
		rec.StartSec = append(rec.StartSec, float64(s)*hop)
	}
	return rec, nil
}

// Segment is a run of consecutive windows with the same most likely class.
type Segment struct {
	StartSec float64 `json:"start_s"`
	EndSec   float64 `json:"end_s"`
	Class    int     `json:"class"`
	Label    string  `json:"label"`
	MeanProb float64 `json:"mean_probability"` // mean top-class probability over the segment's windows
	Windows  int     `json:"windows"`
}

// Segments merges windows (probabilities probs (N, L), starts in seconds,
// each lasting windowSec) into segments of equal arg-max class. A
// segment ends where the next one's first window starts (the last one at
// its last window's end), so segments tile the recording without overlap.
// It is [Segmenter] over all windows at once.
func Segments(probs []float32, classes []string, starts []float64, windowSec float64) ([]Segment, error) {
	L := len(classes)
	if L == 0 || len(probs) != L*len(starts) {
		return nil, fmt.Errorf("datasets: %d probabilities for %d windows of %d classes", len(probs), len(starts), L)
	}
	sg := NewSegmenter(classes, windowSec)
	for i, s := range starts {
		sg.Add(probs[i*L:(i+1)*L], s)
	}
	return sg.Segments(), nil
}

// Segmenter builds the segments of [Segments] one window at a time, so a
// time line of any length keeps only its segments.
type Segmenter struct {
	classes   []string
	windowSec float64
	segs      []Segment
}

// NewSegmenter returns a Segmenter for windows of windowSec seconds over
// classes.
func NewSegmenter(classes []string, windowSec float64) *Segmenter {
	return &Segmenter{classes: classes, windowSec: windowSec}
}

// Add takes the next window: its class probabilities p (one per class)
// and its start in seconds. It panics when len(p) is not the number of
// classes.
func (sg *Segmenter) Add(p []float32, start float64) {
	if len(p) != len(sg.classes) || len(p) == 0 {
		panic(fmt.Sprintf("datasets: Segmenter.Add: %d probabilities for %d classes", len(p), len(sg.classes)))
	}
	best := 0
	for c := range p {
		if p[c] > p[best] {
			best = c
		}
	}
	segs := sg.segs
	if n := len(segs); n > 0 && segs[n-1].Class == best {
		last := &segs[n-1]
		last.MeanProb += (float64(p[best]) - last.MeanProb) / float64(last.Windows+1)
		last.Windows++
		last.EndSec = start + sg.windowSec
		return
	}
	if n := len(segs); n > 0 {
		segs[n-1].EndSec = start
	}
	sg.segs = append(segs, Segment{StartSec: start, EndSec: start + sg.windowSec, Class: best, Label: sg.classes[best], MeanProb: float64(p[best]), Windows: 1})
}

// Segments returns the segments so far (the Segmenter's own slice).
func (sg *Segmenter) Segments() []Segment { return sg.segs }
