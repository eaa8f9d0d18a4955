package datasets

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// manifestErr parses m (relative paths under /yard) and returns the
// *ManifestError it fails with; when it fails otherwise or not at all,
// the test fails and the result is an empty *ManifestError.
func manifestErr(t *testing.T, m string) *ManifestError {
	t.Helper()
	_, err := ParseManifest("yard.csv", []byte(m), "/yard", "")
	var me *ManifestError
	if !errors.As(err, &me) {
		t.Errorf("manifest %q: error %v, want a *ManifestError", m, err)
		return &ManifestError{}
	}
	if !errors.Is(err, ErrCorpus) || !strings.Contains(err.Error(), "yard.csv") {
		t.Errorf("manifest %q: error %v does not wrap ErrCorpus or name yard.csv", m, err)
	}
	return me
}

// A manifest saved by a spreadsheet often starts with a UTF-8 byte-order
// mark; it is skipped, not taken as part of the first column's name.
func TestManifestByteOrderMark(t *testing.T) {
	m := "\ufeffpath,label,fold\nsaw1.wav,saw,1\nchip1.wav,chipper,2\n"
	c, err := ParseManifest("yard.csv", []byte(m), "/yard", "")
	if err != nil {
		t.Fatalf("manifest with a UTF-8 BOM: %v", err)
	}
	if len(c.Clips) != 2 || c.Clips[0].Path != filepath.FromSlash("/yard/saw1.wav") || c.Clips[0].Line != 2 {
		t.Errorf("clips %+v", c.Clips)
	}
	// The BOM before a comment line, and a BOM alone.
	if _, err := ParseManifest("yard.csv", []byte("\ufeff# yard\npath,label\na.wav,saw\n"), "/yard", ""); err != nil {
		t.Errorf("BOM then a comment: %v", err)
	}
	if me := manifestErr(t, "\ufeff"); !strings.Contains(me.Reason, "empty manifest") {
		t.Errorf("BOM only: %v, want an empty manifest", me)
	}
	// UTF-16 (as some editors save "Unicode text") is named as such.
	for _, bom := range []string{"\xff\xfe", "\xfe\xff"} {
		if me := manifestErr(t, bom+"p\x00a\x00"); me.Line != 1 || !strings.Contains(me.Reason, "UTF-16") {
			t.Errorf("UTF-16 BOM %q: %v, want line 1 naming UTF-16", bom, me)
		}
	}
}

// Empty manifests, in each form, say so and say what is missing.
func TestManifestEmpty(t *testing.T) {
	for _, m := range []string{"", "\n\n", "# timber yard\n\n", "  \n \t\n", " , \n"} {
		me := manifestErr(t, m)
		if me.Line != 1 || !strings.Contains(me.Reason, "empty manifest") || !strings.Contains(me.Reason, "path") {
			t.Errorf("manifest %q: %v, want line 1: empty manifest, naming the path column", m, me)
		}
	}
	for _, m := range []string{"path,label\n", "# yard\npath,label,fold\n\n# none yet\n"} {
		me := manifestErr(t, m)
		want := strings.Count(m[:strings.Index(m, "path")], "\n") + 1 // the header's line
		if me.Line != want || !strings.Contains(me.Reason, "no clips") || !strings.Contains(me.Reason, "header") {
			t.Errorf("header only %q: %v, want line %d: no clips after the header", m, me, want)
		}
	}
	// ReadManifest of an empty file: the same error, naming the file.
	p := filepath.Join(t.TempDir(), "empty.csv")
	os.WriteFile(p, nil, 0o644)
	if _, err := ReadManifest(p, ""); err == nil || !strings.Contains(err.Error(), p) || !strings.Contains(err.Error(), "empty manifest") {
		t.Errorf("empty file: error %v", err)
	}
}

