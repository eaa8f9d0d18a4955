package quant

import (
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"hash/crc32"
	"os"

	"github.com/pipit-audio/pipit/internal/kernels"
	"github.com/pipit-audio/pipit/nn"
)

// ImportFiles reads an exported blob and scheme description back into a
// Model the integer engine can run.
func ImportFiles(blobPath, schemePath string) (*Model, error) {
	blob, err := os.ReadFile(blobPath)
	if err != nil {
		return nil, fmt.Errorf("quant: %w", err)
	}
	scheme, err := os.ReadFile(schemePath)
	if err != nil {
		return nil, fmt.Errorf("quant: %w", err)
	}
	return Import(blob, scheme)
}

type blobSection struct{ kind, layer, off, length uint32 }

// parseBlob checks the blob's header, CRC and section table.
func parseBlob(b []byte) ([]blobSection, error) {
	bad := func(off int64, format string, args ...any) error {
		return &FormatError{Name: "blob", Offset: off, Reason: fmt.Sprintf(format, args...)}
	}
	le := binary.LittleEndian
	if len(b) < blobHeader || string(b[:8]) != blobMagic {
		return nil, bad(0, "not a pipit blob (%d bytes)", len(b))
	}
	if v := le.Uint32(b[8:]); v != BlobVersion {
		return nil, &FormatError{Name: "blob", Offset: 8, Reason: fmt.Sprintf("version %d, this pipit reads %d", v, BlobVersion), Err: ErrUnsupportedVersion}
	}
	if n := le.Uint32(b[12:]); int64(n) != int64(len(b)) {
		return nil, bad(12, "header says %d bytes, file has %d (truncated or padded)", n, len(b))
	}
	if got, want := crc32.ChecksumIEEE(b[20:]), le.Uint32(b[16:]); got != want {
		return nil, bad(16, "CRC mismatch (stored %08x, computed %08x): the blob is damaged", want, got)
	}
	ns := int64(le.Uint32(b[20:]))
	if blobHeader+16*ns > int64(len(b)) {
		return nil, bad(20, "section table of %d entries runs past the end", ns)
	}
	secs := make([]blobSection, ns)
	for k := range secs {
		t := b[blobHeader+16*k:]
		s := blobSection{le.Uint32(t), le.Uint32(t[4:]), le.Uint32(t[8:]), le.Uint32(t[12:])}
		if s.off%4 != 0 || int64(s.off) < blobHeader+16*ns || int64(s.off)+int64(s.length) > int64(len(b)) || sectionNames[s.kind] == "" {
			return nil, bad(blobHeader+16*int64(k), "section %d (kind %d, offset %d, length %d) is out of range or misaligned", k, s.kind, s.off, s.length)
		}
		secs[k] = s
	}
	return secs, nil
}

