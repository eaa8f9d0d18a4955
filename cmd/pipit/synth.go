package main

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit/datasets"
)

func newSynthCmd() *cobra.Command {
	var cfg datasets.SynthConfig
	var day datasets.DayConfig
	var out string
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "synth --out DIR",
		Short: "Write the synthetic timber-yard corpus (WAV files and manifest.csv)",
		Long: `synth generates the demo corpus of an invented timber-yard noise monitor:
` + fmt.Sprint(datasets.SynthClasses) + `.
Every clip draws its own parameters and sits on pink background noise at a
random SNR. Files go to DIR/<class>/, with DIR/manifest.csv holding
path,label,fold,group; folds are assigned from --seed.

With --day SECONDS it writes instead one long recording of a day at the
yard, DIR/yard-day.wav, with events of the classes at known times and
A-weighted levels (--day-event-db-min … --day-event-db-max, dB re full scale)
over a pink background (--day-background-db), and its ground truth
DIR/yard-day.truth.csv (start_s,end_s,class,level_db). It streams to disk,
so days of hours take little memory.

With --hard it writes the hard corpus, made to tell training recipes apart:
` + fmt.Sprint(datasets.HardSynthClasses) + `,
class k with --clips-per-class × 0.4^(k/11) clips; events start anywhere
and cover 35–100 % of the clip, often overlapped by a weaker event of
another class, reverberated (RT60 0.2–1 s), coloured by microphone and
housing, on background at 0 to 15 dB SNR, peak levels over 30 dB.`,
		Args: cobra.NoArgs,
	}
	f := cmd.Flags()
	f.StringVar(&out, "out", "", "output directory (required)")
	f.IntVar(&cfg.ClipsPerClass, "clips-per-class", 40, "clips per class")
	f.Float64Var(&cfg.Seconds, "seconds", 1, "clip length, seconds")
	f.IntVar(&cfg.RateHz, "rate", 16000, "sample rate, Hz")
	f.IntVar(&cfg.Folds, "folds", 5, "number of folds")
	f.Uint64Var(&cfg.Seed, "seed", 1, "random seed")
	f.BoolVar(&asJSON, "json", false, "print a JSON summary")
	f.BoolVar(&cfg.Hard, "hard", false, "write the hard corpus instead (12 classes, skewed counts, overlapping events, reverberation, low SNR)")
	f.Float64Var(&day.Seconds, "day", 0, "write one long recording of this many seconds instead of the corpus")
	f.Float64Var(&day.BackgroundDB, "day-background-db", -50, "A-weighted background level of the day, dB re full scale")
	f.Float64Var(&day.MinEventDB, "day-event-db-min", -32, "lowest event level of the day, dB re full scale")
	f.Float64Var(&day.MaxEventDB, "day-event-db-max", -18, "highest event level of the day, dB re full scale")
	cmd.MarkFlagRequired("out")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		if day.Seconds > 0 {
			return runSynthDay(cmd, out, day, cfg, asJSON)
		}
		b := newTask(cmd.ErrOrStderr(), "synth")
		c, err := datasets.Synthesize(out, cfg, func(done, total int) { b.step(done, total, "clips", "") })
		if err != nil {
			return err
		}
		b.finish(fmt.Sprintf("%d clips", len(c.Clips)))
		if asJSON {
			return printJSON(cmd.OutOrStdout(), map[string]any{"manifest": c.Source, "clips": len(c.Clips), "classes": c.Classes, "folds": c.Folds})
		}
		fmt.Fprintf(cmd.OutOrStdout(), "wrote %d clips of %d classes, %d folds: %s\n", len(c.Clips), len(c.Classes), c.Folds, c.Source)
		return nil
	}
	return cmd
}

func runSynthDay(cmd *cobra.Command, out string, day datasets.DayConfig, cfg datasets.SynthConfig, asJSON bool) error {
	day.RateHz, day.Seed = cfg.RateHz, cfg.Seed
	if err := os.MkdirAll(out, 0o755); err != nil {
		return err
	}
	wav, truth := filepath.Join(out, "yard-day.wav"), filepath.Join(out, "yard-day.truth.csv")
	events, err := datasets.SynthDay(wav, truth, day)
	if err != nil {
		return err
	}
	if asJSON {
		return printJSON(cmd.OutOrStdout(), map[string]any{"wav": wav, "truth": truth, "events": len(events), "seconds": day.Seconds})
	}
	fmt.Fprintf(cmd.OutOrStdout(), "wrote %s (%s) with %d events; ground truth %s\n", wav, day, len(events), truth)
	return nil
}
