package logbook

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
)

// TestScoreHandWorked checks both scores on a small case worked by hand
// from the definitions of Mesaros, Heittola and Virtanen (2016).
func TestScoreHandWorked(t *testing.T) {
	ref := []Span{{0.0, 2.0, "saw"}, {3.0, 5.0, "alarm"}, {6.0, 7.0, "saw"}}
	det := []Span{{0.1, 1.9, "saw"}, {3.4, 5.0, "alarm"}, {6.0, 6.5, "alarm"}, {8.0, 9.0, "saw"}}
	// Events, onset tolerance 0.2 s: saw 0.1 matches saw 0.0 (TP); alarm 3.4
	// is 0.4 s late (FP, and the alarm at 3.0 is missed); alarm 6.0 has no
	// alarm reference there (FP); saw 8.0 none (FP). TP 1, FP 3, FN 2:
	// P = 1/4, R = 1/3, F1 = 2·(1/4)(1/3)/(1/4+1/3) = 2/7.
	e := ScoreEvents(ref, det, 0.2)
	if e.TP != 1 || e.FP != 3 || e.FN != 2 || math.Abs(e.F1-2.0/7) > 1e-12 || math.Abs(e.Precision-0.25) > 1e-12 {
		t.Errorf("events: %+v, want TP 1 FP 3 FN 2, F1 2/7", e)
	}
	// With 0.5 s the alarm at 3.4 matches too: TP 2, FP 2, FN 1 → P 1/2,
	// R 2/3, F1 = 4/7.
	if e := ScoreEvents(ref, det, 0.5); e.TP != 2 || math.Abs(e.F1-4.0/7) > 1e-12 {
		t.Errorf("events at 0.5 s: %+v, want TP 2, F1 4/7", e)
	}
	// Segments of 1 s over 10 s. Reference active: saw in 0,1; alarm in
	// 3,4; saw in 6. Detected: saw 0,1; alarm 3,4; alarm 6; saw 8.
	// Segment 6: FP 1 (alarm) and FN 1 (saw) → one substitution; segment 8:
	// FP 1 → one insertion. TP 4, FP 2, FN 1: P 4/6, R 4/5, F1 = 8/11;
	// N = 5, ER = (1 + 0 + 1)/5 = 0.4.
	s := ScoreSegments(ref, det, 1, 10)
	if s.Segments != 10 || s.TP != 4 || s.FP != 2 || s.FN != 1 || math.Abs(s.F1-8.0/11) > 1e-12 || math.Abs(s.ErrorRate-0.4) > 1e-12 {
		t.Errorf("segments: %+v, want TP 4 FP 2 FN 1, F1 8/11, ER 0.4", s)
	}
}

func TestDecideHysteresis(t *testing.T) {
	// Two classes; probability of class 0 per window.
	p0 := []float32{0.2, 0.7, 0.45, 0.45, 0.3, 0.55, 0.5625}
	probs := make([]float32, 0, 2*len(p0))
	for _, p := range p0 {
		probs = append(probs, p, 1-p)
	}
	// Without hysteresis (on = off = 0.5) the arg-max wins every window.
	if got := Decide(probs, 2, EventConfig{OnProb: 0.5, OffProb: 0.5}); !equalInts(got, []int{1, 0, 1, 1, 1, 0, 0}) {
		t.Errorf("no hysteresis: %v", got)
	}
	// on 0.6, off 0.4: class 0 starts at 0.7 and holds through 0.45, 0.45,
	// drops at 0.3 (class 1 has 0.7 ≥ 0.6), class 1 holds at 0.45 (≥ 0.4), and
	// the last window's 0.5625 for class 0 does not end it (1 has 0.4375).
	if got := Decide(probs, 2, EventConfig{OnProb: 0.6, OffProb: 0.4}); !equalInts(got, []int{1, 0, 0, 0, 1, 1, 1}) {
		t.Errorf("hysteresis: %v", got)
	}
	// on 0.8: nothing reaches it except nothing → all none except where ≥ 0.8.
	if got := Decide(probs, 2, EventConfig{OnProb: 0.8, OffProb: 0.8}); !equalInts(got, []int{1, -1, -1, -1, -1, -1, -1}) {
		t.Errorf("high threshold: %v", got)
	}
}

func equalInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// toneRecording writes a 30 s recording at rate: silence except a 1 kHz
// sine of amplitude 0.1 (−23.01 dB re full scale) from 10 s to 20 s.
func toneRecording(t *testing.T, rate int) string {
	t.Helper()
	x := make([]float32, 30*rate)
	for i := 10 * rate; i < 20*rate; i++ {
		x[i] = float32(0.1 * math.Sin(2*math.Pi*1000*float64(i)/float64(rate)))
	}
	p := filepath.Join(t.TempDir(), "tone.wav")
	if err := features.WriteWAVFile(p, x, rate); err != nil {
		t.Fatal(err)
	}
	return p
}

