package datasets

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/features"
)

// A clip shorter than a quarter of a window (or one front-end frame) is
// refused by Load, naming the manifest line, the file and its length, not
// silently padded to a whole window of silence; SkipBad skips it with a
// warning. A clip of exactly the minimum is loaded.
func TestLoadRefusesShortClips(t *testing.T) {
	fe := features.DefaultConfig()
	w := WindowConfig{Frames: 61, Pad: PadZeros}
	min := MinClipSamples(fe, w)
	if want := (w.Samples(fe) + 3) / 4; min != want || min < fe.WindowSamples {
		t.Fatalf("MinClipSamples = %d, want ⌈%d/4⌉ = %d and at least one frame", min, w.Samples(fe), want)
	}
	if got := MinClipSamples(fe, WindowConfig{Frames: 1, Pad: PadZeros}); got != fe.WindowSamples {
		t.Errorf("one-frame window: minimum %d samples, want one front-end frame, %d", got, fe.WindowSamples)
	}
	dir := t.TempDir()
	tone := func(name string, n int) {
		x := make([]float32, n)
		for i := range x {
			x[i] = 0.3 * float32(math.Sin(float64(i)/5))
		}
		if err := features.WriteWAVFile(filepath.Join(dir, name), x, fe.SampleRateHz); err != nil {
			t.Fatal(err)
		}
	}
	tone("saw1.wav", fe.SampleRateHz)
	tone("chip1.wav", fe.SampleRateHz)
	tone("blip.wav", 1)
	tone("edge.wav", min)
	tone("under.wav", min-1)
	manifest := filepath.Join(dir, "yard.csv")
	os.WriteFile(manifest, []byte("path,label,start,end\nsaw1.wav,saw,,\n# a one-sample click\nblip.wav,saw,,\nedge.wav,forklift,,\nunder.wav,forklift,,\nchip1.wav,chipper,0.99,\n"), 0o644)
	c, err := ReadManifest(manifest, "")
	if err != nil {
		t.Fatal(err)
	}
	opts := Options{FrontEnd: fe, Window: w, Cache: &Cache{Dir: filepath.Join(dir, "cache")}}
	_, err = Load(c, []int{0, 1}, opts)
	var se *ShortClipError
	if !errors.As(err, &se) || !errors.Is(err, ErrCorpus) {
		t.Fatalf("1-sample clip: error %v, want a *ShortClipError", err)
	}
	if se.Line != 4 || se.Samples != 1 || se.Min != min {
		t.Errorf("error %+v, want line 4, 1 sample, minimum %d", se, min)
	}
	for _, s := range []string{"yard.csv line 4", "blip.wav", "1 sample", "0.1 ms", "248.0 ms"} {
		if !strings.Contains(err.Error(), s) {
			t.Errorf("%v: want %q in it", err, s)
		}
	}
	for i := 0; i < 2; i++ { // the second time from the cache: still refused
		var warned []error
		o := opts
		o.SkipBad = true
		o.Warn = func(err error) { warned = append(warned, err) }
		s, err := Load(c, allIDs(c), o)
		if err != nil {
			t.Fatal(err)
		}
		if len(s.Clips) != 2 || s.Clips[0] != 0 || s.Clips[1] != 2 || len(s.Skipped) != 3 || len(warned) != 3 {
			t.Fatalf("load %d: clips %v skipped %v warnings %v; want 0 and 2 loaded, 1, 3, 4 skipped", i, s.Clips, s.Skipped, warned)
		}
		for k, want := range []string{"blip.wav", "under.wav", "chip1.wav 0.99 s to the end"} {
			if !errors.As(warned[k], &se) || !strings.Contains(warned[k].Error(), want) {
				t.Errorf("load %d: warning %v, want a short clip naming %s", i, warned[k], want)
			}
		}
	}
}

// A cache written before short clips were refused may hold a padded
// 1-sample clip; its group no longer matches, so the clip is decoded and
// refused rather than served from the cache.
func TestOldCacheHoldsNoShortClips(t *testing.T) {
	fe := features.DefaultConfig()
	w := WindowConfig{Frames: 61, Pad: PadZeros}
	dir := t.TempDir()
	if err := features.WriteWAVFile(filepath.Join(dir, "blip.wav"), []float32{0.5}, fe.SampleRateHz); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(dir, "yard.csv"), []byte("path,label\nblip.wav,saw\n"), 0o644)
	c, err := ReadManifest(filepath.Join(dir, "yard.csv"), "")
	if err != nil {
		t.Fatal(err)
	}
	// The group name as it was: no rule version.
	meta, _ := json.Marshal(struct {
		Pad string
		Min int
		FE  features.Config
	}{w.Pad, w.Samples(fe), fe})
	h := sha256.Sum256(meta)
	old := filepath.Join(dir, "cache", hex.EncodeToString(h[:10]))
	raw, _ := os.ReadFile(c.Clips[0].Path)
	os.MkdirAll(old, 0o755)
	f, err := os.Create(filepath.Join(old, "0000000000000000"+packExt))
	if err != nil {
		t.Fatal(err)
	}
	if err := encodePack(f, []packEntry{{key: fileKey(raw, c.Clips[0]), mat: make([]float32, fe.Bands*w.Frames), bands: fe.Bands, frames: w.Frames}}); err != nil {
		t.Fatal(err)
	}
	f.Close()
	cache := &Cache{Dir: filepath.Join(dir, "cache")}
	var se *ShortClipError
	if _, err := Load(c, []int{0}, Options{FrontEnd: fe, Window: w, Cache: cache}); !errors.As(err, &se) || cache.Hits != 0 {
		t.Errorf("1-sample clip in an old cache: error %v, %d hits; want a *ShortClipError and no hit", err, cache.Hits)
	}
}
