package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/internal/plots"
	"github.com/pipit-audio/pipit/logbook"
)

// logbookReport is what `pipit logbook --json` prints.
type logbookReport struct {
	Caution        string               `json:"caution"`
	LevelReference string               `json:"level_reference"`
	Input          string               `json:"input"`
	Model          string               `json:"model"`
	Summary        logbook.Summary      `json:"summary"`
	PerClass       []logbook.ClassLevel `json:"per_class"`
	Events         []logbook.Event      `json:"events"`
	Calibration    logbook.Calibration  `json:"calibration"`
	Windows        int                  `json:"windows"`
	CSV            string               `json:"csv"`
	JSON           string               `json:"json"`
	PNG            string               `json:"png"`
}

func newLogbookCmd() *cobra.Command {
	var model, out, background, calFile string
	var overlap, onProb, offProb, minEvent, offsetDB, calDB float64
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "logbook --model MODEL IN.wav",
		Short: "Write a noise logbook: events with their class and A-weighted levels",
		Long: `logbook reads a recording of any length block by block, classifies its
windows with the float or int8 model, smooths the decisions (a class starts
at --on-prob and holds while its probability stays at or above --off-prob;
events shorter than --min-event seconds are dropped; windows of the
--background class are not logged), and meters it (A weighting, F and S time
weighting). It writes PREFIX.logbook.csv (one row per event: start, end,
class, mean probability, LAeq, LAFmax, SEL), PREFIX.logbook.json (the same
with the per-class LAeq and share of the sound energy, and the recording's
LAeq, LAFmax, LAF10, LAF50 and LAF90 as the background) and
PREFIX.logbook.png (the A-weighted F level over time with the events under
it).

Levels are in dB re digital full scale unless --offset-db gives the offset to
sound pressure level, or --calibrator names a recording of an acoustic
calibrator whose level is --calibrator-db (default 94 dB); every output says
which.

CAUTION: ` + logbook.Caution,
		Args: cobra.ExactArgs(1),
	}
	f := cmd.Flags()
	f.StringVar(&model, "model", "", "float or int8 model (required)")
	f.StringVar(&out, "out", "", "output prefix (default: IN without .wav)")
	f.Float64Var(&overlap, "overlap", 0, "window overlap, at least 0 and below 1 (default: the model's)")
	f.Float64Var(&onProb, "on-prob", 0.5, "probability at which a class starts an event")
	f.Float64Var(&offProb, "off-prob", 0.3, "probability below which the current class ends (hysteresis; ≤ --on-prob)")
	f.Float64Var(&minEvent, "min-event", 1, "drop events shorter than this, seconds")
	f.StringVar(&background, "background", "", "class counted as background, not logged as events (e.g. quiet)")
	f.Float64Var(&offsetDB, "offset-db", 0, "offset from dB re full scale to sound pressure level, dB")
	f.StringVar(&calFile, "calibrator", "", "recording of an acoustic calibrator tone to derive the offset from")
	f.Float64Var(&calDB, "calibrator-db", 94, "stated level of the calibrator, dB")
	f.BoolVar(&asJSON, "json", false, "print the report as JSON")
	cmd.MarkFlagRequired("model")
	cmd.RunE = func(cmd *cobra.Command, args []string) error {
		in := args[0]
		if out == "" {
			out = strings.TrimSuffix(in, filepath.Ext(in))
		}
		if cmd.Flags().Changed("overlap") && !(overlap >= 0 && overlap < 1) {
			return fmt.Errorf("--overlap %g: want at least 0 and below 1 (0.5: windows start half a window apart)", overlap)
		}
		var cal logbook.Calibration
		var err error
		switch {
		case calFile != "" && cmd.Flags().Changed("offset-db"):
			return fmt.Errorf("give --offset-db or --calibrator, not both")
		case calFile != "":
			cal, err = logbook.CalibratorCalibration(calFile, calDB)
		case cmd.Flags().Changed("offset-db"):
			cal, err = logbook.OffsetCalibration(offsetDB)
		}
		if err != nil {
			return err
		}
		m, err := pipit.LoadModel(model)
		if err != nil {
			return err
		}
		defer m.Close()
		info := m.Info()
		win := info.Window
		if cmd.Flags().Changed("overlap") {
			win.Overlap = overlap
		}
		cfg := logbook.Config{FrontEnd: info.FrontEnd, Window: win, Stats: info.Stats, Classes: info.Classes,
			Classify: func(x []float32, n int) ([]float32, error) {
				return pipit.Probabilities(m, x, n), nil
			},
			Events:      logbook.EventConfig{OnProb: onProb, OffProb: offProb, MinEventSec: minEvent, Background: background},
			Calibration: cal}
		lb, err := logbook.Run(in, cfg)
		if err != nil {
			return err
		}
		rep := &logbookReport{Caution: logbook.Caution, LevelReference: cal.Reference(), Input: in, Model: model,
			Calibration: cal, Windows: lb.Windows,
			CSV: out + ".logbook.csv", JSON: out + ".logbook.json", PNG: out + ".logbook.png"}
		// The three files appear together, only when all are written.
		var outs fsutil.Outputs
		defer outs.Abort()
		var js bytes.Buffer
		if err := lb.WriteJSON(&js); err != nil {
			return fmt.Errorf("writing %s: %w", rep.JSON, err)
		}
		for _, o := range []struct {
			path  string
			write func(io.Writer) error
		}{
			{rep.CSV, lb.WriteCSV},
			{rep.JSON, func(w io.Writer) error { _, err := w.Write(js.Bytes()); return err }},
			{rep.PNG, logbookFigure(lb, in).WritePNG},
		} {
			w, err := outs.Create(o.path)
			if err != nil {
				return err
			}
			if err := o.write(w); err != nil {
				return fmt.Errorf("writing %s: %w", o.path, err)
			}
		}
		// The report carries the same rounded figures as the files.
		var rounded struct {
			Summary  logbook.Summary      `json:"summary"`
			PerClass []logbook.ClassLevel `json:"per_class"`
			Events   []logbook.Event      `json:"events"`
		}
		if err := json.Unmarshal(js.Bytes(), &rounded); err != nil {
			return fmt.Errorf("%s: %w", rep.JSON, err)
		}
		if err := outs.Commit(); err != nil {
			return err
		}
		rep.Summary, rep.PerClass, rep.Events = rounded.Summary, rounded.PerClass, rounded.Events
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		printLogbook(cmd, rep)
		return nil
	}
	return cmd
}

