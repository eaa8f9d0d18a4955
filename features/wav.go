package features

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"os"
)

// Limits applied to WAV input before anything is allocated.
const (
	// MaxWAVBytes is the largest WAV file ReadWAVFile accepts (1 GiB, about
	// 9 hours of 16 kHz 16-bit mono). Larger files are an error, not a
	// silent truncation.
	MaxWAVBytes = 1 << 30
	// MaxWAVChannels bounds the channel count of a fmt chunk.
	MaxWAVChannels = 64
	// MaxWAVRateHz bounds the sample rate of a fmt chunk.
	MaxWAVRateHz = 1_000_000
)

// WAVE format tags (Microsoft RIFF specification, mmreg.h).
const (
	wavFormatPCM        = 0x0001
	wavFormatFloat      = 0x0003
	wavFormatExtensible = 0xFFFE
)

// ksdataformatSubtypeSuffix is bytes 2..15 of the KSDATAFORMAT_SUBTYPE_PCM
// and _IEEE_FLOAT GUIDs as stored in a WAVE_FORMAT_EXTENSIBLE fmt chunk
// (ksmedia.h: xxxxxxxx-0000-0010-8000-00aa00389b71).
var ksdataformatSubtypeSuffix = []byte{0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71}

// Audio is a decoded recording, mixed down to mono.
type Audio struct {
	SampleRateHz int       // sample rate of Samples
	Channels     int       // channel count of the source before the mono mix
	BitDepth     int       // bits per sample in the source
	Float        bool      // true when the source held IEEE float samples
	Samples      []float32 // mono samples, full scale ±1 (see DecodeWAV)
}

// Seconds returns the duration of a in seconds.
func (a *Audio) Seconds() float64 {
	if a.SampleRateHz == 0 {
		return 0
	}
	return float64(len(a.Samples)) / float64(a.SampleRateHz)
}

// ReadWAVFile reads and decodes the WAV file at path with [DecodeWAV]. The
// file size is checked against [MaxWAVBytes] before it is read.
func ReadWAVFile(path string) (*Audio, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("features: %w", err)
	}
	if fi.IsDir() {
		return nil, &WAVError{Name: path, Offset: -1, Reason: "is a directory, not a WAV file"}
	}
	if fi.Size() > MaxWAVBytes {
		return nil, &WAVError{Name: path, Offset: -1, Reason: fmt.Sprintf("file is %d bytes, more than the %d-byte limit", fi.Size(), MaxWAVBytes)}
	}
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("features: %w", err)
	}
	return DecodeWAV(path, data)
}

// wavLayout is what the RIFF chunk walk found.
type wavLayout struct {
	format     int // wavFormatPCM or wavFormatFloat after resolving extensible
	channels   int
	rateHz     int
	bits       int
	blockAlign int
	data       []byte // the data chunk body, whole frames only
	dataOffset int64
}

// DecodeWAV decodes a RIFF/WAVE file held in data. name is used in errors
// only.
//
// Accepted encodings: PCM 8-bit (unsigned, offset 128), 16-, 24- and 32-bit
// signed little-endian integers, and 32-bit IEEE float, each either with
// format tag 1/3 or as WAVE_FORMAT_EXTENSIBLE (0xFFFE) with the PCM or
// IEEE_FLOAT sub-format GUID. Any number of channels up to [MaxWAVChannels]
// is mixed to mono by the arithmetic mean. Integer samples are scaled by
// 2^-(bits-1) (8-bit: (v-128)/128), so full scale is [-1, 1); float samples
// are taken as they are and must be finite.
//
// Chunks may come in any order; unknown chunks (LIST, bext, fact, ...) are
// skipped, odd-sized chunks are followed by their RIFF pad byte, and an
// incomplete final sample frame is dropped. The chunk structure is
// validated here against the bytes present and the sample words are
// unpacked straight from them (tested against github.com/go-audio/wav,
// which itself neither follows extensible or out-of-order layouts nor
// bounds its allocations by the input length).
//
// Every malformed input gives a *[WAVError] naming the file; DecodeWAV never
// panics and its work is bounded by len(data).
func DecodeWAV(name string, data []byte) (*Audio, error) {
	if name == "" {
		name = "<input>"
	}
	lay, err := parseWAVLayout(name, data)
	if err != nil {
		return nil, err
	}
	frames := len(lay.data) / lay.blockAlign
	out := &Audio{
		SampleRateHz: lay.rateHz,
		Channels:     lay.channels,
		BitDepth:     lay.bits,
		Float:        lay.format == wavFormatFloat,
		Samples:      make([]float32, frames),
	}
	if at := unpackSamples(out.Samples, lay); at >= 0 {
		return nil, &WAVError{Name: name, Offset: lay.dataOffset + int64(at), Reason: "non-finite float sample"}
	}
	return out, nil
}

