package quant

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"hash/crc32"
	"strings"

	"github.com/pipit-audio/pipit/nn"
)

// Blob format (version BlobVersion), all integers little-endian:
//
//	offset  size   field
//	0       8      magic "PIPITBLB"
//	8       4      uint32 format version
//	12      4      uint32 total length of the blob in bytes
//	16      4      uint32 CRC-32 (IEEE) of bytes [20, total)
//	20      4      uint32 section count S
//	24      16·S   section table, per section: uint32 kind, uint32 layer
//	               index, uint32 byte offset from the blob start, uint32
//	               byte length
//	...            sections, each starting at a multiple of 4, zero padding
//	               between them
//
// Section kinds and layouts:
//
//	1 weights     int8;  convolution and pointwise (OutC, KH, KW, InC),
//	                     depthwise (KH, KW, C), dense (Out, In) — output-
//	                     channel-major with channels-last kernels, except
//	                     depthwise, whose channel is the fastest axis
//	2 bias        int32 per output channel, scale input_scale·weight_scale[c]
//	3 multiplier  int32 per output channel, mantissa m0 in [2^30, 2^31)
//	4 shift       int32 per output channel, right shift (negative: left)
//
// Pooling layers have no sections.
const (
	blobMagic = "PIPITBLB"
	// BlobVersion is the current blob format version.
	BlobVersion   = 1
	blobHeader    = 24
	sectionWeight = 1
	sectionBias   = 2
	sectionMult   = 3
	sectionShift  = 4
)

var sectionNames = map[uint32]string{sectionWeight: "weights", sectionBias: "bias", sectionMult: "multiplier", sectionShift: "shift"}

// SchemeVersion is the version of the scheme description. Version 3 seals
// the export: the scheme records the SHA-256 of its blob (blob.sha256),
// the digest of its own canonical content (seal, see [SchemeDigest]) and
// the generated C headers that record the same seal (c_headers). Version
// 2 gives the weight granularity as a field of its own
// (quantisation.weight_granularity); version 1 stated it only inside the
// prose of quantisation.weights.
const SchemeVersion = 3

// SectionRef locates one blob section of a layer.
type SectionRef struct {
	Offset int    `json:"offset"`
	Length int    `json:"length"` // bytes
	Type   string `json:"type"`   // "int8" or "int32"
	Layout string `json:"layout"`
}

// BufferRef is one activation tensor in the RAM pool.
type BufferRef struct {
	ID     int `json:"id"`
	Offset int `json:"offset"`
	Bytes  int `json:"bytes"`
}

// SchemeLayer describes one layer of an exported network.
type SchemeLayer struct {
	Index      int                   `json:"index"`
	Op         string                `json:"op"`
	InShape    [3]int                `json:"in_shape"`  // H, W, C
	OutShape   [3]int                `json:"out_shape"` // H, W, C
	Kernel     [2]int                `json:"kernel,omitempty"`
	Stride     [2]int                `json:"stride,omitempty"`
	PadTop     int                   `json:"pad_top"`
	PadLeft    int                   `json:"pad_left"`
	InBuffer   int                   `json:"input_buffer"`
	OutBuffer  int                   `json:"output_buffer"`
	Activation string                `json:"activation"`
	ClampLo    int32                 `json:"clamp_lo"`
	ClampHi    int32                 `json:"clamp_hi"`
	Input      QParams               `json:"input"`
	Output     QParams               `json:"output"`
	WeightScl  []float64             `json:"weight_scale,omitempty"`
	Sections   map[string]SectionRef `json:"sections,omitempty"`
	MACs       int64                 `json:"macs"`
}

// SchemeDoc is the JSON scheme description of an exported network: what a
// device runtime needs besides the blob. Every field is documented in
// docs/export-format.md.
type SchemeDoc struct {
	Format  string          `json:"format"` // "pipit-scheme"
	Version int             `json:"version"`
	Blob    BlobInfo        `json:"blob"`
	Model   json.RawMessage `json:"model_info,omitempty"` // front end, classes, normalisation (opaque to quant)
	Scheme  SchemeInfo      `json:"quantisation"`
	Input   TensorInfo      `json:"input"`
	Output  TensorInfo      `json:"output"`
	Layers  []SchemeLayer   `json:"layers"`
	Memory  MemoryPlan      `json:"memory"`
	Totals  Totals          `json:"totals"`
	// FrontEnd describes the generated C front end (RAM, tables, flops),
	// filled by the caller that generates it (opaque to quant).
	FrontEnd json.RawMessage `json:"device_front_end,omitempty"`
	// Headers lists the generated C headers of the export, filled by the
	// caller that writes them; each records Seal.
	Headers []HeaderRef `json:"c_headers,omitempty"`
	// Seal is the SHA-256 of the scheme's canonical content without the
	// seal ([SchemeDigest]); the content includes the blob's SHA-256, so
	// the seal identifies the whole export. Set by [SchemeDoc.Reseal].
	Seal string `json:"seal"`
}

