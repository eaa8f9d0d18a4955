package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func tinyCorpus(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	if _, err := run(t, "synth", "--out", dir, "--clips-per-class", "6", "--folds", "3", "--seconds", "1.5"); err != nil {
		t.Fatal(err)
	}
	return dir
}

func TestTrainOnFolderCorpusAndCrossValidate(t *testing.T) {
	dir := tinyCorpus(t)
	os.Remove(filepath.Join(dir, "manifest.csv")) // the folder form: one sub-folder per class
	model := filepath.Join(t.TempDir(), "m.pnet")
	out, err := run(t, "train", "--data", dir, "--out", model, "--epochs", "2", "--folds", "3", "--cache", "", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var rep trainReport
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if rep.Epochs != 2 || rep.TrainWindows == 0 {
		t.Errorf("report %+v", rep)
	}
	for _, p := range []string{model, model + ".log.csv", model + ".curves.png"} {
		if _, err := os.Stat(p); err != nil {
			t.Errorf("missing output %s", p)
		}
	}
	log, _ := os.ReadFile(model + ".log.csv")
	if n := strings.Count(string(log), "\n"); n != 3 {
		t.Errorf("log has %d lines, want header + 2 epochs", n)
	}
	if h, _, _ := strings.Cut(string(log), "\n"); h != "epoch,train_loss,train_window_accuracy,val_fold_loss,val_fold_window_accuracy,learning_rate,seconds,windows_per_second,val_fold_seconds,best_so_far" {
		t.Errorf("log header %q", h)
	}
	// eval on the folder corpus re-derives the same folds from the model.
	out, err = run(t, "eval", "--model", model, "--data", dir, "--cache", "", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var ev evalReport
	json.Unmarshal([]byte(out), &ev)
	if ev.Accuracy != rep.TestAccuracy || ev.NumClips != 16 {
		t.Errorf("eval accuracy %.3f on %d clips, train reported %.3f on the 16-clip test fold", ev.Accuracy, ev.NumClips, rep.TestAccuracy)
	}
	out, err = run(t, "train", "--data", dir, "--out", model, "--epochs", "1", "--folds", "3", "--cache", "", "--cross-validate", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var cv cvReport
	json.Unmarshal([]byte(out), &cv)
	if len(cv.Folds) != 3 || cv.TestAccuracy.Mean <= 0 {
		t.Errorf("cross-validation report %+v", cv)
	}
	for k := 0; k < 3; k++ {
		if _, err := os.Stat(model + ".fold" + string(rune('0'+k))); err != nil {
			t.Errorf("fold model %d missing", k)
		}
	}
}

func TestTrainCorpusErrors(t *testing.T) {
	dir := tinyCorpus(t)
	manifest := filepath.Join(dir, "manifest.csv")
	model := filepath.Join(t.TempDir(), "m.pnet")
	// A corrupt WAV fails the run, naming the file, unless --skip-bad.
	bad := filepath.Join(dir, "rain", "rain_002.wav")
	os.WriteFile(bad, []byte("RIFF\x00\x00\x00\x00WAVE"), 0o644)
	if _, err := run(t, "train", "--data", manifest, "--out", model, "--epochs", "1", "--cache", ""); err == nil || !strings.Contains(err.Error(), "rain_002.wav") {
		t.Errorf("corrupt WAV: error %v", err)
	}
	if _, err := os.Stat(model); err == nil {
		t.Error("a failed run wrote a model")
	}
	out, err := run(t, "train", "--data", manifest, "--out", model, "--epochs", "1", "--cache", "", "--skip-bad", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var rep trainReport
	json.Unmarshal([]byte(out), &rep)
	if rep.SkippedClips != 1 {
		t.Errorf("skipped %d clips, want 1", rep.SkippedClips)
	}
	// A manifest row naming a missing file, or an unknown fold.
	m2 := filepath.Join(dir, "m2.csv")
	os.WriteFile(m2, []byte("path,label,fold\nrain/rain_000.wav,rain,0\nnope.wav,saw,1\n"), 0o644)
	if _, err := run(t, "train", "--data", m2, "--out", model); err == nil || !strings.Contains(err.Error(), "nope.wav") || !strings.Contains(err.Error(), "line 3") {
		t.Errorf("missing file: error %v", err)
	}
	if _, err := run(t, "train", "--data", manifest, "--out", model, "--test-fold", "7"); err == nil || !strings.Contains(err.Error(), "test-fold") {
		t.Errorf("unknown test fold: error %v", err)
	}
}

func TestQuantizeWithQAT(t *testing.T) {
	dir := tinyCorpus(t)
	manifest := filepath.Join(dir, "manifest.csv")
	model := filepath.Join(t.TempDir(), "m.pnet")
	if _, err := run(t, "train", "--data", manifest, "--out", model, "--epochs", "2", "--cache", ""); err != nil {
		t.Fatal(err)
	}
	q := strings.TrimSuffix(model, ".pnet") + ".pq8"
	out, err := run(t, "quantize", "--model", model, "--calib", manifest, "--out", q, "--cache", "", "--qat-epochs", "1", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var rep quantizeReport
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if rep.QATEpochs != 1 || rep.TestWindows == 0 {
		t.Errorf("report %+v", rep)
	}
	out, err = run(t, "eval", "--model", q, "--data", manifest, "--cache", "", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var ev evalReport
	json.Unmarshal([]byte(out), &ev)
	if ev.Accuracy != rep.Int8Accuracy {
		t.Errorf("eval of the QAT model %.3f, quantize reported %.3f", ev.Accuracy, rep.Int8Accuracy)
	}
}
