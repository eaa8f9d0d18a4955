package main

import (
	"encoding/json"
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
)

type quantizeReport struct {
	Model          string              `json:"model"`
	Out            string              `json:"out"`
	Method         string              `json:"method"`
	Scheme         quant.Scheme        `json:"scheme"`
	CalibFold      int                 `json:"calib_fold"`
	CalibWindows   int                 `json:"calib_windows"`
	TestFold       int                 `json:"test_fold"`
	TestWindows    int                 `json:"test_windows"`
	FloatAccuracy  float64             `json:"float_accuracy"`
	Int8Accuracy   float64             `json:"int8_accuracy"`
	FloatClipAcc   float64             `json:"float_clip_accuracy"`
	Int8ClipAcc    float64             `json:"int8_clip_accuracy"`
	PTQAccuracy    float64             `json:"ptq_int8_accuracy"` // before QAT (equals int8_accuracy without it)
	QATEpochs      int                 `json:"qat_epochs"`
	PerLayerSQNRdB []float64           `json:"per_layer_sqnr_db"`
	Layers         []quant.LayerReport `json:"layers"`
	Tried          map[string]float64  `json:"tried,omitempty"`
	LogitCorr      float64             `json:"logit_correlation"`
	LogitMaxErr    float64             `json:"logit_max_abs_error"`
	WeightBytes    int64               `json:"int8_weight_bytes"`
	FloatBytes     int64               `json:"float_weight_bytes"`
	OverheadBytes  int64               `json:"overhead_bytes"`
}

func newQuantizeCmd() *cobra.Command {
	var model, calib, method, scheme, out, group, cacheDir string
	var calibFold, qatEpochs int
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
	f.IntVar(&calibFold, "calib-fold", -2, "calibration fold (default: the model's validation fold; -1: every fold but the test fold)")
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
		rep, err := runQuantize(model, calib, group, cacheDir, out, calibFold, quant.Config{Method: method, Scheme: sch}, qatOptions{epochs: qatEpochs, lr: qatLR}, cmd.ErrOrStderr())
		if err != nil {
			return err
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		printQuantize(cmd.OutOrStdout(), rep)
		return nil
	}
	return cmd
}

// qatOptions configure optional quantisation-aware fine-tuning.
type qatOptions struct {
	epochs int
	lr     float64
}

func runQuantize(model, calib, group, cacheDir, out string, calibFold int, cfg quant.Config, qat qatOptions, stderr io.Writer) (*quantizeReport, error) {
	m, err := loadModel(model)
	if err != nil {
		return nil, err
	}
	defer m.close()
	if m.net == nil {
		return nil, fmt.Errorf("%s is already quantised", model)
	}
	c, err := datasets.Open(calib, group)
	if err != nil {
		return nil, err
	}
	if err := m.info.Relabel(c); err != nil {
		return nil, fmt.Errorf("%s: %w", calib, err)
	}
	if !c.HasFolds {
		if err := c.AssignFolds(m.info.Folds, m.info.FoldSeed); err != nil {
			return nil, err
		}
	}
	if calibFold == -2 {
		calibFold = m.info.ValFold
	}
	var calIDs, testIDs []int
	for _, cl := range c.Clips {
		if cl.Fold == m.info.TestFold {
			testIDs = append(testIDs, cl.ID)
		} else if calibFold == -1 || cl.Fold == calibFold {
			calIDs = append(calIDs, cl.ID)
		}
	}
	if calibFold == m.info.TestFold {
		return nil, fmt.Errorf("--calib-fold %d is the model's test fold: calibrate on other data", calibFold)
	}
	opts := datasets.Options{FrontEnd: m.info.FrontEnd, Window: m.info.Window, Cache: &datasets.Cache{Dir: cacheDir}}
	calSet, err := datasets.Load(c, calIDs, opts)
	if err != nil {
		return nil, err
	}
	testSet, err := datasets.Load(c, testIDs, opts)
	if err != nil {
		return nil, err
	}
	calSet.Stats, testSet.Stats = m.info.Stats, m.info.Stats
	in := calSet.InputSize()
	x := make([]float32, calSet.Len()*in)
	labels := make([]int, calSet.Len())
	for i := range labels {
		labels[i] = calSet.Sample(i, 0, x[i*in:(i+1)*in])
	}
	b := newTask(stderr, "calibrate")
	b.show(fmt.Sprintf("%d windows, method %s …", calSet.Len(), cfg.Method))
	q, qrep, err := quant.Quantize(m.net, x, len(labels), labels, cfg)
	if err != nil {
		return nil, err
	}
	if err := q.CheckOverflow(); err != nil {
		return nil, err
	}
	b.finish(fmt.Sprintf("%d windows, method %s", calSet.Len(), qrep.Method))
	ptq := q
	if qat.epochs > 0 {
		q, err = fineTuneQAT(m, c, opts, cfg.Scheme, qat, stderr)
		if err != nil {
			return nil, err
		}
	}
	q.Meta = json.RawMessage(mustJSON(m.info))
	if err := q.WriteFile(out); err != nil {
		return nil, err
	}
	fr, err := evaluateSet(floatPredictor(m.net), testSet, m.info.Classes)
	if err != nil {
		return nil, err
	}
	ir, err := evaluateSet(int8Predictor(q), testSet, m.info.Classes)
	if err != nil {
		return nil, err
	}
	pr := ir
	if ptq != q {
		if pr, err = evaluateSet(int8Predictor(ptq), testSet, m.info.Classes); err != nil {
			return nil, err
		}
	}
	rep := &quantizeReport{Model: model, Out: out, Method: qrep.Method, Scheme: q.Scheme, CalibFold: calibFold, CalibWindows: calSet.Len(),
		TestFold: m.info.TestFold, TestWindows: testSet.Len(), FloatAccuracy: fr.Accuracy, Int8Accuracy: ir.Accuracy,
		FloatClipAcc: fr.ClipAcc, Int8ClipAcc: ir.ClipAcc, PTQAccuracy: pr.Accuracy, QATEpochs: qat.epochs, Layers: qrep.Layers, Tried: qrep.Tried,
		LogitCorr: qrep.LogitCorr, LogitMaxErr: qrep.LogitMaxErr, WeightBytes: qrep.WeightBytes, FloatBytes: qrep.FloatBytes, OverheadBytes: qrep.OverheadBytes}
	for _, l := range qrep.Layers {
		rep.PerLayerSQNRdB = append(rep.PerLayerSQNRdB, l.SQNRdB)
	}
	return rep, nil
}

