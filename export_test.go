package pipit

import (
	"bytes"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
)

// yardModel is a quantised separable network with random weights and a
// model info of the timber-yard monitor (classes, front end, band
// statistics, window), so its export includes the C front end.
func yardModel(t *testing.T, seed uint64) *quant.Model {
	t.Helper()
	net, err := nn.Arch("separable", 3, seed)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	r := rand.New(rand.NewPCG(seed, 5))
	st := &features.BandStats{Version: features.BandStatsVersion, Frames: 1}
	for range net.Input.H {
		st.Mean = append(st.Mean, -40+10*r.Float64())
		st.Std = append(st.Std, 5+5*r.Float64())
	}
	info := &datasets.ModelInfo{Version: datasets.ModelInfoVersion, Arch: "separable", Classes: []string{"saw", "planer", "quiet"},
		FrontEnd: features.DefaultConfig(), Stats: st, Window: datasets.WindowConfig{Frames: net.Input.W, Overlap: 0.5, Pad: datasets.PadZeros}}
	const n = 4
	x := make([]float32, n*net.Input.Size())
	for i := range x {
		x[i] = float32(r.NormFloat64())
	}
	q, _, err := quant.Quantize(net, x, n, nil, quant.Config{Method: quant.MethodMinMax})
	if err != nil {
		t.Fatal(err)
	}
	if q.Meta, err = info.Marshal(); err != nil {
		t.Fatal(err)
	}
	return q
}

// exportFileNames is every file an export of yardModel holds.
var exportFileNames = []string{"model.blob", "model.scheme.json", "pipit_fe.c", "pipit_fe.h", "pipit_net.h", "pipit_net_fe.h", "pipit_rt.c", "pipit_rt.h", "pipit_rt_fast.c", "pipit_rt_fast.h"}

func dirNames(t *testing.T, dir string) []string {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	return names
}

// sameFiles requires dirs a and b to hold the same file names with the
// same bytes.
func sameFiles(t *testing.T, a, b string) {
	t.Helper()
	na, nb := dirNames(t, a), dirNames(t, b)
	if !slices.Equal(na, nb) {
		t.Fatalf("%s holds %v, %s holds %v", a, na, b, nb)
	}
	for _, n := range na {
		x, _ := os.ReadFile(filepath.Join(a, n))
		y, _ := os.ReadFile(filepath.Join(b, n))
		if !bytes.Equal(x, y) {
			t.Errorf("%s differs between %s and %s", n, a, b)
		}
	}
}

// An export over an earlier one is exactly the export made into an empty
// directory, and leaves nothing beside it or inside it: not the
// temporary directory of a killed run, nor the per-file temporaries the
// earlier writer left in the directory itself (issue 12, finding 1).
func TestExportReplacesWholeSet(t *testing.T) {
	a, b := yardModel(t, 1), yardModel(t, 2)
	ref := filepath.Join(t.TempDir(), "b")
	rb, err := Export(b, ref)
	if err != nil {
		t.Fatal(err)
	}
	if got := dirNames(t, ref); !slices.Equal(got, exportFileNames) {
		t.Fatalf("export holds %v, want %v", got, exportFileNames)
	}
	parent := t.TempDir()
	out := filepath.Join(parent, "out")
	if _, err := Export(a, out); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(out, ".model.blob.tmp12345"), []byte("half a blob"), 0o600)
	os.Mkdir(filepath.Join(parent, ".out.tmp-678"), 0o700)
	os.WriteFile(filepath.Join(parent, ".out.tmp-678", "model.blob"), []byte("half"), 0o600)
	r, err := Export(b, out)
	if err != nil {
		t.Fatal(err)
	}
	sameFiles(t, out, ref)
	if s := dirNames(t, parent); !slices.Equal(s, []string{"out"}) {
		t.Errorf("beside the export: %v, want only out", s)
	}
	if r.Seal == "" || r.Seal != rb.Seal || len(r.Recovered) != 1 {
		t.Errorf("seal %q (reference %q), recovered %q", r.Seal, rb.Seal, r.Recovered)
	}
}

