package datasets

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
)

// SynthClasses are the classes of the synthetic timber-yard corpus, an
// invented scenario: a noise monitor at the fence of a timber yard. Each
// class differs from the others the way real sources do — in spectrum,
// in temporal structure, or both.
var SynthClasses = []string{
	"circular_saw",    // tonal whine with harmonics, pitch and level dips under load
	"hammering",       // impulsive decaying bursts with a ringing resonance
	"idling_diesel",   // low harmonic series, amplitude-modulated at the firing cycle
	"reversing_alarm", // periodic tone bursts
	"bird_calls",      // frequency-modulated chirps
	"rain",            // filtered noise with droplet transients
	"voices",          // harmonic glottal source through moving formants
	"quiet",           // background only (pink noise)
}

// SynthConfig configures [Synthesize]. Zero fields take the defaults noted.
type SynthConfig struct {
	ClipsPerClass int     // default 40
	Seconds       float64 // clip length, default 1
	RateHz        int     // default 16000
	Folds         int     // default 5
	Seed          uint64
	// SNR range of the source over the background noise, dB; default 0..20.
	// The hard corpus has its own ranges and ignores these.
	MinSNRdB, MaxSNRdB float64
	// Hard selects the hard corpus: [HardSynthClasses] drawn by
	// [HardSynthClip], class k getting ClipsPerClass·0.4^(k/(K−1)) clips.
	Hard bool
}

func (c *SynthConfig) defaults() {
	if c.ClipsPerClass == 0 {
		c.ClipsPerClass = 40
	}
	if c.Seconds == 0 {
		c.Seconds = 1
	}
	if c.RateHz == 0 {
		c.RateHz = 16000
	}
	if c.Folds == 0 {
		c.Folds = 5
	}
	if c.MinSNRdB == 0 && c.MaxSNRdB == 0 {
		c.MinSNRdB, c.MaxSNRdB = 0, 20
	}
}

// SynthClip generates one clip of class (an index into SynthClasses) with
// all its parameters drawn from rng, mixed with pink background noise at an
// SNR drawn from [MinSNRdB, MaxSNRdB] and scaled to a random peak level
// between 0.1 and 0.9. It is deterministic for a given rng state.
func SynthClip(class int, cfg SynthConfig, rng *rand.Rand) []float32 {
	cfg.defaults()
	n := int(cfg.Seconds * float64(cfg.RateHz))
	fs := float64(cfg.RateHz)
	src := make([]float64, n)
	switch SynthClasses[class] {
	case "circular_saw":
		synthSaw(src, fs, rng)
	case "hammering":
		synthHammer(src, fs, rng)
	case "idling_diesel":
		synthDiesel(src, fs, rng)
	case "reversing_alarm":
		synthAlarm(src, fs, rng)
	case "bird_calls":
		synthBirds(src, fs, rng)
	case "rain":
		synthRain(src, fs, rng)
	case "voices":
		synthVoices(src, fs, rng)
	case "quiet":
		// background only
	}
	colour(src, fs, rng)
	bg := pinkNoise(n, rng)
	colour(bg, fs, rng)
	out := make([]float64, n)
	ps, pb := power(src), power(bg)
	gain := 0.0
	if ps > 0 && pb > 0 {
		snr := cfg.MinSNRdB + rng.Float64()*(cfg.MaxSNRdB-cfg.MinSNRdB)
		gain = math.Sqrt(ps / pb / math.Pow(10, snr/10))
	} else {
		gain = 1
	}
	peak := 0.0
	for i := range out {
		out[i] = src[i] + gain*bg[i]
		peak = math.Max(peak, math.Abs(out[i]))
	}
	level := 0.1 + 0.8*rng.Float64()
	if class == len(SynthClasses)-1 {
		level = 0.02 + 0.2*rng.Float64() // quiet is quiet
	}
	x := make([]float32, n)
	for i, v := range out {
		x[i] = float32(v / peak * level)
	}
	return x
}

// colour applies a random first-order tilt to x in place, the way distance,
// walls and the microphone change a source's spectrum: a one-pole low-pass
// with its corner between 1 and 8 kHz mixed with the dry signal, so the
// level above the corner falls by 0 to about 12 dB.
func colour(x []float64, fs float64, rng *rand.Rand) {
	fc := uniform(rng, 1000, 8000)
	dry := uniform(rng, 0.25, 1)
	a := math.Exp(-2 * math.Pi * fc / fs)
	var y float64
	for i, v := range x {
		y = (1-a)*v + a*y
		x[i] = dry*v + (1-dry)*y*2
	}
}

