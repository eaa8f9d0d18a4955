package datasets

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/features"
)

func TestAssignFoldsNeverSplitsAGroup(t *testing.T) {
	// A corpus built to tempt leakage: 3 classes; class 0 has two long
	// source recordings cut into 30 spans each, the others many short
	// single-clip sources. A per-clip split would scatter the spans of each
	// recording over all folds.
	var b strings.Builder
	b.WriteString("path,label,start,end\n")
	for src := 0; src < 2; src++ {
		for k := 0; k < 30; k++ {
			fmt.Fprintf(&b, "long%d.wav,saw,%d,%d\n", src, k, k+1)
		}
	}
	for k := 0; k < 25; k++ {
		fmt.Fprintf(&b, "alarm%d.wav,alarm,,\nbird%d.wav,bird,0,1\n", k, k)
	}
	c, err := ParseManifest("tempt.csv", []byte(b.String()), "/data", "")
	if err != nil {
		t.Fatal(err)
	}
	for _, seed := range []uint64{1, 2, 3} {
		if err := c.AssignFolds(5, seed); err != nil {
			t.Fatal(err)
		}
		groupFold := map[string]int{}
		perFold := make([]int, 5)
		for _, cl := range c.Clips {
			if f, ok := groupFold[cl.Group]; ok && f != cl.Fold {
				t.Fatalf("seed %d: group %s is in folds %d and %d", seed, cl.Group, f, cl.Fold)
			}
			groupFold[cl.Group] = cl.Fold
			perFold[cl.Fold]++
		}
		for f, n := range perFold {
			if n == 0 {
				t.Errorf("seed %d: fold %d empty", seed, f)
			}
		}
		// the single-clip classes spread evenly: 25 clips → 5 per fold
		for _, cls := range []string{"alarm", "bird"} {
			counts := make([]int, 5)
			for _, cl := range c.Clips {
				if c.Classes[cl.Label] == cls {
					counts[cl.Fold]++
				}
			}
			for f, n := range counts {
				if n != 5 {
					t.Errorf("seed %d: %s has %d clips in fold %d, want 5", seed, cls, n, f)
				}
			}
		}
	}
	// Deterministic: the same seed gives the same folds.
	c.AssignFolds(5, 9)
	first := make([]int, len(c.Clips))
	for i, cl := range c.Clips {
		first[i] = cl.Fold
	}
	c.AssignFolds(5, 9)
	for i, cl := range c.Clips {
		if cl.Fold != first[i] {
			t.Fatal("AssignFolds is not deterministic")
		}
	}
	// A manifest whose own folds split a source recording is rejected.
	bad := "path,label,fold,start,end\nrec.wav,saw,0,0,1\nrec.wav,saw,1,1,2\nx.wav,bird,1,,\n"
	if _, err := ParseManifest("leak.csv", []byte(bad), "/", ""); err == nil || !strings.Contains(err.Error(), "leakage") {
		t.Errorf("manifest splitting a recording across folds: error %v", err)
	}
	// ... and a group column ties differently named files together.
	grouped := "path,label,fold,session\na.wav,saw,0,s1\nb.wav,saw,1,s1\nc.wav,bird,1,s2\n"
	if _, err := ParseManifest("g.csv", []byte(grouped), "/", "session"); err == nil {
		t.Error("group column: clips of one session in two folds accepted")
	}
}

func TestManifestErrors(t *testing.T) {
	cases := map[string]string{
		"no label column": "path,fold\na.wav,0\n",
		"empty":           "",
		"partial folds":   "path,label,fold\na.wav,x,0\nb.wav,y,\n",
		"bad span":        "path,label,start,end\na.wav,x,2,1\n",
		"no rows":         "path,label\n",
		"missing group":   "path,label\na.wav,x\n",
	}
	for name, m := range cases {
		group := ""
		if name == "missing group" {
			group = "session"
		}
		_, err := ParseManifest("m.csv", []byte(m), "/", group)
		if !errors.Is(err, ErrCorpus) || !strings.Contains(err.Error(), "m.csv") {
			t.Errorf("%s: error %v, want ErrCorpus naming m.csv", name, err)
		}
	}
	var me *ManifestError
	_, err := ParseManifest("m.csv", []byte("path,label,start,end\na.wav,x,0,1\nb.wav,y,3,-3\n"), "/", "")
	if !errors.As(err, &me) || me.Line != 3 {
		t.Errorf("error %v should point at line 3", err)
	}
	// A row naming a missing file is an error naming it.
	dir := t.TempDir()
	p := filepath.Join(dir, "m.csv")
	os.WriteFile(p, []byte("path,label\nnothere.wav,x\n"), 0o644)
	if _, err := ReadManifest(p, ""); err == nil || !strings.Contains(err.Error(), "nothere.wav") {
		t.Errorf("missing file: error %v", err)
	}
}

