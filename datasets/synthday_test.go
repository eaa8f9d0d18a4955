package datasets

import (
	"encoding/csv"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/pipit-audio/pipit/features"
)

// TestSynthDayLevels: the day's events sit where the truth file says, at
// the levels it says. The levels were set with the frequency-domain A
// weighting (ALevelDBFS); here the time-domain meter reads each event span
// back, expecting the event's level plus the background's energy.
func TestSynthDayLevels(t *testing.T) {
	dir := t.TempDir()
	wav, truth := filepath.Join(dir, "day.wav"), filepath.Join(dir, "day.truth.csv")
	cfg := DayConfig{Seconds: 90, Seed: 3}
	events, err := SynthDay(wav, truth, cfg)
	if err != nil {
		t.Fatal(err)
	}
	if len(events) < 4 {
		t.Fatalf("%d events in 90 s", len(events))
	}
	f, _ := os.Open(truth)
	rows, err := csv.NewReader(f).ReadAll()
	f.Close()
	if err != nil || len(rows) != len(events)+1 || rows[0][2] != "class" {
		t.Fatalf("truth file: %d rows (%v), want %d", len(rows), err, len(events)+1)
	}
	r, err := features.OpenWAV(wav)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if math.Abs(r.Seconds()-90) > 1e-9 {
		t.Errorf("day of %.3f s, want 90", r.Seconds())
	}
	m, _ := features.NewMeter(features.MeterConfig{RateHz: r.RateHz(), TickSec: 0.01})
	s := features.LevelSeries{RateHz: r.RateHz(), TickSec: m.Config().TickSec}
	buf := make([]float32, 4096)
	for {
		n, err := r.Read(buf)
		s.Ticks = m.Push(s.Ticks, buf[:n])
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	s.Ticks = m.Flush(s.Ticks)
	cfg.defaults()
	bgE := math.Pow(10, cfg.BackgroundDB/10) // −50 dB by default
	for i, e := range events {
		want := 10 * math.Log10(math.Pow(10, e.LevelDB/10)+bgE)
		got := s.Leq(e.StartSec, e.EndSec)
		lv, _ := strconv.ParseFloat(rows[i+1][3], 64)
		// 0.3 dB: two implementations of A weighting (time vs frequency
		// domain, 0.23 dB apart at most below 5 kHz at 16 kHz) and 16-bit rounding.
		if math.Abs(got-want) > 0.3 || math.Abs(lv-e.LevelDB) > 0.006 {
			t.Errorf("event %d (%s, %.1f–%.1f s): LAeq %.2f dB, synthesised %.2f dB (+ background: %.2f)", i, e.Class, e.StartSec, e.EndSec, got, e.LevelDB, want)
		}
	}
	// Between events only the background: its Leq is BackgroundDB.
	if got := s.Leq(0, events[0].StartSec-0.1); math.Abs(got-cfg.BackgroundDB) > 0.5 {
		t.Errorf("background before the first event: LAeq %.2f dB, want %.1f", got, cfg.BackgroundDB)
	}
}
