package features

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/go-audio/wav"
)

// Fixtures: SoX 14.4.2 (Debian) via testdata/gen/make_wavs.sh. Every file is
// 0.25 s of 0.5·sin(2π f n / rate) per channel, undithered, so the expected
// samples are analytic; the tolerance is the quantisation step of the format.
var wavFixtures = []struct {
	file     string
	rate     int
	channels int
	bits     int
	float    bool
	freqs    []float64 // one per channel; the decoder mixes them by mean
}{
	{"pcm_u8_16k.wav", 16000, 1, 8, false, []float64{1000}},
	{"pcm_s16_16k.wav", 16000, 1, 16, false, []float64{1000}},
	{"pcm_s24_16k.wav", 16000, 1, 24, false, []float64{1000}},
	{"pcm_s32_16k.wav", 16000, 1, 32, false, []float64{1000}},
	{"float32_16k.wav", 16000, 1, 32, true, []float64{1000}},
	{"ext_s24_48k.wav", 48000, 1, 24, false, []float64{1000}},
	{"ext_float32_44k1.wav", 44100, 1, 32, true, []float64{1000}},
	{"stereo_s16_22k05.wav", 22050, 2, 16, false, []float64{1000, 1500}},
	{"quad_s16_8k.wav", 8000, 4, 16, false, []float64{500, 1000, 1500, 2000}},
	{"pcm_s16_11k025.wav", 11025, 1, 16, false, []float64{1000}},
	{"pcm_s16_32k.wav", 32000, 1, 16, false, []float64{1000}},
}

func TestReadWAVFixtures(t *testing.T) {
	for _, fx := range wavFixtures {
		t.Run(fx.file, func(t *testing.T) {
			a, err := ReadWAVFile(filepath.Join("..", "testdata", "wav", fx.file))
			if err != nil {
				t.Fatal(err)
			}
			if a.SampleRateHz != fx.rate || a.Channels != fx.channels || a.BitDepth != fx.bits || a.Float != fx.float {
				t.Fatalf("header = %d Hz %d ch %d bit float=%v, want %d Hz %d ch %d bit float=%v",
					a.SampleRateHz, a.Channels, a.BitDepth, a.Float, fx.rate, fx.channels, fx.bits, fx.float)
			}
			if want := fx.rate / 4; len(a.Samples) < want-1 || len(a.Samples) > want+1 {
				t.Fatalf("%d samples, want %d (0.25 s)", len(a.Samples), want)
			}
			// One quantisation step of the format (8-bit: 1/128), plus
			// float32 rounding.
			tol := math.Ldexp(1, 1-fx.bits) + 1e-6
			if fx.float {
				tol = 1e-6
			}
			worst := 0.0
			for n, got := range a.Samples {
				var want float64
				for _, f := range fx.freqs {
					want += 0.5 * math.Sin(2*math.Pi*f*float64(n)/float64(fx.rate))
				}
				want /= float64(len(fx.freqs))
				worst = math.Max(worst, math.Abs(float64(got)-want))
			}
			if worst > tol {
				t.Errorf("max |decoded - analytic| = %.3g, want ≤ %.3g", worst, tol)
			}
		})
	}
}

// wavBytes builds a RIFF/WAVE file from chunks given as id, body pairs,
// adding pad bytes after odd-sized bodies.
func wavBytes(chunks ...any) []byte {
	body := []byte("WAVE")
	for i := 0; i < len(chunks); i += 2 {
		id, b := chunks[i].(string), chunks[i+1].([]byte)
		body = append(body, id...)
		body = binary.LittleEndian.AppendUint32(body, uint32(len(b)))
		body = append(body, b...)
		if len(b)%2 == 1 {
			body = append(body, 0)
		}
	}
	out := append([]byte("RIFF"), binary.LittleEndian.AppendUint32(nil, uint32(len(body)))...)
	return append(out, body...)
}

func fmtChunk(tag, channels, rate, bits int) []byte {
	b := make([]byte, 16)
	le := binary.LittleEndian
	le.PutUint16(b[0:], uint16(tag))
	le.PutUint16(b[2:], uint16(channels))
	le.PutUint32(b[4:], uint32(rate))
	le.PutUint32(b[8:], uint32(rate*channels*bits/8))
	le.PutUint16(b[12:], uint16(channels*bits/8))
	le.PutUint16(b[14:], uint16(bits))
	return b
}

func s16(vals ...int16) []byte {
	var b []byte
	for _, v := range vals {
		b = binary.LittleEndian.AppendUint16(b, uint16(v))
	}
	return b
}

