package features_test

import (
	"fmt"
	"math"

	"github.com/pipit-audio/pipit/features"
)

// Compute the log-mel matrix of one second of audio with the default front
// end, as a training pipeline does for every clip.
func ExampleExtractor_Compute() {
	cfg := features.DefaultConfig()
	ex, err := features.NewExtractor(cfg)
	if err != nil {
		panic(err)
	}
	x := make([]float32, cfg.SampleRateHz) // 1 s of a 1 kHz tone
	for n := range x {
		x[n] = float32(0.5 * math.Sin(2*math.Pi*1000*float64(n)/float64(cfg.SampleRateHz)))
	}
	m, err := ex.Compute(x)
	if err != nil {
		panic(err)
	}
	fmt.Println("shape (bands, frames):", m.Shape())
	// Output:
	// shape (bands, frames): (40, 61)
}

// Feed audio as it arrives, in chunks of any size, as a device would.
func ExampleStream_Push() {
	cfg := features.DefaultConfig()
	s, err := features.NewStream(cfg)
	if err != nil {
		panic(err)
	}
	var frames []float32
	chunk := make([]float32, 100) // 6.25 ms of silence per call
	for i := 0; i < 160; i++ {
		frames = s.Push(frames, chunk)
	}
	fmt.Println("frames so far:", len(frames)/cfg.Bands)
	fmt.Printf("band 0 of silence: %.4g dB\n", frames[0])
	// Output:
	// frames so far: 61
	// band 0 of silence: -100 dB
}

// Convert a recording made at 44.1 kHz to the front end's 16 kHz.
func ExampleResampler_Resample() {
	r, err := features.NewResampler(44100, 16000)
	if err != nil {
		panic(err)
	}
	x := make([]float32, 44100)
	y := r.Resample(nil, x)
	fmt.Println(len(y), "samples,", r.Taps(), "taps per sample")
	// Output:
	// 16000 samples, 318 taps per sample
}

// Convert frequencies to mels on both scales.
func ExampleHzToMel() {
	fmt.Printf("%.4f %.4f\n", features.HzToMel(features.MelHTK, 1000), features.HzToMel(features.MelSlaney, 1000))
	// Output:
	// 999.9855 15.0000
}

// Decode a WAV file held in memory.
func ExampleDecodeWAV() {
	_, err := features.DecodeWAV("clip.wav", []byte("RIFF\x04\x00\x00\x00WAVE"))
	fmt.Println(err)
	// Output:
	// features: clip.wav: no fmt chunk
}

// Before training, check what the C front end would cost on the device at
// these settings: the hop is the first lever (doubling it halves the
// front end's compute).
func ExampleCostOnDevice() {
	cfg := features.DefaultConfig()
	c, _ := features.CostOnDevice(cfg, 61)
	fmt.Printf("%.1f frames/s × %d flops = %.0f flop/s; RAM %d B, tables %d B\n", c.FramesPerSecond, c.FlopsPerFrame, c.FlopsPerSecond, c.RAMBytes, c.TableBytes)
	cfg.HopSamples = 512
	c, _ = features.CostOnDevice(cfg, 31)
	fmt.Printf("hop 512: %.0f flop/s\n", c.FlopsPerSecond)
	// Output:
	// 62.5 frames/s × 15393 flops = 962062 flop/s; RAM 5728 B, tables 6632 B
	// hop 512: 481031 flop/s
}

// Meter a recording and read its A-weighted Leq and maximum F level, as
// a noise monitor does for each stretch of a long recording.
func ExampleMeter() {
	m, err := features.NewMeter(features.MeterConfig{RateHz: 16000, Weighting: features.WeightingA})
	if err != nil {
		panic(err)
	}
	x := make([]float32, 2*16000) // 2 s of a 1 kHz tone at amplitude 0.1
	for n := range x {
		x[n] = float32(0.1 * math.Sin(2*math.Pi*1000*float64(n)/16000))
	}
	s := features.LevelSeries{RateHz: 16000, TickSec: m.Config().TickSec}
	s.Ticks = m.Flush(m.Push(nil, x))
	fmt.Printf("LAeq %.1f dB re full scale, LAFmax %.1f dB, SEL %.1f dB\n", s.Leq(0, 2), s.FastMax(0, 2), s.SEL(0, 2))
	// Output:
	// LAeq -23.0 dB re full scale, LAFmax -23.0 dB, SEL -20.0 dB
}

// A front end at 8 kHz with a 256-sample window: Complete fills the FFT
// size and the top band edge that follow from them.
func ExampleConfig_Complete() {
	c := features.DefaultConfig()
	c.SampleRateHz, c.WindowSamples, c.HopSamples = 8000, 256, 128
	c.FFTSize, c.FMaxHz = 0, 0
	c = c.Complete()
	fmt.Println(c.FFTSize, c.FMaxHz, c.Validate())
	// Output: 256 4000 <nil>
}
