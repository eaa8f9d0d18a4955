package quant

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"hash/crc32"
	"os"

	"github.com/pipit-audio/pipit/internal/fsutil"
)

// Quantised model file (pipit's own; the device export is a separate,
// flat format): magic "PIPITQM1", uint32 version (ModelVersion), uint32
// JSON length J, J bytes of the Model as JSON, uint32 CRC-32 (IEEE) of
// every preceding byte. All integers little-endian.
const qmodelMagic = "PIPITQM1"

// MarshalBinary encodes m as a quantised model file.
func (m *Model) MarshalBinary() ([]byte, error) {
	j, err := json.Marshal(m)
	if err != nil {
		return nil, fmt.Errorf("quant: %w", err)
	}
	var b bytes.Buffer
	b.WriteString(qmodelMagic)
	binary.Write(&b, binary.LittleEndian, uint32(ModelVersion))
	binary.Write(&b, binary.LittleEndian, uint32(len(j)))
	b.Write(j)
	binary.Write(&b, binary.LittleEndian, crc32.ChecksumIEEE(b.Bytes()))
	return b.Bytes(), nil
}

// WriteFile writes m to path atomically.
func (m *Model) WriteFile(path string) error {
	b, err := m.MarshalBinary()
	if err != nil {
		return err
	}
	if err := fsutil.WriteFile(path, b); err != nil {
		return fmt.Errorf("quant: %w", err)
	}
	return nil
}

// IsModelFile reports whether data starts like a quantised model file.
func IsModelFile(data []byte) bool { return len(data) >= 8 && string(data[:8]) == qmodelMagic }

// ReadModelFile reads a file written by [Model.WriteFile].
func ReadModelFile(path string) (*Model, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("quant: %w", err)
	}
	return ParseModel(path, data)
}

// ParseModel decodes and validates a quantised model file: every array
// length must match its layer's shapes, so the engine can run any model
// this accepts. Errors are a [*FormatError] naming the file and the byte
// offset (wrapping [ErrFormat], and [ErrUnsupportedVersion] for another
// version).
func ParseModel(name string, data []byte) (*Model, error) {
	bad := func(off int64, format string, args ...any) error {
		return &FormatError{Name: name, Offset: off, Reason: fmt.Sprintf(format, args...)}
	}
	if len(data) < 20 || string(data[:8]) != qmodelMagic {
		return nil, bad(0, "not a pipit quantised model")
	}
	if v := binary.LittleEndian.Uint32(data[8:]); v != ModelVersion {
		return nil, &FormatError{Name: name, Offset: 8, Reason: fmt.Sprintf("version %d, this pipit reads %d", v, ModelVersion), Err: ErrUnsupportedVersion}
	}
	if crc32.ChecksumIEEE(data[:len(data)-4]) != binary.LittleEndian.Uint32(data[len(data)-4:]) {
		return nil, bad(int64(len(data)-4), "CRC mismatch: the file is damaged")
	}
	jl := int64(binary.LittleEndian.Uint32(data[12:]))
	if 16+jl != int64(len(data)-4) {
		return nil, bad(12, "JSON length %d does not match the file", jl)
	}
	var m Model
	if err := json.Unmarshal(data[16:16+jl], &m); err != nil {
		off := int64(16)
		var se *json.SyntaxError
		if errors.As(err, &se) {
			off += se.Offset
		}
		return nil, bad(off, "%v", err)
	}
	if err := m.Validate(); err != nil {
		return nil, bad(16, "%v", err)
	}
	return &m, nil
}

// Validate checks that every layer's arrays and geometry are consistent
// with its shapes and with its neighbours.
func (m *Model) Validate() error {
	if len(m.Layers) == 0 || !validShape(m.Input) {
		return fmt.Errorf("no layers or bad input shape %v", m.Input)
	}
	if err := checkQ(m.InputQ); err != nil {
		return fmt.Errorf("input: %w", err)
	}
	cur := m.Input
	for i := range m.Layers {
		l := &m.Layers[i]
		if err := l.validate(cur); err != nil {
			return fmt.Errorf("layer %d (%s): %w", i, l.Op, err)
		}
		if i > 0 && m.Layers[i-1].Out != l.In {
			return fmt.Errorf("layer %d: input parameters differ from layer %d's output", i, i-1)
		}
		cur = l.OutShape
	}
	if m.Layers[0].In != m.InputQ {
		return fmt.Errorf("layer 0 input parameters differ from the model input's")
	}
	if cur.Size() != m.Classes || m.Classes < 1 {
		return fmt.Errorf("output %v does not give %d classes", cur, m.Classes)
	}
	return nil
}