// fineTuneQAT fine-tunes the float model with fake quantisation on its
// training folds (validation fold for the best epoch) and converts it.
func fineTuneQAT(m *loadedModel, c *datasets.Corpus, opts datasets.Options, s quant.Scheme, o qatOptions, stderr io.Writer) (*quant.Model, error) {
	var trainIDs, valIDs []int
	for _, cl := range c.Clips {
		switch cl.Fold {
		case m.info.TestFold:
		case m.info.ValFold:
			valIDs = append(valIDs, cl.ID)
		default:
			trainIDs = append(trainIDs, cl.ID)
		}
	}
	trainSet, err := datasets.Load(c, trainIDs, opts)
	if err != nil {
		return nil, err
	}
	valSet, err := datasets.Load(c, valIDs, opts)
	if err != nil {
		return nil, err
	}
	trainSet.Stats, valSet.Stats = m.info.Stats, m.info.Stats
	qat, err := quant.NewQAT(m.net, s)
	if err != nil {
		return nil, err
	}
	defer qat.Net.Close()
	tr, err := nn.NewTrainer(qat.Net, &nn.SoftmaxCrossEntropy{Classes: len(m.info.Classes)}, nn.OptimizerConfig{Kind: nn.OptAdam}, nn.Schedule{Base: o.lr}, 1)
	if err != nil {
		return nil, err
	}
	qat.Attach(tr)
	var b *task
	_, err = nn.Fit(tr, nn.FitConfig{Epochs: o.epochs, Batch: 32, Seed: 1}, trainSet, valSet,
		func(ep, st, n int, loss, acc float64, seen int, secs float64) {
			if st == 1 {
				b = newTask(stderr, fmt.Sprintf("QAT epoch %d/%d", ep, o.epochs))
			}
			b.step(st, n, "batches", fmt.Sprintf("train loss %.4f, %.1f %% of windows right", loss, 100*acc))
		},
		func(e nn.EpochStats) error {
			b.finish(fmt.Sprintf("train loss %.4f, %.1f %% of windows right; val fold %.1f %% right", e.Loss, 100*e.Accuracy, 100*e.ValAcc))
			return nil
		})
	if err != nil {
		return nil, err
	}
	return qat.Quantize()
}

func mustJSON(v any) []byte {
	b, err := json.Marshal(v)
	if err != nil {
		panic("pipit: internal error: " + err.Error())
	}
	return b
}

func printQuantize(w io.Writer, r *quantizeReport) {
	fmt.Fprintf(w, "quantised %s → %s (%s weights, pow2 %v, ranges by %s on fold %d, %d windows)\n\n", r.Model, r.Out, r.Scheme.Weights, r.Scheme.Pow2, r.Method, r.CalibFold, r.CalibWindows)
	if r.QATEpochs > 0 {
		fmt.Fprintln(w, "post-training calibration (the table and logit figures below; the written model is the fine-tuned one):")
	}
	fmt.Fprintf(w, "%-3s %-14s %-6s %10s %5s %9s %12s %7s\n", "#", "op", "act", "out scale", "zp", "SQNR dB", "max |acc|", "margin")
	for _, l := range r.Layers {
		fmt.Fprintf(w, "%-3d %-14s %-6s %10.4g %5d %9.1f %12d %6.1fb\n", l.Index, l.Op, l.Act, l.OutScale, l.OutZeroPoint, l.SQNRdB, l.MaxAcc, l.MarginBits)
	}
	fmt.Fprintf(w, "\ntest fold %d (%d windows):\n  float accuracy %.3f (clips %.3f)\n  int8  accuracy %.3f (clips %.3f)\n", r.TestFold, r.TestWindows, r.FloatAccuracy, r.FloatClipAcc, r.Int8Accuracy, r.Int8ClipAcc)
	if r.QATEpochs > 0 {
		fmt.Fprintf(w, "  (after %d epochs of quantisation-aware fine-tuning; post-training int8 was %.3f)\n", r.QATEpochs, r.PTQAccuracy)
	}
	fmt.Fprintf(w, "logits on the calibration set: correlation %.5f, max |error| %.3g\n", r.LogitCorr, r.LogitMaxErr)
	fmt.Fprintf(w, "weights: %d bytes int8 (%d as float32, ratio %.2f) + %d bytes of int32 bias, multiplier, shift\n", r.WeightBytes, r.FloatBytes, float64(r.WeightBytes)/float64(r.FloatBytes), r.OverheadBytes)
}