func power(x []float64) float64 {
	var s float64
	for _, v := range x {
		s += v * v
	}
	return s / float64(len(x))
}

// pinkNoise approximates 1/f noise by the Voss–McCartney method: the sum of
// 16 random values, value k redrawn every 2^k samples (common practice).
func pinkNoise(n int, rng *rand.Rand) []float64 {
	const rows = 16
	var v [rows]float64
	var sum float64
	for k := range v {
		v[k] = rng.NormFloat64()
		sum += v[k]
	}
	out := make([]float64, n)
	for i := range out {
		// redraw the row given by the trailing zeros of i (Voss–McCartney)
		if i > 0 {
			k := 0
			for j := i; j&1 == 0 && k < rows-1; j >>= 1 {
				k++
			}
			sum -= v[k]
			v[k] = rng.NormFloat64()
			sum += v[k]
		}
		out[i] = sum + rng.NormFloat64()
	}
	return out
}

// resonator filters x in place through a two-pole resonance at f Hz with
// bandwidth bw Hz: y[n] = x[n] + 2r·cos θ·y[n−1] − r²·y[n−2], r = e^(−π·bw/fs).
func resonator(x []float64, fs, f, bw float64) {
	r := math.Exp(-math.Pi * bw / fs)
	a1, a2 := 2*r*math.Cos(2*math.Pi*f/fs), -r*r
	g := 1 - r
	var y1, y2 float64
	for i, v := range x {
		y := g*v + a1*y1 + a2*y2
		y2, y1 = y1, y
		x[i] = y
	}
}

func uniform(rng *rand.Rand, a, b float64) float64 { return a + (b-a)*rng.Float64() }

// toneRecipe draws the pitch and harmonic amplitudes shared by the saw and
// the alarm, so the two differ in time structure, not in spectrum.
func toneRecipe(rng *rand.Rand) (f0 float64, harm []float64) {
	f0 = uniform(rng, 700, 3000)
	harm = []float64{1, uniform(rng, 0.2, 0.7), uniform(rng, 0.1, 0.5), uniform(rng, 0.05, 0.3)}
	return f0, harm
}

func synthSaw(x []float64, fs float64, rng *rand.Rand) {
	f0, harm := toneRecipe(rng)
	// one or two load dips: pitch falls by up to 15 %, level rises with cutting noise
	type dip struct{ at, width, depth float64 }
	var dips []dip
	for k := 0; k < 1+rng.IntN(2); k++ {
		dips = append(dips, dip{uniform(rng, 0.1, 0.9), uniform(rng, 0.05, 0.2), uniform(rng, 0.05, 0.15)})
	}
	dur := float64(len(x)) / fs
	phase := 0.0
	for i := range x {
		t := float64(i) / fs
		load := 0.0
		for _, d := range dips {
			u := (t/dur - d.at) / d.width
			load += d.depth * math.Exp(-u*u)
		}
		phase += 2 * math.Pi * f0 * (1 - load) / fs
		var v float64
		for h, a := range harm {
			v += a * math.Sin(float64(h+1)*phase)
		}
		x[i] = v + 1.2*load*rng.NormFloat64()
	}
}

// broadband draws the resonance shared by hammering and rain, so the two
// differ in time structure (bursts against a steady patter), not spectrum.
func broadband(rng *rand.Rand) (centre, width float64) {
	return uniform(rng, 1500, 5000), uniform(rng, 1500, 4000)
}

func synthHammer(x []float64, fs float64, rng *rand.Rand) {
	centre, width := broadband(rng)
	ring := uniform(rng, 800, 4000)
	decay := uniform(rng, 0.015, 0.05)
	period := uniform(rng, 0.15, 0.4)
	t := uniform(rng, 0, period)
	dur := float64(len(x)) / fs
	burst := make([]float64, len(x))
	for ; t < dur; t += period * uniform(rng, 0.8, 1.2) {
		a := uniform(rng, 0.5, 1)
		start := int(t * fs)
		for i := start; i < len(x) && i < start+int(6*decay*fs); i++ {
			u := float64(i-start) / fs
			e := a * math.Exp(-u/decay)
			burst[i] += e * (rng.NormFloat64() + 0.7*math.Sin(2*math.Pi*ring*u))
		}
	}
	hiss := make([]float64, len(burst))
	for i := range hiss {
		hiss[i] = burst[i]
	}
	resonator(burst, fs, centre, width)
	for i := range x {
		x[i] = burst[i] + 0.3*hiss[i]
	}
}