// BlobInfo identifies the blob a scheme belongs to.
type BlobInfo struct {
	Version int    `json:"version"`
	Bytes   int    `json:"bytes"`
	CRC32   string `json:"crc32"`  // of the whole blob file, 8 hex digits
	SHA256  string `json:"sha256"` // of the whole blob file, 64 hex digits
}

// SchemeInfo states the quantisation scheme so a runtime never guesses.
type SchemeInfo struct {
	Granularity    string `json:"weight_granularity"` // PerChannel or PerTensor: what a runtime reads
	Weights        string `json:"weights"`            // the same in words: granularity, symmetric int8, zero point 0, range [-127, 127]
	Pow2Scales     bool   `json:"pow2_scales"`
	Activations    string `json:"activations"` // "int8 affine per tensor"
	Bias           string `json:"bias"`
	Requantisation string `json:"requantisation"`
	Rounding       string `json:"rounding"`
	Method         string `json:"calibration_method"`
	AveragePooling string `json:"average_pooling"`
}

// TensorInfo is a network input or output.
type TensorInfo struct {
	Shape  [3]int  `json:"shape"`
	Q      QParams `json:"q"`
	Buffer int     `json:"buffer"`
}

// MemoryPlan places every activation in one RAM pool: tensor k (0 = the
// input, k = layer k−1's output) sits at the low end of the pool when k is
// even and at the high end when k is odd, so a layer's input and output
// never overlap and the pool is the largest input + output pair.
type MemoryPlan struct {
	PoolBytes int         `json:"pool_bytes"`
	Buffers   []BufferRef `json:"buffers"`
}

// Totals summarise the exported network.
type Totals struct {
	FlashBytes    int   `json:"flash_bytes"` // the blob
	WeightBytes   int   `json:"weight_bytes"`
	OverheadBytes int   `json:"overhead_bytes"` // blob bytes that are not int8 weights
	RAMBytes      int   `json:"ram_bytes"`
	MACs          int64 `json:"macs"`
}

func shape3(s nn.Shape) [3]int { return [3]int{s.H, s.W, s.C} }

