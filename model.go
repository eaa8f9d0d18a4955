package pipit

import (
	"encoding/json"
	"fmt"
	"io"
	"os"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
)

// Model is a trained classifier, float or int8, with what it was trained
// on. [Evaluate], [Timeline] and the commands work on either through this
// interface.
type Model interface {
	// Info returns the model info: classes, front end, window, band
	// statistics, the labels of the test and validation folds.
	Info() *datasets.ModelInfo
	// Predict writes the logits (n, classes) of n inputs x (n, bands,
	// frames, 1), normalised by Info().Stats, into dst. It panics when the
	// lengths do not match.
	Predict(dst, x []float32, n int)
	// Close releases the model's workers; the model must not be used
	// afterwards.
	Close()
}

// FloatModel is a trained float network.
type FloatModel struct {
	Net       *nn.Network
	ModelInfo *datasets.ModelInfo
}

// Info implements Model.
func (m *FloatModel) Info() *datasets.ModelInfo { return m.ModelInfo }

// Predict implements Model (batches of 64 through the network).
func (m *FloatModel) Predict(dst, x []float32, n int) { m.Net.Predict(dst, x, n, 64) }

// Close implements Model.
func (m *FloatModel) Close() { m.Net.Close() }

// Int8Model is a quantised network run by the integer-only engine.
type Int8Model struct {
	Q         *quant.Model
	ModelInfo *datasets.ModelInfo
}

// Info implements Model.
func (m *Int8Model) Info() *datasets.ModelInfo { return m.ModelInfo }

// Predict implements Model: each input is quantised with the model's
// input parameters, run by the integer engine, and its int8 logits
// dequantised.
func (m *Int8Model) Predict(dst, x []float32, n int) {
	in, L := m.Q.Input.Size(), m.Q.Classes
	if len(x) != n*in || len(dst) != n*L {
		panic(fmt.Sprintf("pipit: Int8Model.Predict: len(x) = %d, len(dst) = %d for %d inputs of %d and %d classes", len(x), len(dst), n, in, L))
	}
	for i := 0; i < n; i++ {
		copy(dst[i*L:(i+1)*L], m.Q.Run(x[i*in:(i+1)*in]))
	}
}

// Close implements Model (nothing to release).
func (m *Int8Model) Close() {}

// LoadModel reads a float model file (written by [Train]) or an int8 one
// (written by [Quantize]); the first bytes of the file tell which.
func LoadModel(path string) (Model, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("pipit: %w", err)
	}
	head := make([]byte, 8)
	k, _ := io.ReadFull(f, head)
	f.Close()
	if quant.IsModelFile(head[:k]) {
		return LoadInt8Model(path)
	}
	return LoadFloatModel(path)
}

// LoadFloatModel reads a float model file written by [Train].
func LoadFloatModel(path string) (*FloatModel, error) {
	ck, err := nn.ReadCheckpoint(path)
	if err != nil {
		return nil, err
	}
	info, err := datasets.ParseModelInfo(path, ck.Meta)
	if err != nil {
		ck.Trainer.Net.Close()
		return nil, err
	}
	return &FloatModel{Net: ck.Trainer.Net, ModelInfo: info}, nil
}

// LoadInt8Model reads an int8 model file written by [Quantize].
func LoadInt8Model(path string) (*Int8Model, error) {
	q, err := quant.ReadModelFile(path)
	if err != nil {
		return nil, err
	}
	info, err := datasets.ParseModelInfo(path, q.Meta)
	if err != nil {
		return nil, err
	}
	return &Int8Model{Q: q, ModelInfo: info}, nil
}

// withInfo returns q with info as its metadata.
func withInfo(q *quant.Model, info *datasets.ModelInfo) (*quant.Model, error) {
	b, err := json.Marshal(info)
	if err != nil {
		return nil, fmt.Errorf("pipit: %w", err)
	}
	q.Meta = b
	return q, nil
}

// Level is the scores of one level of evaluation (windows or clips).
type Level struct {
	nn.Metrics
	Confusion [][]int `json:"confusion"` // [true][predicted] counts
}

// Evaluation is what [Evaluate] measured on a set.
type Evaluation struct {
	Classes      []string  `json:"classes"`
	Windows      Level     `json:"windows"`
	ClipsMean    Level     `json:"clips_mean_probability"`
	ClipsVote    Level     `json:"clips_majority_vote"`
	Accuracy     float64   `json:"accuracy"`      // window level
	ClipAccuracy float64   `json:"clip_accuracy"` // clips by mean window probability
	Loss         float64   `json:"loss"`          // mean softmax cross-entropy over windows
	Skipped      int       `json:"skipped_clips"`
	NumWindows   int       `json:"num_windows"`
	NumClips     int       `json:"num_clips"`
	Probs        []float32 `json:"-"` // (windows, classes) softmax probabilities
}

