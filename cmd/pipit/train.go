package main

import (
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/internal/plots"
	"github.com/pipit-audio/pipit/nn"
)

// trainOptions are the settings of one training run.
type trainOptions struct {
	data, arch, out, group, cacheDir, pad string
	testFold, valFold, folds              int
	epochs, batch, patience               int
	seed                                  uint64
	lr, overlap                           float64
	skipBad, noAugment                    bool
	fe                                    features.Config
	spec                                  string // layer spec with input line; when set, used instead of arch (pipit sweep)
}

// trainReport is the JSON summary of a training run.
type trainReport struct {
	Model            string  `json:"model"`
	Arch             string  `json:"arch"`
	TestFold         int     `json:"test_fold"`
	ValFold          int     `json:"val_fold"`
	TrainWindows     int     `json:"train_windows"`
	ValAccuracy      float64 `json:"val_fold_accuracy"`
	TestAccuracy     float64 `json:"test_window_accuracy"`
	TestClipAccuracy float64 `json:"test_clip_accuracy"`
	BestEpoch        int     `json:"best_epoch"`
	Epochs           int     `json:"epochs"`
	Seconds          float64 `json:"seconds"`
	Log              string  `json:"log_csv"`
	Curves           string  `json:"curves_png"`
	SkippedClips     int     `json:"skipped_clips"`
	CacheHits        int     `json:"cache_hits"`
}

func addTrainFlags(cmd *cobra.Command, o *trainOptions) {
	f := cmd.Flags()
	f.StringVar(&o.data, "data", "", "manifest CSV or folder with one sub-folder per class (required)")
	f.StringVar(&o.arch, "arch", "separable", "built-in architecture ("+strings.Join(nn.ArchNames(), ", ")+") or layer-spec file")
	f.StringVar(&o.out, "out", "", "float model file to write, by convention NAME.pnet (required)")
	f.IntVar(&o.testFold, "test-fold", 0, "fold held out for testing")
	f.IntVar(&o.valFold, "val-fold", -1, "fold for validation and early stopping (default: the fold after the test fold)")
	f.IntVar(&o.folds, "folds", 5, "folds to assign when the corpus has none")
	f.StringVar(&o.group, "group", "", "manifest column naming the source recording (clips of one source share a fold)")
	f.IntVar(&o.epochs, "epochs", 40, "maximum epochs")
	f.IntVar(&o.batch, "batch", 32, "batch size")
	f.IntVar(&o.patience, "patience", 10, "stop after this many epochs without a better validation accuracy (0: never)")
	f.Float64Var(&o.lr, "lr", 0.005, "peak learning rate (Adam, cosine schedule with warm-up)")
	f.Uint64Var(&o.seed, "seed", 1, "random seed (weights, shuffling, augmentation)")
	f.Float64Var(&o.overlap, "overlap", 0.5, "overlap of consecutive model windows within a clip")
	f.StringVar(&o.pad, "pad", datasets.PadZeros, "padding of clips shorter than a window: zeros or repeat")
	f.BoolVar(&o.skipBad, "skip-bad", false, "skip unreadable WAV files (reported by name) instead of failing")
	f.BoolVar(&o.noAugment, "no-augment", false, "train without augmentation")
	f.StringVar(&o.cacheDir, "cache", defaultCacheDir(), "feature cache directory (empty: no cache)")
}

func defaultCacheDir() string {
	d, err := os.UserCacheDir()
	if err != nil {
		return ""
	}
	return filepath.Join(d, "pipit", "features")
}

