package datasets

import (
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/pipit-audio/pipit/features"
)

// TestLoadIsDeterministicAcrossWorkers: one worker and four give the same
// clips, windows, matrices, warnings and (without SkipBad) the same
// error, that of the first bad clip in ids order even when a later one is
// bad too.
func TestLoadIsDeterministicAcrossWorkers(t *testing.T) {
	_, c := smallCorpus(t, 3, 1)
	for _, i := range []int{5, 17} {
		os.WriteFile(c.Clips[i].Path, []byte("RIFF\x10\x00\x00\x00WAVEjunk"), 0o644)
	}
	opts := Options{FrontEnd: features.DefaultConfig(), Window: WindowConfig{Frames: 61, Pad: PadZeros}}
	type outcome struct {
		err     string
		windows []Window
		mats    [][]float32
		warned  []string
	}
	run := func(procs int, skip bool) outcome {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		o := opts
		o.SkipBad = skip
		var warned []string
		o.Warn = func(err error) { warned = append(warned, err.Error()) }
		s, err := Load(c, allIDs(c), o)
		if err != nil {
			return outcome{err: err.Error()}
		}
		var mats [][]float32
		for _, id := range s.Clips {
			mats = append(mats, s.data[id].mat)
		}
		return outcome{windows: s.Windows, mats: mats, warned: warned}
	}
	for _, skip := range []bool{false, true} {
		one, four := run(1, skip), run(4, skip)
		if one.err != four.err || !slices.Equal(one.windows, four.windows) || !slices.Equal(one.warned, four.warned) || len(one.mats) != len(four.mats) {
			t.Fatalf("skip=%v: 1 worker %q %d windows %v; 4 workers %q %d windows %v", skip, one.err, len(one.windows), one.warned, four.err, len(four.windows), four.warned)
		}
		for i := range one.mats {
			if !slices.Equal(one.mats[i], four.mats[i]) {
				t.Fatalf("skip=%v: clip %d matrices differ between 1 and 4 workers", skip, i)
			}
		}
		if !skip && !strings.Contains(one.err, filepath.Base(c.Clips[5].Path)) {
			t.Errorf("error %q does not name the first bad clip %s", one.err, c.Clips[5].Path)
		}
		if skip && len(one.warned) != 2 {
			t.Errorf("warnings %v, want 2", one.warned)
		}
	}
}

// TestCachePacksMerge: more than MaxCachePacks loads that each compute
// something leave one merged pack holding every entry.
func TestCachePacksMerge(t *testing.T) {
	_, c := smallCorpus(t, 2, 1)
	cache := &Cache{Dir: t.TempDir()}
	opts := Options{FrontEnd: features.DefaultConfig(), Window: WindowConfig{Frames: 61, Pad: PadZeros}, Cache: cache}
	for i := 0; i <= MaxCachePacks; i++ { // one new clip per load: 9 packs, then a merge
		if _, err := Load(c, []int{i}, opts); err != nil {
			t.Fatal(err)
		}
	}
	packs, _ := filepath.Glob(filepath.Join(cache.Dir, "*", "*.lmpack"))
	if len(packs) != 1 {
		t.Fatalf("%d packs after %d loads, want 1 merged pack", len(packs), MaxCachePacks+1)
	}
	hits := cache.Hits
	if _, err := Load(c, allIDs(c)[:MaxCachePacks+1], opts); err != nil {
		t.Fatal(err)
	}
	if cache.Hits-hits != MaxCachePacks+1 {
		t.Errorf("%d hits from the merged pack, want %d", cache.Hits-hits, MaxCachePacks+1)
	}
}

// BenchmarkLoadClips measures clips/s of Load on a synthetic corpus of
// one-second 16 kHz 16-bit clips (8 classes × PIPIT_BENCH_CLIPS/8, 4,000
// by default): "cold" starts every run with an empty cache directory
// (the WAV files themselves are in the page cache), "warm" reads every
// matrix from the cache. Run with -benchtime 3x; scripts/bench_load.sh does.
func BenchmarkLoadClips(b *testing.B) {
	n := 4000
	if v := os.Getenv("PIPIT_BENCH_CLIPS"); v != "" {
		fmt.Sscan(v, &n)
	}
	dir := b.TempDir()
	c, err := Synthesize(dir, SynthConfig{ClipsPerClass: max(n/8, 1), Seconds: 1, Folds: 5, Seed: 1}, nil)
	if err != nil {
		b.Fatal(err)
	}
	ids := allIDs(c)
	opts := Options{FrontEnd: features.DefaultConfig(), Window: WindowConfig{Frames: 61, Overlap: 0.5, Pad: PadZeros}}
	report := func(b *testing.B, elapsed time.Duration) {
		b.ReportMetric(float64(len(ids)*b.N)/elapsed.Seconds(), "clips/s")
	}
	b.Run("cold", func(b *testing.B) {
		var spent time.Duration
		for b.Loop() {
			b.StopTimer()
			o := opts
			o.Cache = &Cache{Dir: tempDir(b, dir)}
			b.StartTimer()
			t0 := time.Now()
			if _, err := Load(c, ids, o); err != nil {
				b.Fatal(err)
			}
			spent += time.Since(t0)
		}
		report(b, spent)
	})
	b.Run("warm", func(b *testing.B) {
		o := opts
		o.Cache = &Cache{Dir: tempDir(b, dir)}
		if _, err := Load(c, ids, o); err != nil {
			b.Fatal(err)
		}
		t0 := time.Now()
		for b.Loop() {
			if _, err := Load(c, ids, o); err != nil {
				b.Fatal(err)
			}
		}
		report(b, time.Since(t0))
		if o.Cache.Misses != len(ids) {
			b.Fatalf("warm runs missed the cache: %d misses, want only the first %d", o.Cache.Misses, len(ids))
		}
	})
}

// tempDir returns a new empty directory under dir.
func tempDir(b *testing.B, dir string) string {
	d, err := os.MkdirTemp(dir, "cache")
	if err != nil {
		b.Fatal(err)
	}
	return d
}
