package features

import (
	"encoding/json"
	"fmt"
	"math"
)

// Spectrum and log-compression names accepted by [Config].
const (
	SpectrumPower     = "power"
	SpectrumMagnitude = "magnitude"
	LogNatural        = "ln"
	LogDecibel        = "db"
	MelNormNone       = "none"
	MelNormArea       = "area"
)

// Config fully describes the log-mel front end, so that a device given the
// same Config computes the same features. Its JSON form (field tags below)
// is written into model files and export descriptions.
//
// A frame t covers samples [t·Hop - pad, t·Hop - pad + Window) of the
// signal at SampleRateHz, with pad = Window/2 when PadEnds is set and 0
// otherwise, and zeros outside the signal. The frame is multiplied by the
// window, zero-padded symmetrically to FFTSize (offset (FFTSize-Window)/2),
// transformed by an unnormalised real DFT X[k] = Σ x[n]·e^(-2πikn/N), and
// reduced to |X[k]|² ("power") or |X[k]| ("magnitude") for
// k = 0..FFTSize/2. Each mel band is the dot product of that spectrum with
// its triangle ([MelFilterbank]), then compressed:
//
//   - "ln": ln(max(v, LogFloor));
//   - "db": 10·log10(max(v, LogFloor)), then raised to at least
//     (maximum over the frame's bands) − FloorBelowPeakDB when
//     FloorBelowPeakDB > 0. The floor is per frame, not per matrix, so a
//     streaming device can apply it.
//
// Use [DefaultConfig] and change fields; [Config.Validate] checks a Config.
type Config struct {
	SampleRateHz     int     `json:"sample_rate_hz"`
	WindowSamples    int     `json:"window_samples"`
	HopSamples       int     `json:"hop_samples"`
	FFTSize          int     `json:"fft_size"`         // ≥ WindowSamples
	Window           string  `json:"window"`           // "hann" or "hamming"
	SymmetricWindow  bool    `json:"symmetric_window"` // false: periodic (DFT-even)
	PadEnds          bool    `json:"pad_ends"`         // pad Window/2 zeros at both ends
	Bands            int     `json:"bands"`
	FMinHz           float64 `json:"fmin_hz"`
	FMaxHz           float64 `json:"fmax_hz"`             // ≤ SampleRateHz/2
	MelScale         string  `json:"mel_scale"`           // "htk" or "slaney"
	MelNorm          string  `json:"mel_norm"`            // "none" or "area"
	Spectrum         string  `json:"spectrum"`            // "power" or "magnitude"
	Log              string  `json:"log"`                 // "ln" or "db"
	LogFloor         float64 `json:"log_floor"`           // ≥ 1e-30
	FloorBelowPeakDB float64 `json:"floor_below_peak_db"` // "db" only; 0 disables the clip
}

// DefaultConfig returns pipit's default front end: 16 kHz, 512-sample
// (32 ms) periodic Hann window, 256-sample hop, FFT of 512, no end padding,
// 40 HTK bands from 0 Hz to 8 kHz without area normalisation, power
// spectrum, dB with a floor of 1e-10 (−100 dB) and an 80 dB per-frame clip.
// One second of audio gives 61 frames.
func DefaultConfig() Config {
	return Config{
		SampleRateHz:     16000,
		WindowSamples:    512,
		HopSamples:       256,
		FFTSize:          512,
		Window:           WindowHann,
		Bands:            40,
		FMinHz:           0,
		FMaxHz:           8000,
		MelScale:         MelHTK,
		MelNorm:          MelNormNone,
		Spectrum:         SpectrumPower,
		Log:              LogDecibel,
		LogFloor:         1e-10,
		FloorBelowPeakDB: 80,
	}
}

// Complete returns c with the fields whose default depends on others
// filled in: an FFTSize of 0 becomes the window length and an FMaxHz of 0
// the Nyquist frequency, SampleRateHz/2. It does not validate; call
// [Config.Validate] on the result.
func (c Config) Complete() Config {
	if c.FFTSize == 0 {
		c.FFTSize = c.WindowSamples
	}
	if c.FMaxHz == 0 {
		c.FMaxHz = float64(c.SampleRateHz) / 2
	}
	return c
}

