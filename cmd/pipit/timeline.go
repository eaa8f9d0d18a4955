package main

import (
	"fmt"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
)

// timelineReport is what `pipit timeline --json` prints.
type timelineReport struct {
	Model string `json:"model"`
	pipit.TimelineResult
}

func newTimelineCmd() *cobra.Command {
	var model, out string
	var overlap float64
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "timeline --model MODEL IN.wav",
		Short: "Classify a long recording window by window into a time line",
		Long: fmt.Sprintf(`timeline reads a recording of any length block by block, cuts it into
the model's windows (--overlap, default the model's own, the overlap it
was trained with), runs the float or int8 model on each, and writes
PREFIX.timeline.csv (a header, then one row per window: start, end, most
likely class, its probability, then every class's probability) as it
goes, PREFIX.timeline.png (class probabilities over time; past %d windows
each column is the mean of 2, 4, 8 … windows) and prints the segments of
equal most likely class. Memory does not grow with the recording; both
files appear only when the command succeeds. Classifications are
indicative, not a certified measurement.`, pipit.PlotColumns),
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
	var cfg pipit.TimelineConfig
	if overlap >= 0 {
		cfg.Overlap = &overlap
	}
	r, err := pipit.Timeline(m, in, out, cfg)
	if err != nil {
		return nil, err
	}
	return &timelineReport{Model: model, TimelineResult: *r}, nil
}
