package main

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/nn"
)

type (
	trainReport = pipit.TrainResult
	cvReport    = pipit.CrossValidation
)

func defaultCacheDir() string {
	d, err := os.UserCacheDir()
	if err != nil {
		return ""
	}
	return filepath.Join(d, "pipit", "features")
}

func newTrainCmd() *cobra.Command {
	var data, group string
	var folds int
	var cross, asJSON bool
	cfg := pipit.TrainConfig{Recipe: pipit.DefaultRecipe()}
	r := &cfg.Recipe
	cmd := &cobra.Command{
		Use:   "train --data MANIFEST|FOLDER --out MODEL",
		Short: "Train a classifier with held-out folds and write the best model",
		Long: `train cuts the corpus into model windows, trains the network with
augmentation on every fold but the test and validation folds, keeps the
best epoch on the validation fold, and writes it to MODEL with
MODEL.log.csv and MODEL.curves.png when the run has ended. The front-end
settings and the identities of the test and validation clips are recorded
in MODEL. Folds are named by their labels in the manifest (1..10, "dev",
...); a corpus without folds gets --folds folds labelled 0, 1, ...
With --cross-validate it trains one model per fold (MODEL.foldLABEL) and
reports mean ± standard deviation over folds.

The run works in MODEL` + pipit.UnfinishedSuffix + `/ (best epoch so far, the state after
the last finished epoch, log, curves); MODEL itself is only written when
the run ends, so a run that is killed or fails leaves an existing MODEL as
it was. An existing MODEL needs --replace. An interrupted run continues
from its last finished epoch with --carry-on (same flags and data),
ending bit-identical to a run never interrupted.`,
		Args: cobra.NoArgs,
	}
	f := cmd.Flags()
	f.StringVar(&data, "data", "", "manifest CSV or folder with one sub-folder per class (required)")
	f.StringVar(&cfg.Arch, "arch", "separable", "built-in architecture ("+strings.Join(nn.ArchNames(), ", ")+") or layer-spec file")
	f.StringVar(&cfg.Out, "out", "", "float model file to write, by convention NAME.pnet (required)")
	f.StringVar(&cfg.TestFold, "test-fold", "", "label of the fold held out for testing (default: the first fold)")
	f.StringVar(&cfg.ValFold, "val-fold", "", "label of the fold for validation and early stopping (default: the fold after the test fold)")
	f.IntVar(&folds, "folds", pipit.DefaultFolds, "folds to assign when the corpus has none")
	f.StringVar(&group, "group", "", "manifest column naming the source recording (clips of one source share a fold)")
	f.IntVar(&r.Epochs, "epochs", r.Epochs, "maximum epochs")
	f.IntVar(&r.Batch, "batch", r.Batch, "batch size")
	f.IntVar(&r.Patience, "patience", r.Patience, "stop after this many epochs without a better validation accuracy (0: never)")
	f.Float64Var(&r.LR, "lr", r.LR, "peak learning rate (AdamW; linear warm-up, then --schedule)")
	f.Uint64Var(&r.Seed, "seed", r.Seed, "random seed (weights, shuffling, augmentation, assigned folds)")
	f.Float64Var(&cfg.Overlap, "overlap", 0.5, "overlap of consecutive model windows within a clip")
	f.StringVar(&cfg.Pad, "pad", datasets.PadZeros, "padding of clips shorter than a window: zeros or repeat")
	f.BoolVar(&cfg.SkipBad, "skip-bad", false, "skip unreadable WAV files and clips too short for a window (reported by name) instead of failing")
	f.BoolVar(&r.NoAugment, "no-augment", false, "train without augmentation")
	f.StringVar(&cfg.CacheDir, "cache", defaultCacheDir(), "feature cache directory (empty: no cache)")
	addRecipeFlags(cmd, r)
	fe := addFrontEndFlags(cmd)
	f.BoolVar(&cfg.Replace, "replace", false, "write over an existing MODEL when the run has ended (until then it stays as it is)")
	f.BoolVar(&cfg.CarryOn, "carry-on", false, "continue the interrupted run left in MODEL"+pipit.UnfinishedSuffix+" from its last finished epoch")
	f.BoolVar(&cross, "cross-validate", false, "train one model per fold and report mean ± std")
	f.BoolVar(&asJSON, "json", false, "print the final report as JSON")
	cmd.MarkFlagRequired("data")
	cmd.MarkFlagRequired("out")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		var err error
		cfg.Log = true
		if cfg.FrontEnd, err = fe.config(); err != nil {
			return err
		}
		corpus, err := pipit.OpenCorpus(pipit.Data{Path: data, Group: group}, folds, r.Seed)
		if err != nil {
			return err
		}
		rep := newReporter(cmd.ErrOrStderr())
		if cross {
			cv, err := pipit.CrossValidate(corpus, cfg, rep)
			if err != nil {
				return err
			}
			if asJSON {
				return printJSON(cmd.OutOrStdout(), cv)
			}
			fmt.Fprintf(cmd.OutOrStdout(), "cross-validation over %d folds:\n  test accuracy (windows) %.3f ± %.3f\n  test accuracy (clips)   %.3f ± %.3f\n  validation accuracy     %.3f ± %.3f\n",
				len(cv.Folds), cv.TestAccuracy.Mean, cv.TestAccuracy.Std, cv.TestClipAccuracy.Mean, cv.TestClipAccuracy.Std, cv.ValAccuracy.Mean, cv.ValAccuracy.Std)
			return nil
		}
		if cfg.TestFold == "" {
			cfg.TestFold = corpus.FoldLabel(0)
		}
		if _, err := corpus.FoldIndex(cfg.TestFold); err != nil {
			return fmt.Errorf("--test-fold %s: %w", cfg.TestFold, err)
		}
		if cfg.ValFold != "" {
			if _, err := corpus.FoldIndex(cfg.ValFold); err != nil {
				return fmt.Errorf("--val-fold %s: %w", cfg.ValFold, err)
			}
		}
		res, err := pipit.Train(corpus, cfg, rep)
		if err != nil {
			return err
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), res)
		}
		printTrainReport(cmd.OutOrStdout(), res)
		return nil
	}
	return cmd
}

func printTrainReport(w io.Writer, r *pipit.TrainResult) {
	fmt.Fprintf(w, "model %s (%s), best epoch %d of %d, %.1f s\n", r.Model, r.Arch, r.BestEpoch, r.Epochs, r.Seconds)
	fmt.Fprintf(w, "  validation fold %s: accuracy %.3f\n", r.ValFold, r.ValAccuracy)
	fmt.Fprintf(w, "  test fold %s: window accuracy %.3f, clip accuracy %.3f (mean of window probabilities)\n", r.TestFold, r.TestAccuracy, r.TestClipAccuracy)
	fmt.Fprintf(w, "  log %s, curves %s\n", r.Log, r.Curves)
}
