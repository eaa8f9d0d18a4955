package main

import (
	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit/features"
)

// frontEndFlags binds the front-end flags shared by every command that
// computes features.
type frontEndFlags struct {
	cfg  features.Config
	fmax float64
}

func addFrontEndFlags(cmd *cobra.Command) *frontEndFlags {
	f := &frontEndFlags{cfg: features.DefaultConfig()}
	fl := cmd.Flags()
	fl.IntVar(&f.cfg.SampleRateHz, "rate", f.cfg.SampleRateHz, "sample rate to resample to, Hz")
	fl.IntVar(&f.cfg.WindowSamples, "window", f.cfg.WindowSamples, "window length, samples")
	fl.IntVar(&f.cfg.HopSamples, "hop", f.cfg.HopSamples, "hop between frames, samples")
	fl.IntVar(&f.cfg.FFTSize, "fft", 0, "FFT size, samples (default: the window length)")
	fl.IntVar(&f.cfg.Bands, "bands", f.cfg.Bands, "number of mel bands")
	fl.Float64Var(&f.cfg.FMinHz, "fmin", f.cfg.FMinHz, "lowest band edge, Hz")
	fl.Float64Var(&f.fmax, "fmax", 0, "highest band edge, Hz (default: rate/2)")
	fl.StringVar(&f.cfg.MelScale, "mel", f.cfg.MelScale, "mel scale: htk or slaney")
	fl.StringVar(&f.cfg.MelNorm, "mel-norm", f.cfg.MelNorm, "band normalisation: none or area")
	fl.StringVar(&f.cfg.Log, "log", f.cfg.Log, "log compression: ln or db")
	fl.Float64Var(&f.cfg.FloorBelowPeakDB, "floor-below-peak", f.cfg.FloorBelowPeakDB, "with --log db, raise each frame's bands to at least this many dB below its loudest band (0: off)")
	fl.StringVar(&f.cfg.Window, "window-shape", f.cfg.Window, "window function: hann or hamming")
	fl.BoolVar(&f.cfg.SymmetricWindow, "symmetric", false, "use the symmetric window instead of the periodic one")
	fl.BoolVar(&f.cfg.PadEnds, "pad-ends", false, "pad half a window of zeros at both ends")
	fl.StringVar(&f.cfg.Spectrum, "spectrum", f.cfg.Spectrum, "spectrum: power or magnitude")
	return f
}

// config resolves the defaults that depend on other flags and validates.
func (f *frontEndFlags) config() (features.Config, error) { return f.resolve(f.cfg) }

// resolve is config for c, the flags' settings with some fields changed:
// --fmax (0: rate/2) and the defaults that follow from other fields
// (features.Config.Complete).
func (f *frontEndFlags) resolve(c features.Config) (features.Config, error) {
	c.FMaxHz = f.fmax
	c = c.Complete()
	return c, c.Validate()
}
