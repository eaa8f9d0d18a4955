package datasets

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/dsp/fourier"
)

// HardSynthClasses are the classes of the hard synthetic timber-yard
// corpus ([SynthConfig].Hard). Beside the demo classes it has pairs that
// share spectrum or time structure: two saws, two impulsive tools, two
// diesel engines, and a planer whose blade noise sits where rain and the
// saws sit.
var HardSynthClasses = []string{
	"circular_saw",    // tonal whine with load dips
	"band_saw",        // steady whine in the same range with blade ticks, no dips
	"planer",          // broadband noise modulated at the blade-passing rate
	"hammering",       // decaying bursts every 0.15–0.4 s
	"nail_gun",        // sharp shot plus a pneumatic hiss, irregular
	"idling_diesel",   // steady low harmonic series
	"forklift_engine", // diesel harmonic series whose firing rate sweeps
	"reversing_alarm", // periodic tone bursts in the saws' range
	"bird_calls",      // frequency-modulated chirps
	"rain",            // filtered noise with droplets
	"voices",          // glottal source through formants
	"quiet",           // background only
}

// Ranges of the hard corpus (derived here by tuning; see the README's
// recipe section for the accuracy they give).
const (
	hardMinSNRdB, hardMaxSNRdB = 0.0, 15.0  // event over background
	hardMinLevelDB             = -33.0      // peak level, dB re full scale,
	hardMaxLevelDB             = -3.0       // a 30 dB spread
	hardMinRT60, hardMaxRT60   = 0.2, 1.0   // reverberation time, s
	hardMinDRRdB, hardMaxDRRdB = -4.0, 10.0 // direct-to-reverberant ratio
	hardDistractorProb         = 0.45       // chance of a second, weaker event
	hardSkew                   = 0.4        // smallest class count over the largest
)

// hardClipsForClass returns the clip count of class k of K in the hard
// corpus: n·r^(k/(K−1)) with r = hardSkew, so the corpus is skewed the
// way field recordings are (many of the common sources, few of the rare).
func hardClipsForClass(n, k, classes int) int {
	c := int(math.Round(float64(n) * math.Pow(hardSkew, float64(k)/float64(classes-1))))
	return max(c, 1)
}

// HardSynthClip generates one clip of class (an index into
// HardSynthClasses). The event covers 35–100 % of the clip starting
// anywhere in it; with probability 0.45 a weaker event of another class
// (8–20 dB below) overlaps it; both pass through one room response (the decaying sound of one click)
// (see [roomResponse]), a microphone-and-housing colouring (a high-pass, a
// housing resonance and the demo's spectral tilt), and sit on pink noise
// with a mains-frequency hum at an SNR of 0 to 15 dB. The peak level is
// drawn uniformly in dB over −33 … −3 dB re full scale. It is
// deterministic for a given rng state.
func HardSynthClip(class int, cfg SynthConfig, rng *rand.Rand) []float32 {
	cfg.defaults()
	n := int(cfg.Seconds * float64(cfg.RateHz))
	fs := float64(cfg.RateHz)
	quiet := len(HardSynthClasses) - 1
	src := make([]float64, n)
	if class != quiet {
		hardEvent(src, class, fs, rng)
	}
	if rng.Float64() < hardDistractorProb {
		other := rng.IntN(quiet) // any sounding class but the label
		if other == class {
			other = (other + 1 + rng.IntN(quiet-1)) % quiet
		}
		d := make([]float64, n)
		hardEvent(d, other, fs, rng)
		ps, pd := power(src), power(d)
		g := 1.0
		if ps > 0 && pd > 0 {
			g = math.Sqrt(ps / pd * math.Pow(10, -uniform(rng, 8, 20)/10))
		} else if ps == 0 && pd > 0 {
			// quiet with a far-away event: keep it faint against the background
			g = math.Sqrt(1 / pd * math.Pow(10, -uniform(rng, 6, 15)/10))
		}
		for i := range src {
			src[i] += g * d[i]
		}
	}
	src = reverberate(src, fs, rng)
	micColour(src, fs, rng)
	bg := pinkNoise(n, rng)
	hum(bg, fs, rng)
	micColour(bg, fs, rng)
	ps, pb := power(src), power(bg)
	gain := 1.0
	if ps > 0 && pb > 0 {
		snr := uniform(rng, hardMinSNRdB, hardMaxSNRdB)
		gain = math.Sqrt(ps / pb / math.Pow(10, snr/10))
	} else if ps > 0 {
		gain = 0
	}
	peak := 0.0
	out := make([]float64, n)
	for i := range out {
		out[i] = src[i] + gain*bg[i]
		peak = math.Max(peak, math.Abs(out[i]))
	}
	level := math.Pow(10, uniform(rng, hardMinLevelDB, hardMaxLevelDB)/20)
	x := make([]float32, n)
	for i, v := range out {
		x[i] = float32(v / peak * level)
	}
	return x
}

