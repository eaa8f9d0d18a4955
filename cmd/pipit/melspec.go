package main

import (
	"fmt"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
)

// melspecReport is what `pipit melspec --json` prints.
type melspecReport = pipit.MelspecResult

func newMelspecCmd() *cobra.Command {
	var out string
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "melspec IN.wav --out PREFIX",
		Short: "Write the log-mel matrix of a WAV file as PREFIX.csv and PREFIX.png",
		Long: fmt.Sprintf(`melspec reads IN.wav block by block, mixes it to mono, resamples it to
--rate and writes its log-mel matrix as PREFIX.csv (one row per frame, one
column per band, no header) and PREFIX.png (time on x, bands on y, colour
bar; past %d frames each column is the mean of 2, 4, 8 … frames), in
memory that does not grow with the recording. It also gives the
A-weighted level of the input in dB re digital full scale, an indicative
digital level, not a sound pressure level (none for digital silence:
null in --json). Both files appear only when the command succeeds.`, pipit.PlotColumns),
		Args: cobra.ExactArgs(1),
	}
	fe := addFrontEndFlags(cmd)
	cmd.Flags().StringVar(&out, "out", "", "output prefix (default: IN without .wav)")
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the settings used and the matrix shape as JSON")
	cmd.RunE = func(cmd *cobra.Command, args []string) error {
		cfg, err := fe.config()
		if err != nil {
			return err
		}
		if out == "" {
			out = strings.TrimSuffix(args[0], filepath.Ext(args[0]))
		}
		rep, err := pipit.Melspec(args[0], out, cfg)
		if err != nil {
			return err
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		fmt.Fprintf(cmd.OutOrStdout(), "%s: %.2f s at %d Hz, %d ch → %d frames × %d bands\n", rep.Input, rep.Seconds, rep.InputRateHz, rep.Channels, rep.Frames, rep.Bands)
		level := "none: the input is digital silence"
		if rep.LevelA != nil {
			level = fmt.Sprintf("%.1f dB FS", *rep.LevelA)
		}
		fmt.Fprintf(cmd.OutOrStdout(), "A-weighted level %s (indicative digital level, not a sound pressure level)\nwrote %s\nwrote %s\n", level, rep.CSV, rep.PNG)
		return nil
	}
	return cmd
}
