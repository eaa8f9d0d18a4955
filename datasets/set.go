package datasets

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"runtime"
	"sync"
	"sync/atomic"

	"github.com/pipit-audio/pipit/features"
)

// Options configures [Load].
type Options struct {
	FrontEnd features.Config
	Window   WindowConfig
	Cache    *Cache // nil: no cache
	// SkipBad skips clips whose file cannot be decoded, or that are
	// shorter than [MinClipSamples] (a [*ShortClipError]), calling Warn
	// with the error (which names the file); otherwise the first bad clip
	// fails the load.
	SkipBad bool
	Warn    func(error)
	// KeepAudio keeps each clip's samples, which augmentation needs.
	KeepAudio bool
	// Progress, if not nil, is called after each clip is loaded.
	Progress func(done, total int)
}

// Window is one model input cut from a clip.
type Window struct {
	Clip       int     // Clip.ID
	Label      int     // class index
	StartFrame int     // first log-mel frame of the clip's matrix
	StartSec   float64 // StartFrame·hop/rate
}

type clipData struct {
	mat    []float32 // (bands, frames)
	frames int
	audio  []float32 // at the front-end rate, padded; nil unless KeepAudio
}

// Set is the windows of some clips of a corpus, ready to feed a network:
// [Set.Sample] writes window i as a (bands, frames, 1) input, normalised
// by Stats and augmented by Aug when both are set.
type Set struct {
	Corpus  *Corpus
	Opts    Options
	Windows []Window
	Clips   []int               // clip IDs in this set (bad clips skipped)
	Skipped []int               // clip IDs skipped as unreadable
	Stats   *features.BandStats // per-band normalisation; nil: none
	Aug     *Augment            // nil: no augmentation
	Seed    uint64              // augmentation seed
	data    map[int]*clipData
	ex      *features.Extractor
	res     map[int]*features.Resampler
	seg     []float32 // Sample's scratch: augmented audio, its log-mel, its RNG
	mel     []float32
	pcg     *rand.PCG
	rng     *rand.Rand
	bank    *noiseBank
}

// Load reads, resamples, pads and extracts the clips ids of c and cuts
// them into windows. A clip shorter than [MinClipSamples] is a
// [*ShortClipError] (skipped with a warning under opts.SkipBad). Each clip's log-mel matrix is taken from opts.Cache
// when present there; the matrices computed are added to it as one pack.
//
// Clips are loaded by GOMAXPROCS workers; the result (windows, clip
// order, skipped clips, warnings, the error returned) is the same for any
// worker count: clips are taken in ids order and collected by position,
// and without SkipBad the error is that of the first bad clip in ids
// order. Progress, Warn and the cache counters are called and updated
// from the calling goroutine only.
func Load(c *Corpus, ids []int, opts Options) (*Set, error) {
	if err := opts.Window.Check(); err != nil {
		return nil, err
	}
	ex, err := features.NewExtractor(opts.FrontEnd)
	if err != nil {
		return nil, err
	}
	s := &Set{Corpus: c, Opts: opts, data: map[int]*clipData{}, ex: ex, res: map[int]*features.Resampler{}}
	fe := opts.FrontEnd
	need := opts.Window.Samples(fe)
	group := opts.Cache.openGroup(groupName(opts.Window.Pad, need, fe))

	results := make([]loadResult, len(ids))
	var next atomic.Int64
	var stop atomic.Bool
	done := make(chan struct{}, 64)
	var wg sync.WaitGroup
	for w := 0; w < min(runtime.GOMAXPROCS(0), len(ids)); w++ {
		wl := &clipLoader{opts: &s.Opts, source: c.Source, group: group, need: need, min: MinClipSamples(fe, opts.Window), res: map[int]*features.Resampler{}}
		if w == 0 {
			wl.ex = ex
		} else if wl.ex, err = features.NewExtractor(fe); err != nil {
			return nil, err
		}
		wg.Add(1)
		go func() {
			defer wg.Done()
			for !stop.Load() {
				i := int(next.Add(1) - 1)
				if i >= len(ids) {
					return
				}
				results[i] = wl.load(c.Clips[ids[i]])
				if results[i].err != nil && !opts.SkipBad {
					stop.Store(true)
				}
				done <- struct{}{}
			}
		}()
	}
	go func() { wg.Wait(); close(done) }()
	finished := 0
	for range done {
		finished++
		if opts.Progress != nil {
			opts.Progress(finished, len(ids))
		}
	}

	var fresh []packEntry
	hopSec := float64(fe.HopSamples) / float64(fe.SampleRateHz)
	for i, id := range ids {
		r := results[i]
		if r.err != nil {
			if !opts.SkipBad {
				return nil, r.err
			}
			if opts.Warn != nil {
				opts.Warn(r.err)
			}
			s.Skipped = append(s.Skipped, id)
			continue
		}
		if group != nil {
			if r.hit {
				opts.Cache.Hits++
			} else {
				opts.Cache.Misses++
				fresh = append(fresh, packEntry{key: r.key, mat: r.d.mat, bands: fe.Bands, frames: r.d.frames})
			}
		}
		s.data[id] = r.d
		s.Clips = append(s.Clips, id)
		for _, st := range opts.Window.Starts(r.d.frames) {
			s.Windows = append(s.Windows, Window{Clip: id, Label: c.Clips[id].Label, StartFrame: st, StartSec: float64(st) * hopSec})
		}
	}
	if err := group.add(fresh); err != nil {
		return nil, err
	}
	if len(s.Windows) == 0 {
		return nil, corpusErr("no readable clips among %d", len(ids))
	}
	return s, nil
}

