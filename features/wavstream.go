package features

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
)

// maxFmtChunkBytes bounds the fmt chunk a [WAVReader] reads into memory.
const maxFmtChunkBytes = 1 << 12

// WAVReader decodes a WAV file block by block, mixed to mono, so that
// recordings of hours pass through in bounded memory. It accepts exactly
// the files [DecodeWAV] accepts (same encodings, chunk walk and errors)
// and yields the same samples, but is not limited by [MaxWAVBytes]; the
// one difference is that it refuses fmt chunks over 4 KiB.
type WAVReader struct {
	name   string
	r      io.ReadSeeker
	closer io.Closer
	lay    wavLayout // data is nil; the data chunk is read from r
	frames int64     // whole sample frames in the data chunk
	done   int64     // frames returned so far
	buf    []byte    // raw block buffer
}

// OpenWAV opens the WAV file at path for block reading. Close it when done.
func OpenWAV(path string) (*WAVReader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("features: %w", err)
	}
	if fi, err := f.Stat(); err == nil && fi.IsDir() {
		f.Close()
		return nil, &WAVError{Name: path, Offset: -1, Reason: "is a directory, not a WAV file"}
	}
	r, err := NewWAVReader(path, f)
	if err != nil {
		f.Close()
		return nil, err
	}
	r.closer = f
	return r, nil
}

