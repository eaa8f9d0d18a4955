package main

import (
	"fmt"
	"io"
	"os"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/quant"
)

// quantizeReport is the JSON report of quantize.
type quantizeReport struct {
	Model string `json:"model"`
	*pipit.QuantizeResult
}

func newQuantizeCmd() *cobra.Command {
	var model, calib, method, scheme, out, group, cacheDir string
	var calibFold string
	var qatEpochs int
	var qatLR float64
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "quantize --model MODEL --calib MANIFEST|FOLDER --out QMODEL",
		Short: "Calibrate a float model to int8 and measure the accuracy it costs",
		Long: `quantize folds batch norm, observes activation ranges on a calibration
fold (default: the model's validation fold), quantises weights to int8
(symmetric, per output channel by default), computes fixed-point
requantisation multipliers, and checks every accumulator against int32.
It then runs the float network and the integer-only engine on the same
test windows (the model's test fold) and reports both accuracies, the
per-layer SQNR and the agreement of the logits. QMODEL can be given to
pipit eval.`,
		Args: cobra.NoArgs,
	}
	f := cmd.Flags()
	f.StringVar(&model, "model", "", "float model written by pipit train (required)")
	f.StringVar(&calib, "calib", "", "corpus to calibrate on: manifest CSV or class folders (required)")
	f.StringVar(&calibFold, "calib-fold", "", "label of the calibration fold (default: the model's validation fold; "+pipit.TrainingFolds+": every fold but the test fold)")
	f.StringVar(&method, "method", quant.MethodAuto, "how activation ranges are calibrated: minmax, percentile, mse or auto (best on the calibration set)")
	f.StringVar(&scheme, "scheme", quant.PerChannel, "weights: per-channel, per-tensor, or pow2 (per-channel with power-of-two scales)")
	f.StringVar(&out, "out", "", "int8 model file to write, by convention NAME.pq8 (required)")
	f.StringVar(&group, "group", "", "manifest column naming the source recording")
	f.StringVar(&cacheDir, "cache", defaultCacheDir(), "feature cache directory (empty: no cache)")
	f.IntVar(&qatEpochs, "qat-epochs", 0, "quantisation-aware fine-tuning epochs on the training folds after calibration (0: post-training quantisation only)")
	f.Float64Var(&qatLR, "qat-lr", 2e-4, "learning rate of quantisation-aware fine-tuning")
	f.BoolVar(&asJSON, "json", false, "print the report as JSON")
	for _, r := range []string{"model", "calib", "out"} {
		cmd.MarkFlagRequired(r)
	}
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		sch := quant.Scheme{Weights: scheme}
		if scheme == "pow2" {
			sch = quant.Scheme{Weights: quant.PerChannel, Pow2: true}
		}
		fm, err := pipit.LoadFloatModel(model)
		if err != nil {
			if quant.IsModelFile(head(model)) {
				return fmt.Errorf("%s is already quantised", model)
			}
			return err
		}
		defer fm.Close()
		res, err := pipit.Quantize(fm, pipit.QuantizeConfig{Data: pipit.Data{Path: calib, Group: group, CacheDir: cacheDir}, CalibFold: calibFold,
			Method: method, Scheme: sch, QAT: pipit.QATRecipe{Epochs: qatEpochs, LR: qatLR}, Out: out}, newReporter(cmd.ErrOrStderr()))
		if err != nil {
			return err
		}
		rep := &quantizeReport{Model: model, QuantizeResult: res}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		printQuantize(cmd.OutOrStdout(), rep)
		return nil
	}
	return cmd
}

// head returns up to the first 8 bytes of path (nil if unreadable).
func head(path string) []byte {
	f, err := os.Open(path)
	if err != nil {
		return nil
	}
	defer f.Close()
	b := make([]byte, 8)
	n, _ := io.ReadFull(f, b)
	return b[:n]
}

func printQuantize(w io.Writer, r *quantizeReport) {
	fmt.Fprintf(w, "quantised %s → %s (%s weights, pow2 %v, ranges by %s on fold %s, %d windows)\n\n", r.Model, r.Out, r.Scheme.Weights, r.Scheme.Pow2, r.Method, r.CalibFold, r.CalibWindows)
	if r.QATEpochs > 0 {
		fmt.Fprintln(w, "post-training calibration (the table and logit figures below; the written model is the fine-tuned one):")
	}
	fmt.Fprintf(w, "%-3s %-14s %-6s %10s %5s %9s %12s %7s\n", "#", "op", "act", "out scale", "zp", "SQNR dB", "max |acc|", "margin")
	for _, l := range r.Layers {
		fmt.Fprintf(w, "%-3d %-14s %-6s %10.4g %5d %9.1f %12d %6.1fb\n", l.Index, l.Op, l.Act, l.OutScale, l.OutZeroPoint, l.SQNRdB, l.MaxAcc, l.MarginBits)
	}
	fmt.Fprintf(w, "\ntest fold %s (%d windows):\n  float accuracy %.3f (clips %.3f)\n  int8  accuracy %.3f (clips %.3f)\n", r.TestFold, r.TestWindows, r.FloatAccuracy, r.FloatClipAcc, r.Int8Accuracy, r.Int8ClipAcc)
	if r.QATEpochs > 0 {
		fmt.Fprintf(w, "  (after %d epochs of quantisation-aware fine-tuning; post-training int8 was %.3f)\n", r.QATEpochs, r.PTQAccuracy)
	}
	fmt.Fprintf(w, "logits on the calibration set: correlation %.5f, max |error| %.3g\n", r.LogitCorr, r.LogitMaxErr)
	fmt.Fprintf(w, "weights: %d bytes int8 (%d as float32, ratio %.2f) + %d bytes of int32 bias, multiplier, shift\n", r.WeightBytes, r.FloatBytes, float64(r.WeightBytes)/float64(r.FloatBytes), r.OverheadBytes)
}