func TestWindowArithmetic(t *testing.T) {
	// n = 1 + ⌊(T − F)/hop⌋ windows, hop = round(F·(1 − overlap)),
	// window k at frame k·hop = k·hop·256/16000 s.
	fe := features.DefaultConfig()
	for _, c := range []struct {
		overlap  float64
		hop      int
		total, n int
	}{
		{0, 61, 311, 5},     // 1 + 250/61 = 5.09
		{0.25, 46, 311, 6},  // round(45.75) = 46; 1 + 250/46 = 6.4
		{0.5, 31, 311, 9},   // round(30.5) = 31 (half away from zero); 1 + 250/31 = 9.06
		{0.75, 15, 311, 17}, // round(15.25) = 15; 1 + 250/15 = 17.7
		{0.5, 31, 61, 1},    // exactly one window
		{0.5, 31, 40, 1},    // short clip: padded to one window
	} {
		w := WindowConfig{Frames: 61, Overlap: c.overlap, Pad: PadZeros}
		if h := w.HopFrames(); h != c.hop {
			t.Errorf("overlap %g: hop %d frames, want %d", c.overlap, h, c.hop)
		}
		s := w.Starts(c.total)
		if len(s) != c.n {
			t.Errorf("overlap %g, %d frames: %d windows, want %d", c.overlap, c.total, len(s), c.n)
		}
		for k, v := range s {
			if v != k*c.hop {
				t.Errorf("window %d starts at frame %d, want %d", k, v, k*c.hop)
			}
		}
	}
	// Samples per window: (61−1)·256 + 512 = 15872.
	if n := (WindowConfig{Frames: 61, Pad: PadZeros}).Samples(fe); n != 15872 {
		t.Errorf("Samples = %d, want 15872", n)
	}
	if x := padClip([]float32{1, 2, 3}, 7, PadRepeat); fmt.Sprint(x) != "[1 2 3 1 2 3 1]" {
		t.Errorf("repeat padding %v", x)
	}
	if x := padClip([]float32{1, 2}, 4, PadZeros); fmt.Sprint(x) != "[1 2 0 0]" {
		t.Errorf("zero padding %v", x)
	}
}

// Public corpora number folds 1..5 or 1..10, or name them; the labels are
// kept and ordered as numbers when they all are (issue #11).
func TestManifestFoldLabels(t *testing.T) {
	var b strings.Builder
	b.WriteString("path,label,fold\n")
	for f := 1; f <= 10; f++ {
		fmt.Fprintf(&b, "a%d.wav,saw,%d\nb%d.wav,bird,%d\n", f, f, f, f)
	}
	c, err := ParseManifest("ten.csv", []byte(b.String()), "/", "")
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(c.FoldLabels, " "); c.Folds != 10 || got != "1 2 3 4 5 6 7 8 9 10" {
		t.Fatalf("folds %d, labels %q; want 10 labels 1..10 in numeric order", c.Folds, got)
	}
	k, err := c.FoldIndex("10")
	if err != nil || k != 9 {
		t.Fatalf("FoldIndex(10) = %d, %v; want 9", k, err)
	}
	test, _ := c.Split(k)
	if len(test) != 2 || c.Clips[test[0]].Path != "/a10.wav" {
		t.Errorf("fold 10 holds %v", test)
	}
	if _, err := c.FoldIndex("0"); !errors.Is(err, ErrCorpus) || !strings.Contains(err.Error(), "1, 2, 3") {
		t.Errorf("FoldIndex(0) error %v, want ErrCorpus listing the labels", err)
	}
	named, err := ParseManifest("named.csv", []byte("path,label,fold\na.wav,x,train\nb.wav,y,dev\nc.wav,x,eval\n"), "/", "")
	if err != nil {
		t.Fatal(err)
	}
	if got := strings.Join(named.FoldLabels, " "); got != "dev eval train" {
		t.Errorf("string labels %q, want dev eval train", got)
	}
	if k, _ := named.FoldIndex("eval"); named.Clips[2].Fold != k {
		t.Errorf("clip c.wav in fold %d, eval is %d", named.Clips[2].Fold, k)
	}
	train, val, tst := named.Partition(2, 0)
	if fmt.Sprint(train, val, tst) != "[2] [1] [0]" {
		t.Errorf("Partition(train, dev) = %v %v %v", train, val, tst)
	}
}

