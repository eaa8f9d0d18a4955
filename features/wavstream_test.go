package features

import (
	"bytes"
	"errors"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

// readAllBlocks reads r to the end in blocks of n samples.
func readAllBlocks(r *WAVReader, n int) ([]float32, error) {
	var out []float32
	buf := make([]float32, n)
	for {
		k, err := r.Read(buf)
		out = append(out, buf[:k]...)
		if err == io.EOF {
			return out, nil
		}
		if err != nil {
			return out, err
		}
	}
}

// TestWAVReaderMatchesDecodeWAV: block reading gives exactly DecodeWAV's
// samples for every SoX fixture (all encodings and layouts), whatever the
// block size.
func TestWAVReaderMatchesDecodeWAV(t *testing.T) {
	paths, _ := filepath.Glob(filepath.Join("..", "testdata", "wav", "*.wav"))
	levels, _ := filepath.Glob(filepath.Join("..", "testdata", "levels", "*.wav"))
	paths = append(paths, levels...)
	if len(paths) < 16 {
		t.Fatalf("only %d fixtures", len(paths))
	}
	for _, p := range paths {
		want, err := ReadWAVFile(p)
		if err != nil {
			t.Fatal(err)
		}
		for _, n := range []int{1, 997, 1 << 16} {
			r, err := OpenWAV(p)
			if err != nil {
				t.Fatalf("%s: %v", p, err)
			}
			got, err := readAllBlocks(r, n)
			r.Close()
			if err != nil {
				t.Fatalf("%s: %v", p, err)
			}
			if r.RateHz() != want.SampleRateHz || r.Channels() != want.Channels || r.BitDepth() != want.BitDepth || r.Frames() != int64(len(want.Samples)) {
				t.Errorf("%s: header %d Hz %d ch %d bits %d frames, DecodeWAV %d/%d/%d/%d", p, r.RateHz(), r.Channels(), r.BitDepth(), r.Frames(), want.SampleRateHz, want.Channels, want.BitDepth, len(want.Samples))
			}
			if !equalF32(got, want.Samples) {
				t.Errorf("%s (blocks of %d): samples differ from DecodeWAV", p, n)
			}
		}
	}
}

func equalF32(a, b []float32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			return false
		}
	}
	return true
}

func TestWAVReaderErrors(t *testing.T) {
	for _, c := range []struct {
		name string
		data []byte
	}{
		{"empty", nil},
		{"short", []byte("RIFF")},
		{"no data", wavBytes("fmt ", fmtChunk(1, 1, 8000, 16))},
		{"truncated data", wavBytes("fmt ", fmtChunk(1, 1, 8000, 16), "data", s16(1, 2, 3))[:47]},
		{"a-law", wavBytes("fmt ", fmtChunk(6, 1, 8000, 8), "data", []byte{1, 2})},
	} {
		_, err := NewWAVReader("x.wav", bytes.NewReader(c.data))
		var we *WAVError
		if !errors.As(err, &we) || we.Name != "x.wav" {
			t.Errorf("%s: error %v, want a *WAVError naming x.wav", c.name, err)
		}
	}
	if _, err := OpenWAV(t.TempDir()); err == nil {
		t.Error("a directory was accepted")
	}
}

// FuzzWAVReader: the block reader never panics, and it accepts (header and
// every sample) exactly what DecodeWAV accepts, with the same samples.
func FuzzWAVReader(f *testing.F) {
	paths, _ := filepath.Glob(filepath.Join("..", "testdata", "wav", "*.wav"))
	for _, p := range paths {
		data, err := os.ReadFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data[:min(len(data), 2048)])
	}
	f.Add([]byte{})
	f.Add([]byte("RIFF\xff\xff\xff\xffWAVEfmt \xff\xff\xff\xff"))
	f.Add(wavBytes("LIST", []byte("abc"), "fmt ", fmtChunk(1, 2, 8000, 16), "data", s16(1, 2, 3, 4, 5)))
	f.Add(wavBytes("data", s16(7, 8), "fmt ", fmtChunk(1, 1, 8000, 16)))
	f.Add(wavBytes("fmt ", fmtChunk(3, 1, 8000, 32), "data", []byte{0, 0, 0x80, 0x7f}))
	f.Fuzz(func(t *testing.T, data []byte) {
		want, derr := DecodeWAV("fuzz.wav", data)
		r, err := NewWAVReader("fuzz.wav", bytes.NewReader(data))
		var got []float32
		if err == nil {
			got, err = readAllBlocks(r, 7)
		}
		if err != nil {
			if _, ok := err.(*WAVError); !ok {
				t.Fatalf("error %v (%T) is not a *WAVError", err, err)
			}
		}
		if (err == nil) != (derr == nil) {
			t.Fatalf("reader error %v, DecodeWAV error %v", err, derr)
		}
		if err == nil && !equalF32(got, want.Samples) {
			t.Fatal("samples differ from DecodeWAV")
		}
	})
}

// TestWAVWriter: the block writer produces a file WriteWAVFile would have
// written byte for byte, and a failed write leaves the old file in place.
func TestWAVWriter(t *testing.T) {
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(1, 2))
	x := make([]float32, 10007)
	for i := range x {
		x[i] = float32(1.2*rng.Float64() - 0.6)
	}
	ref := filepath.Join(dir, "ref.wav")
	if err := WriteWAVFile(ref, x, 16000); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(dir, "blocks.wav")
	w, err := CreateWAV(p, 16000)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i < len(x); i += 1000 {
		if err := w.Write(x[i:min(i+1000, len(x))]); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	a, _ := os.ReadFile(ref)
	b, _ := os.ReadFile(p)
	if !bytes.Equal(a, b) {
		t.Errorf("block writer: %d bytes, WriteWAVFile %d bytes; contents differ", len(b), len(a))
	}
	// Abort keeps the previous file.
	w, _ = CreateWAV(p, 8000)
	w.Write(x[:10])
	w.Abort()
	if c, _ := os.ReadFile(p); !bytes.Equal(c, a) {
		t.Error("an aborted write changed the existing file")
	}
	if left, _ := filepath.Glob(filepath.Join(dir, ".*tmp*")); len(left) != 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

// TestResampleStream: chunked resampling equals one-shot Resample sample
// for sample, for up- and down-sampling and odd ratios.
func TestResampleStream(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	x := make([]float32, 24001)
	for i := range x {
		x[i] = float32(rng.NormFloat64())
	}
	for _, c := range [][2]int{{48000, 16000}, {16000, 48000}, {44100, 16000}, {16000, 16000}, {22050, 16000}} {
		r, err := NewResampler(c[0], c[1])
		if err != nil {
			t.Fatal(err)
		}
		want := r.Resample(nil, x)
		s := r.NewStream()
		var got []float32
		for i := 0; i < len(x); {
			n := 1 + rng.IntN(3000)
			got = s.Push(got, x[i:min(i+n, len(x))])
			i += n
		}
		got = s.Flush(got)
		if !equalF32(got, want) {
			t.Errorf("%d → %d Hz: stream gives %d samples, Resample %d; first difference at %d", c[0], c[1], len(got), len(want), firstDiff(got, want))
		}
	}
}

func firstDiff(a, b []float32) int {
	for i := range min(len(a), len(b)) {
		if a[i] != b[i] {
			return i
		}
	}
	return min(len(a), len(b))
}