// One clip listed twice, one clip with two labels, one file in two folds:
// each is refused at the later line, naming the earlier one. Paths are
// compared cleaned and resolved against the manifest's folder, so
// "./saw1.wav", "sub/../saw1.wav" and "/yard/saw1.wav" are one file.
func TestManifestDuplicatesAndConflicts(t *testing.T) {
	for _, c := range []struct {
		name, m string
		line    int
		want    []string // in the reason
	}{
		{"duplicate row", "path,label,fold\nsaw1.wav,saw,1\nchip1.wav,chipper,2\nsaw1.wav,saw,1\n", 4, []string{"duplicate", "line 2", "saw1.wav"}},
		{"duplicate, path written differently", "path,label\nsaw1.wav,saw\nfork1.wav,forklift\n./saw1.wav,saw\n", 4, []string{"duplicate", "line 2", `"saw1.wav"`}},
		{"duplicate span", "path,label,start,end\nlog.wav,saw,0,1\nlog.wav,saw,1,2\nlog.wav,saw,0,1\n", 4, []string{"duplicate", "line 2"}},
		{"two labels", "path,label,fold\nsaw1.wav,saw,1\nchip1.wav,chipper,2\nsub/../saw1.wav,forklift,1\n", 4, []string{"line 2", `"saw"`, `"forklift"`}},
		{"two labels, absolute path", "path,label\nsaw1.wav,saw\n/yard/./saw1.wav,chipper\n", 3, []string{"line 2", `"saw"`, `"chipper"`}},
		{"whole file and a span of it", "path,label,start,end\nlog.wav,saw,,\nlog.wav,chipper,2,3\n", 3, []string{"line 2", `"saw"`, `"chipper"`}},
		{"overlapping spans", "path,label,start,end\nlog.wav,chipper,2,3\nx.wav,saw,,\nlog.wav,saw,0,2.5\n", 4, []string{"line 2", `"saw"`, `"chipper"`, "overlap"}},
		{"open-ended span", "path,label,start,end\nlog.wav,saw,5,\nlog.wav,chipper,7,9\n", 3, []string{"line 2"}},
		{"two folds", "path,label,fold\nsaw1.wav,saw,1\nchip1.wav,chipper,2\n/yard/saw1.wav,saw,2\n", 4, []string{"line 2", `fold "1"`, `fold "2"`, "leakage"}},
		{"spans in two folds, separate groups", "path,label,fold,start,end,group\nlog.wav,saw,1,0,1,a\nlog.wav,saw,2,1,2,b\nx.wav,chipper,1,,,c\n", 3, []string{"line 2", "leakage"}},
	} {
		me := manifestErr(t, c.m)
		if me.Line != c.line {
			t.Errorf("%s: %v, want line %d", c.name, me, c.line)
		}
		for _, w := range c.want {
			if !strings.Contains(me.Reason, w) {
				t.Errorf("%s: %v, want %s in the reason", c.name, me, w)
			}
		}
	}
	// A relative manifest folder: an absolute path to the same file is
	// recognised.
	wd, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	m := "path,label\nsaw1.wav,saw\n" + filepath.ToSlash(filepath.Join(wd, "yard", "saw1.wav")) + ",saw\n"
	if _, err := ParseManifest("yard.csv", []byte(m), "yard", ""); err == nil || !strings.Contains(err.Error(), "duplicates line 2") {
		t.Errorf("relative folder, absolute path: error %v, want a duplicate of line 2", err)
	}
	// Spans of one file that do not overlap may carry different labels
	// (a long recording labelled in parts), and spans of one label may
	// overlap.
	for _, m := range []string{
		"path,label,start,end\nlog.wav,saw,0,2\nlog.wav,chipper,2,3\nlog.wav,saw,3,\n",
		"path,label,start,end\nlog.wav,saw,0,2\nlog.wav,saw,1,3\n",
		"path,label,fold\nsaw1.wav,saw,1\nsaw2.wav,saw,1\nyard/saw1.wav,saw,2\n",
	} {
		if _, err := ParseManifest("yard.csv", []byte(m), "/yard", ""); err != nil {
			t.Errorf("manifest %q: %v", m, err)
		}
	}
}

