package features

import (
	"math"
	"os"
	"path/filepath"
	"testing"
)

// FuzzDecodeWAV checks that DecodeWAV never panics, that accepted input
// yields finite samples no more numerous than the bytes allow, and that a
// rejected input yields a *WAVError. Seeds: the SoX fixtures of
// testdata/wav plus hand-made edge cases.
func FuzzDecodeWAV(f *testing.F) {
	paths, _ := filepath.Glob(filepath.Join("..", "testdata", "wav", "*.wav"))
	for _, p := range paths {
		data, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		if len(data) > 4096 {
			data = data[:4096] // keep the corpus small; truncation is itself a case
		}
		f.Add(data)
	}
	f.Add([]byte{})
	f.Add([]byte("RIFF\x00\x00\x00\x00WAVE"))
	f.Add([]byte("RIFF\xff\xff\xff\xffWAVEfmt \xff\xff\xff\xff"))
	f.Add(wavBytes("fmt ", fmtChunk(1, 1, 8000, 16), "data", s16(1, 2, 3)))
	f.Add(wavBytes("fmt ", fmtChunk(3, 2, 8000, 32), "data", make([]byte, 16)))
	f.Fuzz(func(t *testing.T, data []byte) {
		a, err := DecodeWAV("fuzz.wav", data)
		if err != nil {
			if _, ok := err.(*WAVError); !ok {
				t.Fatalf("error %v (%T) is not a *WAVError", err, err)
			}
			return
		}
		if len(a.Samples) == 0 || len(a.Samples) > len(data) {
			t.Fatalf("%d samples from %d bytes", len(a.Samples), len(data))
		}
		for _, v := range a.Samples {
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				t.Fatal("non-finite sample accepted")
			}
		}
	})
}

// FuzzParseBandStats: never panics; accepted stats are finite and
// consistent.
func FuzzParseBandStats(f *testing.F) {
	f.Add([]byte(`{"version":1,"frames":2,"mean":[0,1],"std":[1,2]}`))
	f.Add([]byte(`{"version":1,"mean":[],"std":[]}`))
	f.Add([]byte(`{"version":2}`))
	f.Add([]byte(`{`))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := ParseBandStats("fuzz.json", data)
		if err != nil {
			return
		}
		if len(s.Mean) != len(s.Std) || len(s.Mean) == 0 {
			t.Fatal("accepted inconsistent stats")
		}
		m := make([]float32, len(s.Mean))
		s.Apply(m)
	})
}