func newTrainCmd() *cobra.Command {
	o := &trainOptions{}
	var cross, asJSON bool
	cmd := &cobra.Command{
		Use:   "train --data MANIFEST|FOLDER --out MODEL",
		Short: "Train a classifier with held-out folds and write the best model",
		Long: `train cuts the corpus into model windows, trains the network with
augmentation on every fold but the test and validation folds, stops early
on the validation fold, keeps the best epoch in MODEL (written atomically
whenever validation improves), and writes MODEL.log.csv and
MODEL.curves.png. The front-end settings are recorded in MODEL.
With --cross-validate it trains one model per fold (MODEL.foldK) and
reports mean ± standard deviation over folds.`,
		Args: cobra.NoArgs,
	}
	addTrainFlags(cmd, o)
	fe := addFrontEndFlags(cmd)
	cmd.Flags().BoolVar(&cross, "cross-validate", false, "train one model per fold and report mean ± std")
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the final report as JSON")
	cmd.MarkFlagRequired("data")
	cmd.MarkFlagRequired("out")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		cfg, err := fe.config()
		if err != nil {
			return err
		}
		o.fe = cfg
		corpus, err := openCorpus(o)
		if err != nil {
			return err
		}
		stderr := cmd.ErrOrStderr()
		if !cross {
			rep, err := trainOne(o, corpus, o.testFold, o.valFold, o.out, stderr)
			if err != nil {
				return err
			}
			if asJSON {
				return printJSON(cmd.OutOrStdout(), rep)
			}
			printTrainReport(cmd.OutOrStdout(), rep)
			return nil
		}
		var reps []*trainReport
		for k := 0; k < corpus.Folds; k++ {
			fmt.Fprintf(stderr, "== fold %d of %d\n", k+1, corpus.Folds)
			rep, err := trainOne(o, corpus, k, -1, fmt.Sprintf("%s.fold%d", o.out, k), stderr)
			if err != nil {
				return err
			}
			reps = append(reps, rep)
		}
		cv := summarizeCV(reps)
		if asJSON {
			return printJSON(cmd.OutOrStdout(), cv)
		}
		fmt.Fprintf(cmd.OutOrStdout(), "cross-validation over %d folds:\n  test accuracy (windows) %.3f ± %.3f\n  test accuracy (clips)   %.3f ± %.3f\n  validation accuracy     %.3f ± %.3f\n",
			len(reps), cv.TestAccuracy.Mean, cv.TestAccuracy.Std, cv.TestClipAccuracy.Mean, cv.TestClipAccuracy.Std, cv.ValAccuracy.Mean, cv.ValAccuracy.Std)
		return nil
	}
	return cmd
}

type meanStd struct {
	Mean float64 `json:"mean"`
	Std  float64 `json:"std"` // sample standard deviation (n−1)
}

type cvReport struct {
	Folds            []*trainReport `json:"folds"`
	TestAccuracy     meanStd        `json:"test_window_accuracy"`
	TestClipAccuracy meanStd        `json:"test_clip_accuracy"`
	ValAccuracy      meanStd        `json:"val_fold_accuracy"`
	Seconds          float64        `json:"seconds"`
}

func stats(v []float64) meanStd {
	var m meanStd
	for _, x := range v {
		m.Mean += x / float64(len(v))
	}
	if len(v) > 1 {
		var s float64
		for _, x := range v {
			s += (x - m.Mean) * (x - m.Mean)
		}
		m.Std = math.Sqrt(s / float64(len(v)-1))
	}
	return m
}

func summarizeCV(reps []*trainReport) *cvReport {
	cv := &cvReport{Folds: reps}
	var a, b, c []float64
	for _, r := range reps {
		a, b, c = append(a, r.TestAccuracy), append(b, r.TestClipAccuracy), append(c, r.ValAccuracy)
		cv.Seconds += r.Seconds
	}
	cv.TestAccuracy, cv.TestClipAccuracy, cv.ValAccuracy = stats(a), stats(b), stats(c)
	return cv
}

func openCorpus(o *trainOptions) (*datasets.Corpus, error) {
	c, err := datasets.Open(o.data, o.group)
	if err != nil {
		return nil, err
	}
	if !c.HasFolds {
		if err := c.AssignFolds(o.folds, o.seed); err != nil {
			return nil, fmt.Errorf("%s: %w", o.data, err)
		}
	}
	return c, nil
}

func printTrainReport(w io.Writer, r *trainReport) {
	fmt.Fprintf(w, "model %s (%s), best epoch %d of %d, %.1f s\n", r.Model, r.Arch, r.BestEpoch, r.Epochs, r.Seconds)
	fmt.Fprintf(w, "  validation fold %d: accuracy %.3f\n", r.ValFold, r.ValAccuracy)
	fmt.Fprintf(w, "  test fold %d: window accuracy %.3f, clip accuracy %.3f (mean of window probabilities)\n", r.TestFold, r.TestAccuracy, r.TestClipAccuracy)
	fmt.Fprintf(w, "  log %s, curves %s\n", r.Log, r.Curves)
}

