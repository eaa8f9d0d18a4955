package nn

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"math/rand/v2"
	"os"

	"github.com/pipit-audio/pipit/internal/fsutil"
)

// Checkpoint file format (all integers little-endian):
//
//	offset  size  field
//	0       8     magic "PIPITCKP"
//	8       4     uint32 format version (CheckpointVersion)
//	12      4     uint32 header length H
//	16      H     header, UTF-8 JSON (checkpointHeader)
//	16+H    4·P   float32 parameters (Params.Data, table order)
//	...     4·S   float32 state (Params.State: batch-norm running statistics)
//	...     4·P   float32 optimiser first moments
//	...     4·V   float32 optimiser second moments (V = P for Adam/AdamW, 0 for SGD)
//	...     R     dropout RNG state (math/rand/v2 PCG MarshalBinary)
//	end−4   4     uint32 CRC-32 (IEEE) of every preceding byte
//
// The counts P, S, V and R are in the header; a reader checks them against
// the file length before reading the arrays.
const (
	checkpointMagic = "PIPITCKP"
	// CheckpointVersion is the current checkpoint format version.
	CheckpointVersion = 1
)

type checkpointHeader struct {
	Spec      string          `json:"spec"`
	Classes   int             `json:"classes"`
	Weights   []float32       `json:"class_weights,omitempty"`
	Smoothing float64         `json:"label_smoothing"`
	Optimizer OptimizerConfig `json:"optimizer"`
	Schedule  Schedule        `json:"schedule"`
	Steps     int64           `json:"steps"`
	Params    int             `json:"params"`
	State     int             `json:"state"`
	Moments1  int             `json:"moments1"`
	Moments2  int             `json:"moments2"`
	RNGBytes  int             `json:"rng_bytes"`
	Meta      json.RawMessage `json:"meta,omitempty"`
}

// WriteCheckpoint writes the trainer's full state to path atomically, with
// meta (any JSON the caller wants kept, e.g. front-end settings and class
// names; may be nil) in the header.
func (t *Trainer) WriteCheckpoint(path string, meta json.RawMessage) error {
	b, err := t.MarshalCheckpoint(meta)
	if err != nil {
		return err
	}
	if err := fsutil.WriteFile(path, b); err != nil {
		return fmt.Errorf("nn: %w", err)
	}
	return nil
}

// MarshalCheckpoint returns the checkpoint bytes (see the format above).
func (t *Trainer) MarshalCheckpoint(meta json.RawMessage) ([]byte, error) {
	rngState, err := t.pcg.MarshalBinary()
	if err != nil {
		return nil, fmt.Errorf("nn: %w", err)
	}
	p := t.Net.Params
	h := checkpointHeader{
		Spec: t.Net.Spec(), Classes: t.Loss.Classes, Weights: t.Loss.ClassWeights, Smoothing: t.Loss.Smoothing,
		Optimizer: t.Opt.Cfg, Schedule: t.Sched, Steps: t.Opt.Steps,
		Params: len(p.Data), State: len(p.State), Moments1: len(t.Opt.M), Moments2: len(t.Opt.V), RNGBytes: len(rngState), Meta: meta,
	}
	hj, err := json.Marshal(h)
	if err != nil {
		return nil, fmt.Errorf("nn: %w", err)
	}
	var buf bytes.Buffer
	buf.WriteString(checkpointMagic)
	binary.Write(&buf, binary.LittleEndian, uint32(CheckpointVersion))
	binary.Write(&buf, binary.LittleEndian, uint32(len(hj)))
	buf.Write(hj)
	for _, arr := range [][]float32{p.Data, p.State, t.Opt.M, t.Opt.V} {
		writeFloats(&buf, arr)
	}
	buf.Write(rngState)
	binary.Write(&buf, binary.LittleEndian, crc32.ChecksumIEEE(buf.Bytes()))
	return buf.Bytes(), nil
}

func writeFloats(w io.Writer, a []float32) {
	var b [4]byte
	for _, v := range a {
		binary.LittleEndian.PutUint32(b[:], math.Float32bits(v))
		w.Write(b[:])
	}
}

// Checkpoint is a decoded checkpoint file.
type Checkpoint struct {
	Trainer *Trainer
	Meta    json.RawMessage
}

// ReadCheckpoint reads a checkpoint written by [Trainer.WriteCheckpoint]
// and rebuilds the trainer, so that training continues exactly where it
// stopped.
func ReadCheckpoint(path string) (*Checkpoint, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("nn: %w", err)
	}
	return ParseCheckpoint(path, data)
}

