package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/datasets"
)

// TestLogbookOverlapFlag: an overlap outside [0, 1) is refused with a
// message naming the flag, before any file is read.
func TestLogbookOverlapFlag(t *testing.T) {
	for _, v := range []string{"-0.2", "1", "1.5", "NaN"} {
		_, err := run(t, "logbook", "--model", "no-such.pnet", "no-such.wav", "--overlap", v)
		if err == nil || !strings.Contains(err.Error(), "--overlap") {
			t.Errorf("--overlap %s: err %v, want one naming --overlap", v, err)
		}
	}
}

// TestOutputsAppearTogether: when the last output of logbook, timeline or
// melspec cannot be put in place (a directory where the PNG goes), the
// command fails naming it and leaves none of its other outputs and no
// temporary file.
func TestOutputsAppearTogether(t *testing.T) {
	dir := t.TempDir()
	if _, err := datasets.Synthesize(filepath.Join(dir, "yard"), datasets.SynthConfig{ClipsPerClass: 4, Folds: 3, Seed: 3}, nil); err != nil {
		t.Fatal(err)
	}
	model := filepath.Join(dir, "m.pnet")
	if _, err := run(t, "train", "--data", filepath.Join(dir, "yard", "manifest.csv"), "--out", model, "--epochs", "1", "--cache", ""); err != nil {
		t.Fatal(err)
	}
	if _, err := run(t, "synth", "--out", filepath.Join(dir, "day"), "--day", "20", "--seed", "4"); err != nil {
		t.Fatal(err)
	}
	wav := filepath.Join(dir, "day", "yard-day.wav")
	out := filepath.Join(dir, "out")
	if err := os.Mkdir(out, 0o755); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		args   []string
		png    string
		others []string
	}{
		{[]string{"logbook", "--model", model, wav, "--out", filepath.Join(out, "lb")}, "lb.logbook.png", []string{"lb.logbook.csv", "lb.logbook.json"}},
		{[]string{"timeline", "--model", model, wav, "--out", filepath.Join(out, "tl")}, "tl.timeline.png", []string{"tl.timeline.csv"}},
		{[]string{"melspec", wav, "--out", filepath.Join(out, "mel")}, "mel.png", []string{"mel.csv"}},
	} {
		if err := os.Mkdir(filepath.Join(out, c.png), 0o755); err != nil {
			t.Fatal(err)
		}
		if _, err := run(t, c.args...); err == nil || !strings.Contains(err.Error(), c.png) {
			t.Errorf("%s: error %v, want one naming %s", c.args[0], err, c.png)
		}
		for _, o := range c.others {
			if _, err := os.Stat(filepath.Join(out, o)); !os.IsNotExist(err) {
				t.Errorf("%s failed but left %s (%v)", c.args[0], o, err)
			}
		}
	}
	ents, _ := os.ReadDir(out)
	if len(ents) != 3 {
		var names []string
		for _, e := range ents {
			names = append(names, e.Name())
		}
		t.Errorf("output folder holds %v, want only the three directories", names)
	}
}
