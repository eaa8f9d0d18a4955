package quant

import (
	"bytes"
	"flag"
	"os"
	"path/filepath"
	"testing"

	"github.com/pipit-audio/pipit/nn"
)

var update = flag.Bool("update", false, "rewrite testdata/*.golden from the current code")

// TestExportGolden pins the exported bytes of a fixed tiny model (seeded
// weights, seeded calibration data): blob, scheme and C header must match
// testdata/tiny.*.golden byte for byte. Any change to the format or to the
// quantisation arithmetic shows up here; regenerate with
// go test ./quant -run ExportGolden -update and bump the version if the
// layout or meaning changed. On a mismatch the new bytes go to *.got.
func TestExportGolden(t *testing.T) {
	net, err := nn.FromSpec("input shape=6x5x1\nconv out=3 kernel=3 stride=2 pad=same bias=false\nbatchnorm\nrelu\nmaxpool size=2 stride=1\ndepthwise kernel=2\nrelu6\nglobalavgpool\ndense out=2", nn.Shape{}, 11)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	x := make([]float32, 8*30)
	for i := range x {
		x[i] = float32((i*37)%17)/8 - 1
	}
	m, _, err := Quantize(net, x, 8, nil, Config{Method: MethodMinMax})
	if err != nil {
		t.Fatal(err)
	}
	m.Meta = []byte(`{"note":"golden"}`)
	blob, doc, err := Export(m)
	if err != nil {
		t.Fatal(err)
	}
	scheme, _ := doc.MarshalScheme()
	for name, got := range map[string][]byte{"tiny.blob": blob, "tiny.scheme.json": scheme, "tiny.h": []byte(CHeader(blob, doc, "tiny"))} {
		path := filepath.Join("testdata", name+".golden")
		if *update {
			if err := os.WriteFile(path, got, 0o644); err != nil {
				t.Fatal(err)
			}
			continue
		}
		want, err := os.ReadFile(path)
		if err != nil {
			t.Fatalf("%v (run with -update to create)", err)
		}
		if !bytes.Equal(got, want) {
			os.WriteFile(filepath.Join("testdata", name+".got"), got, 0o644)
			t.Errorf("%s differs from %s (new bytes in testdata/%s.got)", name, path, name)
		}
	}
}