func printLogbook(cmd *cobra.Command, rep *logbookReport) {
	w := cmd.OutOrStdout()
	fmt.Fprintf(w, "noise logbook of %s (%.1f s, %d windows)\n", rep.Input, rep.Summary.Seconds, rep.Windows)
	fmt.Fprintf(w, "levels in %s\n\n", rep.LevelReference)
	fmt.Fprintf(w, "  %9s  %9s  %-16s  %5s  %7s  %7s  %7s\n", "start s", "end s", "class", "p̄", "LAeq", "LAFmax", "SEL")
	for _, e := range rep.Events {
		fmt.Fprintf(w, "  %9.1f  %9.1f  %-16s  %5.2f  %7.1f  %7.1f  %7.1f\n", e.StartSec, e.EndSec, e.Class, e.MeanProb, e.LAeq, e.LAFmax, e.SEL)
	}
	s := rep.Summary
	fmt.Fprintf(w, "\n  recording  LAeq %.1f dB, LAFmax %.1f dB, LAF10 %.1f dB, LAF90 (background) %.1f dB\n", s.LAeq, s.LAFmax, s.LAF10, s.LAF90)
	for _, c := range rep.PerClass {
		fmt.Fprintf(w, "  %-16s %7.1f s  %3d events  LAeq %6.1f dB  %5.1f %% of the energy\n", c.Class, c.Seconds, c.Events, c.LAeq, 100*c.EnergyShare)
	}
	fmt.Fprintf(w, "\n%s\nwrote %s, %s and %s\n", "CAUTION: "+rep.Caution, rep.CSV, rep.JSON, rep.PNG)
}

// logbookFigure draws the F level over time with the events under it.
func logbookFigure(lb *logbook.Logbook, in string) plots.LevelTimeline {
	t, l := lb.FastLevels(4000)
	var spans []plots.LevelSpan
	for _, e := range lb.Events {
		spans = append(spans, plots.LevelSpan{Start: e.StartSec, End: e.EndSec, Label: e.Class})
	}
	var classes []string
	for _, c := range lb.Classes {
		if c != lb.EventConfig.Background {
			classes = append(classes, c)
		}
	}
	unit := "LAF, dB re full scale"
	if lb.Calibration.Kind != "" && lb.Calibration.Kind != logbook.CalFullScale {
		unit = "LAF, dB SPL (calibrated)"
	}
	return plots.LevelTimeline{Title: "noise logbook: " + filepath.Base(in) + " (indicative levels)", XLabel: "time (s)", YLabel: unit,
		T: t, Level: l, Spans: spans, Classes: classes}
}
