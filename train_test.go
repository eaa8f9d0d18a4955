package pipit

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
)

// smallCorpus writes a small synthetic timber-yard corpus (8 classes × 6
// clips, 3 folds) once per test and opens it.
func smallCorpus(t *testing.T) (*datasets.Corpus, string) {
	t.Helper()
	dir := t.TempDir()
	if _, err := datasets.Synthesize(dir, datasets.SynthConfig{ClipsPerClass: 6, Folds: 3, Seed: 3}, nil); err != nil {
		t.Fatal(err)
	}
	manifest := filepath.Join(dir, "manifest.csv")
	c, err := OpenCorpus(Data{Path: manifest}, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	return c, manifest
}

func smallTrain(out string) TrainConfig {
	r := DefaultRecipe()
	r.Epochs, r.Batch = 5, 16
	return TrainConfig{Arch: "separable", FrontEnd: features.DefaultConfig(), Overlap: 0.5, TestFold: "0", ValFold: "1", Recipe: r, Out: out, Log: true}
}

var errKilled = errors.New("killed (test)")

// killAfter returns an OnEpoch that fails after epoch n, as a run killed
// right after saving that epoch would stop.
func killAfter(n int) func([]nn.EpochStats) error {
	return func(h []nn.EpochStats) error {
		if len(h) == n {
			return errKilled
		}
		return nil
	}
}

func mustRead(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// logWithoutTimes drops the timing columns of a training log (seconds,
// windows per second), which differ between runs.
func logWithoutTimes(t *testing.T, path string) string {
	var rows []string
	for _, line := range strings.Split(strings.TrimSpace(string(mustRead(t, path))), "\n") {
		f := strings.Split(line, ",")
		rows = append(rows, strings.Join(append(f[:6:6], f[len(f)-1]), ","))
	}
	return strings.Join(rows, "\n")
}

// TestTrainKeepsOldModelAndCarriesOn is the re-run case of the robustness
// issue: a second run over a good model must not touch it unless asked,
// a run that dies leaves it as it was, and the interrupted run carried on
// ends bit-identical to a run never interrupted.
func TestTrainKeepsOldModelAndCarriesOn(t *testing.T) {
	c, _ := smallCorpus(t)
	dir := t.TempDir()
	out := filepath.Join(dir, "yard.pnet")
	old := smallTrain(out)
	old.Recipe.Epochs = 2
	if _, err := Train(c, old, nil); err != nil {
		t.Fatal(err)
	}
	good := mustRead(t, out)

	// Without --replace an existing model is refused before any work.
	cfg := smallTrain(out)
	if _, err := Train(c, cfg, nil); err == nil || !strings.Contains(err.Error(), "--replace") {
		t.Fatalf("second run over %s: err %v, want a refusal naming --replace", out, err)
	}
	// With it, a run that dies after epoch 3 leaves the old model.
	cfg.Replace, cfg.OnEpoch = true, killAfter(3)
	if _, err := Train(c, cfg, nil); !errors.Is(err, errKilled) {
		t.Fatalf("interrupted run: err %v", err)
	}
	if !bytes.Equal(mustRead(t, out), good) {
		t.Fatal("an interrupted run changed the existing model")
	}
	if _, err := os.Stat(out + UnfinishedSuffix); err != nil {
		t.Fatalf("interrupted run left no work folder: %v", err)
	}
	// The next run must not silently throw the interrupted one away.
	cfg.OnEpoch = nil
	if _, err := Train(c, cfg, nil); err == nil || !strings.Contains(err.Error(), "--carry-on") {
		t.Fatalf("run over an interrupted one: err %v, want a refusal naming --carry-on", err)
	}
	// Carried on with other settings: refused.
	other := cfg
	other.CarryOn, other.Recipe.LR = true, 0.004
	if _, err := Train(c, other, nil); err == nil || !strings.Contains(err.Error(), "other settings") {
		t.Fatalf("carry on with another learning rate: err %v", err)
	}
	cfg.CarryOn = true
	res, err := Train(c, cfg, nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.Epochs != 5 {
		t.Errorf("carried-on run reports %d epochs, want 5", res.Epochs)
	}
	if _, err := os.Stat(out + UnfinishedSuffix); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("work folder left after the run ended: %v", err)
	}

	// The same run never interrupted, into another file.
	ref := filepath.Join(dir, "straight.pnet")
	straight := smallTrain(ref)
	rr, err := Train(c, straight, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(mustRead(t, out), mustRead(t, ref)) {
		t.Error("carried-on model differs from the uninterrupted one")
	}
	if a, b := logWithoutTimes(t, out+".log.csv"), logWithoutTimes(t, ref+".log.csv"); a != b {
		t.Errorf("carried-on log differs from the uninterrupted one:\n%s\n--- vs ---\n%s", a, b)
	}
	if res.TestAccuracy != rr.TestAccuracy || res.BestEpoch != rr.BestEpoch {
		t.Errorf("carried on: test %.4f best epoch %d; uninterrupted: %.4f, %d", res.TestAccuracy, res.BestEpoch, rr.TestAccuracy, rr.BestEpoch)
	}
}

// TestTrainChecksBeforeWork: bad settings are refused with a message
// naming the flag, before any clip is read (the corpus here lists files
// that do not exist, so reading would fail with another message).
func TestTrainChecksBeforeWork(t *testing.T) {
	dir := t.TempDir()
	manifest := filepath.Join(dir, "manifest.csv")
	var b strings.Builder
	b.WriteString("path,label,fold\n")
	for i, cls := range []string{"saw", "forklift", "chipper"} {
		for k := 0; k < 3; k++ {
			name := filepath.Join(dir, cls+string(rune('a'+k))+".wav")
			if err := os.WriteFile(name, []byte("not a wav"), 0o644); err != nil {
				t.Fatal(err)
			}
			b.WriteString(filepath.Base(name) + "," + cls + "," + string(rune('0'+(i+k)%3)) + "\n")
		}
	}
	if err := os.WriteFile(manifest, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := OpenCorpus(Data{Path: manifest}, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "m.pnet")
	cases := []struct {
		name string
		edit func(*TrainConfig)
		want string
	}{
		{"batch 0", func(c *TrainConfig) { c.Recipe.Batch = 0 }, "--batch"},
		{"epochs 0", func(c *TrainConfig) { c.Recipe.Epochs = 0 }, "--epochs"},
		{"epochs -3", func(c *TrainConfig) { c.Recipe.Epochs = -3 }, "--epochs"},
		{"negative patience", func(c *TrainConfig) { c.Recipe.Patience = -1 }, "--patience"},
		{"smoothing 1", func(c *TrainConfig) { c.Recipe.LabelSmoothing = 1 }, "--label-smoothing"},
		{"negative mixup", func(c *TrainConfig) { c.Recipe.MixupAlpha = -0.2 }, "--mixup"},
		{"schedule", func(c *TrainConfig) { c.Recipe.Schedule = "steps" }, "--schedule"},
		{"overlap 1", func(c *TrainConfig) { c.Overlap = 1 }, "--overlap"},
		{"negative overlap", func(c *TrainConfig) { c.Overlap = -0.1 }, "--overlap"},
		{"no out", func(c *TrainConfig) { c.Out = "" }, "--out"},
		{"missing folder", func(c *TrainConfig) { c.Out = filepath.Join(dir, "nowhere", "m.pnet") }, "nowhere"},
		{"out is a folder", func(c *TrainConfig) { c.Out = dir }, "is a folder"},
		{"memory", func(c *TrainConfig) { c.MemoryLimit = 1 << 20 }, "GB to train"},
	}
	for _, tc := range cases {
		cfg := smallTrain(out)
		tc.edit(&cfg)
		_, err := Train(c, cfg, nil)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err %v, want one naming %q", tc.name, err, tc.want)
		}
		if _, err := os.Stat(out); err == nil {
			t.Fatalf("%s: a refused run wrote %s", tc.name, out)
		}
	}
}

// TestTrainRefusesHugeNetwork is the case of a layer spec the budget
// flags as far too large: 100000 filters would need tens of GB; the run
// must be refused with a message before the allocation, not die of it.
func TestTrainRefusesHugeNetwork(t *testing.T) {
	c, _ := smallCorpus(t)
	dir := t.TempDir()
	spec := filepath.Join(dir, "huge.spec")
	if err := os.WriteFile(spec, []byte("input shape=40x61x1\nconv out=100000 kernel=3 pad=same\nglobalavgpool\ndense out=8\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	cfg := smallTrain(filepath.Join(dir, "huge.pnet"))
	cfg.Arch, cfg.MemoryLimit = spec, 16<<30
	_, err := Train(c, cfg, nil)
	if err == nil || !strings.Contains(err.Error(), "GB to train") {
		t.Fatalf("err %v, want a memory refusal", err)
	}
}

// TestEvalRefusesOtherTestFold is the silent-leakage case: a manifest
// whose fold of the model's test-fold label holds other clips (here the
// folds rotated, so "0" now holds training clips) must not be scored as
// the test fold, by eval or by quantize.
func TestEvalRefusesOtherTestFold(t *testing.T) {
	c, manifest := smallCorpus(t)
	dir := t.TempDir()
	out := filepath.Join(dir, "m.pnet")
	cfg := smallTrain(out)
	cfg.Recipe.Epochs = 1
	if _, err := Train(c, cfg, nil); err != nil {
		t.Fatal(err)
	}
	fm, err := LoadFloatModel(out)
	if err != nil {
		t.Fatal(err)
	}
	defer fm.Close()
	if _, err := EvaluateFold(fm, Data{Path: manifest}, "", nil); err != nil {
		t.Fatalf("the training manifest: %v", err)
	}
	// Rotate the folds: 0 → 1 → 2 → 0.
	rotated := refold(t, manifest, "rotated.csv", func(label, fold string) string {
		return map[string]string{"0": "1", "1": "2", "2": "0"}[fold]
	})
	if _, err := EvaluateFold(fm, Data{Path: rotated}, "", nil); !errors.Is(err, datasets.ErrNotTestFold) {
		t.Errorf("eval on rotated folds: err %v, want ErrNotTestFold", err)
	}
	if _, err := Quantize(fm, QuantizeConfig{Data: Data{Path: rotated}, Out: filepath.Join(dir, "m.pq8")}, nil); !errors.Is(err, datasets.ErrNotTestFold) {
		t.Errorf("quantize on rotated folds: err %v, want ErrNotTestFold", err)
	}
	if _, err := os.Stat(filepath.Join(dir, "m.pq8")); err == nil {
		t.Error("refused quantize wrote its model")
	}
	// Every clip, asked for knowingly, is still allowed.
	if _, err := EvaluateFold(fm, Data{Path: rotated}, AllFolds, nil); err != nil {
		t.Errorf("eval --fold all on rotated folds: %v", err)
	}
}

// TestCrossValidateCarriesOn: a cross-validation interrupted in its
// second fold keeps the first, carries the second on, and ends with the
// fold models of a run never interrupted.
func TestCrossValidateCarriesOn(t *testing.T) {
	c, _ := smallCorpus(t)
	dir := t.TempDir()
	out := filepath.Join(dir, "cv.pnet")
	cfg := smallTrain(out)
	cfg.Recipe.Epochs = 3
	calls := 0
	cfg.OnEpoch = func(h []nn.EpochStats) error {
		calls++
		if calls == 5 { // fold 1, epoch 2
			return errKilled
		}
		return nil
	}
	if _, err := CrossValidate(c, cfg, nil); !errors.Is(err, errKilled) {
		t.Fatalf("interrupted cross-validation: err %v", err)
	}
	for _, l := range c.FoldLabels {
		if _, err := os.Stat(out + ".fold" + l); err == nil {
			t.Fatalf("interrupted cross-validation put fold %s in place", l)
		}
	}
	cfg.OnEpoch = nil
	if _, err := CrossValidate(c, cfg, nil); err == nil || !strings.Contains(err.Error(), "--carry-on") {
		t.Fatalf("second run: err %v, want a refusal naming --carry-on", err)
	}
	cfg.CarryOn = true
	cv, err := CrossValidate(c, cfg, nil)
	if err != nil {
		t.Fatal(err)
	}
	ref := filepath.Join(dir, "ref.pnet")
	rc := smallTrain(ref)
	rc.Recipe.Epochs = 3
	rv, err := CrossValidate(c, rc, nil)
	if err != nil {
		t.Fatal(err)
	}
	for _, l := range c.FoldLabels {
		if !bytes.Equal(mustRead(t, out+".fold"+l), mustRead(t, ref+".fold"+l)) {
			t.Errorf("fold %s: carried-on model differs from the uninterrupted one", l)
		}
	}
	if cv.TestAccuracy != rv.TestAccuracy {
		t.Errorf("test accuracy %v carried on, %v uninterrupted", cv.TestAccuracy, rv.TestAccuracy)
	}
	if _, err := os.Stat(out + UnfinishedSuffix); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("work folder left: %v", err)
	}
}

// TestTrainRefusesClassWithoutTrainingClips: a class whose clips all sit
// in the test and validation folds cannot be learnt; and a manifest with
// one fold is refused with a message about folds, not about a
// validation fold the user never named.
func TestTrainRefusesClassWithoutTrainingClips(t *testing.T) {
	c, manifest := smallCorpus(t)
	moved := refold(t, manifest, "moved.csv", func(label, fold string) string {
		if label == c.Classes[0] && fold == "2" {
			return "0" // the class's training clips go to the test fold
		}
		return fold
	})
	one := refold(t, manifest, "one.csv", func(string, string) string { return "0" })
	for _, tc := range []struct{ path, want string }{{moved, "leave no training clip of class"}, {one, "3 for test + validation + training"}} {
		cc, err := OpenCorpus(Data{Path: tc.path}, 0, 1)
		if err != nil {
			t.Fatal(err)
		}
		cfg := smallTrain(filepath.Join(t.TempDir(), "m.pnet"))
		cfg.ValFold = ""
		if _, err := Train(cc, cfg, nil); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err %v, want %q", filepath.Base(tc.path), err, tc.want)
		}
	}
}

// refold writes a copy of manifest named name beside it, each row's fold
// replaced by fold(label, fold), and returns its path.
func refold(t *testing.T, manifest, name string, fold func(label, fold string) string) string {
	t.Helper()
	lines := strings.Split(strings.TrimSpace(string(mustRead(t, manifest))), "\n")
	col, lab := -1, -1
	for i, h := range strings.Split(lines[0], ",") {
		switch h {
		case "fold":
			col = i
		case "label":
			lab = i
		}
	}
	if col < 0 || lab < 0 {
		t.Fatalf("manifest header %q lacks a fold or label column", lines[0])
	}
	for i := 1; i < len(lines); i++ {
		f := strings.Split(lines[i], ",")
		f[col] = fold(f[lab], f[col])
		lines[i] = strings.Join(f, ",")
	}
	p := filepath.Join(filepath.Dir(manifest), name)
	if err := os.WriteFile(p, []byte(strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}
