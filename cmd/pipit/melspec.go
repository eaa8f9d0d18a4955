package main

import (
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/spf13/cobra"
	"gorgonia.org/tensor"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/internal/plots"
)

type melspecReport struct {
	Input       string          `json:"input"`
	InputRateHz int             `json:"input_rate_hz"`
	Channels    int             `json:"input_channels"`
	Seconds     float64         `json:"seconds"`
	LevelA      *float64        `json:"level_a_dbfs"` // indicative A-weighted level of the input, dB re full scale; not a sound pressure level; null for digital silence
	Settings    features.Config `json:"settings"`
	Frames      int             `json:"frames"`
	Bands       int             `json:"bands"`
	CSV         string          `json:"csv"`
	PNG         string          `json:"png"`
}

func newMelspecCmd() *cobra.Command {
	var out string
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "melspec IN.wav --out PREFIX",
		Short: "Write the log-mel matrix of a WAV file as PREFIX.csv and PREFIX.png",
		Long: `melspec decodes IN.wav, mixes it to mono, resamples it to --rate and
writes its log-mel matrix as PREFIX.csv (one row per frame, one column
per band, no header) and PREFIX.png (time on x, bands on y, colour bar).`,
		Args: cobra.ExactArgs(1),
		RunE: nil,
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
		rep, err := runMelspec(args[0], out, cfg)
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

func runMelspec(in, prefix string, cfg features.Config) (*melspecReport, error) {
	a, err := features.ReadWAVFile(in)
	if err != nil {
		return nil, err
	}
	ex, err := features.NewExtractor(cfg)
	if err != nil {
		return nil, err
	}
	m, err := ex.ComputeAudio(a)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", in, err)
	}
	levelA, err := features.ALevelDBFS(a.Samples, a.SampleRateHz)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", in, err)
	}
	rep := &melspecReport{
		Input: in, InputRateHz: a.SampleRateHz, Channels: a.Channels, Seconds: a.Seconds(),
		Settings: cfg, Bands: m.Shape()[0], Frames: m.Shape()[1],
		CSV: prefix + ".csv", PNG: prefix + ".png",
	}
	if !math.IsInf(levelA, 0) && !math.IsNaN(levelA) {
		rep.LevelA = &levelA // silence has no level: null in JSON
	}
	if err := writeMelCSV(rep.CSV, m); err != nil {
		return nil, err
	}
	if err := writeMelPNG(rep.PNG, m, cfg, filepath.Base(in)); err != nil {
		return nil, err
	}
	return rep, nil
}

// writeMelCSV writes a (bands, frames) matrix as frames rows of bands
// columns.
func writeMelCSV(path string, m *tensor.Dense) error {
	bands, frames := m.Shape()[0], m.Shape()[1]
	data := m.Data().([]float32)
	return fsutil.WriteWith(path, func(w io.Writer) error {
		var line []byte
		for t := 0; t < frames; t++ {
			line = line[:0]
			for b := 0; b < bands; b++ {
				if b > 0 {
					line = append(line, ',')
				}
				line = strconv.AppendFloat(line, float64(data[b*frames+t]), 'g', 7, 32)
			}
			line = append(line, '\n')
			if _, err := w.Write(line); err != nil {
				return err
			}
		}
		return nil
	})
}

func writeMelPNG(path string, m *tensor.Dense, cfg features.Config, title string) error {
	bands, frames := m.Shape()[0], m.Shape()[1]
	data := m.Data().([]float32)
	g := plots.Grid{Values: make([][]float64, bands), DX: float64(cfg.HopSamples) / float64(cfg.SampleRateHz), DY: 1}
	for b := range g.Values {
		g.Values[b] = make([]float64, frames)
		for t := range g.Values[b] {
			g.Values[b][t] = float64(data[b*frames+t])
		}
	}
	unit := "ln"
	if cfg.Log == features.LogDecibel {
		unit = "dB"
	}
	fig := plots.HeatMap{
		Title:    fmt.Sprintf("log-mel of %s (%s, %d bands)", title, cfg.MelScale, bands),
		XLabel:   "time (s)",
		YLabel:   "mel band",
		BarLabel: "level (" + unit + ")",
		Grid:     g,
	}
	return plots.SavePNG(path, fig)
}