// MinClipSamples returns the fewest samples, at the front-end rate, that
// [Load] accepts of a clip (of the part of its file that its span covers)
// under front end fe and windows w: a quarter of one window
// ([WindowConfig.Samples], rounded up), and never less than one front-end
// frame (fe.WindowSamples). A shorter clip would be padded to a window of
// mostly zeros or repeats (a 1-sample clip to a whole window of silence),
// teaching its class nothing of its sound. With the default front end and
// a 61-frame window that is 3,968 samples, 248 ms at 16 kHz.
func MinClipSamples(fe features.Config, w WindowConfig) int {
	return max(fe.WindowSamples, (w.Samples(fe)+3)/4)
}

// ShortClipError is the error [Load] gives for a clip shorter than
// [MinClipSamples] (with [Options.SkipBad], the warning it passes to
// Options.Warn before skipping the clip). It wraps [ErrCorpus].
type ShortClipError struct {
	Source     string  // the corpus's manifest or folder
	Line       int     // the clip's manifest line; 0 for a folder corpus
	Path       string  // the clip's file
	Start, End float64 // the clip's span in seconds (End 0: to the end of the file)
	Samples    int     // samples of the clip at RateHz
	Min        int     // MinClipSamples
	RateHz     int     // the front end's sample rate
}

// Error implements error: it names the manifest line, the file (and span),
// the clip's length and the minimum.
func (e *ShortClipError) Error() string {
	where := "datasets: " + e.Source
	if e.Line > 0 {
		where += fmt.Sprintf(" line %d", e.Line)
	}
	what := e.Path
	switch {
	case e.End != 0:
		what += fmt.Sprintf(" %g–%g s", e.Start, e.End)
	case e.Start != 0:
		what += fmt.Sprintf(" %g s to the end", e.Start)
	}
	samples := "samples"
	if e.Samples == 1 {
		samples = "sample"
	}
	return fmt.Sprintf("%s: %s: clip of %s (%d %s at %d Hz) is shorter than the %s (%d samples) a clip needs: a quarter of a model window and at least one front-end frame; padded to a window it would be mostly padding",
		where, what, duration(e.Samples, e.RateHz), e.Samples, samples, e.RateHz, duration(e.Min, e.RateHz), e.Min)
}

// Unwrap makes errors.Is(err, ErrCorpus) true.
func (e *ShortClipError) Unwrap() error { return ErrCorpus }

// duration formats n samples at rate Hz as milliseconds below a second,
// else seconds.
func duration(n, rate int) string {
	if rate <= 0 {
		return "?"
	}
	if s := float64(n) / float64(rate); s >= 1 {
		return fmt.Sprintf("%.3f s", s)
	}
	return fmt.Sprintf("%.1f ms", 1000*float64(n)/float64(rate))
}

