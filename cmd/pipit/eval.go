package main

import (
	"fmt"
	"io"
	"strings"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/internal/plots"
	"github.com/pipit-audio/pipit/nn"
)

// evalReport is the JSON report of eval.
type evalReport struct {
	Model string   `json:"model"`
	Data  string   `json:"data"`
	Fold  string   `json:"fold"` // fold label, or "all"
	PNG   string   `json:"confusion_png"`
	With  []string `json:"ensemble_with,omitempty"` // further models averaged with Model
	*pipit.Evaluation
}

func newEvalCmd() *cobra.Command {
	var model, data, group, png, cacheDir string
	var fold string
	var asJSON, skipBad bool
	var with []string
	cmd := &cobra.Command{
		Use:   "eval --model MODEL --data MANIFEST|FOLDER",
		Short: "Evaluate a float or int8 model: accuracy, recall, precision and F1 by class, confusion matrix",
		Long: `eval runs a model over a fold of a corpus (default: the fold it held out
for testing) and reports accuracy, balanced accuracy, per-class precision,
recall and F1 and the confusion matrix, for windows and for whole clips
(by mean window probability and by majority vote); the window-level
confusion matrix is also drawn as a PNG.
With --with MODEL2 (repeatable) it evaluates the ensemble of MODEL and the
others, the mean of their window probabilities; a device runs one model
(export takes one), so this says what averaging would buy at N times the
inference cost.`,
		Args: cobra.NoArgs,
	}
	f := cmd.Flags()
	f.StringVar(&model, "model", "", "model file written by pipit train (required)")
	f.StringVar(&data, "data", "", "manifest CSV or class-folder corpus (required)")
	f.StringVar(&fold, "fold", "", "label of the fold to evaluate, or "+pipit.AllFolds+" for every clip (default: the model's test fold)")
	f.StringVar(&group, "group", "", "manifest column naming the source recording")
	f.StringVar(&png, "png", "", "confusion-matrix PNG to write (default: MODEL.confusion.png)")
	f.StringVar(&cacheDir, "cache", defaultCacheDir(), "feature cache directory (empty: no cache)")
	f.BoolVar(&skipBad, "skip-bad", false, "skip unreadable WAV files instead of failing")
	f.BoolVar(&asJSON, "json", false, "print the report as JSON")
	f.StringArrayVar(&with, "with", nil, "a further model of an ensemble (repeatable; same classes, front end and window)")
	cmd.MarkFlagRequired("model")
	cmd.MarkFlagRequired("data")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		m, err := pipit.LoadModel(model)
		if err != nil {
			return err
		}
		if fold == "" {
			fold = m.Info().TestFold
		}
		if len(with) > 0 {
			ms := []pipit.Model{m}
			for _, p := range with {
				o, err := pipit.LoadModel(p)
				if err != nil {
					for _, x := range ms {
						x.Close()
					}
					return err
				}
				ms = append(ms, o)
			}
			if m, err = pipit.NewEnsemble(ms...); err != nil {
				for _, x := range ms {
					x.Close()
				}
				return err
			}
		}
		defer m.Close()
		if png == "" {
			png = model + ".confusion.png"
		}
		ev, err := pipit.EvaluateFold(m, pipit.Data{Path: data, Group: group, CacheDir: cacheDir, SkipBad: skipBad}, fold, newReporter(cmd.ErrOrStderr()))
		if err != nil {
			return err
		}
		rep := &evalReport{Model: model, Data: data, Fold: fold, PNG: png, With: with, Evaluation: ev}
		if err := plots.SavePNG(png, confusionFigure(ev.Windows.Confusion, ev.Classes, "confusion (windows), fold "+fold)); err != nil {
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

func printEval(w io.Writer, r *evalReport) {
	fmt.Fprintf(w, "model %s on %s, fold %s: %d clips, %d windows\n\n", r.Model, r.Data, r.Fold, r.NumClips, r.NumWindows)
	if len(r.With) > 0 {
		fmt.Fprintf(w, "ensemble: mean window probability of %s and %s (%d models; the device runs one)\n", r.Model, strings.Join(r.With, ", "), 1+len(r.With))
	}
	for _, lv := range []struct {
		name string
		l    pipit.Level
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
