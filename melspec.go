package pipit

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strconv"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/internal/plots"
)

// PlotColumns is the most columns the heat maps of [Melspec] and
// [Timeline] draw. Up to that many frames or windows each has its own
// column; beyond it each column is the mean of 2^k consecutive ones (the
// smallest k that fits), so the figure's memory does not grow with the
// recording. 2048 columns are 33 s of frames at the default 16 ms hop and
// 17 minutes of 1 s windows at 50 % overlap; the figure is about 770
// pixels wide.
const PlotColumns = 2048

// readBlockSamples is the block [Melspec] and [Timeline] read at a time.
const readBlockSamples = 1 << 15

// MelspecResult is what [Melspec] measured and wrote; its JSON form is
// what `pipit melspec --json` prints.
type MelspecResult struct {
	Input       string  `json:"input"`
	InputRateHz int     `json:"input_rate_hz"`
	Channels    int     `json:"input_channels"`
	Seconds     float64 `json:"seconds"`
	// LevelA is the A-weighted level of the input in dB relative to
	// digital full scale ([features.ALevelMeter] at the file's own rate):
	// an indicative digital level, not a sound pressure level. It is nil
	// (JSON null) for digital silence, which has no level (−∞ dB).
	LevelA   *float64        `json:"level_a_dbfs"`
	Settings features.Config `json:"settings"`
	Frames   int             `json:"frames"`
	Bands    int             `json:"bands"`
	CSV      string          `json:"csv"`
	PNG      string          `json:"png"`
}

// openResampled opens the WAV file at in and returns it with a
// streaming resampler to rateHz (nil when the file is at that rate).
func openResampled(in string, rateHz int) (*features.WAVReader, *features.ResampleStream, error) {
	r, err := features.OpenWAV(in)
	if err != nil {
		return nil, nil, err
	}
	if r.RateHz() == rateHz {
		return r, nil, nil
	}
	res, err := features.NewResampler(r.RateHz(), rateHz)
	if err != nil {
		r.Close()
		return nil, nil, fmt.Errorf("pipit: %s: %w", in, err)
	}
	return r, res.NewStream(), nil
}

// Melspec reads the WAV file in block by block, mixes it to mono,
// resamples it to cfg's rate when needed and writes its log-mel matrix
// as prefix+".csv" (one row per frame, one column per band, no header;
// encoding/csv) and prefix+".png" (time on x, bands on y, colour bar; see
// [PlotColumns]), and measures the input's A-weighted level. The matrix
// is [features.Extractor.Compute]'s bit for bit ([features.MatrixStream]),
// rows are written as their frames arrive, and memory does not grow with
// the recording. Both files are written beside their targets and put in
// place together, only once everything has succeeded (the result too can
// be written as JSON); a failure leaves any existing files as they were.
// Errors name the file.
func Melspec(in, prefix string, cfg features.Config) (*MelspecResult, error) {
	r, rs, err := openResampled(in, cfg.SampleRateHz)
	if err != nil {
		return nil, err
	}
	defer r.Close()
	ms, err := features.NewMatrixStream(cfg)
	if err != nil {
		return nil, err
	}
	meter, err := features.NewALevelMeter(r.RateHz())
	if err != nil {
		return nil, fmt.Errorf("pipit: %s: %w", in, err)
	}
	res := &MelspecResult{Input: in, InputRateHz: r.RateHz(), Channels: r.Channels(), Seconds: r.Seconds(),
		Settings: cfg, Bands: cfg.Bands, CSV: prefix + ".csv", PNG: prefix + ".png"}
	var outs fsutil.Outputs
	defer outs.Abort()
	csvOut, err := outs.Create(res.CSV)
	if err != nil {
		return nil, err
	}
	pngOut, err := outs.Create(res.PNG)
	if err != nil {
		return nil, err
	}
	cw := csv.NewWriter(csvOut)
	cols := plots.NewColumns(cfg.Bands, PlotColumns)
	row := make([]string, cfg.Bands)
	var num []byte
	buf := make([]float32, readBlockSamples)
	var rbuf, frames []float32
	for {
		n, rerr := r.Read(buf)
		if rerr != nil && rerr != io.EOF {
			return nil, rerr
		}
		x := buf[:n]
		meter.Push(x)
		if rs != nil {
			rbuf = rs.Push(rbuf[:0], x)
			if rerr == io.EOF {
				rbuf = rs.Flush(rbuf)
			}
			x = rbuf
		}
		frames = ms.Push(frames[:0], x)
		if rerr == io.EOF {
			frames = ms.Flush(frames)
		}
		for f := 0; f+cfg.Bands <= len(frames); f += cfg.Bands {
			frame := frames[f : f+cfg.Bands]
			for b, v := range frame {
				num = strconv.AppendFloat(num[:0], float64(v), 'g', 7, 32)
				row[b] = string(num)
			}
			cw.Write(row)
			cols.Add(frame)
		}
		if cw.Flush(); cw.Error() != nil {
			return nil, fmt.Errorf("writing %s: %w", res.CSV, cw.Error())
		}
		if rerr == io.EOF {
			break
		}
	}
	res.Frames = ms.Emitted()
	if res.Frames == 0 {
		return nil, fmt.Errorf("pipit: %s: %d samples at %d Hz, shorter than one %d-sample window", in, ms.Samples(), cfg.SampleRateHz, cfg.WindowSamples)
	}
	level, err := meter.LevelDBFS()
	if err != nil {
		return nil, fmt.Errorf("pipit: %s: %w", in, err)
	}
	if !math.IsInf(level, 0) && !math.IsNaN(level) {
		res.LevelA = &level
	}
	if err := reportable(in, res); err != nil {
		return nil, err
	}
	if err := melFigure(cols, cfg, filepath.Base(in)).WritePNG(pngOut); err != nil {
		return nil, fmt.Errorf("writing %s: %w", res.PNG, err)
	}
	if err := outs.Commit(); err != nil {
		return nil, err
	}
	return res, nil
}

// reportable checks that res can be written as JSON (the commands print
// it), so that a result that could not be reported leaves no outputs
// either.
func reportable(in string, res any) error {
	if _, err := json.Marshal(res); err != nil {
		return fmt.Errorf("pipit: %s: result cannot be reported: %w", in, err)
	}
	return nil
}

// melFigure is the heat map of the log-mel columns in cols.
func melFigure(cols *plots.Columns, cfg features.Config, title string) plots.HeatMap {
	unit := "ln"
	if cfg.Log == features.LogDecibel {
		unit = "dB"
	}
	return plots.HeatMap{
		Title:    fmt.Sprintf("log-mel of %s (%s, %d bands)", title, cfg.MelScale, cfg.Bands),
		XLabel:   "time (s)",
		YLabel:   "mel band",
		BarLabel: "level (" + unit + ")",
		Grid:     cols.Grid(0, float64(cfg.HopSamples)/float64(cfg.SampleRateHz), 0, 1),
	}
}
