package features

import "math"

// Mel scale names accepted by [Config].MelScale and [HzToMel].
const (
	MelHTK    = "htk"
	MelSlaney = "slaney"
)

// Constants of the Slaney (Auditory Toolbox) mel scale, in the continuous
// form of D. P. W. Ellis's hz2mel.m (rastamat, 2005), written "to match
// Slaney's Auditory Toolbox mfcc.m": linear at 200/3 Hz per mel below
// 1 kHz, logarithmic above with 27 steps from 1 kHz to 6.4 kHz.
const (
	slaneyHzPerMel = 200.0 / 3.0
	slaneyBreakHz  = 1000.0
	slaneyBreakMel = slaneyBreakHz / slaneyHzPerMel // 15
)

var slaneyLogStep = math.Log(6.4) / 27 // ln of 1.0711703, Ellis hz2mel.m

// HzToMel converts a frequency in Hz to mels.
//
// "htk" is mel(f) = 2595·log10(1 + f/700) (HTK Book, eq. 5.13, after
// O'Shaughnessy 1987); "slaney" is f/(200/3) below 1 kHz and
// 15 + ln(f/1000)/(ln(6.4)/27) above, after Slaney's Auditory Toolbox
// (Technical Report 1998-010). Any other scale name panics: scale names are
// validated by [Config.Validate] before they reach here.
func HzToMel(scale string, hz float64) float64 {
	switch scale {
	case MelHTK:
		return 2595 * math.Log10(1+hz/700)
	case MelSlaney:
		if hz < slaneyBreakHz {
			return hz / slaneyHzPerMel
		}
		return slaneyBreakMel + math.Log(hz/slaneyBreakHz)/slaneyLogStep
	}
	panic("features: HzToMel: unknown mel scale " + scale)
}

// MelToHz is the inverse of [HzToMel]; it panics on the same input.
func MelToHz(scale string, mel float64) float64 {
	switch scale {
	case MelHTK:
		return 700 * (math.Pow(10, mel/2595) - 1)
	case MelSlaney:
		if mel < slaneyBreakMel {
			return mel * slaneyHzPerMel
		}
		return slaneyBreakHz * math.Exp(slaneyLogStep*(mel-slaneyBreakMel))
	}
	panic("features: MelToHz: unknown mel scale " + scale)
}

// MelFilter is one triangular band of a [MelFilterbank]: Weights[i]
// applies to spectrum bin Start+i.
type MelFilter struct {
	Start   int
	Weights []float64
	// LowHz, CentreHz and HighHz are the triangle's corners.
	LowHz, CentreHz, HighHz float64
}

// MelFilterbank returns bands triangular filters over the fftSize/2+1 bins
// of a real FFT at rateHz.
//
// Band edges are bands+2 points equally spaced on the chosen mel scale
// from fMinHz to fMaxHz; band m rises linearly in Hz from edge m to a peak
// of 1 at edge m+1 and falls to 0 at edge m+2, evaluated at bin
// frequencies k·rateHz/fftSize. With areaNorm each triangle is scaled by
// 2/(high-low) so it has unit area in Hz (Slaney's mfcc.m
// "triangle_height"). A band narrower than one bin can be all zero; that
// is allowed (it reads silence) but reported by [Config.Validate] as an
// error, because such a setting is almost always a mistake.
//
// It allocates; inputs are assumed validated by [Config.Validate] and an
// unknown scale panics as in [HzToMel].
func MelFilterbank(scale string, bands, fftSize, rateHz int, fMinHz, fMaxHz float64, areaNorm bool) []MelFilter {
	lo, hi := HzToMel(scale, fMinHz), HzToMel(scale, fMaxHz)
	edges := make([]float64, bands+2)
	for i := range edges {
		edges[i] = MelToHz(scale, lo+(hi-lo)*float64(i)/float64(bands+1))
	}
	nBins := fftSize/2 + 1
	binHz := float64(rateHz) / float64(fftSize)
	out := make([]MelFilter, bands)
	for m := range out {
		l, c, h := edges[m], edges[m+1], edges[m+2]
		scaleBy := 1.0
		if areaNorm {
			scaleBy = 2 / (h - l)
		}
		first := -1
		var w []float64
		for k := 0; k < nBins; k++ {
			f := float64(k) * binHz
			v := math.Min((f-l)/(c-l), (h-f)/(h-c))
			if v <= 0 {
				if first >= 0 {
					break
				}
				continue
			}
			if first < 0 {
				first = k
			}
			w = append(w, v*scaleBy)
		}
		if first < 0 {
			first = 0
		}
		out[m] = MelFilter{Start: first, Weights: w, LowHz: l, CentreHz: c, HighHz: h}
	}
	return out
}
