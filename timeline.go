package pipit

import (
	"encoding/csv"
	"fmt"
	"io"
	"path/filepath"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/internal/plots"
	"github.com/pipit-audio/pipit/nn"
)

// timelineBatch is the number of windows [Timeline] classifies at a time:
// a multiple of the 64 a [FloatModel] runs at once, so that the batches
// the network sees, and so its outputs, are those of one call on all
// windows.
const timelineBatch = 256

// TimelineConfig configures [Timeline].
type TimelineConfig struct {
	// Overlap of consecutive windows, at least 0 and below 1; nil: the
	// model's own (Info().Window.Overlap, the overlap it was trained with).
	Overlap *float64
}

// TimelineResult is what [Timeline] found and wrote.
type TimelineResult struct {
	Input      string             `json:"input"`
	Seconds    float64            `json:"seconds"`
	Windows    int                `json:"windows"`
	WindowSec  float64            `json:"window_seconds"`
	Overlap    float64            `json:"overlap"`
	Segments   []datasets.Segment `json:"segments"`
	ClassTotal map[string]float64 `json:"seconds_per_class"`
	CSV        string             `json:"csv"`
	PNG        string             `json:"png"`
}

// Timeline reads the WAV file in block by block, cuts it into the model's
// windows ([datasets.WindowStream]: the windows of
// [datasets.CutRecording], bit for bit), classifies them with m and
// returns the segments of equal most likely class. It writes
// prefix+".timeline.csv" (encoding/csv; a header start_s, end_s, class,
// probability and the class names, then one row per window: start, end,
// most likely class, its probability, every class's probability) as the
// windows are classified, and prefix+".timeline.png" (class
// probabilities over time; see [PlotColumns]). Memory grows only with the
// number of segments. Both files are written beside their targets and
// put in place together, only once everything has succeeded (the result
// too can be written as JSON); a failure leaves any existing files as
// they were. Classifications are indicative, not a certified measurement.
func Timeline(m Model, in, prefix string, cfg TimelineConfig) (*TimelineResult, error) {
	info := m.Info()
	win := info.Window
	if cfg.Overlap != nil {
		if o := *cfg.Overlap; !(o >= 0 && o < 1) {
			return nil, fmt.Errorf("pipit: timeline overlap %g: want at least 0 and below 1", o)
		}
		win.Overlap = *cfg.Overlap
	}
	r, rs, err := openResampled(in, info.FrontEnd.SampleRateHz)
	if err != nil {
		return nil, err
	}
	defer r.Close()
	ws, err := datasets.NewWindowStream(info.FrontEnd, win, info.Stats)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", in, err)
	}
	classes := info.Classes
	L := len(classes)
	res := &TimelineResult{Input: in, Seconds: r.Seconds(), WindowSec: ws.WindowSec(), Overlap: win.Overlap,
		ClassTotal: map[string]float64{}, CSV: prefix + ".timeline.csv", PNG: prefix + ".timeline.png"}
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
	cw.Write(append([]string{"start_s", "end_s", "class", "probability"}, classes...))
	row := make([]string, 4+L)
	seg := datasets.NewSegmenter(classes, res.WindowSec)
	cols := plots.NewColumns(L, PlotColumns)
	var firstStarts []float64 // the first two window starts, for the figure's x axis
	in1 := info.FrontEnd.Bands * win.Frames
	var pending []float32 // windows not yet classified
	var starts []float64  // their starts
	// classify runs the pending windows through m in batches of
	// timelineBatch (the last one shorter when final) and writes them out;
	// fewer than a batch wait for more unless final.
	classify := func(final bool) error {
		done := 0
		for len(starts)-done >= timelineBatch || (final && done < len(starts)) {
			k := min(timelineBatch, len(starts)-done)
			probs := Probabilities(m, pending[done*in1:(done+k)*in1], k)
			for i, st := range starts[done : done+k] {
				p := probs[i*L : (i+1)*L]
				best := nn.Argmax(p)
				row[0], row[1], row[2], row[3] = fmt.Sprintf("%.3f", st), fmt.Sprintf("%.3f", st+res.WindowSec), classes[best], fmt.Sprintf("%.4f", p[best])
				for c, v := range p {
					row[4+c] = fmt.Sprintf("%.4f", v)
				}
				cw.Write(row)
				seg.Add(p, st)
				cols.Add(p)
				if len(firstStarts) < 2 {
					firstStarts = append(firstStarts, st)
				}
			}
			done += k
		}
		pending = pending[:copy(pending, pending[done*in1:])]
		starts = starts[:copy(starts, starts[done:])]
		cw.Flush()
		return cw.Error()
	}
	buf := make([]float32, readBlockSamples)
	var rbuf []float32
	for {
		n, rerr := r.Read(buf)
		if rerr != nil && rerr != io.EOF {
			return nil, rerr
		}
		x := buf[:n]
		if rs != nil {
			rbuf = rs.Push(rbuf[:0], x)
			if rerr == io.EOF {
				rbuf = rs.Flush(rbuf)
			}
			x = rbuf
		}
		pending, starts = ws.Push(pending, starts, x)
		if rerr == io.EOF {
			pending, starts = ws.Flush(pending, starts)
		}
		if err := classify(rerr == io.EOF); err != nil {
			return nil, fmt.Errorf("writing %s: %w", res.CSV, err)
		}
		if rerr == io.EOF {
			break
		}
	}
	res.Windows = ws.Windows()
	res.Segments = seg.Segments()
	for _, s := range res.Segments {
		res.ClassTotal[s.Label] += s.EndSec - s.StartSec
	}
	if err := reportable(in, res); err != nil {
		return nil, err
	}
	x0, dx := res.WindowSec/2, res.WindowSec
	if len(firstStarts) > 1 {
		x0, dx = firstStarts[0]+res.WindowSec/2, firstStarts[1]-firstStarts[0]
	}
	fig := plots.HeatMap{Title: "class probabilities over time: " + filepath.Base(in), XLabel: "time (s, window centres)", YLabel: "", BarLabel: "probability",
		Grid: cols.Grid(x0, dx, 0, 1), YTicks: classes}
	if err := fig.WritePNG(pngOut); err != nil {
		return nil, fmt.Errorf("writing %s: %w", res.PNG, err)
	}
	if err := outs.Commit(); err != nil {
		return nil, err
	}
	return res, nil
}
