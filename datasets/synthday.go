package datasets

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"strings"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
)

// DayConfig configures [SynthDay], a long recording of the invented timber
// yard: events of the demo classes at known times and levels over a
// steady pink background. Zero fields take the defaults noted.
type DayConfig struct {
	Seconds      float64 // length, default 600
	RateHz       int     // default 16000
	Seed         uint64
	BackgroundDB float64 // A-weighted level of the background, dB re full scale; default −50
	// A-weighted level of each event's source alone, dB re full scale,
	// drawn uniformly; default −32 … −18.
	MinEventDB, MaxEventDB float64
	// Event length in whole seconds, drawn uniformly; default 3 … 10.
	MinEventSec, MaxEventSec int
	// Gap of background between events, s, drawn uniformly; default 4 … 15.
	MinGapSec, MaxGapSec float64
}

func (c *DayConfig) defaults() {
	if c.Seconds == 0 {
		c.Seconds = 600
	}
	if c.RateHz == 0 {
		c.RateHz = 16000
	}
	if c.BackgroundDB == 0 {
		c.BackgroundDB = -50
	}
	if c.MinEventDB == 0 && c.MaxEventDB == 0 {
		c.MinEventDB, c.MaxEventDB = -32, -18
	}
	if c.MinEventSec == 0 && c.MaxEventSec == 0 {
		c.MinEventSec, c.MaxEventSec = 3, 10
	}
	if c.MinGapSec == 0 && c.MaxGapSec == 0 {
		c.MinGapSec, c.MaxGapSec = 4, 15
	}
}

// DayEvent is one event of a synthetic day, its ground truth.
type DayEvent struct {
	StartSec float64 `json:"start_s"`
	EndSec   float64 `json:"end_s"`
	Class    string  `json:"class"`
	// LevelDB is the A-weighted equivalent level of the event's source
	// alone over [StartSec, EndSec], dB re full scale, as set by
	// [features.ALevelDBFS] (the frequency-domain weighting).
	LevelDB float64 `json:"level_db"`
}

// DayBackgroundClass is the class of SynthClasses the background of a
// synthetic day belongs to; it has no events of its own.
const DayBackgroundClass = "quiet"

// SynthDay writes a synthetic day at the yard to wavPath (mono 16-bit WAV,
// streamed to disk in bounded memory, atomically) and its ground truth to
// truthPath (CSV: start_s,end_s,class,level_db), and returns the events.
//
// Every event is one of the SynthClasses other than quiet, made of 1 s
// clips of [SynthClip] (each with its own parameters, as in the training
// corpus, at 60 dB SNR so the clip's own background is negligible), each
// clip scaled to the same A-weighted level and joined with 10 ms
// cross-fades; the event is then scaled to its drawn level and added to
// the background (Voss–McCartney pink noise at BackgroundDB). Events never
// overlap and are separated by background.
func SynthDay(wavPath, truthPath string, cfg DayConfig) ([]DayEvent, error) {
	cfg.defaults()
	switch {
	case !(cfg.Seconds >= 10 && cfg.Seconds <= 48*3600):
		return nil, corpusErr("day of %g s outside 10 s … 48 h", cfg.Seconds)
	case cfg.RateHz < 8000 || cfg.RateHz > 192000:
		return nil, corpusErr("rate %d Hz outside 8000..192000", cfg.RateHz)
	case cfg.MinEventSec < 1 || cfg.MaxEventSec < cfg.MinEventSec:
		return nil, corpusErr("event lengths %d … %d s", cfg.MinEventSec, cfg.MaxEventSec)
	case !(cfg.MinGapSec >= 0.5 && cfg.MaxGapSec >= cfg.MinGapSec):
		return nil, corpusErr("gaps %g … %g s (want at least 0.5 s)", cfg.MinGapSec, cfg.MaxGapSec)
	case !(cfg.MaxEventDB >= cfg.MinEventDB && cfg.MaxEventDB < 0 && cfg.BackgroundDB < cfg.MinEventDB):
		return nil, corpusErr("event levels %g … %g dB over a background of %g dB", cfg.MinEventDB, cfg.MaxEventDB, cfg.BackgroundDB)
	}
	rng := rand.New(rand.NewPCG(cfg.Seed, 0xda7))
	fs := cfg.RateHz
	total := int(cfg.Seconds * float64(fs))
	var classes []int
	for k, name := range SynthClasses {
		if name != DayBackgroundClass {
			classes = append(classes, k)
		}
	}
	// The plan: gap, event, gap, event, … until the day is full.
	var events []DayEvent
	for t := uniform(rng, cfg.MinGapSec, cfg.MaxGapSec); ; {
		dur := cfg.MinEventSec + rng.IntN(cfg.MaxEventSec-cfg.MinEventSec+1)
		if t+float64(dur)+cfg.MinGapSec > cfg.Seconds {
			break
		}
		start := math.Round(t*float64(fs)) / float64(fs)
		events = append(events, DayEvent{StartSec: start, EndSec: start + float64(dur),
			Class: SynthClasses[classes[rng.IntN(len(classes))]], LevelDB: uniform(rng, cfg.MinEventDB, cfg.MaxEventDB)})
		t += float64(dur) + uniform(rng, cfg.MinGapSec, cfg.MaxGapSec)
	}

	w, err := features.CreateWAV(wavPath, fs)
	if err != nil {
		return nil, err
	}
	bg := newPinkStream(rand.New(rand.NewPCG(cfg.Seed, 0xb9)))
	bgGain, err := bg.gainFor(cfg.BackgroundDB, fs)
	if err != nil {
		w.Abort()
		return nil, err
	}
	block := make([]float32, fs)
	writeBG := func(n int) error {
		for n > 0 {
			k := min(n, len(block))
			for i := range block[:k] {
				block[i] = float32(bgGain * bg.next())
			}
			if err := w.Write(block[:k]); err != nil {
				return err
			}
			n -= k
		}
		return nil
	}
	pos := 0
	for i := range events {
		e := &events[i]
		s0, s1 := int(math.Round(e.StartSec*float64(fs))), int(math.Round(e.EndSec*float64(fs)))
		if err := writeBG(s0 - pos); err != nil {
			w.Abort()
			return nil, err
		}
		src, err := dayEvent(e, fs, s1-s0, cfg.Seed, i)
		if err != nil {
			w.Abort()
			return nil, err
		}
		out := make([]float32, len(src))
		for j, v := range src {
			out[j] = float32(v + bgGain*bg.next())
		}
		if err := w.Write(out); err != nil {
			w.Abort()
			return nil, err
		}
		pos = s1
	}
	if err := writeBG(total - pos); err != nil {
		w.Abort()
		return nil, err
	}
	if err := w.Close(); err != nil {
		return nil, err
	}
	err = fsutil.WriteWith(truthPath, func(wr io.Writer) error {
		cw := csv.NewWriter(wr)
		cw.Write([]string{"start_s", "end_s", "class", "level_db"})
		for _, e := range events {
			cw.Write([]string{fmt.Sprintf("%.4f", e.StartSec), fmt.Sprintf("%.4f", e.EndSec), e.Class, fmt.Sprintf("%.2f", e.LevelDB)})
		}
		cw.Flush()
		return cw.Error()
	})
	if err != nil {
		return nil, fmt.Errorf("datasets: %w", err)
	}
	return events, nil
}

