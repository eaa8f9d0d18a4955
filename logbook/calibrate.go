package logbook

import (
	"fmt"
	"io"
	"math"

	"github.com/pipit-audio/pipit/features"
)

// Kinds of [Calibration].
const (
	CalFullScale  = "full_scale" // dB re digital full scale, no offset
	CalOffset     = "offset"     // an offset to SPL given by the user
	CalCalibrator = "calibrator" // offset derived from a calibrator recording
)

// LevelFloorDB stands for the level of digital silence (−∞ dB) in reports,
// since JSON has no infinity.
const LevelFloorDB = -300.0

// Calibration maps levels in dB re full scale to the reported levels:
// reported = dB FS + OffsetDB. The zero value (Kind "") means dB re full
// scale.
type Calibration struct {
	Kind     string  `json:"kind"`
	OffsetDB float64 `json:"offset_db"`
	// For CalCalibrator: the recording, the stated level of the
	// calibrator and the level measured in the recording (dB re full scale).
	CalibratorFile string  `json:"calibrator_file,omitempty"`
	StatedDB       float64 `json:"calibrator_stated_db,omitempty"`
	MeasuredDBFS   float64 `json:"calibrator_measured_dbfs,omitempty"`
}

// Reference returns the unit of the reported levels in words.
func (c Calibration) Reference() string {
	switch c.Kind {
	case CalOffset:
		return fmt.Sprintf("dB re 20 µPa (sound pressure level), offset %+.2f dB given by the user", c.OffsetDB)
	case CalCalibrator:
		return fmt.Sprintf("dB re 20 µPa (sound pressure level), offset %+.2f dB from the calibrator recording %s (stated %.1f dB, read %.2f dB re full scale)", c.OffsetDB, c.CalibratorFile, c.StatedDB, c.MeasuredDBFS)
	default:
		return "dB re digital full scale (uncalibrated; a full-scale sine reads -3.01 dB)"
	}
}

// OffsetCalibration returns the calibration for a known offset from dB re
// full scale to sound pressure level.
func OffsetCalibration(offsetDB float64) (Calibration, error) {
	if math.IsNaN(offsetDB) || math.IsInf(offsetDB, 0) || math.Abs(offsetDB) > 300 {
		return Calibration{}, fmt.Errorf("logbook: calibration offset %g dB", offsetDB)
	}
	return Calibration{Kind: CalOffset, OffsetDB: offsetDB}, nil
}

// calSettleSec is skipped at the start of a calibrator recording (handling
// and the filter's settling); calMaxSpreadDB is the largest L10 − L90 of
// the F level accepted as a steady tone (common practice: a calibrator
// tone is steady to a fraction of a dB).
const (
	calSettleSec   = 0.5
	calMaxSpreadDB = 1.0
)

// CalibratorCalibration reads the recording of an acoustic calibrator at
// path (a steady tone, e.g. 94 dB at 1 kHz) and returns the offset that
// makes its level read statedDB. The level is the Z-weighted (flat) Leq
// after the first 0.5 s, so calibrators at any frequency work; a recording
// whose F level varies by more than 1 dB (L10 − L90) is refused as not a
// steady tone.
func CalibratorCalibration(path string, statedDB float64) (Calibration, error) {
	if !(statedDB > 0 && statedDB < 200) {
		return Calibration{}, fmt.Errorf("logbook: calibrator level %g dB outside 0..200", statedDB)
	}
	r, err := features.OpenWAV(path)
	if err != nil {
		return Calibration{}, err
	}
	defer r.Close()
	m, err := features.NewMeter(features.MeterConfig{RateHz: r.RateHz(), Weighting: features.WeightingZ, TickSec: 0.05})
	if err != nil {
		return Calibration{}, fmt.Errorf("logbook: %s: %w", path, err)
	}
	s := features.LevelSeries{RateHz: r.RateHz(), TickSec: m.Config().TickSec}
	buf := make([]float32, blockSamples)
	for {
		n, err := r.Read(buf)
		s.Ticks = m.Push(s.Ticks, buf[:n])
		if err == io.EOF {
			break
		}
		if err != nil {
			return Calibration{}, err
		}
	}
	s.Ticks = m.Flush(s.Ticks)
	// The spread is judged after five more F time constants, once the F
	// level has settled, over at least half a second.
	from := calSettleSec + 5*features.TauFastSec
	if r.Seconds() < from+0.5 {
		return Calibration{}, fmt.Errorf("logbook: %s: calibrator recording of %.2f s, want at least %.2f s", path, r.Seconds(), from+0.5)
	}
	end := math.Inf(1)
	l := s.Leq(calSettleSec, end)
	if math.IsInf(l, -1) {
		return Calibration{}, fmt.Errorf("logbook: %s: calibrator recording is silent", path)
	}
	if spread := s.Exceeded(from, end, 10) - s.Exceeded(from, end, 90); spread > calMaxSpreadDB {
		return Calibration{}, fmt.Errorf("logbook: %s: level varies by %.1f dB (L10 − L90), not a steady calibrator tone", path, spread)
	}
	return Calibration{Kind: CalCalibrator, OffsetDB: statedDB - l, CalibratorFile: path, StatedDB: statedDB, MeasuredDBFS: l}, nil
}
