package datasets

import (
	"bytes"
	"math"
	"path/filepath"
	"testing"
)

// FuzzParseManifest: the manifest parser never panics; accepted manifests
// have classes, clips with labels in range, and consistent folds, list no
// clip (cleaned path and span) twice, no file in two folds and no
// overlapping spans of one file with two labels; a UTF-8 byte-order mark
// in front changes nothing. Seeds beyond these are in
// testdata/fuzz/FuzzParseManifest (a BOM, duplicates, two labels, two
// folds, overlapping spans).
func FuzzParseManifest(f *testing.F) {
	f.Add([]byte("path,label,fold,group\na.wav,saw,0,s1\nb.wav,bird,1,s2\n"))
	f.Add([]byte("path,label,start,end,extra\na.wav,x,0,1.5,z\n"))
	f.Add([]byte("label,path\n\"q,uoted\",x\n"))
	f.Add([]byte("path,label,fold\na.wav,x,99999999999999999999\n"))
	f.Add([]byte(""))
	f.Add([]byte("\xef\xbb\xbfpath,label\nsaw1.wav,saw\n"))
	f.Add([]byte("path,label,fold\nsaw1.wav,saw,0\n./saw1.wav,saw,0\n"))
	f.Add([]byte("path,label,fold\nsaw1.wav,saw,0\nsaw1.wav,chipper,1\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := ParseManifest("fuzz.csv", data, "/base", "")
		if err != nil {
			return
		}
		if len(c.Clips) == 0 || len(c.Classes) == 0 {
			t.Fatal("accepted an empty corpus")
		}
		type span struct {
			path       string
			start, end float64
		}
		seen := map[span]bool{}
		fileFold := map[string]int{}
		for _, cl := range c.Clips {
			if cl.Label < 0 || cl.Label >= len(c.Classes) || (c.HasFolds && (cl.Fold < 0 || cl.Fold >= c.Folds)) {
				t.Fatalf("clip %+v out of range", cl)
			}
			if filepath.Clean(cl.Path) != cl.Path {
				t.Fatalf("clip path %q is not clean", cl.Path)
			}
			k := span{cl.Path, cl.Start, cl.End}
			if seen[k] {
				t.Fatalf("clip %+v listed twice", cl)
			}
			seen[k] = true
			if f, ok := fileFold[cl.Path]; ok && f != cl.Fold {
				t.Fatalf("file %s in folds %d and %d", cl.Path, f, cl.Fold)
			}
			fileFold[cl.Path] = cl.Fold
		}
		end := func(cl Clip) float64 {
			if cl.End == 0 {
				return math.Inf(1)
			}
			return cl.End
		}
		for i, a := range c.Clips {
			for _, b := range c.Clips[i+1:] {
				if a.Path == b.Path && a.Label != b.Label && a.Start < end(b) && b.Start < end(a) {
					t.Fatalf("overlapping spans of %s with labels %d and %d: %+v, %+v", a.Path, a.Label, b.Label, a, b)
				}
			}
		}
		if bytes.HasPrefix(data, []byte(utf8BOM)) {
			return
		}
		b, err := ParseManifest("fuzz.csv", append([]byte(utf8BOM), data...), "/base", "")
		if err != nil || len(b.Clips) != len(c.Clips) || b.Clips[0].Line != c.Clips[0].Line {
			t.Fatalf("with a byte-order mark in front: %v", err)
		}
	})
}

// FuzzDecodeCachePack: damaged cache packs are rejected or yield only
// whole, consistent entries; decodePack never panics. The seeds are a
// valid two-entry pack, it truncated, and a header claiming a huge table.
func FuzzDecodeCachePack(f *testing.F) {
	var buf bytes.Buffer
	if err := encodePack(&buf, []packEntry{
		{key: cacheKey{1}, mat: []float32{1, 2, 3, 4, 5, 6}, bands: 2, frames: 3},
		{key: cacheKey{2}, mat: []float32{-1}, bands: 1, frames: 1},
	}); err != nil {
		f.Fatal(err)
	}
	f.Add(buf.Bytes())
	f.Add(buf.Bytes()[:buf.Len()-3])
	f.Add([]byte("PIPITLP1\xff\xff\xff\xff\x00\x00\x00\x00"))
	f.Fuzz(func(t *testing.T, data []byte) {
		got := map[cacheKey]cachedClip{}
		if err := decodePack(data, got); err != nil {
			return
		}
		for k, e := range got {
			if e.frames < 1 || len(e.mat) == 0 || len(e.mat)%e.frames != 0 {
				t.Fatalf("entry %x: %d values for %d frames", k[:4], len(e.mat), e.frames)
			}
		}
	})
}
