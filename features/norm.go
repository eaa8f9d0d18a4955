package features

import (
	"encoding/json"
	"fmt"
	"math"
	"os"

	"github.com/pipit-audio/pipit/internal/fsutil"
)

// BandStats holds per-band mean and standard deviation of log-mel values
// over a corpus, used to normalise features as (v − Mean[m]) / Std[m].
// Its JSON form is what [BandStats.WriteFile] writes.
type BandStats struct {
	Version int       `json:"version"` // BandStatsVersion
	Frames  int64     `json:"frames"`  // frames accumulated
	Mean    []float64 `json:"mean"`    // (Bands)
	Std     []float64 `json:"std"`     // (Bands), population std, at least MinStd
}

// BandStatsVersion is the version of the BandStats file format.
const BandStatsVersion = 1

// MinStd is the smallest standard deviation [BandStatsAccumulator.Stats]
// reports, so a constant band normalises to 0 rather than to ±Inf.
const MinStd = 1e-6

// BandStatsAccumulator sums log-mel matrices band by band in float64
// (Chan et al.'s pairwise update of mean and M2, so large corpora do not
// lose precision).
type BandStatsAccumulator struct {
	n    int64
	mean []float64
	m2   []float64
}

// NewBandStatsAccumulator returns an accumulator for bands bands.
func NewBandStatsAccumulator(bands int) *BandStatsAccumulator {
	return &BandStatsAccumulator{mean: make([]float64, bands), m2: make([]float64, bands)}
}

// Add accumulates a (Bands, Frames) row-major matrix. It returns an error
// if the band count differs or a value is not finite.
func (a *BandStatsAccumulator) Add(m []float32, frames int) error {
	bands := len(a.mean)
	if frames <= 0 || len(m) != bands*frames {
		return fmt.Errorf("features: band stats: matrix of %d values is not %d bands × %d frames", len(m), bands, frames)
	}
	nb := int64(frames)
	for b := 0; b < bands; b++ {
		row := m[b*frames : (b+1)*frames]
		var s float64
		for _, v := range row {
			if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
				return fmt.Errorf("features: band stats: non-finite value in band %d", b)
			}
			s += float64(v)
		}
		mb := s / float64(nb)
		var m2b float64
		for _, v := range row {
			d := float64(v) - mb
			m2b += d * d
		}
		na := a.n
		n := na + nb
		delta := mb - a.mean[b]
		a.mean[b] += delta * float64(nb) / float64(n)
		a.m2[b] += m2b + delta*delta*float64(na)*float64(nb)/float64(n)
	}
	a.n += nb
	return nil
}

// Stats returns the accumulated statistics; it is an error to call it
// before any frame was added.
func (a *BandStatsAccumulator) Stats() (*BandStats, error) {
	if a.n == 0 {
		return nil, fmt.Errorf("features: band stats: no frames accumulated")
	}
	s := &BandStats{Version: BandStatsVersion, Frames: a.n, Mean: append([]float64(nil), a.mean...), Std: make([]float64, len(a.mean))}
	for b := range s.Std {
		s.Std[b] = math.Max(math.Sqrt(a.m2[b]/float64(a.n)), MinStd)
	}
	return s, nil
}

// Apply normalises a (Bands, Frames) row-major matrix in place. It panics
// if len(m) is not a multiple of the band count.
func (s *BandStats) Apply(m []float32) {
	bands := len(s.Mean)
	if bands == 0 || len(m)%bands != 0 {
		panic(fmt.Sprintf("features: BandStats.Apply: %d values for %d bands", len(m), bands))
	}
	frames := len(m) / bands
	for b := 0; b < bands; b++ {
		mu, inv := float32(s.Mean[b]), float32(1/s.Std[b])
		row := m[b*frames : (b+1)*frames]
		for i, v := range row {
			row[i] = (v - mu) * inv
		}
	}
}

// ParseBandStats decodes and validates the JSON form of BandStats. name
// is used in errors.
func ParseBandStats(name string, data []byte) (*BandStats, error) {
	var s BandStats
	if err := json.Unmarshal(data, &s); err != nil {
		return nil, fmt.Errorf("features: %s: band stats: %w", name, err)
	}
	if s.Version != BandStatsVersion {
		return nil, fmt.Errorf("features: %s: band stats version %d, want %d", name, s.Version, BandStatsVersion)
	}
	if len(s.Mean) == 0 || len(s.Mean) != len(s.Std) {
		return nil, fmt.Errorf("features: %s: band stats have %d means and %d standard deviations", name, len(s.Mean), len(s.Std))
	}
	for b := range s.Mean {
		if math.IsNaN(s.Mean[b]) || math.IsInf(s.Mean[b], 0) || !(s.Std[b] >= MinStd) || math.IsInf(s.Std[b], 0) {
			return nil, fmt.Errorf("features: %s: band %d has mean %g and std %g", name, b, s.Mean[b], s.Std[b])
		}
	}
	return &s, nil
}

// ReadBandStatsFile reads a file written by [BandStats.WriteFile].
func ReadBandStatsFile(path string) (*BandStats, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("features: %w", err)
	}
	return ParseBandStats(path, data)
}

// WriteFile writes s as JSON to path atomically (a temporary file in the
// same directory, then rename), so a crash never leaves a partial file.
func (s *BandStats) WriteFile(path string) error {
	data, err := json.MarshalIndent(s, "", "  ")
	if err != nil {
		return fmt.Errorf("features: %w", err)
	}
	if err := fsutil.WriteFile(path, append(data, '\n')); err != nil {
		return fmt.Errorf("features: %w", err)
	}
	return nil
}