// oracle classifies a window as "tone" when its centre lies in 10..20 s,
// else "quiet", with probability 0.9; it reads the window times from the
// windows' own energy, so it needs no side channel: a window of the tone
// has a far higher mean normalised value.
func oracle(fe features.Config, w datasets.WindowConfig) Classifier {
	return func(x []float32, n int) ([]float32, error) {
		size := fe.Bands * w.Frames
		out := make([]float32, 0, 2*n)
		for k := 0; k < n; k++ {
			var sum float64
			// The middle frame of the window, all bands: its mean log-mel.
			for b := 0; b < fe.Bands; b++ {
				sum += float64(x[k*size+b*w.Frames+w.Frames/2])
			}
			if sum/float64(fe.Bands) > -60 {
				out = append(out, 0.1, 0.9)
			} else {
				out = append(out, 0.9, 0.1)
			}
		}
		return out, nil
	}
}

func testConfig() Config {
	fe := features.DefaultConfig()
	w := datasets.WindowConfig{Frames: 61, Overlap: 0.5, Pad: datasets.PadZeros}
	return Config{FrontEnd: fe, Window: w, Classes: []string{"quiet", "tone"}, Classify: oracle(fe, w),
		Events: EventConfig{Background: "quiet"}}
}

// TestRunToneEvent: a 10 s tone in silence becomes one event near 10–20 s
// whose LAeq is the tone's −23.01 dB, whose SEL adds 10·lg(duration), and
// whose share of the energy is all of it; at 48 kHz (resampled for the
// classifier) the same.
func TestRunToneEvent(t *testing.T) {
	for _, rate := range []int{16000, 48000} {
		lb, err := Run(toneRecording(t, rate), testConfig())
		if err != nil {
			t.Fatal(err)
		}
		if len(lb.Events) != 1 {
			t.Fatalf("%d Hz: %d events %+v, want 1", rate, len(lb.Events), lb.Events)
		}
		e := lb.Events[0]
		// Boundaries within one window hop (0.5 s) of the truth.
		if math.Abs(e.StartSec-10) > lb.HopSec || math.Abs(e.EndSec-20) > lb.HopSec || e.Class != "tone" {
			t.Errorf("%d Hz: event %+v, want tone 10–20 s", rate, e)
		}
		// The event spans only tone and silence: its energy is that of the
		// tone (−23.0103 dB) over the overlap T of the event with 10–20 s, so
		// SEL = −23.0103 + 10·lg T, and LAeq = SEL − 10·lg(duration).
		overlap := math.Min(20, e.EndSec) - math.Max(10, e.StartSec)
		if want := -23.0103 + 10*math.Log10(overlap); math.Abs(e.SEL-want) > 0.02 || math.Abs(e.LAeq-(e.SEL-10*math.Log10(e.EndSec-e.StartSec))) > 0.01 {
			t.Errorf("%d Hz: SEL %.3f dB (want %.3f), LAeq %.3f over %.2f s", rate, e.SEL, want, e.LAeq, e.EndSec-e.StartSec)
		}
		// LAFmax of a steady tone equals its level (within the F ripple).
		if math.Abs(e.LAFmax+23.0103) > 0.05 {
			t.Errorf("%d Hz: LAFmax %.3f, want −23.01", rate, e.LAFmax)
		}
		// The whole recording: 10 s of tone in 30 s → LAeq = −23.01 − 10·lg 3.
		if want := -23.0103 - 10*math.Log10(3); math.Abs(lb.Summary.LAeq-want) > 0.02 || math.Abs(lb.Summary.Seconds-30) > 1e-9 {
			t.Errorf("%d Hz: recording LAeq %.3f over %.1f s, want %.3f over 30", rate, lb.Summary.LAeq, lb.Summary.Seconds, want)
		}
		var share, secs float64
		for _, c := range lb.PerClass {
			share += c.EnergyShare
			secs += c.Seconds
			if want := (math.Min(20, e.EndSec) - math.Max(10, e.StartSec)) / 10; c.Class == "tone" && math.Abs(c.EnergyShare-want) > 0.002 {
				t.Errorf("%d Hz: tone has %.4f of the energy, want %.4f (its share of the tone's time)", rate, c.EnergyShare, want)
			}
		}
		if math.Abs(share-1) > 1e-9 || math.Abs(secs-30) > 1e-9 {
			t.Errorf("%d Hz: shares sum to %.6f over %.3f s, want 1 over 30 s", rate, share, secs)
		}
	}
}

