package main

import (
	"fmt"
	"io"
	"os"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/internal/plots"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
)

// readHead returns up to n bytes from the start of path.
func readHead(path string, n int) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	b := make([]byte, n)
	k, _ := io.ReadFull(f, b)
	return b[:k], nil
}

type levelReport struct {
	nn.Metrics
	Confusion [][]int `json:"confusion"`
}

type evalReport struct {
	Model      string      `json:"model"`
	Data       string      `json:"data"`
	Fold       int         `json:"fold"` // -1: every clip
	Classes    []string    `json:"classes"`
	Windows    levelReport `json:"windows"`
	ClipsMean  levelReport `json:"clips_mean_probability"`
	ClipsVote  levelReport `json:"clips_majority_vote"`
	Accuracy   float64     `json:"accuracy"`      // window level
	ClipAcc    float64     `json:"clip_accuracy"` // mean probability
	Loss       float64     `json:"loss"`
	PNG        string      `json:"confusion_png"`
	Skipped    int         `json:"skipped_clips"`
	NumWindows int         `json:"num_windows"`
	NumClips   int         `json:"num_clips"`
}

// loadedModel is a trained float model, or a quantised one (q set), with
// what it was trained on.
type loadedModel struct {
	net  *nn.Network
	q    *quant.Model
	info *datasets.ModelInfo
}

func (m *loadedModel) close() {
	if m.net != nil {
		m.net.Close()
	}
}

func (m *loadedModel) predictor() predictor {
	if m.q != nil {
		return int8Predictor(m.q)
	}
	return floatPredictor(m.net)
}

// loadModel reads a float model (nn checkpoint) or a quantised model.
func loadModel(path string) (*loadedModel, error) {
	if head, err := readHead(path, 8); err == nil && quant.IsModelFile(head) {
		q, err := quant.ReadModelFile(path)
		if err != nil {
			return nil, err
		}
		info, err := datasets.ParseModelInfo(path, q.Meta)
		if err != nil {
			return nil, err
		}
		return &loadedModel{q: q, info: info}, nil
	}
	ck, err := nn.ReadCheckpoint(path)
	if err != nil {
		return nil, err
	}
	info, err := datasets.ParseModelInfo(path, ck.Meta)
	if err != nil {
		ck.Trainer.Net.Close()
		return nil, err
	}
	return &loadedModel{net: ck.Trainer.Net, info: info}, nil
}

func newEvalCmd() *cobra.Command {
	var model, data, group, png, cacheDir string
	var fold int
	var asJSON, skipBad bool
	cmd := &cobra.Command{
		Use:   "eval --model MODEL --data MANIFEST|FOLDER",
		Short: "Evaluate a float or int8 model: accuracy, recall, precision and F1 by class, confusion matrix",
		Long: `eval runs a model over a fold of a corpus (default: the fold it held out
for testing) and reports accuracy, balanced accuracy, per-class precision,
recall and F1 and the confusion matrix, for windows and for whole clips
(by mean window probability and by majority vote); the window-level
confusion matrix is also drawn as a PNG.`,
		Args: cobra.NoArgs,
	}
	f := cmd.Flags()
	f.StringVar(&model, "model", "", "model file written by pipit train (required)")
	f.StringVar(&data, "data", "", "manifest CSV or class-folder corpus (required)")
	f.IntVar(&fold, "fold", -2, "fold to evaluate; -1 for every clip (default: the model's test fold)")
	f.StringVar(&group, "group", "", "manifest column naming the source recording")
	f.StringVar(&png, "png", "", "confusion-matrix PNG to write (default: MODEL.confusion.png)")
	f.StringVar(&cacheDir, "cache", defaultCacheDir(), "feature cache directory (empty: no cache)")
	f.BoolVar(&skipBad, "skip-bad", false, "skip unreadable WAV files instead of failing")
	f.BoolVar(&asJSON, "json", false, "print the report as JSON")
	cmd.MarkFlagRequired("model")
	cmd.MarkFlagRequired("data")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		m, err := loadModel(model)
		if err != nil {
			return err
		}
		defer m.close()
		c, err := datasets.Open(data, group)
		if err != nil {
			return err
		}
		if err := m.info.Relabel(c); err != nil {
			return fmt.Errorf("%s: %w", data, err)
		}
		if !c.HasFolds {
			if err := c.AssignFolds(m.info.Folds, m.info.FoldSeed); err != nil {
				return err
			}
		}
		if fold == -2 {
			fold = m.info.TestFold
		}
		if fold >= c.Folds || fold < -1 {
			return fmt.Errorf("--fold %d: the corpus has folds 0..%d", fold, c.Folds-1)
		}
		var ids []int
		for _, cl := range c.Clips {
			if fold == -1 || cl.Fold == fold {
				ids = append(ids, cl.ID)
			}
		}
		if png == "" {
			png = model + ".confusion.png"
		}
		stderr := cmd.ErrOrStderr()
		b := newTask(stderr, "load")
		set, err := datasets.Load(c, ids, datasets.Options{FrontEnd: m.info.FrontEnd, Window: m.info.Window, Cache: &datasets.Cache{Dir: cacheDir},
			SkipBad: skipBad, Warn: func(err error) { fmt.Fprintf(stderr, "skipping: %v\n", err) },
			Progress: func(d, t int) { b.step(d, t, "clips", "") }})
		if err != nil {
			return err
		}
		b.finish(fmt.Sprintf("%d clips → %d windows", len(set.Clips), set.Len()))
		set.Stats = m.info.Stats
		rep, err := evaluateSet(m.predictor(), set, m.info.Classes)
		if err != nil {
			return err
		}
		rep.Model, rep.Data, rep.Fold, rep.PNG = model, data, fold, png
		if err := plots.SavePNG(png, confusionFigure(rep.Windows.Confusion, m.info.Classes, fmt.Sprintf("confusion (windows), fold %d", fold))); err != nil {
			return err
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		printEval(cmd.OutOrStdout(), rep)
		return nil
	}
	return cmd
}

