package quant

import (
	"bytes"
	"encoding/json"
	"errors"
	"hash/crc32"
	"math/rand/v2"
	"os/exec"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant/cref"
)

func TestCRC32CheckValue(t *testing.T) {
	// The published CRC-32/IEEE check value: crc("123456789") = 0xCBF43926
	// (the "check" field of the CRC catalogue entry for CRC-32/ISO-HDLC).
	if got := crc32.ChecksumIEEE([]byte("123456789")); got != 0xCBF43926 {
		t.Fatalf("CRC-32 of 123456789 = %08x, want cbf43926", got)
	}
}

func exportedModel(t *testing.T, arch string) (*nn.Network, *Model, []byte, *SchemeDoc, []float32) {
	t.Helper()
	net, x, n := randomNet(t, arch, 4)
	m, _, err := Quantize(net, x, n, nil, Config{Method: MethodMinMax})
	if err != nil {
		t.Fatal(err)
	}
	m.Meta = json.RawMessage(`{"note":"test"}`)
	blob, doc, err := Export(m)
	if err != nil {
		t.Fatal(err)
	}
	return net, m, blob, doc, x
}

func TestExportImportRoundTrip(t *testing.T) {
	for _, arch := range nn.ArchNames() {
		net, m, blob, doc, x := exportedModel(t, arch)
		// Weight bytes are exactly the int8 parameter count; the pool is the
		// cost model's int8 peak.
		want := 0
		for _, l := range m.Layers {
			want += len(l.Weights)
		}
		if doc.Totals.WeightBytes != want || doc.Totals.OverheadBytes != len(blob)-want {
			t.Errorf("%s: weight bytes %d (want %d), overhead %d", arch, doc.Totals.WeightBytes, want, doc.Totals.OverheadBytes)
		}
		if c := nn.Cost(net, 1); int64(doc.Memory.PoolBytes) != c.RAMBytes || doc.Totals.MACs != c.MACs {
			t.Errorf("%s: pool %d B and %d MACs; cost model %d B and %d MACs", arch, doc.Memory.PoolBytes, doc.Totals.MACs, c.RAMBytes, c.MACs)
		}
		js, _ := doc.MarshalScheme()
		back, err := Import(blob, js)
		if err != nil {
			t.Fatalf("%s: %v", arch, err)
		}
		in := m.Input.Size()
		q := make([]int8, in)
		for s := 0; s < 8; s++ {
			m.InputQ.QuantizeInput(q, x[s*in:(s+1)*in])
			a, b := m.RunAll(q), back.RunAll(q)
			for i := range a {
				if !bytes.Equal(i8b(a[i]), i8b(b[i])) {
					t.Fatalf("%s: imported model differs at layer %d", arch, i)
				}
			}
		}
		// Re-export is byte-identical (deterministic encoding).
		blob2, _, _ := Export(back)
		if !bytes.Equal(blob, blob2) {
			t.Errorf("%s: re-exported blob differs", arch)
		}
		net.Close()
	}
}

func i8b(v []int8) []byte {
	b := make([]byte, len(v))
	for i, x := range v {
		b[i] = byte(x)
	}
	return b
}

func TestImportRejectsDamage(t *testing.T) {
	net, _, blob, doc, _ := exportedModel(t, "separable")
	defer net.Close()
	js, _ := doc.MarshalScheme()
	mod := func(f func([]byte) []byte) []byte { return f(append([]byte(nil), blob...)) }
	cases := map[string][]byte{
		"crc":       mod(func(b []byte) []byte { b[len(b)-5] ^= 0x40; return b }),
		"truncated": blob[:len(blob)-8],
		"version":   mod(func(b []byte) []byte { b[8] = 9; return b }),
		"magic":     mod(func(b []byte) []byte { b[0] = 'X'; return b }),
		"section out of range": mod(func(b []byte) []byte {
			b[24+8] = 0xff
			b[24+9] = 0xff // first section's offset
			// keep the CRC valid so the range check itself is tested
			c := crc32.ChecksumIEEE(b[20:])
			b[16], b[17], b[18], b[19] = byte(c), byte(c>>8), byte(c>>16), byte(c>>24)
			return b
		}),
	}
	for name, b := range cases {
		if _, err := Import(b, js); !errors.Is(err, ErrFormat) {
			t.Errorf("%s: error %v, want ErrFormat", name, err)
		}
	}
	// A scheme that does not match the blob.
	var d SchemeDoc
	json.Unmarshal(js, &d)
	d.Layers[2].Sections["weights"] = SectionRef{Offset: d.Layers[2].Sections["weights"].Offset + 4, Length: 1, Type: "int8"}
	bad, _ := d.MarshalScheme() // resealed: the section check refuses it, not the seal
	if _, err := Import(blob, bad); !errors.Is(err, ErrFormat) || !strings.Contains(err.Error(), "section") {
		t.Errorf("mismatched scheme: error %v", err)
	}
	json.Unmarshal(js, &d)
	d.Layers[2].ClampHi = 100 // edited, not resealed
	bad, _ = json.Marshal(&d)
	if _, err := Import(blob, bad); !errors.Is(err, ErrFormat) || !strings.Contains(err.Error(), "seal") {
		t.Errorf("edited scheme: error %v", err)
	}
	json.Unmarshal(js, &d)
	d.Blob.SHA256 = strings.Repeat("0", 64)
	bad, _ = d.MarshalScheme()
	if _, err := Import(blob, bad); !errors.Is(err, ErrFormat) || !strings.Contains(err.Error(), "another export") {
		t.Errorf("scheme for another blob: error %v", err)
	}
}