// Export refuses to replace a directory that is not an export and names
// it and what is in it; the directory is left as it was.
func TestExportRefusesForeignDirectory(t *testing.T) {
	q := yardModel(t, 1)
	out := filepath.Join(t.TempDir(), "firmware")
	os.MkdirAll(filepath.Join(out, "src"), 0o755)
	os.WriteFile(filepath.Join(out, "main.c"), []byte("int main(void) { return 0; }\n"), 0o644)
	os.WriteFile(filepath.Join(out, "pipit_rt.c"), []byte("/* an older copy */\n"), 0o644)
	_, err := Export(q, out)
	if err == nil || !strings.Contains(err.Error(), out) || !strings.Contains(err.Error(), "main.c") || !strings.Contains(err.Error(), "src") {
		t.Errorf("export into a firmware directory: error %v, want one naming %s, main.c and src", err, out)
	}
	if got := dirNames(t, out); !slices.Equal(got, []string{"main.c", "pipit_rt.c", "src"}) {
		t.Errorf("the directory now holds %v", got)
	}
	file := filepath.Join(t.TempDir(), "export")
	os.WriteFile(file, nil, 0o644)
	if _, err := Export(q, file); err == nil || !strings.Contains(err.Error(), file) {
		t.Errorf("export onto a file: error %v", err)
	}
}

// The read-back that verify uses refuses a set whose files come from two
// exports and names the file that does not belong: the front-end header
// and the network header, which it did not read (issue 12, finding 2).
func TestVerifyRoundTripRefusesMixedSet(t *testing.T) {
	a, b := yardModel(t, 1), yardModel(t, 2)
	da, db := filepath.Join(t.TempDir(), "a"), filepath.Join(t.TempDir(), "b")
	ea, err := Export(a, da)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Export(b, db); err != nil {
		t.Fatal(err)
	}
	in := [][]int8{make([]int8, a.Input.Size())}
	if _, err := VerifyRoundTrip(a, ea, in); err != nil {
		t.Fatalf("intact export: %v", err)
	}
	for _, f := range []string{"pipit_net_fe.h", "pipit_net.h", "model.scheme.json"} {
		keep, _ := os.ReadFile(filepath.Join(da, f))
		other, _ := os.ReadFile(filepath.Join(db, f))
		os.WriteFile(filepath.Join(da, f), other, 0o644)
		_, err := VerifyRoundTrip(a, ea, in)
		if err == nil || !strings.Contains(err.Error(), filepath.Join(da, f)) {
			t.Errorf("%s of another export: error %v, want one naming %s", f, err, filepath.Join(da, f))
		}
		os.WriteFile(filepath.Join(da, f), keep, 0o644)
	}
	// an edited runtime file or a missing one: not this pipit's export
	rt := filepath.Join(da, "pipit_rt.c")
	keep, _ := os.ReadFile(rt)
	os.WriteFile(rt, append(keep, "/* local change */\n"...), 0o644)
	if _, err := OpenExport(da); err == nil || !strings.Contains(err.Error(), rt) {
		t.Errorf("edited runtime: error %v", err)
	}
	os.Remove(rt)
	if _, err := OpenExport(da); err == nil || !strings.Contains(err.Error(), rt) || !strings.Contains(err.Error(), "missing") {
		t.Errorf("missing runtime: error %v", err)
	}
}

// A run killed between its two renames (where the directories cannot be
// exchanged) leaves no directory and the previous export beside it as
// .NAME.old-N: OpenExport says where it is, and RecoverExport (which
// Export runs first) puts it back.
func TestRecoverExportPutsBackPrevious(t *testing.T) {
	q := yardModel(t, 1)
	parent := t.TempDir()
	out, old := filepath.Join(parent, "out"), filepath.Join(parent, ".out.old-42")
	ref := filepath.Join(t.TempDir(), "ref")
	if _, err := Export(q, ref); err != nil {
		t.Fatal(err)
	}
	if _, err := Export(q, out); err != nil {
		t.Fatal(err)
	}
	os.Rename(out, old)
	if _, err := OpenExport(out); err == nil || !strings.Contains(err.Error(), old) {
		t.Errorf("missing export: error %v, want one naming %s", err, old)
	}
	notes, err := RecoverExport(out)
	if err != nil || len(notes) != 1 {
		t.Fatalf("RecoverExport: %v, notes %q", err, notes)
	}
	sameFiles(t, out, ref)
	if s := dirNames(t, parent); !slices.Equal(s, []string{"out"}) {
		t.Errorf("beside the export: %v", s)
	}
}