func validShape(s interface{ Size() int }) bool { return s.Size() > 0 && s.Size() <= 1<<24 }

func checkQ(q QParams) error {
	if !(q.Scale > 0 && q.Scale < 1e30) || q.ZeroPoint < -128 || q.ZeroPoint > 127 {
		return fmt.Errorf("scale %g / zero point %d out of range", q.Scale, q.ZeroPoint)
	}
	return nil
}

func (l *Layer) validate(in interface{ Size() int }) error {
	if l.InShape.Size() != in.Size() || l.InShape.H < 1 || l.InShape.W < 1 || l.InShape.C < 1 || !validShape(l.OutShape) || l.OutShape.H < 1 || l.OutShape.W < 1 || l.OutShape.C < 1 {
		return fmt.Errorf("shapes %v → %v do not follow the previous output", l.InShape, l.OutShape)
	}
	if err := checkQ(l.In); err != nil {
		return err
	}
	if err := checkQ(l.Out); err != nil {
		return err
	}
	if l.ClampLo < -128 || l.ClampHi > 127 || l.ClampLo > l.ClampHi {
		return fmt.Errorf("clamp [%d, %d]", l.ClampLo, l.ClampHi)
	}
	g := l.Geom
	geomOK := func(outC int) error {
		if g.H != l.InShape.H || g.W != l.InShape.W || g.C != l.InShape.C || g.OH != l.OutShape.H || g.OW != l.OutShape.W || outC != l.OutShape.C ||
			g.KH < 1 || g.KW < 1 || g.SH < 1 || g.SW < 1 || g.KH > 64 || g.KW > 64 || g.PadTop < 0 || g.PadLeft < 0 || g.PadTop >= g.KH || g.PadLeft >= g.KW ||
			(g.OH-1)*g.SH-g.PadTop >= g.H || (g.OW-1)*g.SW-g.PadLeft >= g.W {
			return fmt.Errorf("geometry %+v does not match shapes %v → %v", g, l.InShape, l.OutShape)
		}
		return nil
	}
	var nw, oc int
	switch l.Op {
	case OpConv:
		oc = l.OutShape.C
		nw = oc * g.KH * g.KW * g.C
		if err := geomOK(oc); err != nil {
			return err
		}
	case OpDepthwise:
		oc = l.OutShape.C
		nw = g.KH * g.KW * g.C
		if err := geomOK(g.C); err != nil {
			return err
		}
	case OpDense:
		oc = l.OutShape.Size()
		nw = oc * l.InShape.Size()
		if l.OutShape.H != 1 || l.OutShape.W != 1 {
			return fmt.Errorf("dense output %v is not 1x1xN", l.OutShape)
		}
	case OpMaxPool, OpAvgPool:
		if l.In != l.Out {
			return fmt.Errorf("pooling changes quantisation parameters")
		}
		return geomOK(l.InShape.C)
	case OpGlobalAvgPool:
		if l.In != l.Out || l.OutShape.H != 1 || l.OutShape.W != 1 || l.OutShape.C != l.InShape.C {
			return fmt.Errorf("global average pool %v → %v", l.InShape, l.OutShape)
		}
		return nil
	default:
		return fmt.Errorf("unknown op %q", l.Op)
	}
	if len(l.Weights) != nw || len(l.Bias) != oc || len(l.Mult) != oc || len(l.Shift) != oc || len(l.WeightScale) != oc {
		return fmt.Errorf("%d weights, %d biases, %d multipliers, %d shifts for %d channels (want %d weights)", len(l.Weights), len(l.Bias), len(l.Mult), len(l.Shift), oc, nw)
	}
	for c := 0; c < oc; c++ {
		if l.Mult[c] < 1<<30 || l.Shift[c] < -31 || l.Shift[c] > 31 {
			return fmt.Errorf("channel %d multiplier %d / shift %d out of range", c, l.Mult[c], l.Shift[c])
		}
	}
	for _, w := range l.Weights {
		if w == -128 {
			return fmt.Errorf("weight −128 (symmetric weights use −127..127)")
		}
	}
	if w, _ := l.worstAccumulator(); w > 1<<31-1 {
		return fmt.Errorf("%w: worst-case accumulator %d exceeds int32", ErrOverflow, w)
	}
	return nil
}
