package pipit

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/quant"
)

// exportPair trains and quantises two small models (different seeds).
func exportPair(t *testing.T) (a, b *quant.Model) {
	t.Helper()
	c, manifest := smallCorpus(t)
	dir := t.TempDir()
	var out []*quant.Model
	for _, seed := range []uint64{1, 2} {
		cfg := smallTrain(filepath.Join(dir, "m"+string(rune('0'+seed))+".pnet"))
		cfg.Recipe.Epochs, cfg.Recipe.Seed = 1, seed
		if _, err := Train(c, cfg, nil); err != nil {
			t.Fatal(err)
		}
		fm, err := LoadFloatModel(cfg.Out)
		if err != nil {
			t.Fatal(err)
		}
		q, err := Quantize(fm, QuantizeConfig{Data: Data{Path: manifest}, Out: strings.TrimSuffix(cfg.Out, ".pnet") + ".pq8"}, nil)
		fm.Close()
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, q.Model)
	}
	return out[0], out[1]
}

func dirFiles(t *testing.T, dir string) map[string]string {
	t.Helper()
	m := map[string]string{}
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range es {
		m[e.Name()] = string(mustRead(t, filepath.Join(dir, e.Name())))
	}
	return m
}

// TestExportReplacesTheWholeSet: exporting over an earlier export leaves
// exactly the new set (no file of the old one), leftovers of interrupted
// exports are cleaned, an old set swapped out by an interrupted swap is
// put back, and a folder that is not an export is refused untouched.
func TestExportReplacesTheWholeSet(t *testing.T) {
	a, b := exportPair(t)
	root := t.TempDir()
	refA, refB := filepath.Join(root, "refA"), filepath.Join(root, "refB")
	if _, err := Export(a, refA); err != nil {
		t.Fatal(err)
	}
	if _, err := Export(b, refB); err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(root, "yard-export")
	if _, err := Export(a, dir); err != nil {
		t.Fatal(err)
	}
	// Leftovers of killed exports: a half-written new set, and a stray
	// temp file inside the export.
	stale := filepath.Join(root, ".yard-export"+exportNew+"123")
	os.Mkdir(stale, 0o755)
	os.WriteFile(filepath.Join(stale, BlobFile), []byte("half"), 0o644)
	if _, err := Export(b, dir); err != nil {
		t.Fatal(err)
	}
	got, want := dirFiles(t, dir), dirFiles(t, refB)
	if len(got) != len(want) {
		t.Errorf("export over an export holds %d files, a fresh one %d", len(got), len(want))
	}
	for n, w := range want {
		if got[n] != w {
			t.Errorf("%s differs from a fresh export of the same model", n)
		}
	}
	if _, err := os.Stat(stale); !os.IsNotExist(err) {
		t.Errorf("leftover %s not cleaned: %v", stale, err)
	}
	es, _ := os.ReadDir(root)
	for _, e := range es {
		if strings.Contains(e.Name(), ".pipit-") {
			t.Errorf("leftover %s beside the export", e.Name())
		}
	}
	// A swap killed between its two renames: the export is missing and
	// the old set waits beside it; the next export puts it back first,
	// and if that export fails, the old set is what remains.
	os.Rename(dir, filepath.Join(root, ".yard-export"+exportOld+"9"))
	if err := prepareExportDir(dir); err != nil {
		t.Fatal(err)
	}
	if got := dirFiles(t, dir); got[BlobFile] != want[BlobFile] {
		t.Error("the swapped-out export was not put back")
	}
	// Not an export: refused, left as it was.
	notes := filepath.Join(root, "site-notes")
	os.Mkdir(notes, 0o755)
	os.WriteFile(filepath.Join(notes, "readme.txt"), []byte("timber yard, north fence"), 0o644)
	if _, err := Export(a, notes); err == nil || !strings.Contains(err.Error(), "not an export") {
		t.Errorf("export into a folder of other files: err %v", err)
	}
	if got := dirFiles(t, notes); len(got) != 1 {
		t.Errorf("refused export changed %s: %v", notes, got)
	}
}
