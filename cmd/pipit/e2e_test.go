package main

import (
	"encoding/json"
	"path/filepath"
	"testing"
	"time"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
)

// TestSynthTrainEval is the quality bar of the corpus and training path:
// on the default synthetic corpus (8 classes × 40 clips × 1 s, 5 folds),
// `pipit train --arch separable` reaches ≥ 90 % clip accuracy on the
// held-out fold, `pipit eval` agrees, and a linear classifier on the mean
// log-mel of each clip (which sees the spectrum but not its time
// structure) stays clearly below. It is a real training run (about 10 s
// on 2 cores) and is skipped with -short.
func TestSynthTrainEval(t *testing.T) {
	if testing.Short() {
		t.Skip("trains a network; skipped with -short")
	}
	dir := t.TempDir()
	t0 := time.Now()
	if _, err := run(t, "synth", "--out", dir, "--seed", "1"); err != nil {
		t.Fatal(err)
	}
	manifest := filepath.Join(dir, "manifest.csv")
	model := filepath.Join(dir, "model.pnet")
	cache := filepath.Join(dir, "cache")
	out, err := run(t, "train", "--data", manifest, "--arch", "separable", "--out", model, "--cache", cache, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var rep trainReport
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if rep.TestClipAccuracy < 0.90 {
		t.Errorf("held-out clip accuracy %.3f, want ≥ 0.90", rep.TestClipAccuracy)
	}
	out, err = run(t, "eval", "--model", model, "--data", manifest, "--cache", cache, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var ev evalReport
	if err := json.Unmarshal([]byte(out), &ev); err != nil {
		t.Fatal(err)
	}
	if ev.Fold != "0" || ev.ClipAccuracy != rep.TestClipAccuracy || ev.Accuracy != rep.TestAccuracy {
		t.Errorf("eval on fold %s: accuracy %.3f / clips %.3f; train reported %.3f / %.3f", ev.Fold, ev.Accuracy, ev.ClipAccuracy, rep.TestAccuracy, rep.TestClipAccuracy)
	}
	// an ensemble of the model with itself is the model: mean of equal
	// probabilities (and each copy normalises with the same statistics)
	out, err = run(t, "eval", "--model", model, "--with", model, "--data", manifest, "--cache", cache, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var ens evalReport
	if err := json.Unmarshal([]byte(out), &ens); err != nil {
		t.Fatal(err)
	}
	if len(ens.With) != 1 || ens.Accuracy != ev.Accuracy || ens.ClipAccuracy != ev.ClipAccuracy {
		t.Errorf("ensemble of the model with itself: accuracy %.3f / %.3f (with %v), the model alone %.3f / %.3f", ens.Accuracy, ens.ClipAccuracy, ens.With, ev.Accuracy, ev.ClipAccuracy)
	}
	elapsed := time.Since(t0)
	t.Logf("synth → train → eval: %.1f s; test clip accuracy %.3f", elapsed.Seconds(), rep.TestClipAccuracy)

	// int8: calibrate on the validation fold, compare on the test fold
	// (issue bar: within 1 percentage point of float, per-channel weights).
	qmodel := filepath.Join(dir, "model.pq8")
	out, err = run(t, "quantize", "--model", model, "--calib", manifest, "--out", qmodel, "--cache", cache, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var qr quantizeReport
	if err := json.Unmarshal([]byte(out), &qr); err != nil {
		t.Fatal(err)
	}
	t.Logf("int8 (%s): float accuracy %.3f, int8 %.3f, logit correlation %.5f, SQNR %v", qr.Method, qr.FloatAccuracy, qr.Int8Accuracy, qr.LogitCorr, qr.PerLayerSQNRdB)
	if qr.FloatAccuracy != rep.TestAccuracy {
		t.Errorf("quantize's float accuracy %.3f differs from train's %.3f on the same windows", qr.FloatAccuracy, rep.TestAccuracy)
	}
	if qr.FloatAccuracy-qr.Int8Accuracy > 0.01 {
		t.Errorf("int8 accuracy %.3f is more than 1 point below float %.3f", qr.Int8Accuracy, qr.FloatAccuracy)
	}
	if qr.FloatBytes != 4*qr.WeightBytes || len(qr.PerLayerSQNRdB) == 0 {
		t.Errorf("weight bytes %d int8 vs %d float; SQNR %v", qr.WeightBytes, qr.FloatBytes, qr.PerLayerSQNRdB)
	}
	out, err = run(t, "eval", "--model", qmodel, "--data", manifest, "--cache", cache, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var qev evalReport
	json.Unmarshal([]byte(out), &qev)
	if qev.Accuracy != qr.Int8Accuracy {
		t.Errorf("eval of the int8 model: accuracy %.3f, quantize reported %.3f", qev.Accuracy, qr.Int8Accuracy)
	}

	// A long recording: three test-fold clips of every class, end to end.
	// Each window's most likely class must match the clip under its centre
	// for at least 80 % of the windows (those straddling a boundary see two).
	c, _ := datasets.ReadManifest(manifest, "")
	var long []float32
	var truth []string
	perClass := map[int]int{}
	for _, cl := range c.Clips {
		if cl.Fold != 0 || perClass[cl.Label] >= 3 {
			continue
		}
		perClass[cl.Label]++
		a, err := features.ReadWAVFile(cl.Path)
		if err != nil {
			t.Fatal(err)
		}
		long = append(long, a.Samples...)
		truth = append(truth, c.Classes[cl.Label])
	}
	longPath := filepath.Join(dir, "long.wav")
	if err := features.WriteWAVFile(longPath, long, 16000); err != nil {
		t.Fatal(err)
	}
	out, err = run(t, "timeline", "--model", qmodel, longPath, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var tl timelineReport
	if err := json.Unmarshal([]byte(out), &tl); err != nil {
		t.Fatal(err)
	}
	agree, total := 0, 0
	for _, sg := range tl.Segments {
		for k := 0; k < sg.Windows; k++ {
			centre := sg.StartSec + float64(k)*tl.WindowSec/2 + tl.WindowSec/2 // 50 % overlap: windows every half window
			if i := int(centre); i < len(truth) && truth[i] == sg.Label {
				agree++
			}
			total++
		}
	}
	t.Logf("timeline: %d windows over %.0f s, %d segments, %.3f of windows agree with the clip under their centre", total, tl.Seconds, len(tl.Segments), float64(agree)/float64(total))
	if total != tl.Windows || float64(agree) < 0.8*float64(total) {
		t.Errorf("timeline: %d of %d windows agree (report says %d windows)", agree, total, tl.Windows)
	}

	lin := linearBaseline(t, manifest)
	t.Logf("linear classifier on mean log-mel: test accuracy %.3f", lin)
	if lin > rep.TestClipAccuracy-0.1 {
		t.Errorf("linear baseline %.3f is within 10 points of the CNN's %.3f: the task is too easy", lin, rep.TestClipAccuracy)
	}
}

// linearBaseline trains softmax regression on each clip's mean normalised
// log-mel (40 values) on folds 2–4 and returns its accuracy on fold 0.
func linearBaseline(t *testing.T, manifest string) float64 {
	c, err := datasets.ReadManifest(manifest, "")
	if err != nil {
		t.Fatal(err)
	}
	fe := features.DefaultConfig()
	set, err := datasets.Load(c, func() []int {
		ids := make([]int, len(c.Clips))
		for i := range ids {
			ids[i] = i
		}
		return ids
	}(), datasets.Options{FrontEnd: fe, Window: datasets.WindowConfig{Frames: 61, Pad: datasets.PadZeros}})
	if err != nil {
		t.Fatal(err)
	}
	st, _ := set.ComputeStats()
	set.Stats = st
	M, F := fe.Bands, 61
	buf := make([]float32, M*F)
	var trX, teX []float32
	var trY, teY []int
	for i, w := range set.Windows {
		y := set.Sample(i, 0, buf)
		mean := make([]float32, M)
		for b := 0; b < M; b++ {
			for f := 0; f < F; f++ {
				mean[b] += buf[b*F+f] / float32(F)
			}
		}
		switch c.Clips[w.Clip].Fold {
		case 0:
			teX, teY = append(teX, mean...), append(teY, y)
		case 1: // the CNN's validation fold: unused here
		default:
			trX, trY = append(trX, mean...), append(trY, y)
		}
	}
	net, err := nn.FromSpec("input shape=1x1x40\ndense out=8", nn.Shape{}, 1)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	tr, _ := nn.NewTrainer(net, &nn.SoftmaxCrossEntropy{Classes: 8}, nn.OptimizerConfig{Kind: nn.OptAdam}, nn.Schedule{Base: 0.02}, 1)
	for step := 0; step < 1500; step++ { // full batch, to convergence
		if _, err := tr.Step(trX, trY); err != nil {
			t.Fatal(err)
		}
	}
	out := make([]float32, len(teY)*8)
	net.Predict(out, teX, len(teY), 64)
	ok := 0
	for i, y := range teY {
		best := 0
		for k := 1; k < 8; k++ {
			if out[i*8+k] > out[i*8+best] {
				best = k
			}
		}
		if best == y {
			ok++
		}
	}
	return float64(ok) / float64(len(teY))
}
