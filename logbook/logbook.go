// Package logbook turns a long recording into a noise logbook: the events
// a classifier finds (smoothed by hysteresis and a minimum duration,
// adjacent windows of one class merged), each with its A-weighted levels
// (LAeq, LAFmax, SEL), and per recording the overall LAeq, the LAeq and
// share of the sound energy of each class, and the background as the F
// level exceeded 90 % of the time (LAF90). The recording is read block by
// block; memory grows only with the per-window probabilities and the
// 0.1 s level ticks (tens of bytes per second of audio).
//
// Levels are in dB relative to digital full scale unless a [Calibration]
// gives the offset to sound pressure level. They are indicative: pipit is
// not a certified sound level meter, and where noise exposure, planning
// conditions or compliance are at stake, certified instruments, local
// regulations and licensed practice decide ([Caution]).
//
// The package knows nothing of networks: the caller passes a [Classifier].
package logbook

import (
	"errors"
	"fmt"
	"io"
	"math"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
)

// Caution is the notice every logbook output carries.
const Caution = "Levels are indicative. pipit is not a certified sound level meter; " +
	"where noise exposure, planning conditions or compliance are at stake, " +
	"certified instruments, local regulations and licensed practice decide."

// Unassigned labels time that belongs to no logged event and not to the
// background class.
const Unassigned = "unassigned"

// Classifier returns the class probabilities (n, L) of n model windows
// (n × Bands × Frames values, as [datasets.Recording].Inputs).
type Classifier func(windows []float32, n int) ([]float32, error)

// EventConfig says how window decisions become events.
//
// A window's decision is a class or none. The current class c persists
// while its probability stays at or above OffProb (hysteresis); otherwise
// the most likely class is taken if its probability reaches OnProb, else
// none. Runs of windows with the same class are merged into one event
// (time of a window: its share of the time line around its centre, one
// window hop wide). Events shorter than MinEventSec are dropped (their
// time becomes [Unassigned]). Windows of Background are not logged as
// events; they count as the background class.
type EventConfig struct {
	OnProb      float64 // default 0.5
	OffProb     float64 // default OnProb (no hysteresis); must not exceed OnProb
	MinEventSec float64 // default 0: every run is an event
	Background  string  // class not logged as events (e.g. "quiet"); "" for none
}

// Config configures [Run].
type Config struct {
	FrontEnd features.Config
	Window   datasets.WindowConfig
	Stats    *features.BandStats
	Classes  []string
	Classify Classifier
	Events   EventConfig
	// Calibration maps dB re full scale to the reported levels; the zero
	// value reports dB re full scale.
	Calibration Calibration
	TickSec     float64 // level tick, s; default 0.1
	Batch       int     // windows per Classify call; default 64
}

// Event is one logbook entry.
type Event struct {
	StartSec float64 `json:"start_s"`
	EndSec   float64 `json:"end_s"`
	Class    string  `json:"class"`
	MeanProb float64 `json:"mean_probability"` // mean probability of Class over the event's windows
	Windows  int     `json:"windows"`
	LAeq     float64 `json:"laeq_db"`
	LAFmax   float64 `json:"lafmax_db"`
	SEL      float64 `json:"sel_db"` // A-weighted sound exposure level, re 1 s
}

// ClassLevel is one class's part of the recording.
type ClassLevel struct {
	Class       string  `json:"class"`
	Seconds     float64 `json:"seconds"`
	Events      int     `json:"events"`
	LAeq        float64 `json:"laeq_db"`      // over the class's own time
	EnergyShare float64 `json:"energy_share"` // fraction of the recording's A-weighted sound energy
}

// Summary holds the levels of the whole recording.
type Summary struct {
	Seconds float64 `json:"seconds"`
	LAeq    float64 `json:"laeq_db"`
	LAFmax  float64 `json:"lafmax_db"`
	LAF10   float64 `json:"laf10_db"`
	LAF50   float64 `json:"laf50_db"`
	LAF90   float64 `json:"laf90_db"` // the background
}

// Logbook is the result of [Run].
type Logbook struct {
	Input       string       `json:"input"`
	RateHz      int          `json:"rate_hz"`
	Calibration Calibration  `json:"calibration"`
	Summary     Summary      `json:"summary"`
	PerClass    []ClassLevel `json:"per_class"`
	Events      []Event      `json:"events"`
	Windows     int          `json:"windows"`
	WindowSec   float64      `json:"window_seconds"`
	HopSec      float64      `json:"hop_seconds"`
	EventConfig EventConfig  `json:"event_rules"`
	// Levels is the A-weighted level series in dB re full scale (before
	// the calibration offset), for plots and further spans.
	Levels *features.LevelSeries `json:"-"`
	// Probs (Windows, len(Classes)) and Starts (Windows) are the raw
	// window outputs.
	Probs   []float32 `json:"-"`
	Starts  []float64 `json:"-"`
	Classes []string  `json:"classes"`
	// Timeline tiles the recording with labelled spans: events,
	// background and unassigned time.
	Timeline []Span `json:"-"`
}