// unpackSamples decodes the sample words of lay.data straight from the
// bytes into dst (one value per frame) and mixes the channels by their
// mean, each sample scaled as documented in [DecodeWAV]. It returns the
// byte offset in lay.data of the first non-finite float sample, or -1.
// The result equals github.com/go-audio/wav's decoding of the same words
// (TestDecodeMatchesGoAudio).
func unpackSamples(dst []float32, lay *wavLayout) int {
	d, c := lay.data, lay.channels
	le := binary.LittleEndian
	if c == 1 && lay.format == wavFormatPCM && lay.bits == 16 { // the common case
		d = d[:2*len(dst)]
		for i := range dst {
			dst[i] = float32(int16(le.Uint16(d[2*i:]))) * (1.0 / (1 << 15)) // exact
		}
		return -1
	}
	bytesPer := lay.bits / 8
	inv := 1 / float64(c)
	for f := range dst {
		var sum float64
		for ch := 0; ch < c; ch++ {
			at := (f*c + ch) * bytesPer
			var v float64
			switch {
			case lay.format == wavFormatFloat:
				v = float64(math.Float32frombits(le.Uint32(d[at:])))
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return at
				}
			case bytesPer == 1:
				v = float64(int(d[at])-128) / 128
			case bytesPer == 2:
				v = float64(int16(le.Uint16(d[at:]))) / (1 << 15)
			case bytesPer == 3:
				v = float64(int32(uint32(d[at])<<8|uint32(d[at+1])<<16|uint32(d[at+2])<<24)>>8) / (1 << 23)
			default: // 4
				v = float64(int32(le.Uint32(d[at:]))) / (1 << 31)
			}
			sum += v
		}
		dst[f] = float32(sum * inv)
	}
	return -1
}

// parseWAVLayout walks the RIFF chunks of data. Each step advances by at
// least 8 bytes, so the walk ends after at most len(data)/8 steps.
func parseWAVLayout(name string, data []byte) (*wavLayout, error) {
	bad := func(off int64, format string, args ...any) error {
		return &WAVError{Name: name, Offset: off, Reason: fmt.Sprintf(format, args...)}
	}
	if len(data) == 0 {
		return nil, bad(-1, "empty file")
	}
	if len(data) < 12 {
		return nil, bad(0, "file is %d bytes, too short for a RIFF/WAVE header (12 bytes)", len(data))
	}
	if string(data[0:4]) != "RIFF" {
		return nil, bad(0, "not a RIFF file: magic is %q, want \"RIFF\"", data[0:4])
	}
	if string(data[8:12]) != "WAVE" {
		return nil, bad(8, "RIFF form type is %q, want \"WAVE\"", data[8:12])
	}
	// The RIFF size field is often wrong in files written by streaming
	// tools, so the walk is bounded by the bytes present, not by it.
	var (
		lay     wavLayout
		haveFmt bool
		dataAt  = int64(-1)
		dataLen int64
	)
	pos := int64(12)
	end := int64(len(data))
	for pos+8 <= end {
		id := string(data[pos : pos+4])
		size := int64(binary.LittleEndian.Uint32(data[pos+4 : pos+8]))
		body := pos + 8
		switch id {
		case "fmt ":
			if haveFmt {
				return nil, bad(pos, "second fmt chunk")
			}
			if body+size > end {
				return nil, bad(pos, "fmt chunk declares %d bytes but only %d remain (truncated file)", size, end-body)
			}
			if err := parseFmt(name, &lay, data[body:body+size], body); err != nil {
				return nil, err
			}
			haveFmt = true
		case "data":
			if dataAt >= 0 {
				return nil, bad(pos, "second data chunk")
			}
			if body+size > end {
				return nil, bad(pos, "data chunk declares %d bytes but only %d remain (truncated file)", size, end-body)
			}
			dataAt, dataLen = body, size
		}
		next := body + size + size&1 // RIFF chunks are padded to even length
		if next > end {
			break // trailing chunk other than fmt/data runs past the end: ignore it
		}
		pos = next
	}
	if !haveFmt {
		return nil, bad(-1, "no fmt chunk")
	}
	if dataAt < 0 {
		return nil, bad(-1, "no data chunk")
	}
	frames := dataLen / int64(lay.blockAlign)
	if frames == 0 {
		return nil, bad(dataAt, "data chunk holds no complete sample frame (%d bytes, %d per frame)", dataLen, lay.blockAlign)
	}
	lay.data = data[dataAt : dataAt+frames*int64(lay.blockAlign)]
	lay.dataOffset = dataAt
	return &lay, nil
}