func synthDiesel(x []float64, fs float64, rng *rand.Rand) {
	f0 := uniform(rng, 18, 40)   // firing frequency
	am := uniform(rng, 0.3, 0.8) // modulation depth at half the firing rate
	rumble := make([]float64, len(x))
	for i := range rumble {
		rumble[i] = rng.NormFloat64()
	}
	resonator(rumble, fs, uniform(rng, 80, 200), 80)
	for i := range x {
		t := float64(i) / fs
		var v float64
		for h := 1; h <= 24; h++ {
			v += math.Sin(2*math.Pi*f0*float64(h)*t+float64(h)) / float64(h)
		}
		env := 1 - am*(0.5+0.5*math.Sin(2*math.Pi*f0/2*t))
		x[i] = env * (v + 3*rumble[i])
	}
}

func synthAlarm(x []float64, fs float64, rng *rand.Rand) {
	f, harm := toneRecipe(rng)
	period := uniform(rng, 0.3, 0.6)
	duty := uniform(rng, 0.4, 0.6)
	off := uniform(rng, 0, period)
	for i := range x {
		t := float64(i)/fs + off
		ph := math.Mod(t, period) / period
		on := 0.0
		if ph < duty {
			on = 1
		}
		var v float64
		for h, a := range harm {
			v += a * math.Sin(2*math.Pi*f*float64(h+1)*t)
		}
		x[i] = on * v
	}
}

func synthBirds(x []float64, fs float64, rng *rand.Rand) {
	dur := float64(len(x)) / fs
	for k := 0; k < 2+rng.IntN(5); k++ {
		start := uniform(rng, 0, dur*0.85)
		length := uniform(rng, 0.04, 0.2)
		f1, f2 := uniform(rng, 2000, 6500), uniform(rng, 2000, 6500)
		vib, vibRate := uniform(rng, 0, 300), uniform(rng, 20, 60)
		a := uniform(rng, 0.5, 1)
		phase := 0.0
		for i := int(start * fs); i < len(x) && float64(i)/fs < start+length; i++ {
			u := (float64(i)/fs - start) / length
			f := f1 + (f2-f1)*u + vib*math.Sin(2*math.Pi*vibRate*u*length)
			phase += 2 * math.Pi * f / fs
			x[i] += a * math.Sin(math.Pi*u) * math.Sin(phase)
		}
	}
}

func synthRain(x []float64, fs float64, rng *rand.Rand) {
	centre, width := broadband(rng)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	hiss := append([]float64(nil), x...)
	resonator(x, fs, centre, width)
	for i := range x {
		x[i] += 0.3 * hiss[i]
	}
	// droplets: many short clicks ringing briefly
	for k := 0; k < 40+rng.IntN(120); k++ {
		at := rng.IntN(len(x))
		f := uniform(rng, 1500, 7000)
		a := uniform(rng, 0.5, 3)
		for j := 0; j < int(0.004*fs) && at+j < len(x); j++ {
			u := float64(j) / fs
			x[at+j] += a * math.Exp(-u/0.001) * math.Sin(2*math.Pi*f*u)
		}
	}
}

