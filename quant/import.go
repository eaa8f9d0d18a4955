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
// Model the integer engine can run. Besides what [Import] checks, every
// generated C header the scheme lists (c_headers) that exists beside it
// must belong to the same export: record the scheme's seal and, for the
// network header, be byte for byte the header blob and scheme make. A
// listed header that is missing is not an error (blob and scheme are
// what a host needs). Errors name the file at fault.
func ImportFiles(blobPath, schemePath string) (*Model, error) {
	m, _, err := ImportSet(blobPath, schemePath)
	return m, err
}

// ImportSet is [ImportFiles] returning the scheme description it read too.
func ImportSet(blobPath, schemePath string) (*Model, *SchemeDoc, error) {
	blob, err := os.ReadFile(blobPath)
	if err != nil {
		return nil, nil, fmt.Errorf("quant: %w", err)
	}
	scheme, err := os.ReadFile(schemePath)
	if err != nil {
		return nil, nil, fmt.Errorf("quant: %w", err)
	}
	m, d, err := importNamed(blobPath, schemePath, blob, scheme)
	if err != nil {
		return nil, nil, err
	}
	if err := checkHeaderFiles(schemePath, blob, d); err != nil {
		return nil, nil, err
	}
	return m, d, nil
}

type blobSection struct{ kind, layer, off, length uint32 }

// parseBlob checks the blob's header, CRC and section table; name names
// it in errors.
func parseBlob(name string, b []byte) ([]blobSection, error) {
	bad := func(off int64, format string, args ...any) error {
		return &FormatError{Name: name, Offset: off, Reason: fmt.Sprintf(format, args...)}
	}
	le := binary.LittleEndian
	if len(b) < blobHeader || string(b[:8]) != blobMagic {
		return nil, bad(0, "not a pipit blob (%d bytes)", len(b))
	}
	if v := le.Uint32(b[8:]); v != BlobVersion {
		return nil, &FormatError{Name: name, Offset: 8, Reason: fmt.Sprintf("version %d, this pipit reads %d", v, BlobVersion), Err: ErrUnsupportedVersion}
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
// truncation, version, a section out of range), a scheme whose content
// does not match its seal (edited after export), or a scheme that
// describes another blob is an error wrapping [ErrFormat]. It never
// panics.
func Import(blob, scheme []byte) (*Model, error) {
	m, _, err := importNamed("blob", "scheme", blob, scheme)
	return m, err
}

// importNamed is Import with the names the errors give the two files,
// returning the scheme description too.
func importNamed(blobName, schemeName string, blob, scheme []byte) (*Model, *SchemeDoc, error) {
	secs, err := parseBlob(blobName, blob)
	if err != nil {
		return nil, nil, err
	}
	bad := func(format string, args ...any) error {
		return &FormatError{Name: schemeName, Reason: fmt.Sprintf(format, args...)}
	}
	var d SchemeDoc
	if err := json.Unmarshal(scheme, &d); err != nil {
		e := bad("%v", err).(*FormatError)
		var se *json.SyntaxError
		if errors.As(err, &se) {
			e.Offset = se.Offset
		}
		return nil, nil, e
	}
	if d.Format != "pipit-scheme" {
		return nil, nil, bad("format %q, want pipit-scheme", d.Format)
	}
	if d.Version != SchemeVersion {
		why := "written by a newer pipit"
		if d.Version < SchemeVersion {
			why = "schemes before version 3 carry no seal; export the model again"
		}
		return nil, nil, &FormatError{Name: schemeName, Reason: fmt.Sprintf("version %d, this pipit reads %d: %s", d.Version, SchemeVersion, why), Err: ErrUnsupportedVersion}
	}
	digest, err := SchemeDigest(scheme)
	if err != nil {
		return nil, nil, bad("%v", err)
	}
	switch {
	case d.Seal == "":
		return nil, nil, bad("has no seal; export the model again")
	case d.Seal != digest:
		return nil, nil, bad("edited after export: its content does not match its seal (seal %s, content %s); export the model again instead of editing the scheme", short(d.Seal), short(digest))
	}
	if sum := sha256Hex(blob); d.Blob.Bytes != len(blob) || d.Blob.SHA256 != sum || d.Blob.CRC32 != fmt.Sprintf("%08x", crc32.ChecksumIEEE(blob)) {
		return nil, nil, bad("describes a blob of %d bytes with SHA-256 %s, not %s (%d bytes, SHA-256 %s): the files come from another export", d.Blob.Bytes, short(d.Blob.SHA256), blobName, len(blob), short(sum))
	}
	if g := d.Scheme.Granularity; g != PerChannel && g != PerTensor {
		return nil, nil, bad("weight granularity %q, want %s or %s", g, PerChannel, PerTensor)
	}
	if len(d.Layers) == 0 || len(d.Layers) > 4096 {
		return nil, nil, bad("%d layers", len(d.Layers))
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
			return nil, nil, bad("layer %d: index or buffers out of order", i)
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
				return nil, nil, err
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
					return nil, nil, err
				}
				if len(raw)%4 != 0 {
					return nil, nil, bad("layer %d: %s section of %d bytes", i, sectionNames[p.kind], len(raw))
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
		return nil, nil, bad("%v", err)
	}
	return m, &d, nil
}
