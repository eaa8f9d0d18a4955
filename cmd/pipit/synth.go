package main

import (
	"fmt"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit/datasets"
)

func newSynthCmd() *cobra.Command {
	var cfg datasets.SynthConfig
	var out string
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "synth --out DIR",
		Short: "Write the synthetic timber-yard corpus (WAV files and manifest.csv)",
		Long: `synth generates the demo corpus of an invented timber-yard noise monitor:
` + fmt.Sprint(datasets.SynthClasses) + `.
Every clip draws its own parameters and sits on pink background noise at a
random SNR. Files go to DIR/<class>/, with DIR/manifest.csv holding
path,label,fold,group; folds are assigned from --seed.`,
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
	cmd.MarkFlagRequired("out")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
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