// hardEvent writes one event of class into x: the source over the whole
// clip, then kept over a random span of 35–100 % of the clip with 20 ms
// raised-cosine fades.
func hardEvent(x []float64, class int, fs float64, rng *rand.Rand) {
	switch HardSynthClasses[class] {
	case "circular_saw":
		synthSaw(x, fs, rng)
	case "band_saw":
		synthBandSaw(x, fs, rng)
	case "planer":
		synthPlaner(x, fs, rng)
	case "hammering":
		synthHammer(x, fs, rng)
	case "nail_gun":
		synthNailGun(x, fs, rng)
	case "idling_diesel":
		synthDiesel(x, fs, rng)
	case "forklift_engine":
		synthForklift(x, fs, rng)
	case "reversing_alarm":
		synthAlarm(x, fs, rng)
	case "bird_calls":
		synthBirds(x, fs, rng)
	case "rain":
		synthRain(x, fs, rng)
	case "voices":
		synthVoices(x, fs, rng)
	}
	n := len(x)
	span := int(uniform(rng, 0.35, 1) * float64(n))
	start := rng.IntN(n - span + 1)
	fade := int(0.02 * fs)
	for i := range x {
		g := 0.0
		if i >= start && i < start+span {
			g = 1
			if d := i - start; d < fade {
				g = 0.5 - 0.5*math.Cos(math.Pi*float64(d)/float64(fade))
			}
			if d := start + span - 1 - i; d < fade {
				g = math.Min(g, 0.5-0.5*math.Cos(math.Pi*float64(d)/float64(fade)))
			}
		}
		x[i] *= g
	}
}

// synthBandSaw: a steady whine in the circular saw's range, weaker upper
// harmonics, a slow wobble of ±1 % and blade ticks at 15–40 Hz.
func synthBandSaw(x []float64, fs float64, rng *rand.Rand) {
	f0, harm := toneRecipe(rng)
	f0 *= uniform(rng, 0.7, 1)
	wob := uniform(rng, 0.5, 3)
	tick := uniform(rng, 15, 40)
	phase, tp := 0.0, rng.Float64()
	for i := range x {
		t := float64(i) / fs
		phase += 2 * math.Pi * f0 * (1 + 0.01*math.Sin(2*math.Pi*wob*t)) / fs
		var v float64
		for h, a := range harm {
			v += a * math.Pow(0.6, float64(h)) * math.Sin(float64(h+1)*phase)
		}
		tp += tick / fs
		if tp >= 1 {
			tp--
		}
		v += 0.8 * math.Exp(-tp*30) * rng.NormFloat64()
		x[i] = v + 0.15*rng.NormFloat64()
	}
}

// synthPlaner: noise through the hammer/rain resonance, amplitude-modulated
// at the blade-passing rate (50–120 Hz), with its tone.
func synthPlaner(x []float64, fs float64, rng *rand.Rand) {
	centre, width := broadband(rng)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	resonator(x, fs, centre, width)
	rate := uniform(rng, 50, 120)
	depth := uniform(rng, 0.3, 0.9)
	for i := range x {
		t := float64(i) / fs
		m := 1 - depth*(0.5+0.5*math.Cos(2*math.Pi*rate*t))
		x[i] = m*x[i] + 0.3*math.Sin(2*math.Pi*rate*2*t)
	}
}

// synthNailGun: shots at irregular intervals (0.12–0.6 s), each a sharp
// click through the shared broadband resonance and an 40–120 ms
// pneumatic hiss.
func synthNailGun(x []float64, fs float64, rng *rand.Rand) {
	centre, width := broadband(rng)
	dur := float64(len(x)) / fs
	click := make([]float64, len(x))
	hiss := make([]float64, len(x))
	hd := uniform(rng, 0.04, 0.12)
	for t := uniform(rng, 0, 0.3); t < dur; t += uniform(rng, 0.12, 0.6) {
		start := int(t * fs)
		a := uniform(rng, 0.6, 1)
		for i := start; i < len(x) && i < start+int(0.006*fs); i++ {
			u := float64(i-start) / fs
			click[i] += 3 * a * math.Exp(-u/0.0015) * rng.NormFloat64()
		}
		for i := start + int(0.005*fs); i < len(x) && i < start+int((hd*4+0.005)*fs); i++ {
			u := float64(i-start)/fs - 0.005
			hiss[i] += 0.4 * a * math.Exp(-u/hd) * rng.NormFloat64()
		}
	}
	resonator(click, fs, centre, width)
	resonator(hiss, fs, uniform(rng, 3000, 7000), 3000)
	for i := range x {
		x[i] = click[i] + hiss[i]
	}
}