// Errors name the physical line: comments, blank lines and multi-line
// quoted fields count (issue #11: a bad row on line 7 was "line 4").
func TestManifestErrorLines(t *testing.T) {
	m := "# timber-yard clips\npath,label,start,end\n\n# first session\na.wav,saw,0,1\n\nb.wav,bird,5,2\n"
	var me *ManifestError
	if _, err := ParseManifest("m.csv", []byte(m), "/", ""); !errors.As(err, &me) || me.Line != 7 {
		t.Fatalf("error %v, want one at line 7", err)
	}
	if _, err := ParseManifest("m.csv", []byte("# c\n\npath,fold\na.wav,1\n"), "/", ""); !errors.As(err, &me) || me.Line != 3 {
		t.Errorf("header error %v, want line 3", err)
	}
	quoted := "path,label,start,end\n\"a\nb.wav\",saw,0,1\n,bird,,\n"
	if _, err := ParseManifest("m.csv", []byte(quoted), "/", ""); !errors.As(err, &me) || me.Line != 4 {
		t.Errorf("after a two-line field: error %v, want line 4", err)
	}
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "here.wav"), nil, 0o644)
	p := filepath.Join(dir, "m.csv")
	os.WriteFile(p, []byte("path,label\n# note\nhere.wav,x\n\nnothere.wav,y\n"), 0o644)
	if _, err := ReadManifest(p, ""); !errors.As(err, &me) || me.Line != 5 || !strings.Contains(err.Error(), "nothere.wav") {
		t.Errorf("missing file: error %v, want line 5 naming nothere.wav", err)
	}
}

// TestManifestDuplicatesAndBOM: rows that list one clip twice are
// refused with the lines of both (same label and fold: a duplicate; two
// labels; two folds), the same file as two spans is fine, and a leading
// UTF-8 byte-order mark is ignored.
func TestManifestDuplicatesAndBOM(t *testing.T) {
	var me *ManifestError
	cases := []struct {
		name, body, want string
		line             int
	}{
		{"duplicate", "path,label,fold\nsaw1.wav,saw,0\nfork1.wav,forklift,1\n./saw1.wav,saw,0\n", "duplicates line 2", 4},
		{"two labels", "path,label,fold\nsaw1.wav,saw,0\nfork1.wav,forklift,1\nsaw1.wav,chipper,0\n", "a clip has one label", 4},
		{"two folds", "path,label,fold\nsaw1.wav,saw,0\nsaw1.wav,saw,1\n", "two folds", 3},
		{"same span twice", "path,label,start,end\nday.wav,saw,0,1\nday.wav,forklift,1,2\nday.wav,chipper,0,1\n", "0–1 s is labelled \"chipper\" here and \"saw\" on line 2", 4},
	}
	for _, tc := range cases {
		_, err := ParseManifest("yard.csv", []byte(tc.body), "/data", "")
		if !errors.As(err, &me) || me.Line != tc.line || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: error %v, want one at line %d saying %q", tc.name, err, tc.line, tc.want)
		}
	}
	if _, err := ParseManifest("yard.csv", []byte("path,label,start,end\nday.wav,saw,0,1\nday.wav,forklift,1,2\n"), "/data", ""); err != nil {
		t.Errorf("two spans of one file: %v", err)
	}
	c, err := ParseManifest("yard.csv", []byte("\xef\xbb\xbfpath,label\nsaw1.wav,saw\nfork1.wav,forklift\n"), "/data", "")
	if err != nil {
		t.Fatalf("manifest with a byte-order mark: %v", err)
	}
	if len(c.Clips) != 2 || c.Classes[0] != "forklift" {
		t.Errorf("manifest with a byte-order mark: %d clips, classes %v", len(c.Clips), c.Classes)
	}
}
