package pipit

import (
	"fmt"
	"math"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
)

// QATRecipe is quantisation-aware fine-tuning after calibration (Jacob et
// al. 2018 §3): Adam at a constant learning rate on the training folds,
// the best epoch on the validation fold kept, weights and activation
// ranges together. Epochs 0 means post-training quantisation only.
type QATRecipe struct {
	Epochs int
	LR     float64 // default 2e-4 (common practice: a small fraction of the training rate)
	Batch  int     // default 32
	Seed   uint64  // shuffling; default 1
}

// TrainingFolds, given as the calibration fold of [QuantizeConfig],
// calibrates on every fold but the model's test fold.
const TrainingFolds = "train"

// QuantizeConfig configures [Quantize].
type QuantizeConfig struct {
	Data      Data   // the corpus to calibrate on (and to fine-tune and test on)
	CalibFold string // fold label; "": the model's validation fold; TrainingFolds: every fold but the test fold
	Method    string // quant.MethodAuto (default), MethodMinMax, MethodPercentile or MethodMSE
	Scheme    quant.Scheme
	QAT       QATRecipe
	Out       string // int8 model file to write (by convention NAME.pq8)
}

// QuantizeResult is what [Quantize] did and measured.
type QuantizeResult struct {
	Out            string              `json:"out"`
	Method         string              `json:"method"`
	Scheme         quant.Scheme        `json:"scheme"`
	CalibFold      string              `json:"calib_fold"`
	CalibWindows   int                 `json:"calib_windows"`
	TestFold       string              `json:"test_fold"`
	TestWindows    int                 `json:"test_windows"`
	FloatAccuracy  float64             `json:"float_accuracy"`
	Int8Accuracy   float64             `json:"int8_accuracy"`
	FloatClipAcc   float64             `json:"float_clip_accuracy"`
	Int8ClipAcc    float64             `json:"int8_clip_accuracy"`
	PTQAccuracy    float64             `json:"ptq_int8_accuracy"` // before QAT (equals int8_accuracy without it)
	QATEpochs      int                 `json:"qat_epochs"`
	PerLayerSQNRdB []float64           `json:"per_layer_sqnr_db"`
	Layers         []quant.LayerReport `json:"layers"` // post-training calibration
	Tried          map[string]float64  `json:"tried,omitempty"`
	SQNRWindows    int                 `json:"sqnr_windows"` // calibration windows the SQNR figures are computed on
	LogitCorr      float64             `json:"logit_correlation"`
	LogitMaxErr    float64             `json:"logit_max_abs_error"`
	WeightBytes    int64               `json:"int8_weight_bytes"`
	FloatBytes     int64               `json:"float_weight_bytes"`
	OverheadBytes  int64               `json:"overhead_bytes"`
	Model          *quant.Model        `json:"-"`
}