// ParseCheckpoint decodes checkpoint bytes; name is used in errors.
// Malformed input gives a *[FormatError] (or an error wrapping
// [ErrUnsupportedVersion] or [ErrCheckpointMismatch]); it never panics,
// and sizes are checked against len(data) before anything is allocated.
func ParseCheckpoint(name string, data []byte) (*Checkpoint, error) {
	bad := func(off int, format string, args ...any) error {
		return &FormatError{Name: name, Offset: int64(off), Reason: fmt.Sprintf(format, args...)}
	}
	if len(data) < 20 {
		return nil, bad(0, "file is %d bytes, too short for a checkpoint", len(data))
	}
	if string(data[:8]) != checkpointMagic {
		return nil, bad(0, "not a pipit checkpoint (magic %q)", data[:8])
	}
	if v := binary.LittleEndian.Uint32(data[8:12]); v != CheckpointVersion {
		return nil, fmt.Errorf("%w: %s has version %d, this pipit reads %d", ErrUnsupportedVersion, name, v, CheckpointVersion)
	}
	body := data[:len(data)-4]
	if got, want := crc32.ChecksumIEEE(body), binary.LittleEndian.Uint32(data[len(data)-4:]); got != want {
		return nil, bad(len(data)-4, "CRC mismatch (stored %08x, computed %08x): the file is damaged", want, got)
	}
	hl := int64(binary.LittleEndian.Uint32(data[12:16]))
	if 16+hl > int64(len(body)) {
		return nil, bad(12, "header length %d exceeds the file", hl)
	}
	var h checkpointHeader
	if err := json.Unmarshal(data[16:16+hl], &h); err != nil {
		return nil, bad(16, "header: %v", err)
	}
	counts := []int{h.Params, h.State, h.Moments1, h.Moments2, h.RNGBytes}
	need := int64(16 + hl)
	for i, c := range counts {
		if c < 0 || c > len(body) {
			return nil, bad(16, "header count %d out of range", c)
		}
		if i < 4 {
			need += 4 * int64(c)
		} else {
			need += int64(c)
		}
	}
	if need != int64(len(body)) {
		return nil, bad(16, "header declares %d bytes of data, file holds %d", need, len(body))
	}
	net, err := fromSpecBounded(h.Spec, Shape{}, 0, h.Params+h.State)
	if err != nil {
		return nil, bad(16, "spec: %v", err)
	}
	p := net.Params
	if len(p.Data) != h.Params || len(p.State) != h.State {
		return nil, fmt.Errorf("%w: %s: spec gives %d parameters and %d state values, file holds %d and %d", ErrCheckpointMismatch, name, len(p.Data), len(p.State), h.Params, h.State)
	}
	loss := &SoftmaxCrossEntropy{Classes: h.Classes, ClassWeights: h.Weights, Smoothing: h.Smoothing}
	tr, err := NewTrainer(net, loss, h.Optimizer, h.Schedule, 0)
	if err != nil {
		return nil, fmt.Errorf("%w: %s: %v", ErrCheckpointMismatch, name, err)
	}
	if h.Moments1 != len(tr.Opt.M) || h.Moments2 != len(tr.Opt.V) {
		return nil, fmt.Errorf("%w: %s: optimiser state sizes %d/%d, want %d/%d", ErrCheckpointMismatch, name, h.Moments1, h.Moments2, len(tr.Opt.M), len(tr.Opt.V))
	}
	off := int(16 + hl)
	for _, arr := range [][]float32{p.Data, p.State, tr.Opt.M, tr.Opt.V} {
		for i := range arr {
			arr[i] = math.Float32frombits(binary.LittleEndian.Uint32(data[off:]))
			off += 4
		}
	}
	if err := tr.pcg.UnmarshalBinary(data[off : off+h.RNGBytes]); err != nil {
		return nil, bad(off, "RNG state: %v", err)
	}
	tr.rng = rand.New(tr.pcg)
	tr.Opt.Steps = h.Steps
	return &Checkpoint{Trainer: tr, Meta: h.Meta}, nil
}

// LoadWeights copies the parameters and batch-norm statistics of the
// checkpoint at path into net. The checkpoint's spec must describe the
// same network (same layers, shapes and input); otherwise the error wraps
// [ErrCheckpointMismatch] and net is unchanged.
func LoadWeights(net *Network, path string) error {
	ck, err := ReadCheckpoint(path)
	if err != nil {
		return err
	}
	src := ck.Trainer.Net
	defer src.Close()
	if src.Spec() != net.Spec() {
		return fmt.Errorf("%w: %s holds a different network:\n%s\nwant:\n%s", ErrCheckpointMismatch, path, src.Spec(), net.Spec())
	}
	copy(net.Params.Data, src.Params.Data)
	copy(net.Params.State, src.Params.State)
	return nil
}