// Import rebuilds a Model from blob and scheme bytes. A damaged blob (CRC,
// truncation, version, a section out of range) or a scheme that does not
// match it is an error wrapping [ErrFormat]. It never panics.
func Import(blob, scheme []byte) (*Model, error) {
	secs, err := parseBlob(blob)
	if err != nil {
		return nil, err
	}
	bad := func(format string, args ...any) error {
		return &FormatError{Name: "scheme", Reason: fmt.Sprintf(format, args...)}
	}
	var d SchemeDoc
	if err := json.Unmarshal(scheme, &d); err != nil {
		e := bad("%v", err).(*FormatError)
		var se *json.SyntaxError
		if errors.As(err, &se) {
			e.Offset = se.Offset
		}
		return nil, e
	}
	if d.Format != "pipit-scheme" {
		return nil, bad("format %q, want pipit-scheme", d.Format)
	}
	if d.Version != SchemeVersion {
		return nil, &FormatError{Name: "scheme", Reason: fmt.Sprintf("version %d, this pipit reads %d", d.Version, SchemeVersion), Err: ErrUnsupportedVersion}
	}
	if seal, err := d.contentSeal(); err != nil {
		return nil, err
	} else if d.Seal != seal {
		return nil, bad("content_sha256 %q does not match the content (%s): the description was edited after export; export the model again", d.Seal, seal)
	}
	if d.Blob.Bytes != len(blob) || d.Blob.CRC32 != fmt.Sprintf("%08x", crc32.ChecksumIEEE(blob)) {
		return nil, bad("describes a blob of %d bytes with CRC %s, not this one (%d bytes, %08x)", d.Blob.Bytes, d.Blob.CRC32, len(blob), crc32.ChecksumIEEE(blob))
	}
	if g := d.Scheme.Granularity; g != PerChannel && g != PerTensor {
		return nil, bad("weight granularity %q, want %s or %s", g, PerChannel, PerTensor)
	}
	if len(d.Layers) == 0 || len(d.Layers) > 4096 {
		return nil, bad("%d layers", len(d.Layers))
	}
	table := map[[2]uint32]blobSection{}
	for _, s := range secs {
		table[[2]uint32{s.kind, s.layer}] = s
	}
	toShape := func(s [3]int) nn.Shape { return nn.Shape{H: s[0], W: s[1], C: s[2]} }
	m := &Model{Version: ModelVersion, Method: d.Scheme.Method, Input: toShape(d.Input.Shape), InputQ: d.Input.Q, Meta: d.Model,
		Scheme: Scheme{Weights: d.Scheme.Granularity, Pow2: d.Scheme.Pow2Scales}}
	m.Classes = toShape(d.Output.Shape).Size()
	for i, sl := range d.Layers {
		l := Layer{Op: sl.Op, InShape: toShape(sl.InShape), OutShape: toShape(sl.OutShape), Act: sl.Activation, In: sl.Input, Out: sl.Output,
			ClampLo: sl.ClampLo, ClampHi: sl.ClampHi, WeightScale: sl.WeightScl, NetIndex: -1}
		if sl.Index != i || sl.InBuffer != i || sl.OutBuffer != i+1 {
			return nil, bad("layer %d: index or buffers out of order", i)
		}
		if l.Op != OpDense && l.Op != OpGlobalAvgPool {
			l.Geom = kernels.ConvGeom{H: sl.InShape[0], W: sl.InShape[1], C: sl.InShape[2], KH: sl.Kernel[0], KW: sl.Kernel[1],
				SH: sl.Stride[0], SW: sl.Stride[1], PadTop: sl.PadTop, PadLeft: sl.PadLeft, OH: sl.OutShape[0], OW: sl.OutShape[1]}
		}
		if l.Op == OpConv || l.Op == OpDepthwise || l.Op == OpDense {
			get := func(kind uint32) ([]byte, error) {
				s, ok := table[[2]uint32{kind, uint32(i)}]
				ref, ok2 := sl.Sections[sectionNames[kind]]
				if !ok || !ok2 || ref.Offset != int(s.off) || ref.Length != int(s.length) {
					return nil, bad("layer %d: %s section missing or not where the blob has it", i, sectionNames[kind])
				}
				return blob[s.off : s.off+s.length], nil
			}
			w, err := get(sectionWeight)
			if err != nil {
				return nil, err
			}
			l.Weights = make([]int8, len(w))
			for k, v := range w {
				l.Weights[k] = int8(v)
			}
			for _, p := range []struct {
				kind uint32
				dst  *[]int32
			}{{sectionBias, &l.Bias}, {sectionMult, &l.Mult}, {sectionShift, &l.Shift}} {
				raw, err := get(p.kind)
				if err != nil {
					return nil, err
				}
				if len(raw)%4 != 0 {
					return nil, bad("layer %d: %s section of %d bytes", i, sectionNames[p.kind], len(raw))
				}
				*p.dst = make([]int32, len(raw)/4)
				for k := range *p.dst {
					(*p.dst)[k] = int32(binary.LittleEndian.Uint32(raw[4*k:]))
				}
			}
		}
		m.Layers = append(m.Layers, l)
	}
	if err := m.Validate(); err != nil {
		return nil, bad("%v", err)
	}
	return m, nil
}