func TestDecodeWAVOddLayouts(t *testing.T) {
	// Expected samples: int16 v / 32768 (see DecodeWAV).
	want := []float32{0.5, -0.25, 0}
	data := s16(16384, -8192, 0)
	cases := []struct {
		name string
		file []byte
	}{
		{"plain", wavBytes("fmt ", fmtChunk(1, 1, 8000, 16), "data", data)},
		{"LIST before fmt", wavBytes("LIST", []byte("INFOISFT\x04\x00\x00\x00pip\x00"), "fmt ", fmtChunk(1, 1, 8000, 16), "data", data)},
		{"odd-sized chunk with pad byte", wavBytes("fmt ", fmtChunk(1, 1, 8000, 16), "junk", []byte{1, 2, 3}, "data", data)},
		{"data before fmt", wavBytes("data", data, "fmt ", fmtChunk(1, 1, 8000, 16))},
		{"fmt with 2-byte extension", wavBytes("fmt ", append(fmtChunk(1, 1, 8000, 16), 0, 0), "data", data)},
		{"trailing partial frame dropped", wavBytes("fmt ", fmtChunk(1, 1, 8000, 16), "data", append(data, 7))},
		{"trailing chunk past the end ignored", append(wavBytes("fmt ", fmtChunk(1, 1, 8000, 16), "data", data), []byte("LIST\xff\xff\x00\x00ab")...)},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			a, err := DecodeWAV("x.wav", c.file)
			if err != nil {
				t.Fatal(err)
			}
			if len(a.Samples) != len(want) {
				t.Fatalf("DecodeWAV samples = %v, want %v", a.Samples, want)
			}
			for i := range want {
				if a.Samples[i] != want[i] {
					t.Fatalf("DecodeWAV samples = %v, want %v", a.Samples, want)
				}
			}
		})
	}
}

func TestDecodeWAVBadFiles(t *testing.T) {
	good := wavBytes("fmt ", fmtChunk(1, 1, 8000, 16), "data", s16(1, 2, 3, 4))
	hugeData := wavBytes("fmt ", fmtChunk(1, 1, 8000, 16), "data", s16(1, 2))
	binary.LittleEndian.PutUint32(hugeData[len(hugeData)-8:], 0xFFFFFFF0)
	nan := wavBytes("fmt ", fmtChunk(3, 1, 8000, 32), "data", binary.LittleEndian.AppendUint32(nil, math.Float32bits(float32(math.NaN()))))
	cases := []struct {
		name string
		file []byte
		want string // fragment of the error message
	}{
		{"empty", nil, "empty file"},
		{"short", []byte("RIFF"), "too short"},
		{"wrong magic", append([]byte("RIFX"), good[4:]...), "not a RIFF file"},
		{"not WAVE", append(append([]byte{}, good[:8]...), append([]byte("AVI "), good[12:]...)...), "want \"WAVE\""},
		{"zero channels", wavBytes("fmt ", fmtChunk(1, 0, 8000, 16), "data", s16(1)), "zero channels"},
		{"absurd channels", wavBytes("fmt ", fmtChunk(1, 1000, 8000, 16), "data", s16(1)), "channels"},
		{"absurd rate", wavBytes("fmt ", fmtChunk(1, 1, 0x7fffffff, 16), "data", s16(1)), "sample rate"},
		{"absurd data size", hugeData, "truncated"},
		{"truncated data", good[:len(good)-3], "truncated"},
		{"truncated fmt", good[:30], "truncated"},
		{"no data chunk", wavBytes("fmt ", fmtChunk(1, 1, 8000, 16)), "no data chunk"},
		{"no fmt chunk", wavBytes("data", s16(1)), "no fmt chunk"},
		{"empty data", wavBytes("fmt ", fmtChunk(1, 1, 8000, 16), "data", []byte{}), "no complete sample frame"},
		{"12-bit", wavBytes("fmt ", fmtChunk(1, 1, 8000, 12), "data", s16(1)), "unsupported"},
		{"a-law", wavBytes("fmt ", fmtChunk(6, 1, 8000, 8), "data", []byte{1}), "unsupported"},
		{"bad block align", wavBytes("fmt ", func() []byte { b := fmtChunk(1, 2, 8000, 16); b[12] = 3; return b }(), "data", s16(1, 2)), "block align"},
		{"NaN float", nan, "non-finite"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := DecodeWAV("bad.wav", c.file)
			var we *WAVError
			if !errors.As(err, &we) {
				t.Fatalf("DecodeWAV error = %v, want *WAVError", err)
			}
			if !strings.Contains(err.Error(), "bad.wav") || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("DecodeWAV error = %q, want it to name bad.wav and say %q", err, c.want)
			}
		})
	}
	if _, err := DecodeWAV("a.wav", wavBytes("fmt ", fmtChunk(6, 1, 8000, 8), "data", []byte{1})); !errors.Is(err, ErrUnsupportedFormat) {
		t.Errorf("a-law error %v does not wrap ErrUnsupportedFormat", err)
	}
}