// trainOne trains a model with testFold held out and valFold for early
// stopping (-1: the fold after testFold) and writes it to out.
func trainOne(o *trainOptions, c *datasets.Corpus, testFold, valFold int, out string, stderr io.Writer) (*trainReport, error) {
	t0 := time.Now()
	if testFold < 0 || testFold >= c.Folds {
		return nil, fmt.Errorf("--test-fold %d: the corpus has folds 0..%d", testFold, c.Folds-1)
	}
	if valFold < 0 {
		valFold = (testFold + 1) % c.Folds
	}
	if valFold >= c.Folds || valFold == testFold {
		return nil, fmt.Errorf("--val-fold %d: want a fold in 0..%d other than the test fold %d", valFold, c.Folds-1, testFold)
	}
	var net *nn.Network
	var err error
	if o.spec != "" {
		net, err = nn.FromSpec(o.spec, nn.Shape{}, o.seed)
	} else {
		net, err = loadArch(o.arch, len(c.Classes), o.seed)
	}
	if err != nil {
		return nil, err
	}
	defer net.Close()
	if net.Input.C != 1 || net.Input.H != o.fe.Bands {
		return nil, fmt.Errorf("network input %v needs %d bands × frames × 1; the front end gives %d bands (set --bands)", net.Input, net.Input.H, o.fe.Bands)
	}
	if net.Output().Size() != len(c.Classes) {
		return nil, fmt.Errorf("network has %d outputs, the corpus %d classes", net.Output().Size(), len(c.Classes))
	}
	win := datasets.WindowConfig{Frames: net.Input.W, Overlap: o.overlap, Pad: o.pad}
	var trainIDs, valIDs, testIDs []int
	for _, cl := range c.Clips {
		switch cl.Fold {
		case testFold:
			testIDs = append(testIDs, cl.ID)
		case valFold:
			valIDs = append(valIDs, cl.ID)
		default:
			trainIDs = append(trainIDs, cl.ID)
		}
	}
	cache := &datasets.Cache{Dir: o.cacheDir}
	skipped := 0
	opts := datasets.Options{FrontEnd: o.fe, Window: win, Cache: cache, SkipBad: o.skipBad,
		Warn: func(err error) { skipped++; fmt.Fprintf(stderr, "skipping: %v\n", err) }}
	load := func(name string, ids []int, keepAudio bool) (*datasets.Set, error) {
		b := newTask(stderr, "load "+name)
		op := opts
		op.KeepAudio = keepAudio
		op.Progress = func(d, t int) { b.step(d, t, "clips", "") }
		s, err := datasets.Load(c, ids, op)
		if err != nil {
			return nil, err
		}
		b.finish(fmt.Sprintf("%d clips → %d windows", len(s.Clips), s.Len()))
		return s, nil
	}
	trainSet, err := load("train", trainIDs, !o.noAugment)
	if err != nil {
		return nil, err
	}
	valSet, err := load("val", valIDs, false)
	if err != nil {
		return nil, err
	}
	testSet, err := load("test", testIDs, false)
	if err != nil {
		return nil, err
	}
	st, err := trainSet.ComputeStats()
	if err != nil {
		return nil, err
	}
	for _, s := range []*datasets.Set{trainSet, valSet, testSet} {
		s.Stats = st
	}
	if !o.noAugment {
		trainSet.Aug, trainSet.Seed = datasets.DefaultAugment(), o.seed
	}
	steps := int64(o.epochs) * int64((trainSet.Len()+o.batch-1)/o.batch)
	tr, err := nn.NewTrainer(net, &nn.SoftmaxCrossEntropy{Classes: len(c.Classes)},
		nn.OptimizerConfig{Kind: nn.OptAdamW, WeightDecay: 1e-4, ClipNorm: 5},
		nn.Schedule{Kind: nn.SchedCosine, Base: o.lr, WarmupSteps: min(steps/10, 100), TotalSteps: steps, Final: 0.02}, o.seed)
	if err != nil {
		return nil, err
	}
	info := &datasets.ModelInfo{Version: datasets.ModelInfoVersion, Arch: o.arch, Classes: c.Classes, FrontEnd: o.fe, Window: win, Stats: st,
		TestFold: testFold, ValFold: valFold, Folds: c.Folds, FoldSeed: o.seed}
	meta, err := info.Marshal()
	if err != nil {
		return nil, err
	}
	logPath, pngPath := out+".log.csv", out+".curves.png"
	var hist []nn.EpochStats
	var b *task
	progress := func(ep, s, n int, loss, acc float64, seen int, secs float64) {
		if s == 1 {
			b = newTask(stderr, fmt.Sprintf("epoch %d/%d", ep, o.epochs))
			b.startAt(time.Now().Add(-time.Duration(secs * float64(time.Second))))
		}
		b.step(s, n, "batches", fmt.Sprintf("train loss %.4f, %.1f %% of windows right, %.0f windows/s", loss, 100*acc, float64(seen)/secs))
	}
	onEpoch := func(e nn.EpochStats) error {
		mark := ""
		if e.Best {
			mark = "; best so far, saved"
			if err := tr.WriteCheckpoint(out, meta); err != nil {
				return err
			}
		}
		b.finish(fmt.Sprintf("train loss %.4f, %.1f %% of windows right; val fold %d loss %.4f, %.1f %% right; %.0f windows/s%s",
			e.Loss, 100*e.Accuracy, valFold, e.ValLoss, 100*e.ValAcc, e.SamplesSec, mark))
		hist = append(hist, e)
		return writeTrainLog(logPath, pngPath, hist)
	}
	if _, err := nn.Fit(tr, nn.FitConfig{Epochs: o.epochs, Batch: o.batch, Patience: o.patience, Seed: o.seed}, trainSet, valSet, progress, onEpoch); err != nil {
		return nil, err
	}
	// Fit restored the best epoch's parameters; evaluate them.
	rep := &trainReport{Model: out, Arch: o.arch, TestFold: testFold, ValFold: valFold, TrainWindows: trainSet.Len(),
		Epochs: len(hist), Log: logPath, Curves: pngPath, SkippedClips: skipped, CacheHits: cache.Hits}
	for _, e := range hist {
		if e.Best {
			rep.BestEpoch, rep.ValAccuracy = e.Epoch, e.ValAcc
		}
	}
	loss := tr.Loss
	ev, err := nn.Evaluate(net, loss, testSet, 64)
	if err != nil {
		return nil, err
	}
	rep.TestAccuracy = ev.Accuracy
	labels, byMean, _ := testSet.ClipVotes(ev.Probs, len(c.Classes))
	ok := 0
	for i := range labels {
		if labels[i] == byMean[i] {
			ok++
		}
	}
	rep.TestClipAccuracy = float64(ok) / float64(len(labels))
	rep.Seconds = time.Since(t0).Seconds()
	return rep, nil
}