// NewWAVReader walks the RIFF chunks of r (name is used in errors only)
// and positions it at the first sample. Malformed input gives a
// *[WAVError]; it never panics, and it reads at most the fmt chunk into
// memory before the samples.
func NewWAVReader(name string, r io.ReadSeeker) (*WAVReader, error) {
	if name == "" {
		name = "<input>"
	}
	bad := func(off int64, format string, args ...any) error {
		return &WAVError{Name: name, Offset: off, Reason: fmt.Sprintf(format, args...)}
	}
	end, err := r.Seek(0, io.SeekEnd)
	if err != nil {
		return nil, fmt.Errorf("features: %s: %w", name, err)
	}
	readAt := func(off int64, b []byte) error {
		if _, err := r.Seek(off, io.SeekStart); err != nil {
			return err
		}
		_, err := io.ReadFull(r, b)
		return err
	}
	if end == 0 {
		return nil, bad(-1, "empty file")
	}
	if end < 12 {
		return nil, bad(0, "file is %d bytes, too short for a RIFF/WAVE header (12 bytes)", end)
	}
	var hdr [12]byte
	if err := readAt(0, hdr[:]); err != nil {
		return nil, fmt.Errorf("features: %s: %w", name, err)
	}
	if string(hdr[0:4]) != "RIFF" {
		return nil, bad(0, "not a RIFF file: magic is %q, want \"RIFF\"", hdr[0:4])
	}
	if string(hdr[8:12]) != "WAVE" {
		return nil, bad(8, "RIFF form type is %q, want \"WAVE\"", hdr[8:12])
	}
	w := &WAVReader{name: name, r: r}
	var (
		haveFmt bool
		dataAt  = int64(-1)
		dataLen int64
	)
	// The same walk as parseWAVLayout, over the reader.
	for pos := int64(12); pos+8 <= end; {
		var ch [8]byte
		if err := readAt(pos, ch[:]); err != nil {
			return nil, fmt.Errorf("features: %s: %w", name, err)
		}
		id := string(ch[0:4])
		size := int64(binary.LittleEndian.Uint32(ch[4:8]))
		body := pos + 8
		switch id {
		case "fmt ":
			if haveFmt {
				return nil, bad(pos, "second fmt chunk")
			}
			if body+size > end {
				return nil, bad(pos, "fmt chunk declares %d bytes but only %d remain (truncated file)", size, end-body)
			}
			if size > maxFmtChunkBytes {
				return nil, bad(pos, "fmt chunk of %d bytes, more than %d", size, maxFmtChunkBytes)
			}
			b := make([]byte, size)
			if err := readAt(body, b); err != nil {
				return nil, fmt.Errorf("features: %s: %w", name, err)
			}
			if err := parseFmt(name, &w.lay, b, body); err != nil {
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
		next := body + size + size&1
		if next > end {
			break
		}
		pos = next
	}
	if !haveFmt {
		return nil, bad(-1, "no fmt chunk")
	}
	if dataAt < 0 {
		return nil, bad(-1, "no data chunk")
	}
	w.frames = dataLen / int64(w.lay.blockAlign)
	if w.frames == 0 {
		return nil, bad(dataAt, "data chunk holds no complete sample frame (%d bytes, %d per frame)", dataLen, w.lay.blockAlign)
	}
	w.lay.dataOffset = dataAt
	if _, err := r.Seek(dataAt, io.SeekStart); err != nil {
		return nil, fmt.Errorf("features: %s: %w", name, err)
	}
	return w, nil
}

// RateHz returns the sample rate.
func (w *WAVReader) RateHz() int { return w.lay.rateHz }

// Channels returns the channel count before the mono mix.
func (w *WAVReader) Channels() int { return w.lay.channels }

// BitDepth returns the bits per sample.
func (w *WAVReader) BitDepth() int { return w.lay.bits }

// Frames returns the number of sample frames (mono samples) in the file.
func (w *WAVReader) Frames() int64 { return w.frames }

// Seconds returns the duration.
func (w *WAVReader) Seconds() float64 { return float64(w.frames) / float64(w.lay.rateHz) }

// Read decodes up to len(dst) mono samples (full scale ±1, mixed by the
// channel mean as in [DecodeWAV]) into dst and returns how many; at the
// end of the data it returns 0 and io.EOF. It allocates only on the first
// call and when dst grows. A non-finite float sample or a short read is a
// *[WAVError].
func (w *WAVReader) Read(dst []float32) (int, error) {
	left := w.frames - w.done
	if left == 0 {
		return 0, io.EOF
	}
	n := int(min(int64(len(dst)), left))
	ba := w.lay.blockAlign
	if cap(w.buf) < n*ba {
		w.buf = make([]byte, n*ba)
	}
	raw := w.buf[:n*ba]
	if _, err := io.ReadFull(w.r, raw); err != nil {
		return 0, &WAVError{Name: w.name, Offset: w.lay.dataOffset + w.done*int64(ba), Reason: "reading samples: " + err.Error(), Err: err}
	}
	blk := w.lay
	blk.data = raw
	if at := unpackSamples(dst[:n], &blk); at >= 0 {
		return 0, &WAVError{Name: w.name, Offset: w.lay.dataOffset + w.done*int64(ba) + int64(at), Reason: "non-finite float sample"}
	}
	w.done += int64(n)
	return n, nil
}

// Close closes the file opened by [OpenWAV]; for readers made by
// [NewWAVReader] it does nothing.
func (w *WAVReader) Close() error {
	if w.closer == nil {
		return nil
	}
	return w.closer.Close()
}

// WAVWriter writes a mono 16-bit PCM WAV file block by block, in bounded
// memory, atomically: samples go to a temporary file beside the target,
// and [WAVWriter.Close] fixes the header sizes and renames it over the
// target, so a failed or abandoned write leaves any existing file intact.
// Samples are converted as by [WriteWAVFile] (clipped to ±1, scaled by
// 32767 and rounded to nearest).
type WAVWriter struct {
	path, tmp string
	f         *os.File
	rateHz    int
	frames    int64
	buf       []byte
	err       error
}

// maxWAVDataBytes is the largest data chunk a 32-bit RIFF size can describe.
const maxWAVDataBytes = math.MaxUint32 - 36

// CreateWAV starts writing a mono 16-bit WAV file at path with rateHz.
func CreateWAV(path string, rateHz int) (*WAVWriter, error) {
	if rateHz <= 0 || rateHz > MaxWAVRateHz {
		return nil, badConfig("write %s: sample rate %d Hz outside 1..%d", path, rateHz, MaxWAVRateHz)
	}
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return nil, fmt.Errorf("features: %w", err)
	}
	w := &WAVWriter{path: path, tmp: f.Name(), f: f, rateHz: rateHz}
	if _, err := f.Write(w.header()); err != nil {
		w.Abort()
		return nil, fmt.Errorf("features: writing %s: %w", path, err)
	}
	return w, nil
}

func (w *WAVWriter) header() []byte {
	h := make([]byte, 44)
	le := binary.LittleEndian
	data := uint32(w.frames * 2)
	copy(h[0:4], "RIFF")
	le.PutUint32(h[4:8], 36+data)
	copy(h[8:16], "WAVEfmt ")
	le.PutUint32(h[16:20], 16)
	le.PutUint16(h[20:22], wavFormatPCM)
	le.PutUint16(h[22:24], 1)
	le.PutUint32(h[24:28], uint32(w.rateHz))
	le.PutUint32(h[28:32], uint32(w.rateHz*2))
	le.PutUint16(h[32:34], 2)
	le.PutUint16(h[34:36], 16)
	copy(h[36:40], "data")
	le.PutUint32(h[40:44], data)
	return h
}

// Write appends samples. After the first error every call returns it.
func (w *WAVWriter) Write(samples []float32) error {
	if w.err != nil {
		return w.err
	}
	if (w.frames+int64(len(samples)))*2 > maxWAVDataBytes {
		w.err = fmt.Errorf("features: writing %s: more than %d bytes of samples do not fit a WAV file", w.path, int64(maxWAVDataBytes))
		return w.err
	}
	if cap(w.buf) < 2*len(samples) {
		w.buf = make([]byte, 2*len(samples))
	}
	b := w.buf[:2*len(samples)]
	for i, v := range samples {
		x := math.Max(-1, math.Min(1, float64(v)))
		binary.LittleEndian.PutUint16(b[2*i:], uint16(int16(math.Round(x*32767))))
	}
	if _, err := w.f.Write(b); err != nil {
		w.err = fmt.Errorf("features: writing %s: %w", w.path, err)
		return w.err
	}
	w.frames += int64(len(samples))
	return nil
}

// Close writes the header sizes, syncs, and renames the file into place.
// On any earlier or present error the temporary file is removed and the
// target left untouched.
func (w *WAVWriter) Close() error {
	if w.f == nil {
		return w.err
	}
	err := w.err
	if err == nil {
		if _, e := w.f.WriteAt(w.header(), 0); e != nil {
			err = e
		}
	}
	if err == nil {
		err = w.f.Chmod(0o644)
	}
	if err == nil {
		err = w.f.Sync()
	}
	if cerr := w.f.Close(); err == nil {
		err = cerr
	}
	w.f = nil
	if err == nil {
		err = os.Rename(w.tmp, w.path)
	}
	if err != nil {
		os.Remove(w.tmp)
		var werr *WAVError
		if !errors.As(err, &werr) && err != w.err {
			err = fmt.Errorf("features: writing %s: %w", w.path, err)
		}
		w.err = err
		return err
	}
	return nil
}

// Abort abandons the file: the temporary file is removed.
func (w *WAVWriter) Abort() {
	if w.f != nil {
		w.f.Close()
		w.f = nil
	}
	os.Remove(w.tmp)
	if w.err == nil {
		w.err = fmt.Errorf("features: writing %s: aborted", w.path)
	}
}

// ResampleStream is [Resampler.Resample] on a signal given in chunks: the
// outputs equal those of Resample on the concatenated input, sample for
// sample. It keeps only the input the filter still needs.
type ResampleStream struct {
	r    *Resampler
	in   []float32 // input samples from absolute index base on
	base int64     // absolute index of in[0]
	seen int64     // input samples pushed
	out  int64     // output samples emitted
}

// NewStream returns a streaming resampler with r's filter.
func (r *Resampler) NewStream() *ResampleStream { return &ResampleStream{r: r} }

// Push adds x and appends every output sample whose inputs have all
// arrived to dst, returning the extended slice.
func (s *ResampleStream) Push(dst, x []float32) []float32 {
	s.in = append(s.in, x...)
	s.seen += int64(len(x))
	return s.emit(dst, false)
}

// Flush ends the signal (inputs after it are zero) and appends the
// remaining OutLen(total) − emitted outputs.
func (s *ResampleStream) Flush(dst []float32) []float32 { return s.emit(dst, true) }

func (s *ResampleStream) emit(dst []float32, final bool) []float32 {
	r := s.r
	if r.up == r.down {
		dst = append(dst, s.in...)
		s.base += int64(len(s.in))
		s.out = s.base
		s.in = s.in[:0]
		return dst
	}
	total := (s.seen*int64(r.up) + int64(r.down) - 1) / int64(r.down) // OutLen(seen)
	for ; s.out < total; s.out++ {
		num := s.out * int64(r.down)
		i0 := num / int64(r.up)
		if !final && i0+int64(r.half) >= s.seen {
			break
		}
		taps := r.phases[num%int64(r.up)]
		base := i0 - int64(r.half) + 1
		lo, hi := int64(0), int64(len(taps))
		if base < 0 {
			lo = -base
		}
		if base+hi > s.seen {
			hi = s.seen - base
		}
		var acc float64
		for j := lo; j < hi; j++ {
			acc += taps[j] * float64(s.in[base+j-s.base])
		}
		dst = append(dst, float32(acc))
	}
	// Drop input no later output needs: output o reads from
	// floor(o·down/up) − half + 1 on.
	keep := s.out*int64(r.down)/int64(r.up) - int64(r.half) + 1
	if drop := keep - s.base; drop > 0 && drop <= int64(len(s.in)) {
		n := copy(s.in, s.in[drop:])
		s.in = s.in[:n]
		s.base = keep
	}
	return dst
}