// Export encodes m as a blob and its sealed scheme description.
func Export(m *Model) (blob []byte, scheme *SchemeDoc, err error) {
	if err := m.Validate(); err != nil {
		return nil, nil, fmt.Errorf("quant: export: %w", err)
	}
	type sec struct {
		kind, layer uint32
		data        []byte
	}
	var secs []sec
	i32 := func(v []int32) []byte {
		b := make([]byte, 4*len(v))
		for i, x := range v {
			binary.LittleEndian.PutUint32(b[4*i:], uint32(x))
		}
		return b
	}
	for i := range m.Layers {
		l := &m.Layers[i]
		if !l.isMAC() {
			continue
		}
		w := make([]byte, len(l.Weights))
		for j, v := range l.Weights {
			w[j] = byte(v)
		}
		secs = append(secs, sec{sectionWeight, uint32(i), w}, sec{sectionBias, uint32(i), i32(l.Bias)}, sec{sectionMult, uint32(i), i32(l.Mult)}, sec{sectionShift, uint32(i), i32(l.Shift)})
	}
	off := blobHeader + 16*len(secs)
	offs := make([]int, len(secs))
	for k, s := range secs {
		off = (off + 3) &^ 3
		offs[k] = off
		off += len(s.data)
	}
	total := (off + 3) &^ 3
	blob = make([]byte, total)
	copy(blob, blobMagic)
	le := binary.LittleEndian
	le.PutUint32(blob[8:], BlobVersion)
	le.PutUint32(blob[12:], uint32(total))
	le.PutUint32(blob[20:], uint32(len(secs)))
	for k, s := range secs {
		t := blob[blobHeader+16*k:]
		le.PutUint32(t[0:], s.kind)
		le.PutUint32(t[4:], s.layer)
		le.PutUint32(t[8:], uint32(offs[k]))
		le.PutUint32(t[12:], uint32(len(s.data)))
		copy(blob[offs[k]:], s.data)
	}
	le.PutUint32(blob[16:], crc32.ChecksumIEEE(blob[20:]))

	doc := &SchemeDoc{Format: "pipit-scheme", Version: SchemeVersion, Model: m.Meta,
		Blob: BlobInfo{Version: BlobVersion, Bytes: total, CRC32: fmt.Sprintf("%08x", crc32.ChecksumIEEE(blob)), SHA256: sha256Hex(blob)},
		Scheme: SchemeInfo{Granularity: m.Scheme.Weights, Weights: m.Scheme.Weights + " symmetric int8, zero point 0, range [-127, 127]", Pow2Scales: m.Scheme.Pow2,
			Activations:    "int8 affine per tensor: real = scale·(q − zero_point), q in [-128, 127]",
			Bias:           "int32 per output channel at scale input_scale·weight_scale[c], zero point 0",
			Requantisation: "acc = bias[c] + Σ (x − x_zp)·w; h = floor((acc·multiplier[c] + 2^30) / 2^31); y = h / 2^shift[c] + y_zp (shift < 0: acc·2^−shift saturated to int32 first, then h, no division); clamp to [clamp_lo, clamp_hi] (Jacob et al. 2018, eqs. 5–6)",
			Rounding:       "h: half toward +∞ (floor of the nudged product; (−2^31)·(−2^31) gives 2^31 − 1); division by 2^shift: half away from zero",
			Method:         m.Method,
			AveragePooling: "integer sum over the window's real positions divided by their count, rounded half away from zero; scale and zero point unchanged"},
		Input: TensorInfo{Shape: shape3(m.Input), Q: m.InputQ, Buffer: 0},
	}
	// memory plan
	sizes := []int{m.Input.Size()}
	for i := range m.Layers {
		sizes = append(sizes, m.Layers[i].OutShape.Size())
	}
	pool := 0
	for k := 0; k+1 < len(sizes); k++ {
		pool = max(pool, sizes[k]+sizes[k+1])
	}
	for k, sz := range sizes {
		o := 0
		if k%2 == 1 {
			o = pool - sz
		}
		doc.Memory.Buffers = append(doc.Memory.Buffers, BufferRef{ID: k, Offset: o, Bytes: sz})
	}
	doc.Memory.PoolBytes = pool
	byLayer := map[uint32]map[string]SectionRef{}
	for k, s := range secs {
		if byLayer[s.layer] == nil {
			byLayer[s.layer] = map[string]SectionRef{}
		}
		l := &m.Layers[s.layer]
		ref := SectionRef{Offset: offs[k], Length: len(s.data), Type: "int32", Layout: "(OutC)"}
		if s.kind == sectionWeight {
			ref.Type = "int8"
			switch l.Op {
			case OpConv:
				ref.Layout = "(OutC, KH, KW, InC)"
			case OpDepthwise:
				ref.Layout = "(KH, KW, C)"
			case OpDense:
				ref.Layout = "(Out, In)"
			}
		}
		byLayer[s.layer][sectionNames[s.kind]] = ref
	}
	var macs int64
	weights := 0
	for i := range m.Layers {
		l := &m.Layers[i]
		sl := SchemeLayer{Index: i, Op: l.Op, InShape: shape3(l.InShape), OutShape: shape3(l.OutShape), InBuffer: i, OutBuffer: i + 1,
			Activation: l.Act, ClampLo: l.ClampLo, ClampHi: l.ClampHi, Input: l.In, Output: l.Out, WeightScl: l.WeightScale, Sections: byLayer[uint32(i)]}
		if l.Op != OpDense && l.Op != OpGlobalAvgPool {
			sl.Kernel, sl.Stride = [2]int{l.Geom.KH, l.Geom.KW}, [2]int{l.Geom.SH, l.Geom.SW}
			sl.PadTop, sl.PadLeft = l.Geom.PadTop, l.Geom.PadLeft
		}
		sl.MACs = layerMACs(l)
		macs += sl.MACs
		weights += len(l.Weights)
		doc.Layers = append(doc.Layers, sl)
	}
	last := &m.Layers[len(m.Layers)-1]
	doc.Output = TensorInfo{Shape: shape3(last.OutShape), Q: last.Out, Buffer: len(m.Layers)}
	doc.Totals = Totals{FlashBytes: total, WeightBytes: weights, OverheadBytes: total - weights, RAMBytes: pool, MACs: macs}
	if err := doc.Reseal(); err != nil {
		return nil, nil, err
	}
	return blob, doc, nil
}

func layerMACs(l *Layer) int64 { return macCount(l.Op, l.Geom, l.OutShape.C, len(l.Weights)) }

// MarshalScheme reseals d ([SchemeDoc.Reseal]) and returns it as indented
// JSON.
func (d *SchemeDoc) MarshalScheme() ([]byte, error) {
	if err := d.Reseal(); err != nil {
		return nil, err
	}
	b, err := json.MarshalIndent(d, "", "  ")
	if err != nil {
		return nil, fmt.Errorf("quant: %w", err)
	}
	return append(b, '\n'), nil
}

