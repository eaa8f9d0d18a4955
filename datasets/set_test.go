package datasets

import (
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/features"
)

func smallCorpus(t *testing.T, clips int, seconds float64) (string, *Corpus) {
	t.Helper()
	dir := t.TempDir()
	c, err := Synthesize(dir, SynthConfig{ClipsPerClass: clips, Seconds: seconds, Folds: 2, Seed: 3}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return dir, c
}

func allIDs(c *Corpus) []int {
	ids := make([]int, len(c.Clips))
	for i := range ids {
		ids[i] = i
	}
	return ids
}

func TestLoadWindowsCacheAndFolders(t *testing.T) {
	dir, _ := smallCorpus(t, 2, 3)
	// The manifest reads back as the same corpus.
	m, err := ReadManifest(filepath.Join(dir, "manifest.csv"), "")
	if err != nil {
		t.Fatal(err)
	}
	if len(m.Clips) != 16 || len(m.Classes) != 8 || !m.HasFolds || m.Folds != 2 {
		t.Fatalf("manifest corpus: %d clips, %d classes, folds %v/%d", len(m.Clips), len(m.Classes), m.HasFolds, m.Folds)
	}
	// So does the folder form (one sub-folder per class).
	f, err := ReadFolder(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(f.Clips) != 16 || len(f.Classes) != 8 || f.HasFolds {
		t.Fatalf("folder corpus: %d clips, %d classes, folds %v", len(f.Clips), len(f.Classes), f.HasFolds)
	}
	cache := &Cache{Dir: filepath.Join(t.TempDir(), "cache")}
	opts := Options{FrontEnd: features.DefaultConfig(), Window: WindowConfig{Frames: 61, Overlap: 0.5, Pad: PadZeros}, Cache: cache}
	s, err := Load(m, allIDs(m), opts)
	if err != nil {
		t.Fatal(err)
	}
	// 3 s at 16 kHz: 1 + (48000−512)/256 = 186 frames; windows
	// 1 + (186−61)/31 = 5 per clip, starting at 0, 31·256/16000 = 0.496 s, ...
	if s.Len() != 16*5 {
		t.Fatalf("%d windows, want 80", s.Len())
	}
	if w := s.Windows[1]; w.StartFrame != 31 || math.Abs(w.StartSec-0.496) > 1e-12 {
		t.Errorf("window 1 at frame %d, %.4f s; want 31, 0.496 s", w.StartFrame, w.StartSec)
	}
	if cache.Misses != 16 || cache.Hits != 0 {
		t.Errorf("first load: %d hits %d misses, want 0 and 16", cache.Hits, cache.Misses)
	}
	x1 := make([]float32, s.InputSize())
	s.Sample(7, 0, x1)
	s2, err := Load(m, allIDs(m), opts)
	if err != nil {
		t.Fatal(err)
	}
	if cache.Hits != 16 {
		t.Errorf("second load: %d cache hits, want 16", cache.Hits)
	}
	x2 := make([]float32, s.InputSize())
	s2.Sample(7, 0, x2)
	for i := range x1 {
		if x1[i] != x2[i] {
			t.Fatal("cached features differ from extracted ones")
		}
	}
	// A damaged entry is a miss, recomputed into a new pack, never read.
	packs, _ := filepath.Glob(filepath.Join(cache.Dir, "*", "*.lmpack"))
	if len(packs) != 1 {
		t.Fatalf("%d packs after two loads, want 1 (the second load computed nothing)", len(packs))
	}
	data, err := os.ReadFile(packs[0])
	if err != nil {
		t.Fatal(err)
	}
	data[len(data)-1] ^= 0x40 // last value of the last entry
	if err := os.WriteFile(packs[0], data, 0o644); err != nil {
		t.Fatal(err)
	}
	hits := cache.Hits
	if _, err := Load(m, allIDs(m), opts); err != nil {
		t.Fatal(err)
	}
	if cache.Hits != hits+15 {
		t.Errorf("after damaging one entry: %d new hits, want 15", cache.Hits-hits)
	}
	hits = cache.Hits
	if _, err := Load(m, allIDs(m), opts); err != nil {
		t.Fatal(err)
	}
	if cache.Hits != hits+16 {
		t.Errorf("after recomputing it: %d new hits, want 16", cache.Hits-hits)
	}
	// A truncated pack (damaged table) is skipped whole.
	os.WriteFile(packs[0], data[:100], 0o644)
	hits, misses := cache.Hits, cache.Misses
	if _, err := Load(m, allIDs(m), opts); err != nil {
		t.Fatal(err)
	}
	if cache.Hits != hits+1 || cache.Misses != misses+15 {
		t.Errorf("after truncating the first pack: %d hits %d misses, want 1 and 15", cache.Hits-hits, cache.Misses-misses)
	}
	// Statistics normalise the training windows to mean 0, std 1 per band.
	st, err := s.ComputeStats()
	if err != nil {
		t.Fatal(err)
	}
	s.Stats = st
	var mean float64
	for i := 0; i < s.Len(); i++ {
		s.Sample(i, 0, x1)
		for _, v := range x1[:61] { // band 0
			mean += float64(v)
		}
	}
	if mean /= float64(61 * s.Len()); math.Abs(mean) > 1e-4 {
		t.Errorf("band 0 mean after normalisation %g, want 0", mean)
	}
}

func TestAugmentationIsSeededAndTrainOnly(t *testing.T) {
	_, c := smallCorpus(t, 1, 1)
	opts := Options{FrontEnd: features.DefaultConfig(), Window: WindowConfig{Frames: 61, Pad: PadZeros}, KeepAudio: true}
	s, err := Load(c, allIDs(c), opts)
	if err != nil {
		t.Fatal(err)
	}
	plain := make([]float32, s.InputSize())
	s.Sample(2, 0, plain)
	s.Aug, s.Seed = DefaultAugment(), 5
	a, b, e2 := make([]float32, len(plain)), make([]float32, len(plain)), make([]float32, len(plain))
	s.Sample(2, 1, a)
	s.Sample(2, 1, b)
	s.Sample(2, 2, e2)
	same := func(x, y []float32) bool {
		for i := range x {
			if x[i] != y[i] {
				return false
			}
		}
		return true
	}
	if !same(a, b) {
		t.Error("the same (seed, epoch, window) gave different augmentations")
	}
	if same(a, e2) || same(a, plain) {
		t.Error("augmentation did not change the window between epochs")
	}
	// Without KeepAudio (evaluation sets) Aug is ignored.
	ev, _ := Load(c, allIDs(c), Options{FrontEnd: features.DefaultConfig(), Window: WindowConfig{Frames: 61, Pad: PadZeros}})
	ev.Aug = DefaultAugment()
	ev.Sample(2, 1, a)
	if !same(a, plain) {
		t.Error("a set without audio augmented its windows")
	}
}

func TestCorruptClips(t *testing.T) {
	_, c := smallCorpus(t, 1, 1)
	bad := c.Clips[3].Path
	os.WriteFile(bad, []byte("RIFF\x10\x00\x00\x00WAVEjunk"), 0o644)
	opts := Options{FrontEnd: features.DefaultConfig(), Window: WindowConfig{Frames: 61, Pad: PadZeros}}
	if _, err := Load(c, allIDs(c), opts); err == nil || !strings.Contains(err.Error(), filepath.Base(bad)) {
		t.Fatalf("corrupt WAV without SkipBad: error %v, want one naming %s", err, bad)
	}
	var warned []string
	opts.SkipBad = true
	opts.Warn = func(err error) { warned = append(warned, err.Error()) }
	s, err := Load(c, allIDs(c), opts)
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Skipped) != 1 || s.Skipped[0] != 3 || len(warned) != 1 || !strings.Contains(warned[0], filepath.Base(bad)) {
		t.Errorf("skipped %v, warnings %v", s.Skipped, warned)
	}
}

func TestSegments(t *testing.T) {
	classes := []string{"a", "b"}
	// windows at 0, 0.5, 1, 1.5 s of 1 s each: a a b a
	probs := []float32{0.9, 0.1, 0.7, 0.3, 0.2, 0.8, 0.6, 0.4}
	segs, err := Segments(probs, classes, []float64{0, 0.5, 1, 1.5}, 1)
	if err != nil {
		t.Fatal(err)
	}
	want := []Segment{{0, 1, 0, "a", 0.8, 2}, {1, 1.5, 1, "b", 0.8, 1}, {1.5, 2.5, 0, "a", 0.6, 1}}
	if len(segs) != len(want) {
		t.Fatalf("segments %+v", segs)
	}
	for i := range want {
		g, w := segs[i], want[i]
		if g.StartSec != w.StartSec || g.EndSec != w.EndSec || g.Class != w.Class || g.Windows != w.Windows || math.Abs(g.MeanProb-w.MeanProb) > 1e-6 {
			t.Errorf("segment %d = %+v, want %+v", i, g, w)
		}
	}
	// A 10 s recording at 50 % overlap of 61-frame windows: 1 + (623−61)/31 = 19 windows.
	a := &features.Audio{SampleRateHz: 16000, Samples: make([]float32, 160000)}
	rec, err := CutRecording(a, features.DefaultConfig(), WindowConfig{Frames: 61, Overlap: 0.5, Pad: PadZeros}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if rec.N != 19 || math.Abs(rec.StartSec[1]-0.496) > 1e-12 || math.Abs(rec.WindowSec-0.992) > 1e-12 {
		t.Errorf("recording: %d windows, second at %g s, %g s each", rec.N, rec.StartSec[1], rec.WindowSec)
	}
}

// BenchmarkSampleAugmented times one augmented training window (shift,
// gain, noise, log-mel, normalisation, masks): the per-window cost of the
// data path that nn.Fit overlaps with the training step.
func BenchmarkSampleAugmented(b *testing.B) {
	dir := b.TempDir()
	c, err := Synthesize(dir, SynthConfig{ClipsPerClass: 2, Seconds: 1, Folds: 2, Seed: 3}, nil)
	if err != nil {
		b.Fatal(err)
	}
	opts := Options{FrontEnd: features.DefaultConfig(), Window: WindowConfig{Frames: 61, Pad: PadZeros}, KeepAudio: true}
	s, err := Load(c, allIDs(c), opts)
	if err != nil {
		b.Fatal(err)
	}
	s.Aug, s.Seed = DefaultAugment(), 5
	dst := make([]float32, s.InputSize())
	s.Sample(0, 1, dst)
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		s.Sample(i%s.Len(), 1+i/s.Len(), dst)
		i++
	}
}

// TestAugmentAudioEdges shifts windows past both ends of a short clip
// (and wholly off it): every result must be the clip read at one shift in
// range, zero outside the clip, and every shift must occur.
func TestAugmentAudioEdges(t *testing.T) {
	clip := []float32{1, 2, 3, 4}
	a := &Augment{ShiftSeconds: 3} // ±3 samples at 1 Hz; no gain, no noise
	rng := rand.New(rand.NewPCG(1, 2))
	seen := map[int]bool{}
	for k := 0; k < 400; k++ {
		dst := []float32{9, 9, 9}
		start := k % 5
		a.audio(dst, clip, start, 1, rng, nil)
		found := false
		for s := -3; s <= 3 && !found; s++ {
			ok := true
			for i, v := range dst {
				want := float32(0)
				if j := start + s + i; j >= 0 && j < len(clip) {
					want = clip[j]
				}
				ok = ok && v == want
			}
			if ok {
				found, seen[s] = true, true
			}
		}
		if !found {
			t.Fatalf("start %d: %v is the clip at no shift in ±3", start, dst)
		}
	}
	if len(seen) != 7 {
		t.Errorf("shifts seen %v, want all of -3..3", seen)
	}
}

// TestLoadRefusesTinyClip: a clip far shorter than the model window (one
// sample, and 0.2 s of a 1 s window) is refused with its duration, not
// padded into a window of silence; 0.3 s, over a quarter, is padded.
func TestLoadRefusesTinyClip(t *testing.T) {
	dir := t.TempDir()
	for name, n := range map[string]int{"tick.wav": 1, "short.wav": 3200, "ok.wav": 4800, "saw.wav": 16000} {
		x := make([]float32, n)
		for i := range x {
			x[i] = 0.1 * float32(i%7)
		}
		if err := features.WriteWAVFile(filepath.Join(dir, name), x, 16000); err != nil {
			t.Fatal(err)
		}
	}
	opts := Options{FrontEnd: features.DefaultConfig(), Window: WindowConfig{Frames: 61, Overlap: 0.5, Pad: PadZeros}}
	for _, tc := range []struct {
		file string
		ok   bool
	}{{"tick.wav", false}, {"short.wav", false}, {"ok.wav", true}} {
		m := "path,label\n" + tc.file + ",chipper\nsaw.wav,saw\n"
		c, err := ParseManifest(filepath.Join(dir, "m.csv"), []byte(m), dir, "")
		if err != nil {
			t.Fatal(err)
		}
		_, err = Load(c, allIDs(c), opts)
		switch {
		case tc.ok && err != nil:
			t.Errorf("%s: %v", tc.file, err)
		case !tc.ok && (err == nil || !strings.Contains(err.Error(), "a quarter of a model window") || !strings.Contains(err.Error(), tc.file)):
			t.Errorf("%s: err %v, want a refusal naming the file and the quarter-window bound", tc.file, err)
		}
	}
}