// A manifest whose rows are all in one fold cannot give a validation fold
// or cross-validation; CheckFoldCount says so, naming the fold.
func TestCheckFoldCount(t *testing.T) {
	one, err := ParseManifest("yard.csv", []byte("path,label,fold\nsaw1.wav,saw,3\nchip1.wav,chipper,3\n"), "/yard", "")
	if err != nil {
		t.Fatal(err)
	}
	for _, need := range []int{MinFoldsValidation, MinFoldsTraining} {
		err := one.CheckFoldCount(need)
		if !errors.Is(err, ErrTooFewFolds) || !errors.Is(err, ErrCorpus) {
			t.Fatalf("need %d: error %v, want ErrTooFewFolds and ErrCorpus", need, err)
		}
		for _, w := range []string{"yard.csv", `one fold (label "3")`, "cross-validation and a validation fold need at least 2 folds", "3 for test + validation + training"} {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("need %d: %v, want %q in it", need, err, w)
			}
		}
	}
	two, err := ParseManifest("yard.csv", []byte("path,label,fold\nsaw1.wav,saw,1\nchip1.wav,chipper,2\n"), "/yard", "")
	if err != nil {
		t.Fatal(err)
	}
	if err := two.CheckFoldCount(MinFoldsValidation); err != nil {
		t.Errorf("2 folds, need 2: %v", err)
	}
	if err := two.CheckFoldCount(MinFoldsTraining); !errors.Is(err, ErrTooFewFolds) || !strings.Contains(err.Error(), "2 folds (labels 1, 2)") || !strings.Contains(err.Error(), "at least 3") {
		t.Errorf("2 folds, need 3: %v", err)
	}
	none, err := ParseManifest("yard.csv", []byte("path,label\nsaw1.wav,saw\nchip1.wav,chipper\n"), "/yard", "")
	if err != nil {
		t.Fatal(err)
	}
	if err := none.CheckFoldCount(MinFoldsValidation); !errors.Is(err, ErrTooFewFolds) || !strings.Contains(err.Error(), "no folds") {
		t.Errorf("no folds: %v", err)
	}
}