func writeTrainLog(csvPath, pngPath string, hist []nn.EpochStats) error {
	err := fsutil.WriteWith(csvPath, func(w io.Writer) error {
		fmt.Fprintln(w, "epoch,train_loss,train_window_accuracy,val_fold_loss,val_fold_window_accuracy,learning_rate,seconds,windows_per_second,val_fold_seconds,best_so_far")
		for _, e := range hist {
			fmt.Fprintf(w, "%d,%.6f,%.6f,%.6f,%.6f,%.6g,%.3f,%.1f,%.3f,%v\n", e.Epoch, e.Loss, e.Accuracy, e.ValLoss, e.ValAcc, e.LR, e.Seconds, e.SamplesSec, e.ValSeconds, e.Best)
		}
		return nil
	})
	if err != nil {
		return err
	}
	var ep, loss, vloss, acc, vacc []float64
	for _, e := range hist {
		ep = append(ep, float64(e.Epoch))
		loss, vloss = append(loss, e.Loss), append(vloss, e.ValLoss)
		acc, vacc = append(acc, e.Accuracy), append(vacc, e.ValAcc)
	}
	if len(hist) < 2 {
		return nil // a line needs two points
	}
	fig := plots.LineChart{Title: "training curves", XLabel: "epoch", YLabel: "loss / window accuracy", Series: []plots.Series{
		{Name: "train loss", X: ep, Y: loss}, {Name: "val fold loss", X: ep, Y: vloss, Dashed: true},
		{Name: "train window accuracy", X: ep, Y: acc}, {Name: "val fold window accuracy", X: ep, Y: vacc, Dashed: true},
	}}
	return plots.SavePNG(pngPath, fig)
}