// Validate reports the first problem with c as an error wrapping
// [ErrBadConfig], or nil.
func (c Config) Validate() error {
	switch {
	case c.SampleRateHz <= 0 || c.SampleRateHz > MaxWAVRateHz:
		return badConfig("sample rate %d Hz outside 1..%d", c.SampleRateHz, MaxWAVRateHz)
	case c.WindowSamples < 2:
		return badConfig("window of %d samples, want at least 2", c.WindowSamples)
	case c.HopSamples < 1:
		return badConfig("hop of %d samples, want at least 1", c.HopSamples)
	case c.FFTSize < c.WindowSamples:
		return badConfig("FFT size %d smaller than the window (%d)", c.FFTSize, c.WindowSamples)
	case c.FFTSize > 1<<16:
		return badConfig("FFT size %d larger than 65536", c.FFTSize)
	case c.Window != WindowHann && c.Window != WindowHamming:
		return badConfig("window %q, want %q or %q", c.Window, WindowHann, WindowHamming)
	case c.Bands < 1 || c.Bands > 512:
		return badConfig("%d mel bands, want 1..512", c.Bands)
	case c.MelScale != MelHTK && c.MelScale != MelSlaney:
		return badConfig("mel scale %q, want %q or %q", c.MelScale, MelHTK, MelSlaney)
	case c.MelNorm != MelNormNone && c.MelNorm != MelNormArea:
		return badConfig("mel normalisation %q, want %q or %q", c.MelNorm, MelNormNone, MelNormArea)
	case c.Spectrum != SpectrumPower && c.Spectrum != SpectrumMagnitude:
		return badConfig("spectrum %q, want %q or %q", c.Spectrum, SpectrumPower, SpectrumMagnitude)
	case c.Log != LogNatural && c.Log != LogDecibel:
		return badConfig("log %q, want %q or %q", c.Log, LogNatural, LogDecibel)
	case !(c.LogFloor >= 1e-30) || math.IsInf(c.LogFloor, 0):
		return badConfig("log floor %g, want a finite value ≥ 1e-30", c.LogFloor)
	case !(c.FloorBelowPeakDB >= 0) || math.IsInf(c.FloorBelowPeakDB, 0):
		return badConfig("floor below peak %g dB, want 0 (off) or a positive finite value", c.FloorBelowPeakDB)
	case !(c.FMinHz >= 0) || !(c.FMaxHz > c.FMinHz):
		return badConfig("frequency range %g..%g Hz is empty or negative", c.FMinHz, c.FMaxHz)
	case c.FMaxHz > float64(c.SampleRateHz)/2:
		return badConfig("fmax %g Hz above the Nyquist frequency %g Hz", c.FMaxHz, float64(c.SampleRateHz)/2)
	}
	for m, f := range MelFilterbank(c.MelScale, c.Bands, c.FFTSize, c.SampleRateHz, c.FMinHz, c.FMaxHz, c.MelNorm == MelNormArea) {
		if len(f.Weights) == 0 {
			return badConfig("mel band %d (%.1f..%.1f Hz) falls between FFT bins (%.1f Hz apart): use fewer bands, a larger FFT or a wider range",
				m, f.LowHz, f.HighHz, float64(c.SampleRateHz)/float64(c.FFTSize))
		}
	}
	return nil
}

// Frames returns how many frames a signal of n samples gives under c:
// 1 + (n + 2·pad − Window)/Hop, or 0 when the (padded) signal is shorter
// than one window.
func (c Config) Frames(n int) int {
	pad := 0
	if c.PadEnds {
		pad = c.WindowSamples / 2
	}
	total := n + 2*pad
	if total < c.WindowSamples {
		return 0
	}
	return 1 + (total-c.WindowSamples)/c.HopSamples
}

// String returns c as compact JSON.
func (c Config) String() string {
	b, err := json.Marshal(c)
	if err != nil {
		return fmt.Sprintf("%#v", c)
	}
	return string(b)
}