func parseFmt(name string, lay *wavLayout, b []byte, off int64) error {
	bad := func(off int64, format string, args ...any) error {
		return &WAVError{Name: name, Offset: off, Reason: fmt.Sprintf(format, args...)}
	}
	unsupported := func(off int64, format string, args ...any) error {
		return &WAVError{Name: name, Offset: off, Reason: "unsupported sample format: " + fmt.Sprintf(format, args...), Err: ErrUnsupportedFormat}
	}
	if len(b) < 16 {
		return bad(off, "fmt chunk is %d bytes, want at least 16", len(b))
	}
	le := binary.LittleEndian
	tag := int(le.Uint16(b[0:2]))
	lay.channels = int(le.Uint16(b[2:4]))
	lay.rateHz = int(le.Uint32(b[4:8]))
	lay.blockAlign = int(le.Uint16(b[12:14]))
	lay.bits = int(le.Uint16(b[14:16]))
	if tag == wavFormatExtensible {
		if len(b) < 40 {
			return bad(off, "extensible fmt chunk is %d bytes, want 40", len(b))
		}
		valid := int(le.Uint16(b[18:20]))
		guid := b[24:40]
		if !bytes.Equal(guid[2:], ksdataformatSubtypeSuffix) {
			return unsupported(off+24, "unknown extensible sub-format GUID")
		}
		tag = int(le.Uint16(guid[0:2]))
		if valid != 0 && valid != lay.bits {
			return bad(off+18, "extensible fmt: %d valid bits in %d-bit containers is not supported", valid, lay.bits)
		}
	}
	switch {
	case lay.channels == 0:
		return bad(off+2, "zero channels")
	case lay.channels > MaxWAVChannels:
		return bad(off+2, "%d channels, more than %d", lay.channels, MaxWAVChannels)
	case lay.rateHz == 0 || lay.rateHz > MaxWAVRateHz:
		return bad(off+4, "sample rate %d Hz outside 1..%d", lay.rateHz, MaxWAVRateHz)
	}
	switch tag {
	case wavFormatPCM:
		if lay.bits != 8 && lay.bits != 16 && lay.bits != 24 && lay.bits != 32 {
			return unsupported(off+14, "%d-bit integer PCM", lay.bits)
		}
	case wavFormatFloat:
		if lay.bits != 32 {
			return unsupported(off+14, "%d-bit float", lay.bits)
		}
	default:
		return unsupported(off, "format tag 0x%04x", tag)
	}
	lay.format = tag
	if want := lay.channels * lay.bits / 8; lay.blockAlign != want {
		return bad(off+12, "block align %d does not match %d channels of %d bits (%d)", lay.blockAlign, lay.channels, lay.bits, want)
	}
	return nil
}
