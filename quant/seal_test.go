package quant

import (
	"bytes"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// writeSet exports a separable network quantised from seed into dir as
// model.blob, model.scheme.json and net.h, the header named in the scheme,
// and returns the three paths.
func writeSet(t *testing.T, dir string, seed uint64) (blobPath, schemePath, headerPath string) {
	t.Helper()
	net, x, n := randomNet(t, "separable", seed)
	defer net.Close()
	m, _, err := Quantize(net, x, n, nil, Config{Method: MethodMinMax})
	if err != nil {
		t.Fatal(err)
	}
	// model info as pipit train records it: class order and the front end's rate
	m.Meta = json.RawMessage(`{"classes":["saw","planer","quiet"],"front_end":{"sample_rate_hz":16000}}`)
	blob, doc, err := Export(m)
	if err != nil {
		t.Fatal(err)
	}
	doc.Headers = []HeaderRef{{File: "net.h", Prefix: "net", Kind: HeaderNetwork}}
	scheme, err := doc.MarshalScheme()
	if err != nil {
		t.Fatal(err)
	}
	blobPath, schemePath, headerPath = filepath.Join(dir, "model.blob"), filepath.Join(dir, "model.scheme.json"), filepath.Join(dir, "net.h")
	for p, b := range map[string][]byte{blobPath: blob, schemePath: scheme, headerPath: []byte(CHeader(blob, doc, "net"))} {
		if err := os.WriteFile(p, b, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := ImportFiles(blobPath, schemePath); err != nil {
		t.Fatalf("intact export refused: %v", err)
	}
	return
}

func copyFile(t *testing.T, from, to string) {
	t.Helper()
	b, err := os.ReadFile(from)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(to, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// wantFileError requires err to be a format error naming path and saying why.
func wantFileError(t *testing.T, what string, err error, path, why string) {
	t.Helper()
	if err == nil {
		t.Errorf("%s: accepted", what)
		return
	}
	if !errors.Is(err, ErrFormat) || !strings.Contains(err.Error(), path) || !strings.Contains(err.Error(), why) {
		t.Errorf("%s: error %q, want ErrFormat naming %s and saying %q", what, err, path, why)
	}
}

// Issue 12, finding 3: values edited in the scheme JSON (a clamp, the
// input scale or zero point, the class order, the sample rate, a stride)
// were accepted and changed outputs. Every such edit must now be refused
// with an error naming the scheme file; a reformatting that keeps the
// content (another indentation, members in another order) must not.
func TestImportFilesRefusesEditedScheme(t *testing.T) {
	dir := t.TempDir()
	blobPath, schemePath, _ := writeSet(t, dir, 4)
	orig, _ := os.ReadFile(schemePath)
	edit := func(f func(d map[string]any)) []byte {
		var d map[string]any
		if err := json.Unmarshal(orig, &d); err != nil {
			t.Fatal(err)
		}
		f(d)
		b, err := json.MarshalIndent(d, "", "  ")
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	layer := func(d map[string]any, i int) map[string]any { return d["layers"].([]any)[i].(map[string]any) }
	// the first layer with a stride
	strided := -1
	var probe SchemeDoc
	json.Unmarshal(orig, &probe)
	for i, l := range probe.Layers {
		if l.Stride != [2]int{} {
			strided = i
			break
		}
	}
	if strided < 0 {
		t.Fatal("separable has no layer with a stride")
	}
	edits := map[string]func(d map[string]any){
		"clamp": func(d map[string]any) { layer(d, 0)["clamp_hi"] = 100.0 },
		"input scale": func(d map[string]any) {
			q := d["input"].(map[string]any)["q"].(map[string]any)
			q["scale"] = q["scale"].(float64) * 1.01
		},
		"input zero point": func(d map[string]any) {
			q := d["input"].(map[string]any)["q"].(map[string]any)
			q["zero_point"] = q["zero_point"].(float64) + 1
		},
		"layer input scale": func(d map[string]any) {
			q := layer(d, 1)["input"].(map[string]any)
			q["scale"] = q["scale"].(float64) * 2
		},
		"class order": func(d map[string]any) { d["model_info"].(map[string]any)["classes"] = []any{"planer", "saw", "quiet"} },
		"sample rate": func(d map[string]any) {
			d["model_info"].(map[string]any)["front_end"] = map[string]any{"sample_rate_hz": 22050}
		},
		"stride":             func(d map[string]any) { layer(d, strided)["stride"] = []any{1.0, 1.0} },
		"added member":       func(d map[string]any) { d["note"] = "checked by hand" },
		"seal removed":       func(d map[string]any) { delete(d, "seal") },
		"weight granularity": func(d map[string]any) { d["quantisation"].(map[string]any)["weight_granularity"] = PerTensor },
	}
	for name, f := range edits {
		if err := os.WriteFile(schemePath, edit(f), 0o644); err != nil {
			t.Fatal(err)
		}
		_, err := ImportFiles(blobPath, schemePath)
		wantFileError(t, name, err, schemePath, "seal")
	}
	// Content kept, layout changed: compact, and members reordered (Go
	// writes map keys sorted, the file has them in struct order).
	var compact bytes.Buffer
	json.Compact(&compact, orig)
	for name, b := range map[string][]byte{"compact": compact.Bytes(), "reordered": edit(func(map[string]any) {})} {
		os.WriteFile(schemePath, b, 0o644)
		if _, err := ImportFiles(blobPath, schemePath); err != nil {
			t.Errorf("%s scheme refused: %v", name, err)
		}
	}
}

// Issue 12, finding 2: a set mixing files of two exports must be refused
// with an error naming the file that does not belong — in particular the
// C header, which ImportFiles did not look at.
func TestImportFilesRefusesMixedSet(t *testing.T) {
	a, b := t.TempDir(), t.TempDir()
	blobA, schemeA, _ := writeSet(t, a, 4)
	blobB, _, _ := writeSet(t, b, 5)

	// blob of B with scheme and header of A
	copyFile(t, blobB, blobA)
	_, err := ImportFiles(blobA, schemeA)
	wantFileError(t, "blob of another export", err, schemeA, blobA)
	wantFileError(t, "blob of another export", err, schemeA, "another export")

	// header of B with blob and scheme of A
	a2 := t.TempDir()
	blobA, schemeA, headerA := writeSet(t, a2, 4)
	copyFile(t, filepath.Join(b, "net.h"), headerA)
	_, err = ImportFiles(blobA, schemeA)
	wantFileError(t, "header of another export", err, headerA, "another export")

	// header edited by hand, seal kept
	a3 := t.TempDir()
	blobA, schemeA, headerA = writeSet(t, a3, 4)
	h, _ := os.ReadFile(headerA)
	os.WriteFile(headerA, bytes.Replace(h, []byte("#define NET_POOL_BYTES "), []byte("#define NET_POOL_BYTES 1+"), 1), 0o644)
	_, err = ImportFiles(blobA, schemeA)
	wantFileError(t, "edited header", err, headerA, "edited")

	// a missing header is not a mix: blob and scheme alone still import
	os.Remove(headerA)
	if _, err := ImportFiles(blobA, schemeA); err != nil {
		t.Errorf("blob and scheme without the header: %v", err)
	}
}

// An export of the previous scheme version (no seal) gets a clear error
// that says what to do, wrapping ErrUnsupportedVersion.
func TestImportOldSchemeVersion(t *testing.T) {
	old, err := os.ReadFile(filepath.Join("testdata", "tiny-v2.scheme.json"))
	if err != nil {
		t.Fatal(err)
	}
	blob, _ := os.ReadFile(filepath.Join("testdata", "tiny.blob.golden"))
	_, err = Import(blob, old)
	if !errors.Is(err, ErrUnsupportedVersion) || !strings.Contains(err.Error(), "version 2") || !strings.Contains(err.Error(), "export the model again") {
		t.Errorf("scheme version 2: error %v", err)
	}
}

// SHA-256 check values: the one-block and the two-block message of FIPS
// 180-2 (NIST, 2002), Appendix B.1 and B.2.
func TestSHA256CheckValues(t *testing.T) {
	for msg, want := range map[string]string{
		"abc": "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad",
		"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq": "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1",
	} {
		if got := sha256Hex([]byte(msg)); got != want {
			t.Errorf("SHA-256(%q) = %s, want %s", msg, got, want)
		}
	}
}

// The canonical content a seal covers, against the definition in
// docs/export-format.md written out by hand: members sorted by name at
// every level, no whitespace between tokens, numbers as written, strings
// without HTML escaping, the top-level seal left out.
func TestSchemeCanonicalForm(t *testing.T) {
	in := []byte(`{
  "seal": "0123",
  "b": [1.50, -0, 2e3, {"z": "a<b", "a": null}],
  "a": {"y": true, "x": "\u00e9\n"}
}`)
	want := `{"a":{"x":"é\n","y":true},"b":[1.50,-0,2e3,{"a":null,"z":"a<b"}]}`
	got, err := canonicalScheme(in)
	if err != nil {
		t.Fatal(err)
	}
	if string(got) != want {
		t.Errorf("canonical form\n got %s\nwant %s", got, want)
	}
	d1, _ := SchemeDigest(in)
	if d1 != sha256Hex([]byte(want)) {
		t.Errorf("SchemeDigest is not the SHA-256 of the canonical form")
	}
	for _, bad := range []string{`[1]`, `{"a":1} {"b":2}`, `{"a":`} {
		if _, err := SchemeDigest([]byte(bad)); err == nil {
			t.Errorf("SchemeDigest(%s) accepted", bad)
		}
	}
}

// fixUpScheme (the fuzz target's helper) turns an edited scheme back into
// one Import accepts; the fuzzer relies on it to get past the seal.
func TestFixUpSchemeReseals(t *testing.T) {
	net, _, blob, doc, _ := exportedModel(t, "separable")
	defer net.Close()
	js, _ := doc.MarshalScheme()
	edited := bytes.Replace(js, []byte(`"seal": "`), []byte(`"seal": "0`), 1)
	if _, err := Import(blob, edited); err == nil {
		t.Fatal("edited seal accepted")
	}
	if _, err := Import(blob, fixUpScheme(blob, edited)); err != nil {
		t.Errorf("fixed-up scheme refused: %v", err)
	}
}
