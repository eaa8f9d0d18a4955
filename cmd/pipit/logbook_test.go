package main

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/logbook"
)

// TestLogbookScoredDay is the scored scenario: a model trained on the
// synthetic corpus writes the logbook of a generated 5-minute day at the
// yard, which is scored against the day's ground truth with the
// event-based (onset tolerance) and segment-based (1 s) metrics of Mesaros,
// Heittola and Virtanen (2016), and each detected event's LAeq is compared
// with the level its source was synthesised at. It trains a network
// (about 10 s on 2 cores) and is skipped with -short.
func TestLogbookScoredDay(t *testing.T) {
	if testing.Short() {
		t.Skip("trains a network; skipped with -short")
	}
	dir := t.TempDir()
	if _, err := run(t, "synth", "--out", filepath.Join(dir, "yard"), "--seed", "1"); err != nil {
		t.Fatal(err)
	}
	model := filepath.Join(dir, "model.pnet")
	if _, err := run(t, "train", "--data", filepath.Join(dir, "yard", "manifest.csv"), "--arch", "separable", "--out", model, "--cache", filepath.Join(dir, "cache")); err != nil {
		t.Fatal(err)
	}
	dayDir := filepath.Join(dir, "day")
	if _, err := run(t, "synth", "--out", dayDir, "--day", "300", "--seed", "7"); err != nil {
		t.Fatal(err)
	}
	wav := filepath.Join(dayDir, "yard-day.wav")
	out, err := run(t, "logbook", "--model", model, wav, "--background", "quiet", "--overlap", "0.75", "--offset-db", "100", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var rep logbookReport
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	ref := readTruth(t, filepath.Join(dayDir, "yard-day.truth.csv"))
	var det []logbook.Span
	for _, e := range rep.Events {
		det = append(det, logbook.Span{StartSec: e.StartSec, EndSec: e.EndSec, Class: e.Class})
	}
	for _, tol := range []float64{0.25, 0.5, 1} {
		s := logbook.ScoreEvents(ref.spans, det, tol)
		t.Logf("events, onset ±%.2f s: %d reference, %d detected, P %.3f R %.3f F1 %.3f", tol, len(ref.spans), len(det), s.Precision, s.Recall, s.F1)
	}
	ev := logbook.ScoreEvents(ref.spans, det, 0.5)
	seg := logbook.ScoreSegments(ref.spans, det, 1, rep.Summary.Seconds)
	t.Logf("segments of 1 s: P %.3f R %.3f F1 %.3f ER %.3f", seg.Precision, seg.Recall, seg.F1, seg.ErrorRate)
	if ev.F1 < 0.7 || seg.F1 < 0.85 {
		t.Errorf("event F1 %.3f (onset ±0.5 s, want ≥ 0.7), segment F1 %.3f (want ≥ 0.85)", ev.F1, seg.F1)
	}
	// Levels: a matched event's LAeq (offset 100 dB given) against the
	// level synthesised (its source's A-weighted Leq, dB re full scale)
	// plus the background (−50 dB, adding at most 0.07 dB). A detected
	// event covers its reference only partly, or with some background, so
	// allow 2 dB; the median error must be far smaller.
	var errs []float64
	for i, j := range ev.Matches {
		if j < 0 {
			continue
		}
		want := 10*math.Log10(math.Pow(10, ref.levels[j]/10)+math.Pow(10, -5)) + 100
		d := rep.Events[i].LAeq - want
		errs = append(errs, math.Abs(d))
		if math.Abs(d) > 2 {
			t.Errorf("event %d (%s at %.1f s): LAeq %.2f dB, synthesised %.2f dB", i, rep.Events[i].Class, rep.Events[i].StartSec, rep.Events[i].LAeq, want)
		}
	}
	med := median(errs)
	t.Logf("levels of %d matched events: median |LAeq − synthesised| %.2f dB, worst %.2f dB; LAF90 %.2f dB (background −50 + 100)", len(errs), med, maxOf(errs), rep.Summary.LAF90)
	if med > 0.5 || math.Abs(rep.Summary.LAF90-50) > 1.5 {
		t.Errorf("median level error %.2f dB (want ≤ 0.5); LAF90 %.2f (want 50 ± 1.5)", med, rep.Summary.LAF90)
	}
	if !strings.Contains(rep.LevelReference, "offset +100.00 dB given") || rep.Caution != logbook.Caution {
		t.Errorf("report does not say how it is calibrated: %q", rep.LevelReference)
	}
	for _, p := range []string{rep.CSV, rep.JSON, rep.PNG} {
		if fi, err := os.Stat(p); err != nil || fi.Size() == 0 {
			t.Errorf("%s: %v", p, err)
		}
	}
}

type truth struct {
	spans  []logbook.Span
	levels []float64
}

func readTruth(t *testing.T, path string) truth {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil || len(rows) < 2 {
		t.Fatalf("%s: %d rows, %v", path, len(rows), err)
	}
	var tr truth
	for _, r := range rows[1:] {
		a, _ := strconv.ParseFloat(r[0], 64)
		b, _ := strconv.ParseFloat(r[1], 64)
		l, _ := strconv.ParseFloat(r[3], 64)
		tr.spans = append(tr.spans, logbook.Span{StartSec: a, EndSec: b, Class: r[2]})
		tr.levels = append(tr.levels, l)
	}
	return tr
}

func median(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), x...)
	for i := range s {
		for j := i + 1; j < len(s); j++ {
			if s[j] < s[i] {
				s[i], s[j] = s[j], s[i]
			}
		}
	}
	return s[len(s)/2]
}

func maxOf(x []float64) float64 {
	m := 0.0
	for _, v := range x {
		m = math.Max(m, v)
	}
	return m
}