func synthVoices(x []float64, fs float64, rng *rand.Rand) {
	f0 := uniform(rng, 95, 260)
	src := make([]float64, len(x))
	phase := 0.0
	for i := range src {
		t := float64(i) / fs
		f := f0 * (1 + 0.08*math.Sin(2*math.Pi*uniform(rng, 0.98, 1.02)*3*t))
		phase += f / fs
		if phase >= 1 {
			phase -= 1
			src[i] = 1 // glottal pulse
		}
	}
	// vowels: formant triples (F1, F2, F3) of /a/, /i/, /u/, /e/, /o/ for an
	// adult voice (typical values, common practice)
	vowels := [][3]float64{{730, 1090, 2440}, {270, 2290, 3010}, {300, 870, 2240}, {530, 1840, 2480}, {570, 840, 2410}}
	seg := int(uniform(rng, 0.12, 0.25) * fs)
	for s := 0; s < len(x); s += seg {
		e := min(s+seg, len(x))
		v := vowels[rng.IntN(len(vowels))]
		for _, f := range v {
			part := append([]float64(nil), src[s:e]...)
			resonator(part, fs, f*uniform(rng, 0.9, 1.1), 90)
			for i, p := range part {
				x[s+i] += p
			}
		}
	}
	// syllable rhythm about 4 Hz
	rate := uniform(rng, 3, 5)
	for i := range x {
		t := float64(i) / fs
		x[i] *= 0.3 + 0.7*math.Max(0, math.Sin(2*math.Pi*rate*t))
	}
}

// Synthesize writes cfg.ClipsPerClass clips of every class in
// [SynthClasses] into dir/<class>/<class>_NNN.wav (16-bit PCM) and a
// manifest dir/manifest.csv with columns path,label,fold,group, folds
// assigned by [Corpus.AssignFolds] from the seed. It creates dir if needed
// and returns the corpus. progress, if not nil, is called after each clip.
func Synthesize(dir string, cfg SynthConfig, progress func(done, total int)) (*Corpus, error) {
	cfg.defaults()
	switch {
	case cfg.ClipsPerClass < 1 || cfg.ClipsPerClass > 100000:
		return nil, corpusErr("clips per class %d outside 1..100000", cfg.ClipsPerClass)
	case !(cfg.Seconds >= 0.1 && cfg.Seconds <= 600):
		return nil, corpusErr("clip length %g s outside 0.1..600", cfg.Seconds)
	case cfg.RateHz < 4000 || cfg.RateHz > 192000:
		return nil, corpusErr("rate %d Hz outside 4000..192000", cfg.RateHz)
	}
	classes, clip, count := SynthClasses, SynthClip, func(int) int { return cfg.ClipsPerClass }
	if cfg.Hard {
		classes, clip = HardSynthClasses, HardSynthClip
		count = func(k int) int { return hardClipsForClass(cfg.ClipsPerClass, k, len(HardSynthClasses)) }
	}
	total := 0
	for k := range classes {
		total += count(k)
	}
	if cfg.Folds < 2 || cfg.Folds > total {
		return nil, corpusErr("%d folds for %d clips", cfg.Folds, total)
	}
	c := &Corpus{Source: filepath.Join(dir, "manifest.csv"), Classes: append([]string(nil), classes...)}
	for k, name := range classes {
		if err := os.MkdirAll(filepath.Join(dir, name), 0o755); err != nil {
			return nil, fmt.Errorf("datasets: %w", err)
		}
		for i := 0; i < count(k); i++ {
			// one RNG per clip, so any clip can be regenerated alone
			rng := rand.New(rand.NewPCG(cfg.Seed, uint64(k)<<32|uint64(i)))
			x := clip(k, cfg, rng)
			rel := filepath.Join(name, fmt.Sprintf("%s_%03d.wav", name, i))
			if err := features.WriteWAVFile(filepath.Join(dir, rel), x, cfg.RateHz); err != nil {
				return nil, err
			}
			c.Clips = append(c.Clips, Clip{ID: len(c.Clips), Path: filepath.Join(dir, rel), Label: k, Group: filepath.ToSlash(rel)})
			if progress != nil {
				progress(len(c.Clips), total)
			}
		}
	}
	if err := c.AssignFolds(cfg.Folds, cfg.Seed); err != nil {
		return nil, err
	}
	err := fsutil.WriteWith(c.Source, func(w io.Writer) error {
		cw := csv.NewWriter(w)
		cw.Write([]string{"path", "label", "fold", "group"})
		for _, cl := range c.Clips {
			rel, _ := filepath.Rel(dir, cl.Path)
			cw.Write([]string{filepath.ToSlash(rel), c.Classes[cl.Label], c.FoldLabel(cl.Fold), cl.Group})
		}
		cw.Flush()
		return cw.Error()
	})
	if err != nil {
		return nil, fmt.Errorf("datasets: %w", err)
	}
	return c, nil
}