// loadResult is what a worker made of one clip.
type loadResult struct {
	d   *clipData
	key cacheKey
	hit bool // d.mat came from the cache
	err error
}

// clipLoader is one worker's state: its own extractor and resamplers.
type clipLoader struct {
	opts   *Options
	source string      // the corpus's manifest or folder, for errors
	group  *cacheGroup // read only while workers run
	need   int         // samples of one window
	min    int         // MinClipSamples
	ex     *features.Extractor
	res    map[int]*features.Resampler
}

func (l *clipLoader) load(cl Clip) loadResult {
	fe := l.opts.FrontEnd
	raw, err := os.ReadFile(cl.Path)
	if err != nil {
		return loadResult{err: fmt.Errorf("datasets: %w", err)}
	}
	var r loadResult
	var cached cachedClip
	if l.group != nil {
		r.key = fileKey(raw, cl)
		cached, r.hit = l.group.entries[r.key]
	}
	if r.hit && !l.opts.KeepAudio {
		r.d = &clipData{mat: cached.mat, frames: cached.frames}
		return r
	}
	a, err := features.DecodeWAV(cl.Path, raw)
	if err != nil {
		return loadResult{err: err}
	}
	x := a.Samples
	if a.SampleRateHz != fe.SampleRateHz {
		rs, ok := l.res[a.SampleRateHz]
		if !ok {
			if rs, err = features.NewResampler(a.SampleRateHz, fe.SampleRateHz); err != nil {
				return loadResult{err: fmt.Errorf("datasets: %s: %w", cl.Path, err)}
			}
			l.res[a.SampleRateHz] = rs
		}
		x = rs.Resample(nil, x)
	}
	lo := int(math.Round(cl.Start * float64(fe.SampleRateHz)))
	hi := len(x)
	if cl.End > 0 {
		hi = min(hi, int(math.Round(cl.End*float64(fe.SampleRateHz))))
	}
	if lo >= hi {
		return loadResult{err: corpusErr("%s: span %g..%g s is outside the %.3f s recording", cl.Path, cl.Start, cl.End, a.Seconds())}
	}
	if hi-lo < l.min {
		return loadResult{err: &ShortClipError{Source: l.source, Line: cl.Line, Path: cl.Path, Start: cl.Start, End: cl.End, Samples: hi - lo, Min: l.min, RateHz: fe.SampleRateHz}}
	}
	x = padClip(x[lo:hi], l.need, l.opts.Window.Pad)
	r.d = &clipData{}
	if l.opts.KeepAudio {
		r.d.audio = x
	}
	if r.hit {
		r.d.mat, r.d.frames = cached.mat, cached.frames
		return r
	}
	m, err := l.ex.Compute(x)
	if err != nil {
		return loadResult{err: fmt.Errorf("datasets: %s: %w", cl.Path, err)}
	}
	r.d.mat, r.d.frames = m.Data().([]float32), m.Shape()[1]
	return r
}

// Len returns the number of windows.
func (s *Set) Len() int { return len(s.Windows) }

// InputSize returns Bands·Frames, the values of one sample.
func (s *Set) InputSize() int { return s.Opts.FrontEnd.Bands * s.Opts.Window.Frames }