// Span is a labelled stretch of time.
type Span struct {
	StartSec, EndSec float64
	Class            string
}

func (c *Config) defaults() error {
	e := &c.Events
	if e.OnProb == 0 {
		e.OnProb = 0.5
	}
	if e.OffProb == 0 {
		e.OffProb = e.OnProb
	}
	if c.TickSec == 0 {
		c.TickSec = 0.1
	}
	if c.Batch == 0 {
		c.Batch = 64
	}
	switch {
	case !(e.OnProb > 0 && e.OnProb <= 1) || !(e.OffProb > 0 && e.OffProb <= e.OnProb):
		return fmt.Errorf("logbook: probabilities on %g, off %g: want 0 < off ≤ on ≤ 1", e.OnProb, e.OffProb)
	case !(e.MinEventSec >= 0):
		return fmt.Errorf("logbook: minimum event duration %g s", e.MinEventSec)
	case len(c.Classes) < 2 || c.Classify == nil:
		return errors.New("logbook: need at least two classes and a classifier")
	case c.Batch < 1:
		return fmt.Errorf("logbook: batch of %d windows", c.Batch)
	}
	if e.Background != "" && classIndex(c.Classes, e.Background) < 0 {
		return fmt.Errorf("logbook: background class %q is not one of %v", e.Background, c.Classes)
	}
	return nil
}

func classIndex(classes []string, name string) int {
	for i, c := range classes {
		if c == name {
			return i
		}
	}
	return -1
}

// blockSamples is the read block of Run.
const blockSamples = 1 << 15

// Run reads the WAV file at path block by block, meters it (A weighting
// at the file's own rate), resamples it to the front end's rate when they
// differ, classifies its windows and returns the logbook. Errors name the
// file.
func Run(path string, cfg Config) (*Logbook, error) {
	if err := cfg.defaults(); err != nil {
		return nil, err
	}
	r, err := features.OpenWAV(path)
	if err != nil {
		return nil, err
	}
	defer r.Close()
	meter, err := features.NewMeter(features.MeterConfig{RateHz: r.RateHz(), Weighting: features.WeightingA, TickSec: cfg.TickSec})
	if err != nil {
		return nil, fmt.Errorf("logbook: %s: %w", path, err)
	}
	var rs *features.ResampleStream
	if r.RateHz() != cfg.FrontEnd.SampleRateHz {
		res, err := features.NewResampler(r.RateHz(), cfg.FrontEnd.SampleRateHz)
		if err != nil {
			return nil, fmt.Errorf("logbook: %s: %w", path, err)
		}
		rs = res.NewStream()
	}
	ws, err := datasets.NewWindowStream(cfg.FrontEnd, cfg.Window, cfg.Stats)
	if err != nil {
		return nil, err
	}
	lb := &Logbook{Input: path, RateHz: r.RateHz(), Calibration: cfg.Calibration, Classes: cfg.Classes,
		WindowSec: ws.WindowSec(), HopSec: ws.HopSec(), EventConfig: cfg.Events,
		Levels: &features.LevelSeries{RateHz: r.RateHz(), TickSec: meter.Config().TickSec}}
	L := len(cfg.Classes)
	var pending []float32 // windows not yet classified
	classify := func(final bool) error {
		n := len(pending) / (cfg.FrontEnd.Bands * cfg.Window.Frames)
		if n == 0 || (!final && n < cfg.Batch) {
			return nil
		}
		p, err := cfg.Classify(pending, n)
		if err != nil {
			return err
		}
		if len(p) != n*L {
			return fmt.Errorf("logbook: classifier returned %d values for %d windows of %d classes", len(p), n, L)
		}
		lb.Probs = append(lb.Probs, p...)
		pending = pending[:0]
		return nil
	}
	buf := make([]float32, blockSamples)
	var rbuf []float32
	for {
		n, rerr := r.Read(buf)
		if rerr != nil && rerr != io.EOF {
			return nil, rerr
		}
		x := buf[:n]
		lb.Levels.Ticks = meter.Push(lb.Levels.Ticks, x)
		if rs != nil {
			rbuf = rs.Push(rbuf[:0], x)
			if rerr == io.EOF {
				rbuf = rs.Flush(rbuf)
			}
			x = rbuf
		}
		pending, lb.Starts = ws.Push(pending, lb.Starts, x)
		if rerr == io.EOF {
			pending, lb.Starts = ws.Flush(pending, lb.Starts)
		}
		if err := classify(rerr == io.EOF); err != nil {
			return nil, fmt.Errorf("logbook: %s: %w", path, err)
		}
		if rerr == io.EOF {
			break
		}
	}
	lb.Levels.Ticks = meter.Flush(lb.Levels.Ticks)
	lb.Windows = len(lb.Starts)
	lb.build(cfg.Events, r.Seconds())
	return lb, nil
}

