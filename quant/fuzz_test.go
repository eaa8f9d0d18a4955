package quant

import (
	"bytes"
	"encoding/json"
	"fmt"
	"hash/crc32"
	"testing"

	"github.com/pipit-audio/pipit/nn"
)

// fuzzSeedModel quantises a small network touching every op kind, the
// seed of the model-file fuzz targets.
func fuzzSeedModel(f *testing.F) *Model {
	net, _ := nn.FromSpec("input shape=6x5x1\nconv out=2 kernel=3 stride=2 pad=same\nrelu\nmaxpool size=2 stride=1\ndepthwise kernel=2\nglobalavgpool\ndense out=3", nn.Shape{}, 1)
	defer net.Close()
	x := make([]float32, 4*30)
	for i := range x {
		x[i] = float32(i%7) - 3
	}
	m, _, err := Quantize(net, x, 4, nil, Config{Method: MethodMinMax})
	if err != nil {
		f.Fatal(err)
	}
	return m
}

// FuzzParseModel: the quantised-model reader never panics, and the engine
// runs every model it accepts.
func FuzzParseModel(f *testing.F) {
	m := fuzzSeedModel(f)
	good, _ := m.MarshalBinary()
	f.Add(good)
	f.Add(good[:30])
	f.Add([]byte("PIPITQM1\x01\x00\x00\x00\xff\xff\xff\xff"))
	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := ParseModel("fuzz.qm", data)
		if err != nil {
			return
		}
		m.RunAll(make([]int8, m.Input.Size()))
	})
}

// FuzzModelJSON fuzzes the validator behind the CRC: any JSON model that
// Validate accepts must run without panicking.
func FuzzModelJSON(f *testing.F) {
	net, _ := nn.FromSpec("input shape=4x4x1\nconv out=2 kernel=3 pad=same\nrelu6\navgpool size=2\ndense out=2", nn.Shape{}, 1)
	x := make([]float32, 2*16)
	for i := range x {
		x[i] = float32(i%5) - 2
	}
	m, _, err := Quantize(net, x, 2, nil, Config{Method: MethodMinMax})
	net.Close()
	if err != nil {
		f.Fatal(err)
	}
	j, _ := json.Marshal(m)
	f.Add(j)
	f.Fuzz(func(t *testing.T, data []byte) {
		var m Model
		if json.Unmarshal(data, &m) != nil || m.Validate() != nil {
			return
		}
		m.RunAll(make([]int8, m.Input.Size()))
	})
}

// FuzzImport: the blob + scheme loader never panics, and the engine runs
// every model it accepts. Seeds: a real (sealed) export, damaged copies,
// a scheme of the previous version and one edited after export.
func FuzzImport(f *testing.F) {
	m := fuzzSeedModel(f)
	blob, doc, err := Export(m)
	if err != nil {
		f.Fatal(err)
	}
	js, _ := doc.MarshalScheme()
	f.Add(blob, js)
	f.Add(blob[:30], js)
	f.Add(blob, []byte(`{"format":"pipit-scheme","version":1}`))
	f.Add(blob, bytes.Replace(js, []byte(`"version": 3`), []byte(`"version": 2`), 1))
	f.Add(blob, bytes.Replace(js, []byte(`"clamp_lo": -128`), []byte(`"clamp_lo": -100`), 1))
	f.Add(blob, []byte(`{"format":"pipit-scheme","version":3,"seal":""}`))
	f.Fuzz(func(t *testing.T, blob, scheme []byte) {
		if m, err := Import(blob, scheme); err == nil {
			m.RunAll(make([]int8, m.Input.Size()))
		}
		// The fuzzer cannot forge a seal or a SHA-256: tie the scheme to the
		// blob and reseal it, so the checks behind the seal are fuzzed too.
		if m, err := Import(blob, fixUpScheme(blob, scheme)); err == nil {
			m.RunAll(make([]int8, m.Input.Size()))
		}
	})
}

// fixUpScheme returns scheme with blob.bytes, blob.crc32 and blob.sha256
// describing blob and the seal recomputed; scheme unchanged if it is not
// a JSON object.
func fixUpScheme(blob, scheme []byte) []byte {
	var d map[string]any
	if json.Unmarshal(scheme, &d) != nil || d == nil {
		return scheme
	}
	d["blob"] = map[string]any{"version": BlobVersion, "bytes": len(blob), "crc32": fmt.Sprintf("%08x", crc32.ChecksumIEEE(blob)), "sha256": sha256Hex(blob)}
	delete(d, "seal")
	b, err := json.Marshal(d)
	if err != nil {
		return scheme
	}
	s, err := SchemeDigest(b)
	if err != nil {
		return scheme
	}
	d["seal"] = s
	b, _ = json.Marshal(d)
	return b
}