// dayEvent builds the source of event e, n samples long, at its level.
func dayEvent(e *DayEvent, fs, n int, seed uint64, index int) ([]float64, error) {
	class := -1
	for k, name := range SynthClasses {
		if name == e.Class {
			class = k
		}
	}
	fade := fs / 100 // 10 ms
	clipCfg := SynthConfig{Seconds: 1 + float64(fade)/float64(fs), RateHz: fs, MinSNRdB: 60, MaxSNRdB: 60}
	src := make([]float64, n)
	for at, k := 0, 0; at < n; at, k = at+fs, k+1 {
		rng := rand.New(rand.NewPCG(seed^0x5eed, uint64(index)<<20|uint64(k)))
		clip := SynthClip(class, clipCfg, rng)
		l, err := features.ALevelDBFS(clip, fs)
		if err != nil {
			return nil, err
		}
		g := math.Pow(10, -l/20) // every clip at 0 dB before the event gain
		for j, v := range clip {
			if at+j >= n {
				break
			}
			a := 1.0
			if j < fade && at > 0 {
				a = float64(j) / float64(fade) // fade in over the previous clip's tail
			}
			if j >= fs { // the tail overlaps the next clip, fading out
				a = 1 - float64(j-fs)/float64(fade)
			}
			src[at+j] += a * g * float64(v)
		}
	}
	for j := 0; j < fade && j < n; j++ { // the event's own ends
		r := float64(j) / float64(fade)
		src[j] *= r
		src[n-1-j] *= r
	}
	x := make([]float32, n)
	for j, v := range src {
		x[j] = float32(v)
	}
	l, err := features.ALevelDBFS(x, fs)
	if err != nil {
		return nil, err
	}
	g := math.Pow(10, (e.LevelDB-l)/20)
	for j := range src {
		src[j] *= g
	}
	return src, nil
}

// pinkStream is the Voss–McCartney pink noise of pinkNoise as an endless
// stream (common practice).
type pinkStream struct {
	rng *rand.Rand
	v   [16]float64
	sum float64
	i   uint64
}

func newPinkStream(rng *rand.Rand) *pinkStream {
	p := &pinkStream{rng: rng}
	for k := range p.v {
		p.v[k] = rng.NormFloat64()
		p.sum += p.v[k]
	}
	return p
}

func (p *pinkStream) next() float64 {
	if p.i > 0 {
		k := 0
		for j := p.i; j&1 == 0 && k < len(p.v)-1; j >>= 1 {
			k++
		}
		p.sum -= p.v[k]
		p.v[k] = p.rng.NormFloat64()
		p.sum += p.v[k]
	}
	p.i++
	return p.sum + p.rng.NormFloat64()
}

// gainFor returns the gain that puts the stream's A-weighted level at
// levelDB, measured on 10 s of a copy of its generator's output (the
// stream itself is not advanced).
func (p *pinkStream) gainFor(levelDB float64, fs int) (float64, error) {
	probe := newPinkStream(rand.New(rand.NewPCG(0x9e37, 0x79b9)))
	x := make([]float32, 10*fs)
	for i := range x {
		x[i] = float32(probe.next())
	}
	l, err := features.ALevelDBFS(x, fs)
	if err != nil {
		return 0, err
	}
	return math.Pow(10, (levelDB-l)/20), nil
}

// String describes c.
func (c DayConfig) String() string {
	c.defaults()
	return strings.TrimSpace(fmt.Sprintf("%.0f s at %d Hz, background %.0f dB, events %.0f … %.0f dB of %d … %d s", c.Seconds, c.RateHz, c.BackgroundDB, c.MinEventDB, c.MaxEventDB, c.MinEventSec, c.MaxEventSec))
}