// predictor returns the logits (n, L) of n inputs.
type predictor func(x []float32, n int) []float32

func floatPredictor(net *nn.Network) predictor {
	return func(x []float32, n int) []float32 {
		out := make([]float32, n*net.Output().Size())
		net.Predict(out, x, n, 64)
		return out
	}
}

func int8Predictor(m *quant.Model) predictor {
	return func(x []float32, n int) []float32 {
		in := m.Input.Size()
		out := make([]float32, 0, n*m.Classes)
		for i := 0; i < n; i++ {
			out = append(out, m.Run(x[i*in:(i+1)*in])...)
		}
		return out
	}
}

// evaluateSet runs a model over set and computes window and clip metrics.
func evaluateSet(predict predictor, set *datasets.Set, classes []string) (*evalReport, error) {
	L := len(classes)
	n, in := set.Len(), set.InputSize()
	labels := make([]int, n)
	logits := make([]float32, 0, n*L)
	const chunk = 256 // windows in memory at once, whatever the corpus size
	x := make([]float32, chunk*in)
	for lo := 0; lo < n; lo += chunk {
		hi := min(lo+chunk, n)
		for i := lo; i < hi; i++ {
			labels[i] = set.Sample(i, 0, x[(i-lo)*in:(i-lo+1)*in])
		}
		logits = append(logits, predict(x[:(hi-lo)*in], hi-lo)...)
	}
	loss, _, err := (&nn.SoftmaxCrossEntropy{Classes: L}).Forward(logits, labels, nil)
	if err != nil {
		return nil, err
	}
	ev := &nn.Evaluation{Probs: make([]float32, len(logits)), Labels: labels, Preds: make([]int, n)}
	nn.Softmax(ev.Probs, logits, L)
	for i := 0; i < n; i++ {
		best := 0
		for c := 1; c < L; c++ {
			if logits[i*L+c] > logits[i*L+best] {
				best = c
			}
		}
		ev.Preds[i] = best
	}
	rep := &evalReport{Classes: classes, Loss: loss, Skipped: len(set.Skipped), NumWindows: set.Len(), NumClips: len(set.Clips)}
	level := func(labels, preds []int) (levelReport, error) {
		cm, err := nn.NewConfusion(L, labels, preds)
		if err != nil {
			return levelReport{}, err
		}
		return levelReport{Metrics: cm.Metrics(), Confusion: cm.Counts}, nil
	}
	if rep.Windows, err = level(ev.Labels, ev.Preds); err != nil {
		return nil, err
	}
	labels, byMean, byVote := set.ClipVotes(ev.Probs, L)
	if rep.ClipsMean, err = level(labels, byMean); err != nil {
		return nil, err
	}
	if rep.ClipsVote, err = level(labels, byVote); err != nil {
		return nil, err
	}
	rep.Accuracy, rep.ClipAcc = rep.Windows.Accuracy, rep.ClipsMean.Accuracy
	return rep, nil
}

func printEval(w io.Writer, r *evalReport) {
	fmt.Fprintf(w, "model %s on %s, fold %d: %d clips, %d windows\n\n", r.Model, r.Data, r.Fold, r.NumClips, r.NumWindows)
	for _, lv := range []struct {
		name string
		l    levelReport
	}{{"windows", r.Windows}, {"clips, mean probability", r.ClipsMean}, {"clips, majority vote", r.ClipsVote}} {
		fmt.Fprintf(w, "%-24s accuracy %.3f  balanced accuracy %.3f  macro F1 %.3f\n", lv.name, lv.l.Accuracy, lv.l.BalancedAccuracy, lv.l.MacroF1)
	}
	fmt.Fprintf(w, "\nby class (windows):\n%-18s %8s %7s %9s %6s\n", "class", "windows", "recall", "precision", "F1")
	for k, pc := range r.Windows.PerClass {
		fmt.Fprintf(w, "%-18s %8d %7.3f %9.3f %6.3f\n", r.Classes[k], pc.Labelled, pc.Recall, pc.Precision, pc.F1)
	}
	cm := &nn.Confusion{Counts: r.Windows.Confusion}
	fmt.Fprintf(w, "\nconfusion matrix (windows; rows true, columns predicted):\n%s\nconfusion PNG: %s\n", cm.Text(r.Classes), r.PNG)
}

// confusionFigure draws counts as a heat map, true classes on y (class 0
// at the top) and predicted on x.
func confusionFigure(counts [][]int, classes []string, title string) plots.HeatMap {
	L := len(counts)
	g := plots.Grid{Values: make([][]float64, L), DX: 1, DY: 1}
	for r := 0; r < L; r++ {
		g.Values[r] = make([]float64, L)
		for c := 0; c < L; c++ {
			g.Values[r][c] = float64(counts[L-1-r][c])
		}
	}
	return plots.HeatMap{Title: title, XLabel: "predicted class", YLabel: "true class (0 at top)", BarLabel: "windows", Grid: g,
		XTicks: classes, YTicks: reversed(classes), Annotate: true}
}

func reversed(s []string) []string {
	out := make([]string, len(s))
	for i, v := range s {
		out[len(s)-1-i] = v
	}
	return out
}