// synthForklift: the diesel's harmonic series with the firing rate
// sweeping between 25 and 70 Hz (revving and easing off).
func synthForklift(x []float64, fs float64, rng *rand.Rand) {
	fa, fb := uniform(rng, 25, 45), uniform(rng, 40, 70)
	rate := uniform(rng, 0.5, 2)
	rumble := make([]float64, len(x))
	for i := range rumble {
		rumble[i] = rng.NormFloat64()
	}
	resonator(rumble, fs, uniform(rng, 80, 250), 100)
	phase := 0.0
	off := rng.Float64() * 2 * math.Pi
	for i := range x {
		t := float64(i) / fs
		f := fa + (fb-fa)*(0.5+0.5*math.Sin(2*math.Pi*rate*t+off))
		phase += 2 * math.Pi * f / fs
		var v float64
		for h := 1; h <= 24; h++ {
			v += math.Sin(float64(h)*phase+float64(h)) / float64(h)
		}
		x[i] = v + 3*rumble[i]
	}
}

// roomResponse returns a room response (the decaying sound of one click) after the statistical model
// of late reverberation as exponentially decaying Gaussian noise (Polack
// 1988; Jot, Cerveau & Warusfel 1997, AES 103rd Convention, preprint 4629)
// (from memory): a unit direct path, then from a delay of 2–10 ms noise
// with amplitude envelope exp(−3·ln 10·t/RT60), so its energy falls 60 dB
// in RT60 seconds (the definition of RT60, ISO 3382-2:2008 §3.5), cut at
// −60 dB and at 0.5 s, scaled to the direct-to-reverberant energy ratio
// drr dB.
func roomResponse(fs, rt60, drr float64, rng *rand.Rand) []float64 {
	n := int(math.Min(rt60, 0.5) * fs)
	h := make([]float64, n)
	h[0] = 1
	d0 := int(uniform(rng, 0.002, 0.01) * fs)
	k := 3 * math.Ln10 / (rt60 * fs)
	var e float64
	for i := d0; i < n; i++ {
		h[i] = rng.NormFloat64() * math.Exp(-k*float64(i-d0))
		e += h[i] * h[i]
	}
	if e > 0 {
		g := math.Sqrt(math.Pow(10, -drr/10) / e)
		for i := d0; i < n; i++ {
			h[i] *= g
		}
	}
	return h
}

// reverberate convolves x with a room response of RT60 0.2–1 s and DRR
// −4…10 dB drawn from rng, by FFT, and returns the first len(x) samples.
func reverberate(x []float64, fs float64, rng *rand.Rand) []float64 {
	h := roomResponse(fs, uniform(rng, hardMinRT60, hardMaxRT60), uniform(rng, hardMinDRRdB, hardMaxDRRdB), rng)
	return convolveFFT(x, h)
}

// convolveFFT returns the first len(x) samples of x * h.
func convolveFFT(x, h []float64) []float64 {
	m := 1
	for m < len(x)+len(h)-1 {
		m <<= 1
	}
	fft := fourier.NewFFT(m)
	a := make([]float64, m)
	b := make([]float64, m)
	copy(a, x)
	copy(b, h)
	A := fft.Coefficients(nil, a)
	B := fft.Coefficients(nil, b)
	for i := range A {
		A[i] *= B[i]
	}
	y := fft.Sequence(nil, A)
	out := make([]float64, len(x))
	for i := range out {
		out[i] = y[i] / float64(m) // gonum's inverse is unnormalised
	}
	return out
}

// micColour applies what a microphone in a weatherproof housing does to
// a spectrum: a first-order high-pass at 50–300 Hz, a housing resonance at
// 1–5 kHz mixed in at 0.2–1, then the demo corpus's random tilt.
func micColour(x []float64, fs float64, rng *rand.Rand) {
	fc := uniform(rng, 50, 300)
	a := math.Exp(-2 * math.Pi * fc / fs)
	var prevX, prevY float64
	for i, v := range x {
		y := a * (prevY + v - prevX) // one-pole high-pass
		prevX, prevY = v, y
		x[i] = y
	}
	res := append([]float64(nil), x...)
	resonator(res, fs, uniform(rng, 1000, 5000), uniform(rng, 200, 800))
	g := uniform(rng, 0.2, 1) * 4
	for i := range x {
		x[i] += g * res[i]
	}
	colour(x, fs, rng)
}

// hum adds a mains hum (50 Hz and its odd harmonics, common practice for
// transformer and motor hum) at a random level to background noise b.
func hum(b []float64, fs float64, rng *rand.Rand) {
	a := uniform(rng, 0, 0.6) * math.Sqrt(power(b))
	f := 50.0
	for i := range b {
		t := float64(i) / fs
		b[i] += a * (math.Sin(2*math.Pi*f*t) + 0.5*math.Sin(2*math.Pi*3*f*t) + 0.25*math.Sin(2*math.Pi*5*f*t))
	}
}