// Sample writes window i as a (Bands, Frames, 1) network input into dst
// and returns its label. With Aug set, the window is re-extracted from
// augmented audio with an RNG seeded by (Seed, epoch, i), so every epoch
// sees a different but reproducible variant; then Stats normalise it and
// Aug's masks apply. It allocates nothing after its first call; calls
// must not overlap (the training loop makes them from one goroutine). It
// panics if len(dst) != InputSize().
func (s *Set) Sample(i, epoch int, dst []float32) int {
	w := s.Windows[i]
	fe, F, M := s.Opts.FrontEnd, s.Opts.Window.Frames, s.Opts.FrontEnd.Bands
	if len(dst) != M*F {
		panic(fmt.Sprintf("datasets: Set.Sample: len(dst) = %d, want %d", len(dst), M*F))
	}
	d := s.data[w.Clip]
	var rng *rand.Rand
	if s.Aug != nil && d.audio != nil {
		if s.rng == nil {
			s.pcg = rand.NewPCG(0, 0)
			s.rng = rand.New(s.pcg)
			s.bank = newNoiseBank(s.Seed)
		}
		s.pcg.Seed(s.Seed^uint64(epoch)*0x9e3779b97f4a7c15, uint64(i))
		rng = s.rng
		n := s.Opts.Window.Samples(fe)
		if cap(s.seg) < n {
			s.seg = make([]float32, n)
			s.mel = make([]float32, M*fe.Frames(n))
		}
		seg := s.seg[:n]
		s.Aug.audio(seg, d.audio, w.StartFrame*fe.HopSamples, fe.SampleRateHz, rng, s.bank)
		nf, err := s.ex.ComputeInto(s.mel, seg)
		if err != nil || nf < F {
			panic(fmt.Sprintf("datasets: internal error: window of %d samples gives %d frames (%v)", n, nf, err))
		}
		for b := 0; b < M; b++ {
			copy(dst[b*F:(b+1)*F], s.mel[b*nf:b*nf+F])
		}
	} else {
		T := d.frames
		for b := 0; b < M; b++ {
			n := copy(dst[b*F:(b+1)*F], d.mat[b*T+w.StartFrame:min((b+1)*T, b*T+w.StartFrame+F)])
			clear(dst[b*F+n : (b+1)*F]) // a short final window reads silence-level zeros
		}
	}
	if s.Stats != nil {
		s.Stats.Apply(dst)
	}
	if rng != nil {
		s.Aug.masks(dst, M, F, rng)
	}
	return w.Label
}

// ComputeStats returns per-band statistics over every frame of every
// window of the set (unaugmented).
func (s *Set) ComputeStats() (*features.BandStats, error) {
	M, F := s.Opts.FrontEnd.Bands, s.Opts.Window.Frames
	acc := features.NewBandStatsAccumulator(M)
	buf := make([]float32, M*F)
	saveStats, saveAug := s.Stats, s.Aug
	s.Stats, s.Aug = nil, nil
	defer func() { s.Stats, s.Aug = saveStats, saveAug }()
	for i := range s.Windows {
		s.Sample(i, 0, buf)
		if err := acc.Add(buf, F); err != nil {
			return nil, err
		}
	}
	return acc.Stats()
}

// ClipVotes aggregates window probabilities probs (Len(), L) to clips: for
// each clip of the set (in Clips order) its label, the class of the mean
// window probability, and the majority vote of window arg-maxes (ties go
// to the class with the larger mean probability).
func (s *Set) ClipVotes(probs []float32, classes int) (labels, byMean, byVote []int) {
	idx := map[int]int{}
	for k, id := range s.Clips {
		idx[id] = k
	}
	n := len(s.Clips)
	sums := make([][]float64, n)
	votes := make([][]int, n)
	for k := range sums {
		sums[k] = make([]float64, classes)
		votes[k] = make([]int, classes)
	}
	for i, w := range s.Windows {
		k := idx[w.Clip]
		p := probs[i*classes : (i+1)*classes]
		best := 0
		for c, v := range p {
			sums[k][c] += float64(v)
			if v > p[best] {
				best = c
			}
		}
		votes[k][best]++
	}
	for k, id := range s.Clips {
		labels = append(labels, s.Corpus.Clips[id].Label)
		m, v := 0, 0
		for c := 1; c < classes; c++ {
			if sums[k][c] > sums[k][m] {
				m = c
			}
			if votes[k][c] > votes[k][v] || (votes[k][c] == votes[k][v] && sums[k][c] > sums[k][v]) {
				v = c
			}
		}
		byMean = append(byMean, m)
		byVote = append(byVote, v)
	}
	return labels, byMean, byVote
}

// ClassCounts returns the number of windows per class.
func (s *Set) ClassCounts() []int {
	n := make([]int, len(s.Corpus.Classes))
	for _, w := range s.Windows {
		n[w.Label]++
	}
	return n
}

// Label returns window i's class index without building its input.
func (s *Set) Label(i int) int { return s.Windows[i].Label }