// CHeader returns a C99 header holding the blob as a const array and the
// network's layer table, pool size, shapes and quantisation parameters as
// macros, ready for runtime/c/pipit_rt.h. prefix names everything
// (e.g. "yard" gives yard_blob, YARD_POOL_BYTES). The header records
// d.Seal as PREFIX_SEAL, so call it with a sealed d ([Export],
// [SchemeDoc.Reseal]).
func CHeader(blob []byte, d *SchemeDoc, prefix string) string {
	up := strings.ToUpper(prefix)
	var b strings.Builder
	fmt.Fprintf(&b, "/* Generated by pipit export: do not edit. Blob version %d, %d bytes, CRC-32 %s. */\n", d.Blob.Version, d.Blob.Bytes, d.Blob.CRC32)
	fmt.Fprintf(&b, "#ifndef %s_MODEL_H\n#define %s_MODEL_H\n\n#include \"pipit_rt.h\"\n\n", up, up)
	fmt.Fprintf(&b, "/* The export's seal: the same in its scheme and in every header it generated. */\n#define %s_SEAL \"%s\"\n\n", up, d.Seal)
	fmt.Fprintf(&b, "#if PIPIT_BLOB_VERSION != %d\n#error \"%s: blob version %d needs a pipit_rt.h of the same version\"\n#endif\n\n", d.Blob.Version, prefix, d.Blob.Version)
	fmt.Fprintf(&b, "#define %s_POOL_BYTES %d\n#define %s_BLOB_BYTES %d\n#define %s_MACS %dL\n", up, d.Memory.PoolBytes, up, len(blob), up, d.Totals.MACs)
	fmt.Fprintf(&b, "#define %s_INPUT_H %d\n#define %s_INPUT_W %d\n#define %s_INPUT_C %d\n", up, d.Input.Shape[0], up, d.Input.Shape[1], up, d.Input.Shape[2])
	fmt.Fprintf(&b, "#define %s_INPUT_SCALE %.9g\n#define %s_INPUT_ZERO_POINT %d\n", up, d.Input.Q.Scale, up, d.Input.Q.ZeroPoint)
	fmt.Fprintf(&b, "#define %s_OUTPUT_SIZE %d\n#define %s_OUTPUT_SCALE %.9g\n#define %s_OUTPUT_ZERO_POINT %d\n#define %s_LAYERS %d\n\n",
		up, d.Output.Shape[0]*d.Output.Shape[1]*d.Output.Shape[2], up, d.Output.Q.Scale, up, d.Output.Q.ZeroPoint, up, len(d.Layers))
	fmt.Fprintf(&b, "static const uint8_t %s_blob[%d] PIPIT_ALIGN4 = {", prefix, len(blob))
	for i, v := range blob {
		if i%16 == 0 {
			b.WriteString("\n  ")
		}
		fmt.Fprintf(&b, "%d,", v)
	}
	b.WriteString("\n};\n\n")
	ops := map[string]string{OpConv: "PIPIT_OP_CONV", OpDepthwise: "PIPIT_OP_DEPTHWISE", OpDense: "PIPIT_OP_DENSE", OpMaxPool: "PIPIT_OP_MAXPOOL", OpAvgPool: "PIPIT_OP_AVGPOOL", OpGlobalAvgPool: "PIPIT_OP_GLOBALAVGPOOL"}
	fmt.Fprintf(&b, "static const pipit_layer_t %s_layers[%d] = {\n", prefix, len(d.Layers))
	for _, l := range d.Layers {
		sec := func(name string) (int, int) {
			s, ok := l.Sections[name]
			if !ok {
				return 0, 0
			}
			return s.Offset, s.Length
		}
		wo, wl := sec("weights")
		bo, _ := sec("bias")
		mo, _ := sec("multiplier")
		so, _ := sec("shift")
		ib, ob := d.Memory.Buffers[l.InBuffer], d.Memory.Buffers[l.OutBuffer]
		fmt.Fprintf(&b, "  /* %d %s */ {%s, {%d, %d, %d}, {%d, %d, %d}, {%d, %d}, {%d, %d}, %d, %d, %d, %d, %d, %d, %d, %d, %d, %d, %d, %d, %d},\n",
			l.Index, l.Op, ops[l.Op], l.InShape[0], l.InShape[1], l.InShape[2], l.OutShape[0], l.OutShape[1], l.OutShape[2],
			l.Kernel[0], l.Kernel[1], l.Stride[0], l.Stride[1], l.PadTop, l.PadLeft,
			l.Input.ZeroPoint, l.Output.ZeroPoint, l.ClampLo, l.ClampHi, wo, wl, bo, mo, so, ib.Offset, ob.Offset)
	}
	b.WriteString("};\n\n")
	fmt.Fprintf(&b, "static const pipit_model_t %s_model = {%s_blob, %d, %s_layers, %d, %d};\n\n#endif\n", prefix, prefix, len(blob), prefix, len(d.Layers), d.Memory.PoolBytes)
	return b.String()
}