// TestCReferenceBitExact compiles the C99 reference runtime (quant/cref/c)
// with the system C compiler under AddressSanitizer and UBSan, runs it on
// the same int8 inputs as the Go engine, and requires identical int8
// outputs for every layer of the three reference architectures. The C code
// gets a pool of exactly the planned size from malloc, so a single byte
// outside the plan fails the run.
func TestCReferenceBitExact(t *testing.T) {
	cc, err := exec.LookPath("gcc")
	if err != nil {
		t.Skip("no gcc on PATH; .ci/run installs it")
	}
	for _, arch := range nn.ArchNames() {
		net, m, blob, doc, x := exportedModel(t, arch)
		exe, err := cref.Build(t.TempDir(), CHeader(blob, doc, "net"), "net", cc, true)
		if err != nil {
			t.Fatal(err)
		}
		rng := rand.New(rand.NewPCG(7, 7))
		in := m.Input.Size()
		var samples [][]int8
		for s := 0; s < 4; s++ {
			q := make([]int8, in)
			m.InputQ.QuantizeInput(q, x[s*in:(s+1)*in])
			samples = append(samples, q)
		}
		extreme := make([]int8, in) // saturating inputs exercise clamps and large accumulators
		for i := range extreme {
			extreme[i] = int8(127 - 255*rng.IntN(2))
		}
		samples = append(samples, extreme)
		var sizes []int
		for _, l := range m.Layers {
			sizes = append(sizes, l.OutShape.Size())
		}
		got, err := cref.Run(exe, samples, sizes)
		if err != nil {
			t.Fatal(err)
		}
		for s, q := range samples {
			want := m.RunAll(q)
			for i := range want {
				if !bytes.Equal(i8b(want[i]), i8b(got[s][i])) {
					t.Fatalf("%s sample %d layer %d (%s): C and Go differ", arch, s, i, m.Layers[i].Op)
				}
			}
		}
		net.Close()
	}
}

// The C runtime's check verifies the blob's CRC-32 and the layer table's
// offsets against the blob and the pool, and reads the blob version from
// pipit_rt.h, which must equal BlobVersion (issue #11: the CRC was not
// checked, the version hard-coded and the offsets trusted).
func TestCRuntimeCheckRefusesDamage(t *testing.T) {
	m := regexp.MustCompile(`#define PIPIT_BLOB_VERSION (\d+)`).FindSubmatch(cref.RuntimeHeader)
	if m == nil || string(m[1]) != strconv.Itoa(BlobVersion) {
		t.Errorf("pipit_rt.h defines PIPIT_BLOB_VERSION %q, quant.BlobVersion is %d", m, BlobVersion)
	}
	cc, err := exec.LookPath("gcc")
	if err != nil {
		t.Skip("no gcc on PATH; .ci/run installs it")
	}
	net, q, blob, doc, _ := exportedModel(t, "separable")
	defer net.Close()
	sample := [][]int8{make([]int8, q.Input.Size())}
	var sizes []int
	for _, l := range q.Layers {
		sizes = append(sizes, l.OutShape.Size())
	}
	run := func(header string) error {
		exe, err := cref.Build(t.TempDir(), header, "net", cc, true)
		if err != nil {
			t.Fatal(err)
		}
		_, err = cref.Run(exe, sample, sizes)
		return err
	}
	if err := run(CHeader(blob, doc, "net")); err != nil {
		t.Fatalf("intact model refused: %v", err)
	}
	// One weight byte flipped (the stored CRC no longer matches).
	damaged := append([]byte(nil), blob...)
	damaged[doc.Layers[0].Sections["weights"].Offset] ^= 1
	if err := run(CHeader(damaged, doc, "net")); err == nil || !strings.Contains(err.Error(), "pipit_check: -5") {
		t.Errorf("damaged blob: %v, want pipit_check to return PIPIT_ERR_CRC (-5)", err)
	}
	// A layer whose bias section lies past the end of the blob.
	var bad SchemeDoc
	js, _ := doc.MarshalScheme()
	json.Unmarshal(js, &bad)
	sec := bad.Layers[0].Sections["bias"]
	sec.Offset = len(blob) - 2
	bad.Layers[0].Sections["bias"] = sec
	if err := run(CHeader(blob, &bad, "net")); err == nil || !strings.Contains(err.Error(), "pipit_check: -4") {
		t.Errorf("bias past the blob: %v, want PIPIT_ERR_TABLE (-4)", err)
	}
	// A layer writing past the pool.
	json.Unmarshal(js, &bad)
	bad.Memory.Buffers[1].Offset = bad.Memory.PoolBytes
	if err := run(CHeader(blob, &bad, "net")); err == nil || !strings.Contains(err.Error(), "pipit_check: -4") {
		t.Errorf("output past the pool: %v, want PIPIT_ERR_TABLE (-4)", err)
	}
}
