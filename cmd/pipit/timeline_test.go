package main

import (
	"encoding/csv"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/datasets"
)

// TestTimelineOverlapFlag: an overlap outside [0, 1) is refused with a
// message naming the flag, before any file is read.
func TestTimelineOverlapFlag(t *testing.T) {
	for _, v := range []string{"-0.2", "1", "1.5", "NaN"} {
		_, err := run(t, "timeline", "--model", "no-such.pnet", "no-such.wav", "--overlap", v)
		if err == nil || !strings.Contains(err.Error(), "--overlap") {
			t.Errorf("--overlap %s: err %v, want one naming --overlap", v, err)
		}
	}
}

// TestTimelineCSVQuotesClassNames: a class name with a comma and a quote
// must not shift the columns of the time-line CSV (read back with
// encoding/csv, RFC 4180 quoting).
func TestTimelineCSVQuotesClassNames(t *testing.T) {
	dir := t.TempDir()
	if _, err := datasets.Synthesize(dir, datasets.SynthConfig{ClipsPerClass: 4, Folds: 3, Seed: 2}, nil); err != nil {
		t.Fatal(err)
	}
	in, err := os.Open(filepath.Join(dir, "manifest.csv"))
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(in).ReadAll()
	in.Close()
	if err != nil {
		t.Fatal(err)
	}
	odd := `saw, "big"`
	lab := -1
	for i, h := range rows[0] {
		if h == "label" {
			lab = i
		}
	}
	first := rows[1][lab]
	for _, r := range rows[1:] {
		if r[lab] == first {
			r[lab] = odd
		}
	}
	manifest := filepath.Join(dir, "odd.csv")
	f, err := os.Create(manifest)
	if err != nil {
		t.Fatal(err)
	}
	w := csv.NewWriter(f)
	w.WriteAll(rows)
	f.Close()
	model := filepath.Join(t.TempDir(), "m.pnet")
	if _, err := run(t, "train", "--data", manifest, "--out", model, "--epochs", "1", "--cache", ""); err != nil {
		t.Fatal(err)
	}
	wav := filepath.Join(dir, rows[1][0])
	prefix := filepath.Join(t.TempDir(), "tl")
	if _, err := run(t, "timeline", "--model", model, wav, "--out", prefix); err != nil {
		t.Fatal(err)
	}
	tf, err := os.Open(prefix + ".timeline.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer tf.Close()
	got, err := csv.NewReader(tf).ReadAll() // fails on rows of unequal length
	if err != nil {
		t.Fatalf("time-line CSV: %v", err)
	}
	found := false
	for _, h := range got[0] {
		found = found || h == odd
	}
	if !found || len(got) < 2 {
		t.Errorf("header %q lacks the class %q (or no rows)", got[0], odd)
	}
}
