// Command logmel is a walkthrough of pipit's front end: it decodes a WAV
// file (or, with no argument, makes a one-second test tone), computes its
// log-mel matrix with the default settings and with a cheaper setting a
// device might use, and prints what each costs.
//
//	go run ./examples/logmel [IN.wav]
package main

import (
	"fmt"
	"math"
	"os"

	"github.com/pipit-audio/pipit/features"
)

func main() {
	a := &features.Audio{SampleRateHz: 16000, Channels: 1, BitDepth: 32, Float: true}
	if len(os.Args) > 1 {
		var err error
		if a, err = features.ReadWAVFile(os.Args[1]); err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
	} else {
		a.Samples = make([]float32, 16000)
		for n := range a.Samples {
			a.Samples[n] = float32(0.5 * math.Sin(2*math.Pi*1000*float64(n)/16000))
		}
	}
	full := features.DefaultConfig()
	cheap := full
	cheap.SampleRateHz, cheap.WindowSamples, cheap.HopSamples, cheap.FFTSize = 8000, 256, 128, 256
	cheap.Bands, cheap.FMaxHz = 32, 4000
	for _, c := range []struct {
		name string
		cfg  features.Config
	}{{"default", full}, {"device-cheap", cheap}} {
		ex, err := features.NewExtractor(c.cfg)
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		m, err := ex.ComputeAudio(a)
		if err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		framesPerSec := float64(c.cfg.SampleRateHz) / float64(c.cfg.HopSamples)
		fmt.Printf("%-13s %5d Hz, window %3d, hop %3d, %2d bands: %v matrix, %.1f frames/s, FFT %d points per frame\n",
			c.name, c.cfg.SampleRateHz, c.cfg.WindowSamples, c.cfg.HopSamples, c.cfg.Bands, m.Shape(), framesPerSec, c.cfg.FFTSize)
	}
}
