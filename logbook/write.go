package logbook

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strings"
)

// level returns x for reports: finite, rounded to 0.01 dB, silence as
// [LevelFloorDB].
func level(x float64) float64 {
	if math.IsInf(x, -1) || x < LevelFloorDB {
		return LevelFloorDB
	}
	return math.Round(x*100) / 100
}

// rounded returns a copy of lb's events and classes with report rounding.
func (lb *Logbook) rounded() *Logbook {
	c := *lb
	c.Events = append([]Event(nil), lb.Events...)
	for i := range c.Events {
		e := &c.Events[i]
		e.LAeq, e.LAFmax, e.SEL = level(e.LAeq), level(e.LAFmax), level(e.SEL)
		e.MeanProb = math.Round(e.MeanProb*1e4) / 1e4
		e.StartSec, e.EndSec = math.Round(e.StartSec*1e3)/1e3, math.Round(e.EndSec*1e3)/1e3
	}
	c.PerClass = append([]ClassLevel(nil), lb.PerClass...)
	for i := range c.PerClass {
		p := &c.PerClass[i]
		p.LAeq = level(p.LAeq)
		p.EnergyShare = math.Round(p.EnergyShare*1e5) / 1e5
		p.Seconds = math.Round(p.Seconds*1e3) / 1e3
	}
	s := &c.Summary
	s.LAeq, s.LAFmax, s.LAF10, s.LAF50, s.LAF90 = level(s.LAeq), level(s.LAFmax), level(s.LAF10), level(s.LAF50), level(s.LAF90)
	return &c
}

// jsonLogbook is the JSON form: the caution and the level reference first.
type jsonLogbook struct {
	Caution        string `json:"caution"`
	LevelReference string `json:"level_reference"`
	*Logbook
}

// WriteJSON writes the logbook as indented JSON; its first fields are the
// caution and the level reference.
func (lb *Logbook) WriteJSON(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(jsonLogbook{Caution: Caution, LevelReference: lb.Calibration.Reference(), Logbook: lb.rounded()})
}

// CSVHeader is the column row of [Logbook.WriteCSV].
var CSVHeader = []string{"start_s", "end_s", "class", "mean_probability", "windows", "laeq_db", "lafmax_db", "sel_db"}

// WriteCSV writes one row per event under comment lines ("# …") that
// carry the caution, the level reference and the recording's summary, so
// a reader of the file alone knows what the numbers are. The rows are
// written by encoding/csv; read them back with a csv.Reader whose Comment
// is '#'.
func (lb *Logbook) WriteCSV(w io.Writer) error {
	r := lb.rounded()
	s := r.Summary
	lines := []string{
		"pipit noise logbook of " + lb.Input,
		"CAUTION: " + Caution,
		"levels: " + lb.Calibration.Reference() + "; A-weighted; F = 125 ms time weighting",
		fmt.Sprintf("recording: %.1f s, LAeq %.2f dB, LAFmax %.2f dB, LAF90 (background) %.2f dB, LAF10 %.2f dB", s.Seconds, s.LAeq, s.LAFmax, s.LAF90, s.LAF10),
	}
	for _, p := range r.PerClass {
		lines = append(lines, fmt.Sprintf("class %s: %.1f s, %d events, LAeq %.2f dB, %.1f %% of the sound energy", p.Class, p.Seconds, p.Events, p.LAeq, 100*p.EnergyShare))
	}
	for _, l := range lines {
		if _, err := fmt.Fprintf(w, "# %s\n", strings.ReplaceAll(l, "\n", " ")); err != nil {
			return err
		}
	}
	cw := csv.NewWriter(w)
	cw.Write(CSVHeader)
	for _, e := range r.Events {
		cw.Write([]string{fmt.Sprintf("%.3f", e.StartSec), fmt.Sprintf("%.3f", e.EndSec), e.Class, fmt.Sprintf("%.4f", e.MeanProb),
			fmt.Sprint(e.Windows), fmt.Sprintf("%.2f", e.LAeq), fmt.Sprintf("%.2f", e.LAFmax), fmt.Sprintf("%.2f", e.SEL)})
	}
	cw.Flush()
	return cw.Error()
}

// FastLevels returns up to maxPoints (time s, LAF dB) pairs of the F level
// with the calibration applied: the F level at the end of each tick, or,
// when there are more ticks than points, the highest tick-end level in
// each run of ticks (so short peaks stay visible).
func (lb *Logbook) FastLevels(maxPoints int) (t, l []float64) {
	ticks := lb.Levels.Ticks
	if len(ticks) == 0 || maxPoints < 1 {
		return nil, nil
	}
	per := (len(ticks) + maxPoints - 1) / maxPoints
	for i := 0; i < len(ticks); i += per {
		best := 0.0
		for _, tk := range ticks[i:min(i+per, len(ticks))] {
			best = math.Max(best, tk.FastEnd)
		}
		t = append(t, (float64(i)+float64(min(per, len(ticks)-i))/2)*lb.Levels.TickSec)
		l = append(l, level(10*math.Log10(best)+lb.Calibration.OffsetDB))
	}
	return t, l
}
