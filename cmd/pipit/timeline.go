package main

import (
	"encoding/csv"
	"fmt"
	"io"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/internal/plots"
	"github.com/pipit-audio/pipit/nn"
)

type timelineReport struct {
	Input      string             `json:"input"`
	Model      string             `json:"model"`
	Seconds    float64            `json:"seconds"`
	Windows    int                `json:"windows"`
	WindowSec  float64            `json:"window_seconds"`
	Overlap    float64            `json:"overlap"`
	Segments   []datasets.Segment `json:"segments"`
	ClassTotal map[string]float64 `json:"seconds_per_class"`
	CSV        string             `json:"csv"`
	PNG        string             `json:"png"`
}

func newTimelineCmd() *cobra.Command {
	var model, out string
	var overlap float64
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "timeline --model MODEL IN.wav",
		Short: "Classify a long recording window by window into a time line",
		Long: `timeline cuts a recording of any length into the model's windows
(--overlap, default the model's), runs the float or int8 model on each, and
writes PREFIX.timeline.csv (one row per window: start, end, most likely
class, its probability, then every class's probability), PREFIX.timeline.png
(class probabilities over time) and prints the segments of equal most
likely class. Classifications are indicative, not a certified measurement.`,
		Args: cobra.ExactArgs(1),
	}
	cmd.Flags().StringVar(&model, "model", "", "float or int8 model (required)")
	cmd.Flags().StringVar(&out, "out", "", "output prefix (default: IN without .wav)")
	cmd.Flags().Float64Var(&overlap, "overlap", 0, "window overlap, at least 0 and below 1 (default: the model's)")
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the report as JSON")
	cmd.MarkFlagRequired("model")
	cmd.RunE = func(cmd *cobra.Command, args []string) error {
		in := args[0]
		if out == "" {
			out = strings.TrimSuffix(in, filepath.Ext(in))
		}
		if !cmd.Flags().Changed("overlap") {
			overlap = -1 // the model's
		} else if !(overlap >= 0 && overlap < 1) {
			return fmt.Errorf("--overlap %g: want at least 0 and below 1 (0.5: windows start half a window apart)", overlap)
		}
		rep, err := runTimeline(model, in, out, overlap)
		if err != nil {
			return err
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		w := cmd.OutOrStdout()
		fmt.Fprintf(w, "%s: %.1f s, %d windows of %.2f s at %.0f%% overlap\n\n", rep.Input, rep.Seconds, rep.Windows, rep.WindowSec, 100*rep.Overlap)
		for _, s := range rep.Segments {
			fmt.Fprintf(w, "%8.2f – %8.2f s  %-18s p̄ = %.2f (%d windows)\n", s.StartSec, s.EndSec, s.Label, s.MeanProb, s.Windows)
		}
		fmt.Fprintf(w, "\nwrote %s and %s\n", rep.CSV, rep.PNG)
		return nil
	}
	return cmd
}

func runTimeline(model, in, out string, overlap float64) (*timelineReport, error) {
	m, err := pipit.LoadModel(model)
	if err != nil {
		return nil, err
	}
	defer m.Close()
	info := m.Info()
	a, err := features.ReadWAVFile(in)
	if err != nil {
		return nil, err
	}
	win := info.Window
	if overlap >= 0 {
		win.Overlap = overlap
	}
	rec, err := datasets.CutRecording(a, info.FrontEnd, win, info.Stats)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", in, err)
	}
	L := len(info.Classes)
	probs := pipit.Probabilities(m, rec.Inputs, rec.N)
	segs, err := datasets.Segments(probs, info.Classes, rec.StartSec, rec.WindowSec)
	if err != nil {
		return nil, err
	}
	rep := &timelineReport{Input: in, Model: model, Seconds: a.Seconds(), Windows: rec.N, WindowSec: rec.WindowSec, Overlap: win.Overlap,
		Segments: segs, ClassTotal: map[string]float64{}, CSV: out + ".timeline.csv", PNG: out + ".timeline.png"}
	for _, s := range segs {
		rep.ClassTotal[s.Label] += s.EndSec - s.StartSec
	}
	err = fsutil.WriteWith(rep.CSV, func(w io.Writer) error {
		cw := csv.NewWriter(w)
		cw.Write(append([]string{"start_s", "end_s", "class", "probability"}, info.Classes...))
		row := make([]string, 4+L)
		for i, st := range rec.StartSec {
			p := probs[i*L : (i+1)*L]
			best := nn.Argmax(p)
			row[0], row[1], row[2], row[3] = fmt.Sprintf("%.3f", st), fmt.Sprintf("%.3f", st+rec.WindowSec), info.Classes[best], fmt.Sprintf("%.4f", p[best])
			for k, v := range p {
				row[4+k] = fmt.Sprintf("%.4f", v)
			}
			cw.Write(row)
		}
		cw.Flush()
		return cw.Error()
	})
	if err != nil {
		return nil, err
	}
	g := plots.Grid{Values: make([][]float64, L), DY: 1}
	if rec.N > 1 {
		g.X0, g.DX = rec.StartSec[0]+rec.WindowSec/2, rec.StartSec[1]-rec.StartSec[0]
	} else {
		g.X0, g.DX = rec.WindowSec/2, rec.WindowSec
	}
	for c := 0; c < L; c++ {
		g.Values[c] = make([]float64, rec.N)
		for i := 0; i < rec.N; i++ {
			g.Values[c][i] = float64(probs[i*L+c])
		}
	}
	fig := plots.HeatMap{Title: "class probabilities over time: " + filepath.Base(in), XLabel: "time (s, window centres)", YLabel: "", BarLabel: "probability",
		Grid: g, YTicks: info.Classes}
	if err := plots.SavePNG(rep.PNG, fig); err != nil {
		return nil, err
	}
	return rep, nil
}