// Quantize calibrates fm to int8 on the calibration fold of cfg.Data
// (streamed: quant.Calibrate keeps bounded statistics, not the windows'
// activations), optionally fine-tunes it with quantisation-aware training
// on the training folds, writes the int8 model (with fm's model info) to
// cfg.Out, and evaluates float and int8 on the model's test fold. Both the
// post-training and the fine-tuned model are checked for int32
// accumulator overflow before anything is written. Calibrating on the
// test fold is refused.
func Quantize(fm *FloatModel, cfg QuantizeConfig, rep Reporter) (*QuantizeResult, error) {
	rep = orQuiet(rep)
	if cfg.Out == "" {
		return nil, fmt.Errorf("pipit: quantize: no output model file")
	}
	info := fm.ModelInfo
	c, err := openForModel(cfg.Data, info)
	if err != nil {
		return nil, err
	}
	testIdx, err := c.FoldIndex(info.TestFold)
	if err != nil {
		return nil, fmt.Errorf("pipit: the model's test fold: %w", err)
	}
	if err := checkTestFold(c, info, testIdx, rep); err != nil {
		return nil, err
	}
	calib := cfg.CalibFold
	if calib == "" {
		calib = info.ValFold
	}
	var calIDs []int
	testIDs, rest := c.Split(testIdx)
	if calib == TrainingFolds {
		calIDs = rest
	} else {
		k, err := c.FoldIndex(calib)
		if err != nil {
			return nil, fmt.Errorf("pipit: calibration fold: %w", err)
		}
		if k == testIdx {
			return nil, fmt.Errorf("pipit: calibration fold %q is the model's test fold: calibrate on other data", calib)
		}
		calIDs, _ = c.Split(k)
	}
	ld := newLoader(c, cfg.Data, info.FrontEnd, info.Window, rep)
	calSet, err := ld.load("calibration", calIDs, false, info.Stats)
	if err != nil {
		return nil, err
	}
	testSet, err := ld.load("test", testIDs, false, info.Stats)
	if err != nil {
		return nil, err
	}
	qcfg := quant.Config{Method: cfg.Method, Scheme: cfg.Scheme}
	if qcfg.Method == "" {
		qcfg.Method = quant.MethodAuto
	}
	rep.Stage("calibrate")
	rep.Step(0, calSet.Len(), "windows", "method "+qcfg.Method)
	ptq, qrep, err := quant.Calibrate(fm.Net, calSet, qcfg)
	if err != nil {
		return nil, err
	}
	rep.Done(fmt.Sprintf("%d windows, method %s", calSet.Len(), qrep.Method))
	q := ptq
	if cfg.QAT.Epochs > 0 {
		if q, err = fineTune(fm, c, ld, testIdx, cfg.Scheme, cfg.QAT, rep); err != nil {
			return nil, err
		}
	}
	qinfo := *info
	qinfo.CalibClips = c.Identify(calIDs)
	if _, err := withInfo(q, &qinfo); err != nil {
		return nil, err
	}
	if err := q.WriteFile(cfg.Out); err != nil {
		return nil, err
	}
	res := &QuantizeResult{Out: cfg.Out, Method: qrep.Method, Scheme: q.Scheme, CalibFold: calib, CalibWindows: calSet.Len(),
		TestFold: info.TestFold, TestWindows: testSet.Len(), QATEpochs: cfg.QAT.Epochs, Layers: qrep.Layers, Tried: qrep.Tried,
		SQNRWindows: qrep.SQNRWindows, LogitCorr: qrep.LogitCorr, LogitMaxErr: qrep.LogitMaxErr,
		WeightBytes: qrep.WeightBytes, FloatBytes: qrep.FloatBytes, OverheadBytes: qrep.OverheadBytes, Model: q}
	for _, l := range qrep.Layers {
		res.PerLayerSQNRdB = append(res.PerLayerSQNRdB, l.SQNRdB)
	}
	fr, err := Evaluate(fm, testSet)
	if err != nil {
		return nil, err
	}
	ir, err := Evaluate(&Int8Model{Q: q, ModelInfo: info}, testSet)
	if err != nil {
		return nil, err
	}
	res.FloatAccuracy, res.FloatClipAcc, res.Int8Accuracy, res.Int8ClipAcc, res.PTQAccuracy = fr.Accuracy, fr.ClipAccuracy, ir.Accuracy, ir.ClipAccuracy, ir.Accuracy
	if q != ptq {
		pr, err := Evaluate(&Int8Model{Q: ptq, ModelInfo: info}, testSet)
		if err != nil {
			return nil, err
		}
		res.PTQAccuracy = pr.Accuracy
	}
	return res, nil
}

// fineTune runs quantisation-aware training of fm on the training folds
// of c (every fold but the test and validation folds), keeps the epoch
// best on the validation fold and converts it.
func fineTune(fm *FloatModel, c *datasets.Corpus, ld *loader, testIdx int, s quant.Scheme, r QATRecipe, rep Reporter) (*quant.Model, error) {
	valIdx, err := c.FoldIndex(fm.ModelInfo.ValFold)
	if err != nil {
		return nil, fmt.Errorf("pipit: the model's validation fold: %w", err)
	}
	if r.LR == 0 {
		r.LR = 2e-4
	}
	if r.Batch == 0 {
		r.Batch = 32
	}
	if r.Seed == 0 {
		r.Seed = 1
	}
	if !(r.LR > 0) || math.IsInf(r.LR, 0) || r.Batch < 1 {
		return nil, fmt.Errorf("pipit: QAT learning rate %g and batch %d: want a positive rate and batch", r.LR, r.Batch)
	}
	trainIDs, valIDs, _ := c.Partition(testIdx, valIdx)
	info := fm.ModelInfo
	trainSet, err := ld.load("QAT train", trainIDs, false, info.Stats)
	if err != nil {
		return nil, err
	}
	valSet, err := ld.load("QAT val", valIDs, false, info.Stats)
	if err != nil {
		return nil, err
	}
	qat, err := quant.NewQAT(fm.Net, s)
	if err != nil {
		return nil, err
	}
	defer qat.Net.Close()
	tr, err := nn.NewTrainer(qat.Net, &nn.SoftmaxCrossEntropy{Classes: len(info.Classes)}, nn.OptimizerConfig{Kind: nn.OptAdam}, nn.Schedule{Base: r.LR}, r.Seed)
	if err != nil {
		return nil, err
	}
	qat.Attach(tr)
	_, err = nn.Fit(tr, nn.FitConfig{Epochs: r.Epochs, Batch: r.Batch, Seed: r.Seed}, trainSet, valSet,
		func(ep, st, n int, loss, acc float64, _ int, _ float64) {
			if st == 1 {
				rep.Stage(fmt.Sprintf("QAT epoch %d/%d", ep, r.Epochs))
			}
			rep.Step(st, n, "batches", fmt.Sprintf("train loss %.4f, %.1f %% of windows right", loss, 100*acc))
		},
		func(e nn.EpochStats) error {
			rep.Done(fmt.Sprintf("train loss %.4f, %.1f %% of windows right; val fold %.1f %% right", e.Loss, 100*e.Accuracy, 100*e.ValAcc))
			return nil
		})
	if err != nil {
		return nil, err
	}
	return qat.Quantize()
}