// Decide returns each window's class index after the hysteresis of e
// (−1: none). probs is (N, L).
func Decide(probs []float32, L int, e EventConfig) []int {
	n := len(probs) / L
	out := make([]int, n)
	state := -1
	for k := 0; k < n; k++ {
		p := probs[k*L : (k+1)*L]
		if state < 0 || float64(p[state]) < e.OffProb {
			best := 0
			for c := range p {
				if p[c] > p[best] {
					best = c
				}
			}
			state = -1
			if float64(p[best]) >= e.OnProb {
				state = best
			}
		}
		out[k] = state
	}
	return out
}

// build derives events, the time line, per-class levels and the summary.
func (lb *Logbook) build(e EventConfig, seconds float64) {
	L := len(lb.Classes)
	dec := Decide(lb.Probs, L, e)
	bg := classIndex(lb.Classes, e.Background)
	// Each window owns the time from half a hop before its centre to half
	// a hop after it; the first starts at 0, the last runs to the end.
	// Boundaries are snapped to the level ticks, so an event's reported
	// span is exactly the span its levels are computed over.
	tick := lb.Levels.TickSec
	snap := func(x float64) float64 { return math.Round(x/tick) * tick }
	own := func(k int) (float64, float64) {
		c := lb.Starts[k] + lb.WindowSec/2
		a, b := c-lb.HopSec/2, c+lb.HopSec/2
		if k == 0 {
			a = 0
		}
		if k == len(lb.Starts)-1 {
			b = math.Max(b, seconds)
		}
		return snap(math.Max(0, a)), snap(math.Min(b, math.Max(seconds, lb.WindowSec)))
	}
	var spans []Span
	for k := 0; k < len(dec); {
		j := k
		for j+1 < len(dec) && dec[j+1] == dec[k] {
			j++
		}
		a, _ := own(k)
		_, b := own(j)
		label := Unassigned
		switch {
		case dec[k] >= 0 && dec[k] == bg:
			label = e.Background
		case dec[k] >= 0:
			label = lb.Classes[dec[k]]
			var sum float64
			for i := k; i <= j; i++ {
				sum += float64(lb.Probs[i*L+dec[k]])
			}
			if b-a >= e.MinEventSec {
				lb.Events = append(lb.Events, Event{StartSec: a, EndSec: b, Class: label, MeanProb: sum / float64(j-k+1), Windows: j - k + 1})
			} else {
				label = Unassigned
			}
		}
		if n := len(spans); n > 0 && spans[n-1].Class == label {
			spans[n-1].EndSec = b
		} else {
			spans = append(spans, Span{a, b, label})
		}
		k = j + 1
	}
	lb.Timeline = spans
	off := lb.Calibration.OffsetDB
	for i := range lb.Events {
		ev := &lb.Events[i]
		ev.LAeq = lb.Levels.Leq(ev.StartSec, ev.EndSec) + off
		ev.LAFmax = lb.Levels.FastMax(ev.StartSec, ev.EndSec) + off
		ev.SEL = lb.Levels.SEL(ev.StartSec, ev.EndSec) + off
	}
	total, _ := lb.Levels.Energy(0, math.Inf(1))
	names := append(append([]string(nil), lb.Classes...), Unassigned)
	for _, name := range names {
		cl := ClassLevel{Class: name}
		var energy float64
		for _, s := range spans {
			if s.Class == name {
				en, sec := lb.Levels.Energy(s.StartSec, s.EndSec)
				energy += en
				cl.Seconds += sec
			}
		}
		for _, ev := range lb.Events {
			if ev.Class == name {
				cl.Events++
			}
		}
		if cl.Seconds == 0 {
			continue
		}
		cl.LAeq = features.DB(energy/cl.Seconds) + off
		if total > 0 {
			cl.EnergyShare = energy / total
		}
		lb.PerClass = append(lb.PerClass, cl)
	}
	all := math.Inf(1)
	lb.Summary = Summary{
		Seconds: lb.Levels.Seconds(),
		LAeq:    lb.Levels.Leq(0, all) + off,
		LAFmax:  lb.Levels.FastMax(0, all) + off,
		LAF10:   lb.Levels.Exceeded(0, all, 10) + off,
		LAF50:   lb.Levels.Exceeded(0, all, 50) + off,
		LAF90:   lb.Levels.Exceeded(0, all, 90) + off,
	}
}