func TestReadWAVFileErrors(t *testing.T) {
	dir := t.TempDir()
	if _, err := ReadWAVFile(filepath.Join(dir, "missing.wav")); err == nil || !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: error %v, want os.ErrNotExist", err)
	}
	if _, err := ReadWAVFile(dir); err == nil || !strings.Contains(err.Error(), "directory") {
		t.Errorf("directory: error %v, want a directory error", err)
	}
}

func BenchmarkDecodeWAV(b *testing.B) {
	// 60 s of 16 kHz 16-bit mono.
	data := make([]byte, 16000*60*2)
	for i := range data {
		data[i] = byte(i * 7)
	}
	file := wavBytes("fmt ", fmtChunk(1, 1, 16000, 16), "data", data)
	b.SetBytes(int64(len(file)))
	b.ReportAllocs()
	for b.Loop() {
		if _, err := DecodeWAV("bench.wav", file); err != nil {
			b.Fatal(err)
		}
	}
}

func TestWriteWAVFileRoundTrip(t *testing.T) {
	p := filepath.Join(t.TempDir(), "out.wav")
	x := []float32{0, 0.5, -0.5, 1, -1, 2} // 2 clips to 1
	if err := WriteWAVFile(p, x, 22050); err != nil {
		t.Fatal(err)
	}
	a, err := ReadWAVFile(p)
	if err != nil {
		t.Fatal(err)
	}
	if a.SampleRateHz != 22050 || a.BitDepth != 16 || len(a.Samples) != len(x) {
		t.Fatalf("read back %d Hz %d bit %d samples", a.SampleRateHz, a.BitDepth, len(a.Samples))
	}
	// 16-bit step 1/32768 (read) vs 1/32767 (write scale)
	for i, want := range []float32{0, 0.5, -0.5, 1, -1, 1} {
		if math.Abs(float64(a.Samples[i]-want)) > 1.0/16384 {
			t.Errorf("sample %d = %g, want %g", i, a.Samples[i], want)
		}
	}
}

// TestDecodeMatchesGoAudio: for random sample words of every supported
// encoding and 1 to 3 channels, DecodeWAV gives the mean of the channel
// values that github.com/go-audio/wav (v1.1.0) unpacks from the same
// canonical file, scaled as DecodeWAV documents (8-bit: (v-128)/128,
// otherwise v/2^(bits-1); float words as their float32 value).
func TestDecodeMatchesGoAudio(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	for _, enc := range []struct {
		bits  int
		float bool
	}{{8, false}, {16, false}, {24, false}, {32, false}, {32, true}} {
		for channels := 1; channels <= 3; channels++ {
			frames := 257
			data := make([]byte, frames*channels*enc.bits/8)
			for i := range data {
				data[i] = byte(rng.Uint32())
			}
			if enc.float { // finite float words only
				for i := 0; i < len(data); i += 4 {
					binary.LittleEndian.PutUint32(data[i:], math.Float32bits(float32(rng.NormFloat64())))
				}
			}
			tag := uint16(1)
			if enc.float {
				tag = 3
			}
			var hdr [44]byte
			le := binary.LittleEndian
			copy(hdr[0:], "RIFF")
			le.PutUint32(hdr[4:], uint32(36+len(data)))
			copy(hdr[8:], "WAVEfmt ")
			le.PutUint32(hdr[16:], 16)
			le.PutUint16(hdr[20:], tag)
			le.PutUint16(hdr[22:], uint16(channels))
			le.PutUint32(hdr[24:], 16000)
			le.PutUint32(hdr[28:], uint32(16000*channels*enc.bits/8))
			le.PutUint16(hdr[32:], uint16(channels*enc.bits/8))
			le.PutUint16(hdr[34:], uint16(enc.bits))
			copy(hdr[36:], "data")
			le.PutUint32(hdr[40:], uint32(len(data)))
			file := append(hdr[:], data...)

			a, err := DecodeWAV("random.wav", file)
			if err != nil {
				t.Fatal(err)
			}
			buf, err := wav.NewDecoder(bytes.NewReader(file)).FullPCMBuffer()
			if err != nil {
				t.Fatal(err)
			}
			if len(buf.Data) != frames*channels || len(a.Samples) != frames {
				t.Fatalf("%d-bit ×%d: go-audio %d words, DecodeWAV %d frames", enc.bits, channels, len(buf.Data), len(a.Samples))
			}
			for f := 0; f < frames; f++ {
				var sum float64
				for c := 0; c < channels; c++ {
					v := buf.Data[f*channels+c]
					switch {
					case enc.float:
						sum += float64(math.Float32frombits(uint32(int32(v))))
					case enc.bits == 8:
						sum += float64(v-128) / 128
					default:
						sum += float64(v) / math.Ldexp(1, enc.bits-1)
					}
				}
				if want := float32(sum / float64(channels)); a.Samples[f] != want {
					t.Fatalf("%d-bit float=%v ×%d frame %d: %g, go-audio gives %g", enc.bits, enc.float, channels, f, a.Samples[f], want)
				}
			}
		}
	}
}