// Evaluate runs m over every window of set (256 windows in memory at a
// time, whatever the set's size) and scores windows and clips: accuracy,
// balanced accuracy, per-class precision, recall and F1 and the confusion
// matrix, for windows, for clips by mean window probability and for clips
// by majority vote. set must be normalised as m expects (Stats).
func Evaluate(m Model, set *datasets.Set) (*Evaluation, error) {
	classes := m.Info().Classes
	L := len(classes)
	n, in := set.Len(), set.InputSize()
	if n == 0 {
		return nil, fmt.Errorf("pipit: evaluate: no windows")
	}
	labels := make([]int, n)
	logits := make([]float32, n*L)
	const chunk = 256
	x := make([]float32, chunk*in)
	for lo := 0; lo < n; lo += chunk {
		hi := min(lo+chunk, n)
		for i := lo; i < hi; i++ {
			labels[i] = set.Sample(i, 0, x[(i-lo)*in:(i-lo+1)*in])
		}
		m.Predict(logits[lo*L:hi*L], x[:(hi-lo)*in], hi-lo)
	}
	loss, _, err := (&nn.SoftmaxCrossEntropy{Classes: L}).Forward(logits, labels, nil)
	if err != nil {
		return nil, err
	}
	probs := make([]float32, len(logits))
	nn.Softmax(probs, logits, L)
	preds := make([]int, n)
	for i := range preds {
		preds[i] = nn.Argmax(logits[i*L : (i+1)*L])
	}
	ev := &Evaluation{Classes: classes, Loss: loss, Skipped: len(set.Skipped), NumWindows: n, NumClips: len(set.Clips), Probs: probs}
	level := func(labels, preds []int) (Level, error) {
		cm, err := nn.NewConfusion(L, labels, preds)
		if err != nil {
			return Level{}, err
		}
		return Level{Metrics: cm.Metrics(), Confusion: cm.Counts}, nil
	}
	if ev.Windows, err = level(labels, preds); err != nil {
		return nil, err
	}
	clipLabels, byMean, byVote := set.ClipVotes(probs, L)
	if ev.ClipsMean, err = level(clipLabels, byMean); err != nil {
		return nil, err
	}
	if ev.ClipsVote, err = level(clipLabels, byVote); err != nil {
		return nil, err
	}
	ev.Accuracy, ev.ClipAccuracy = ev.Windows.Accuracy, ev.ClipsMean.Accuracy
	return ev, nil
}

// AllFolds, given as the fold of [EvaluateFold], evaluates every clip.
const AllFolds = "all"

// EvaluateFold evaluates m on one fold of the corpus d: fold is a fold
// label, "" for the model's test fold, or [AllFolds]. A corpus without
// folds gets the model's (assigned from the model's seed); the corpus's
// classes are mapped onto the model's.
func EvaluateFold(m Model, d Data, fold string, rep Reporter) (*Evaluation, error) {
	set, err := LoadFold(m.Info(), d, fold, rep)
	if err != nil {
		return nil, err
	}
	return Evaluate(m, set)
}

// LoadFold reads the windows of one fold of the corpus d as the model
// described by info sees them (its front end, window and band
// statistics): fold is a label, "" for the model's test fold, or
// [AllFolds].
func LoadFold(info *datasets.ModelInfo, d Data, fold string, rep Reporter) (*datasets.Set, error) {
	c, err := openForModel(d, info)
	if err != nil {
		return nil, err
	}
	return loadFold(c, info, d, fold, rep)
}

func loadFold(c *datasets.Corpus, info *datasets.ModelInfo, d Data, fold string, rep Reporter) (*datasets.Set, error) {
	if fold == "" {
		fold = info.TestFold
	}
	var ids []int
	if fold == AllFolds {
		for _, cl := range c.Clips {
			ids = append(ids, cl.ID)
		}
	} else {
		k, err := c.FoldIndex(fold)
		if err != nil {
			return nil, fmt.Errorf("pipit: %w", err)
		}
		if fold == info.TestFold {
			if err := checkTestFold(c, info, k, rep); err != nil {
				return nil, err
			}
		}
		ids, _ = c.Split(k)
	}
	return newLoader(c, d, info.FrontEnd, info.Window, rep).load(fold, ids, false, info.Stats)
}

// checkTestFold refuses fold k of c as the model's test fold when it holds
// other clips than the model recorded, and warns when the model records
// none.
func checkTestFold(c *datasets.Corpus, info *datasets.ModelInfo, k int, rep Reporter) error {
	checked, err := info.CheckTestFold(c, k)
	if err != nil {
		return fmt.Errorf("pipit: %w", err)
	}
	if !checked {
		orQuiet(rep).Warn(fmt.Errorf("the model records no test clips (written by an older pipit): cannot check that fold %s of %s holds the clips it was tested on", info.TestFold, c.Source))
	}
	return nil
}

// Probabilities returns the softmax class probabilities (n, classes) of
// n inputs x (see Model.Predict).
func Probabilities(m Model, x []float32, n int) []float32 {
	L := len(m.Info().Classes)
	logits := make([]float32, n*L)
	m.Predict(logits, x, n)
	nn.Softmax(logits, logits, L)
	return logits
}