// TestMinDurationAndCalibration: an event shorter than the minimum is
// dropped; the offset calibration shifts every level by the offset; a
// calibrator recording of SoX's 1 kHz sine at amplitude 0.5 (−9.03 dB re
// full scale) stated at 94 dB gives an offset of 94 + 9.03 dB.
func TestMinDurationAndCalibration(t *testing.T) {
	path := toneRecording(t, 16000)
	cfg := testConfig()
	cfg.Events.MinEventSec = 12
	lb, err := Run(path, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if len(lb.Events) != 0 {
		t.Errorf("a 10 s event survived a 12 s minimum: %+v", lb.Events)
	}
	base, _ := Run(path, testConfig())
	cfg = testConfig()
	cfg.Calibration, _ = OffsetCalibration(120)
	cal, err := Run(path, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if d := cal.Events[0].LAeq - base.Events[0].LAeq; math.Abs(d-120) > 1e-9 || math.Abs(cal.Summary.LAF90-base.Summary.LAF90-120) > 1e-9 && !math.IsInf(base.Summary.LAF90, -1) {
		t.Errorf("offset 120 dB shifted the event by %.3f dB", d)
	}
	c, err := CalibratorCalibration(filepath.Join("..", "testdata", "levels", "level_cal1k_m9.wav"), 94)
	if err != nil {
		t.Fatal(err)
	}
	// 20·lg 0.5 − 3.0103 = −9.0309 dB (SoX "RMS lev dB" of the file: −9.03).
	if math.Abs(c.MeasuredDBFS+9.0309) > 0.01 || math.Abs(c.OffsetDB-(94+9.0309)) > 0.01 || c.Kind != CalCalibrator {
		t.Errorf("calibrator: %+v, want measured −9.03 dB FS, offset 103.03 dB", c)
	}
	if !strings.Contains(c.Reference(), "level_cal1k_m9.wav") || !strings.Contains(c.Reference(), "94.0") {
		t.Errorf("reference %q does not name the calibrator file and level", c.Reference())
	}
	// A tone that comes and goes (10 s in 30 s) is no steady calibrator tone.
	if _, err := CalibratorCalibration(path, 94); err == nil || !strings.Contains(err.Error(), "not a steady calibrator tone") {
		t.Errorf("an unsteady recording as calibrator: %v", err)
	}
	if _, err := CalibratorCalibration(filepath.Join("..", "testdata", "levels", "level_sine1k_m20.wav"), 94); err == nil {
		t.Error("a 1 s recording was accepted as a calibrator recording")
	}
	if _, err := OffsetCalibration(math.NaN()); err == nil {
		t.Error("NaN offset accepted")
	}
}

// TestWriters: both files open with the caution and the level reference;
// the CSV reads back with encoding/csv (comments '#').
func TestWriters(t *testing.T) {
	lb, err := Run(toneRecording(t, 16000), testConfig())
	if err != nil {
		t.Fatal(err)
	}
	var c, j bytes.Buffer
	if err := lb.WriteCSV(&c); err != nil {
		t.Fatal(err)
	}
	if err := lb.WriteJSON(&j); err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitN(c.String(), "\n", 4)
	if !strings.HasPrefix(lines[1], "# CAUTION: ") || !strings.Contains(lines[1], "not a certified sound level meter") || !strings.Contains(lines[2], "full scale") {
		t.Errorf("CSV head:\n%s", strings.Join(lines[:3], "\n"))
	}
	r := csv.NewReader(&c)
	r.Comment = '#'
	rows, err := r.ReadAll()
	if err != nil || len(rows) != 2 || strings.Join(rows[0], ",") != strings.Join(CSVHeader, ",") || rows[1][2] != "tone" {
		t.Errorf("CSV rows %v (%v)", rows, err)
	}
	var m map[string]any
	if err := json.Unmarshal(j.Bytes(), &m); err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(j.String(), "{\n  \"caution\": ") || !strings.Contains(m["level_reference"].(string), "full scale") {
		t.Errorf("JSON head: %.200s", j.String())
	}
	// Silence before the tone: a level of −∞ is written as the floor.
	if s := m["summary"].(map[string]any); s["laf90_db"].(float64) != LevelFloorDB {
		t.Errorf("LAF90 of a mostly silent recording: %v, want %v", s["laf90_db"], LevelFloorDB)
	}
	tt, ll := lb.FastLevels(100)
	if len(tt) != 100 || len(ll) != 100 || math.Abs(ll[50]+23.01) > 0.1 {
		t.Errorf("FastLevels: %d points, level at 15 s %.2f dB", len(tt), ll[50])
	}
}

func TestRunErrors(t *testing.T) {
	cfg := testConfig()
	if _, err := Run(filepath.Join(t.TempDir(), "missing.wav"), cfg); err == nil || !strings.Contains(err.Error(), "missing.wav") {
		t.Errorf("missing file: %v", err)
	}
	cfg.Events.OffProb = 0.9
	if _, err := Run("x.wav", cfg); err == nil {
		t.Error("off above on accepted")
	}
	cfg = testConfig()
	cfg.Events.Background = "nope"
	if _, err := Run("x.wav", cfg); err == nil {
		t.Error("unknown background class accepted")
	}
}
