package features

import (
	"fmt"
	"math/bits"
)

// DeviceCost is the cost model of pipit's C front end (quant/cref/c/pipit_fe.c,
// float32) for one [Config] feeding a network input of a given number of
// frames: floating-point operations per frame and per second, RAM and
// constant tables.
//
// Flops are counted as the C code executes them: every float32 addition,
// subtraction, multiplication, division and square root counts one;
// comparisons, conversions between integers and floats, loads and stores do
// not. Per frame:
//
//	window          W                        multiply by the tabulated window
//	FFT             5·(N/2)·log2(N/2)         radix-2, 10 per butterfly (one complex
//	                                          multiply, two complex additions)
//	split           4 + 22·(N/4 − 1) + 16     the real-input split and |X|², bins 0..N/2
//	magnitude       N/2 + 1                   one square root per bin ("magnitude" only)
//	mel             2·(triangle weights)      one multiply-add per stored weight
//	log             15·M (+ M + 1 for "db")   the ln approximation, 10/ln 10, floor below peak
//	normalise       5·M                       (v − mean)·(1/std)·(1/scale) and the two
//	                                          subtractions of the half-away-from-zero rounding
//
// RAM (bytes, a 32-bit target): the audio ring 2·W (int16), the FFT work
// buffer 4·N, the log-mel of the last frame 4·M, the int8 feature window
// M·F and the state struct (FrontEndStateBytes). Tables (const, flash):
// window 4·W, twiddles 4·N (N/2 complex), triangle weights 4 per weight,
// band start and length 4·M (two uint16), mean and 1/std 8·M, and the
// settings struct (FrontEndConfigBytes).
type DeviceCost struct {
	FramesPerSecond float64 `json:"frames_per_second"`
	FlopsPerFrame   int64   `json:"flops_per_frame"`
	FlopsPerSecond  float64 `json:"flops_per_second"`
	Flops           struct {
		Window, FFT, Split, Magnitude, Mel, Log, Normalise int64
	} `json:"flops_breakdown"`
	MelWeights int `json:"mel_weights"` // stored (non-zero) triangle weights

	RingBytes      int `json:"audio_ring_bytes"`
	WorkBytes      int `json:"fft_work_bytes"`
	LogMelBytes    int `json:"logmel_bytes"`
	FeatureBytes   int `json:"feature_window_bytes"`
	StateBytes     int `json:"state_bytes"`
	RAMBytes       int `json:"ram_bytes"` // sum of the five above
	WindowTabBytes int `json:"window_table_bytes"`
	TwiddleBytes   int `json:"twiddle_table_bytes"`
	MelTabBytes    int `json:"mel_table_bytes"`
	BandIndexBytes int `json:"band_index_bytes"`
	StatsBytes     int `json:"stats_table_bytes"`
	ConfigBytes    int `json:"config_bytes"`
	TableBytes     int `json:"table_bytes"` // sum of the six above
}

// Sizes of the C front end's structs on a 32-bit target (pipit_fe.h):
// pipit_fe_t holds 5 pointers and 9 32-bit counters, pipit_fe_config_t 14
// 32-bit fields and 7 pointers.
const (
	FrontEndStateBytes  = 5*4 + 9*4
	FrontEndConfigBytes = 14*4 + 7*4
)

// FrontEndCodeBytes is the code size of the C front end (pipit_fe.c) for a
// Cortex-M4, as measured: the .text of pipit_fe.o from arm-none-eabi-gcc
// 12.2.1 with the flags of nn.RuntimeCodeBytes. It does not depend on the
// settings (they are tables); quant/m4_test.go re-measures it.
const FrontEndCodeBytes = 1948

// CostOnDevice returns the [DeviceCost] of c feeding network inputs of
// frames frames. The C front end needs a power-of-two FFT size of at least
// 4; other sizes, an invalid c or frames < 1 are errors.
func CostOnDevice(c Config, frames int) (DeviceCost, error) {
	var d DeviceCost
	if err := c.Validate(); err != nil {
		return d, err
	}
	n := c.FFTSize
	if n < 4 || n&(n-1) != 0 {
		return d, badConfig("the C front end needs a power-of-two FFT size ≥ 4, not %d", n)
	}
	if frames < 1 {
		return d, fmt.Errorf("features: device cost: %d frames per network input", frames)
	}
	m := c.Bands
	for _, f := range MelFilterbank(c.MelScale, c.Bands, c.FFTSize, c.SampleRateHz, c.FMinHz, c.FMaxHz, c.MelNorm == MelNormArea) {
		d.MelWeights += len(f.Weights)
	}
	half := int64(n / 2)
	d.Flops.Window = int64(c.WindowSamples)
	d.Flops.FFT = 5 * half * int64(bits.Len(uint(half))-1)
	d.Flops.Split = 4 + 16
	if half >= 2 {
		d.Flops.Split += 22 * (half/2 - 1)
	}
	if c.Spectrum == SpectrumMagnitude {
		d.Flops.Magnitude = half + 1
	}
	d.Flops.Mel = 2 * int64(d.MelWeights)
	d.Flops.Log = 15 * int64(m)
	if c.Log == LogDecibel {
		d.Flops.Log += int64(m)
		if c.FloorBelowPeakDB > 0 {
			d.Flops.Log++
		}
	}
	d.Flops.Normalise = 5 * int64(m)
	f := d.Flops
	d.FlopsPerFrame = f.Window + f.FFT + f.Split + f.Magnitude + f.Mel + f.Log + f.Normalise
	d.FramesPerSecond = float64(c.SampleRateHz) / float64(c.HopSamples)
	d.FlopsPerSecond = d.FramesPerSecond * float64(d.FlopsPerFrame)

	d.RingBytes = 2 * c.WindowSamples
	d.WorkBytes = 4 * n
	d.LogMelBytes = 4 * m
	d.FeatureBytes = m * frames
	d.StateBytes = FrontEndStateBytes
	d.RAMBytes = d.RingBytes + d.WorkBytes + d.LogMelBytes + d.FeatureBytes + d.StateBytes
	d.WindowTabBytes = 4 * c.WindowSamples
	d.TwiddleBytes = 4 * n
	d.MelTabBytes = 4 * d.MelWeights
	d.BandIndexBytes = 4 * m
	d.StatsBytes = 8 * m
	d.ConfigBytes = FrontEndConfigBytes
	d.TableBytes = d.WindowTabBytes + d.TwiddleBytes + d.MelTabBytes + d.BandIndexBytes + d.StatsBytes + d.ConfigBytes
	return d, nil
}