// A class whose clips are all in the test and validation folds has no
// training clip; CheckTrainingClasses names it, its folds and its lines.
func TestCheckTrainingClasses(t *testing.T) {
	m := `path,label,fold
saw1.wav,saw,1
saw2.wav,saw,2
saw3.wav,saw,3
saw4.wav,saw,4
chip1.wav,chipper,1
chip2.wav,chipper,2
fork1.wav,forklift,2
fork2.wav,forklift,4
`
	c, err := ParseManifest("yard.csv", []byte(m), "/yard", "")
	if err != nil {
		t.Fatal(err)
	}
	fold := func(l string) int {
		k, err := c.FoldIndex(l)
		if err != nil {
			t.Fatal(err)
		}
		return k
	}
	for _, ok := range [][2]string{{"3", "4"}, {"1", "3"}, {"3", "2"}} {
		if err := c.CheckTrainingClasses(fold(ok[0]), fold(ok[1])); err != nil {
			t.Errorf("test fold %s, validation fold %s: %v", ok[0], ok[1], err)
		}
	}
	err = c.CheckTrainingClasses(fold("1"), fold("2"))
	if !errors.Is(err, ErrCorpus) {
		t.Fatalf("test 1, validation 2: error %v, want ErrCorpus", err)
	}
	for _, w := range []string{"yard.csv", `test fold "1"`, `validation fold "2"`, `"chipper"`, "lines 6, 7"} {
		if !strings.Contains(err.Error(), w) {
			t.Errorf("%v: want %s in it", err, w)
		}
	}
	if strings.Contains(err.Error(), "forklift") || strings.Contains(err.Error(), `"saw"`) {
		t.Errorf("%v names a class that has training clips", err)
	}
	if err := c.CheckTrainingClasses(fold("2"), fold("4")); err == nil || !strings.Contains(err.Error(), `"forklift"`) || !strings.Contains(err.Error(), "lines 8, 9") {
		t.Errorf("test 2, validation 4: %v, want forklift named", err)
	}
	if err := c.CheckTrainingClasses(0, c.Folds); !errors.Is(err, ErrCorpus) {
		t.Errorf("validation fold index out of range: %v", err)
	}
	// With two folds, test and validation leave no training fold at all.
	two, _ := ParseManifest("yard.csv", []byte("path,label,fold\nsaw1.wav,saw,1\nchip1.wav,chipper,2\n"), "/yard", "")
	if err := two.CheckTrainingClasses(0, 1); !errors.Is(err, ErrTooFewFolds) || !strings.Contains(err.Error(), "no training fold") {
		t.Errorf("2 folds: %v, want ErrTooFewFolds", err)
	}
	// A folder corpus has no lines: the files are named instead.
	f := &Corpus{Source: "yard", Classes: []string{"chipper", "saw"}, HasFolds: true, Folds: 3, FoldLabels: []string{"0", "1", "2"}, Clips: []Clip{
		{ID: 0, Path: "yard/chipper/c1.wav", Label: 0, Fold: 0}, {ID: 1, Path: "yard/saw/s1.wav", Label: 1, Fold: 1}, {ID: 2, Path: "yard/saw/s2.wav", Label: 1, Fold: 2}}}
	if err := f.CheckTrainingClasses(0, 1); err == nil || !strings.Contains(err.Error(), "yard/chipper/c1.wav") {
		t.Errorf("folder corpus: %v, want the chipper file named", err)
	}
	// A class with no clips at all (classes from a model, say) is named too.
	f.Classes = append(f.Classes, "planer")
	if err := f.CheckTrainingClasses(1, 0); err == nil || !strings.Contains(err.Error(), `"planer"`) || !strings.Contains(err.Error(), "no clips") {
		t.Errorf("class without clips: %v", err)
	}
}

// The overlap check sweeps spans in start order; on random manifests of
// spans over two files it accepts exactly those a comparison of every
// pair accepts (no clip twice, no overlapping spans with two labels).
func TestManifestOverlapSweep(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	labels := []string{"saw", "chipper", "forklift"}
	refused := 0
	for trial := 0; trial < 3000; trial++ {
		type row struct {
			file, label string
			start, end  float64 // end 0: to the end of the file
		}
		rows := make([]row, 2+rng.IntN(6))
		var b strings.Builder
		b.WriteString("path,label,start,end\n")
		for i := range rows {
			r := row{file: []string{"log1.wav", "log2.wav"}[rng.IntN(2)], label: labels[rng.IntN(len(labels))], start: float64(rng.IntN(6))}
			if rng.IntN(4) > 0 {
				r.end = r.start + float64(1+rng.IntN(3))
			} else if rng.IntN(2) == 0 {
				r.start = 0
			}
			rows[i] = r
			fmt.Fprintf(&b, "%s,%s,%g,%g\n", r.file, r.label, r.start, r.end)
		}
		end := func(r row) float64 {
			if r.end == 0 {
				return math.Inf(1)
			}
			return r.end
		}
		want := true
		for i, a := range rows {
			for _, c := range rows[i+1:] {
				same := a.file == c.file && a.start == c.start && a.end == c.end
				overlap := a.file == c.file && a.start < end(c) && c.start < end(a)
				if same || (overlap && a.label != c.label) {
					want = false
				}
			}
		}
		_, err := ParseManifest("yard.csv", []byte(b.String()), "/yard", "")
		if (err == nil) != want {
			t.Fatalf("manifest\n%s: error %v, want accepted %v", b.String(), err, want)
		}
		if err != nil {
			refused++
		}
	}
	if refused < 300 || refused > 2700 {
		t.Errorf("%d of 3000 random manifests refused: the test does not exercise both outcomes", refused)
	}
}
