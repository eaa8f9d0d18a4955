package pipit

import (
	"bytes"
	"encoding/binary"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/plots"
	"github.com/pipit-audio/pipit/nn"
)

// yardRecording writes seconds of a made-up timber-yard recording at
// rateHz (a saw's harmonics rising and falling over noise) as a mono
// 16-bit WAV file.
func yardRecording(t *testing.T, path string, seconds float64, rateHz int, seed uint64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 1))
	x := make([]float32, int(seconds*float64(rateHz)))
	for i := range x {
		s := float64(i) / float64(rateHz)
		f0 := 180 + 60*math.Sin(2*math.Pi*s/7)
		v := 0.05 * rng.NormFloat64()
		for h := 1; h <= 4; h++ {
			v += 0.15 / float64(h) * math.Sin(2*math.Pi*f0*float64(h)*s) * (0.6 + 0.4*math.Sin(2*math.Pi*s/3))
		}
		x[i] = float32(v)
	}
	if err := features.WriteWAVFile(path, x, rateHz); err != nil {
		t.Fatal(err)
	}
}

// refMelspec is what melspec computed before it streamed, kept as the
// reference: the whole file decoded, the matrix of Extractor.ComputeAudio,
// ALevelDBFS of all samples, the CSV and the heat map of the whole matrix
// (columns through plots.Columns when there are more than PlotColumns).
func refMelspec(t *testing.T, in string, cfg features.Config) (csvText, png []byte, level float64, frames int) {
	t.Helper()
	a, err := features.ReadWAVFile(in)
	if err != nil {
		t.Fatal(err)
	}
	ex, err := features.NewExtractor(cfg)
	if err != nil {
		t.Fatal(err)
	}
	m, err := ex.ComputeAudio(a)
	if err != nil {
		t.Fatal(err)
	}
	if level, err = features.ALevelDBFS(a.Samples, a.SampleRateHz); err != nil {
		t.Fatal(err)
	}
	bands, frames := m.Shape()[0], m.Shape()[1]
	data := m.Data().([]float32)
	var line []byte
	for f := 0; f < frames; f++ {
		for b := 0; b < bands; b++ {
			if b > 0 {
				line = append(line, ',')
			}
			line = strconv.AppendFloat(line, float64(data[b*frames+f]), 'g', 7, 32)
		}
		line = append(line, '\n')
	}
	g := plots.Grid{Values: make([][]float64, bands), DX: float64(cfg.HopSamples) / float64(cfg.SampleRateHz), DY: 1}
	for b := range g.Values {
		g.Values[b] = make([]float64, frames)
		for f := range g.Values[b] {
			g.Values[b][f] = float64(data[b*frames+f])
		}
	}
	if frames > PlotColumns {
		cols := plots.NewColumns(bands, PlotColumns)
		col := make([]float32, bands)
		for f := 0; f < frames; f++ {
			for b := range col {
				col[b] = data[b*frames+f]
			}
			cols.Add(col)
		}
		g = cols.Grid(0, g.DX, 0, 1)
	}
	unit := "ln"
	if cfg.Log == features.LogDecibel {
		unit = "dB"
	}
	fig := plots.HeatMap{Title: fmt.Sprintf("log-mel of %s (%s, %d bands)", filepath.Base(in), cfg.MelScale, bands),
		XLabel: "time (s)", YLabel: "mel band", BarLabel: "level (" + unit + ")", Grid: g}
	var buf bytes.Buffer
	if err := fig.WritePNG(&buf); err != nil {
		t.Fatal(err)
	}
	return line, buf.Bytes(), level, frames
}

// TestMelspecStreamsAsTheWholeFile: the streaming Melspec writes the
// same CSV and PNG bytes and reports the same frames and level as the
// whole-file computation, on every WAV fixture and on a 12 s recording
// at 44.1 kHz (resampled, 17 read blocks) under two front ends; past
// PlotColumns frames (a 40 s recording) the CSV is still the same and the
// figure is the reference's matrix averaged into columns.
func TestMelspecStreamsAsTheWholeFile(t *testing.T) {
	dir := t.TempDir()
	long, longer := filepath.Join(dir, "yard-44k1.wav"), filepath.Join(dir, "yard-40s.wav")
	yardRecording(t, long, 12, 44100, 1)
	yardRecording(t, longer, 40, 16000, 2)
	centred := features.DefaultConfig()
	centred.WindowSamples, centred.FFTSize, centred.HopSamples, centred.PadEnds, centred.Bands = 400, 512, 160, true, 32
	centred = centred.Complete()
	type run struct {
		in  string
		cfg features.Config
	}
	runs := []run{{long, features.DefaultConfig()}, {long, centred}, {longer, features.DefaultConfig()}}
	fixtures, _ := filepath.Glob(filepath.Join("testdata", "wav", "*.wav"))
	if len(fixtures) < 10 {
		t.Fatalf("found %d fixtures", len(fixtures))
	}
	for _, p := range fixtures {
		runs = append(runs, run{p, features.DefaultConfig()})
	}
	for i, r := range runs {
		prefix := filepath.Join(dir, fmt.Sprintf("out%d", i))
		res, err := Melspec(r.in, prefix, r.cfg)
		if err != nil {
			t.Fatalf("%s: %v", r.in, err)
		}
		wantCSV, wantPNG, wantLevel, wantFrames := refMelspec(t, r.in, r.cfg)
		gotCSV, _ := os.ReadFile(res.CSV)
		gotPNG, _ := os.ReadFile(res.PNG)
		if !bytes.Equal(gotCSV, wantCSV) {
			t.Errorf("%s: CSV differs from the whole-file computation (%d bytes, want %d)", r.in, len(gotCSV), len(wantCSV))
		}
		if !bytes.Equal(gotPNG, wantPNG) {
			t.Errorf("%s: PNG differs from the whole-file computation", r.in)
		}
		if res.Frames != wantFrames || res.Bands != r.cfg.Bands || res.LevelA == nil || math.Float64bits(*res.LevelA) != math.Float64bits(wantLevel) {
			t.Errorf("%s: %d frames × %d bands, level %v; whole file %d frames, level %v", r.in, res.Frames, res.Bands, res.LevelA, wantFrames, wantLevel)
		}
	}
}

// TestMelspecSilenceAndFailure: digital silence reports a null level and
// writes both outputs; a failure at the end (a directory where the PNG
// goes) leaves the old CSV as it was and no temporary file, and so does a
// file that turns out bad half-way (a NaN sample after the first read
// block).
func TestMelspecSilenceAndFailure(t *testing.T) {
	dir := t.TempDir()
	quiet := filepath.Join(dir, "quiet-yard.wav")
	if err := features.WriteWAVFile(quiet, make([]float32, 3*16000), 16000); err != nil {
		t.Fatal(err)
	}
	res, err := Melspec(quiet, filepath.Join(dir, "q"), features.DefaultConfig())
	if err != nil {
		t.Fatal(err)
	}
	b, err := json.Marshal(res)
	if err != nil || res.LevelA != nil || !bytes.Contains(b, []byte(`"level_a_dbfs":null`)) {
		t.Errorf("silence: level %v, JSON %s (%v); want null", res.LevelA, b, err)
	}
	for _, p := range []string{res.CSV, res.PNG} {
		if _, err := os.Stat(p); err != nil {
			t.Error(err)
		}
	}

	prefix := filepath.Join(dir, "keep")
	if err := os.WriteFile(prefix+".csv", []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Mkdir(prefix+".png", 0o755); err != nil {
		t.Fatal(err)
	}
	if _, err := Melspec(quiet, prefix, features.DefaultConfig()); err == nil || !strings.Contains(err.Error(), "keep.png") {
		t.Errorf("PNG target a directory: error %v, want one naming keep.png", err)
	}
	bad := filepath.Join(dir, "bad-yard.wav")
	x := make([]float32, 100000)
	x[70000] = float32(math.NaN())
	writeFloatWAV(t, bad, x, 16000)
	os.Remove(prefix + ".png")
	if _, err := Melspec(bad, prefix, features.DefaultConfig()); err == nil || !strings.Contains(err.Error(), "bad-yard.wav") {
		t.Errorf("NaN sample: error %v, want one naming bad-yard.wav", err)
	}
	if got, _ := os.ReadFile(prefix + ".csv"); string(got) != "old" {
		t.Errorf("a failed melspec changed %s.csv to %d bytes", prefix, len(got))
	}
	if _, err := os.Stat(prefix + ".png"); !os.IsNotExist(err) {
		t.Errorf("a failed melspec left %s.png (%v)", prefix, err)
	}
	noTemporaryFiles(t, dir)
}

// noTemporaryFiles fails if dir holds a temporary file of fsutil.
func noTemporaryFiles(t *testing.T, dir string) {
	t.Helper()
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		if strings.Contains(e.Name(), ".tmp") {
			t.Errorf("temporary file %s left", e.Name())
		}
	}
}

// writeFloatWAV writes x as a mono 32-bit float WAV file (format 3), which
// can hold a NaN.
func writeFloatWAV(t *testing.T, path string, x []float32, rateHz int) {
	t.Helper()
	var b bytes.Buffer
	le := binary.LittleEndian
	b.WriteString("RIFF")
	binary.Write(&b, le, uint32(36+4*len(x)))
	b.WriteString("WAVEfmt ")
	binary.Write(&b, le, struct {
		Size                    uint32
		Format, Channels        uint16
		Rate, ByteRate          uint32
		BlockAlign, BitsPerSamp uint16
	}{16, 3, 1, uint32(rateHz), uint32(4 * rateHz), 4, 32})
	b.WriteString("data")
	binary.Write(&b, le, uint32(4*len(x)))
	binary.Write(&b, le, x)
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

// oddClasses are class names that need CSV quoting.
var oddClasses = []string{`saw, "big"`, "planer", "quiet"}

// streamModel is a float model of the pooled network with random weights,
// band statistics of its own and oddClasses.
func streamModel(t *testing.T, seed uint64) *FloatModel {
	t.Helper()
	net, err := nn.Arch("pooled", len(oddClasses), seed)
	if err != nil {
		t.Fatal(err)
	}
	st := &features.BandStats{Version: features.BandStatsVersion, Frames: 1}
	r := rand.New(rand.NewPCG(seed, 9))
	for range net.Input.H {
		st.Mean = append(st.Mean, -60+10*r.Float64())
		st.Std = append(st.Std, 5+5*r.Float64())
	}
	info := &datasets.ModelInfo{Version: datasets.ModelInfoVersion, Classes: oddClasses, FrontEnd: features.DefaultConfig(), Stats: st,
		Window: datasets.WindowConfig{Frames: net.Input.W, Overlap: 0.5, Pad: datasets.PadZeros}}
	return &FloatModel{Net: net, ModelInfo: info}
}

// refTimeline is what timeline computed before it streamed, kept as the
// reference: the whole file decoded and cut by CutRecording, all windows
// classified in one call, Segments, the CSV written by encoding/csv and
// the heat map of all windows (through plots.Columns when there are more
// than PlotColumns).
func refTimeline(t *testing.T, m Model, in string, win datasets.WindowConfig) (csvText, png []byte, segs []datasets.Segment, rec *datasets.Recording) {
	t.Helper()
	info := m.Info()
	a, err := features.ReadWAVFile(in)
	if err != nil {
		t.Fatal(err)
	}
	if rec, err = datasets.CutRecording(a, info.FrontEnd, win, info.Stats); err != nil {
		t.Fatal(err)
	}
	L := len(info.Classes)
	probs := Probabilities(m, rec.Inputs, rec.N)
	if segs, err = datasets.Segments(probs, info.Classes, rec.StartSec, rec.WindowSec); err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	cw := csv.NewWriter(&buf)
	cw.Write(append([]string{"start_s", "end_s", "class", "probability"}, info.Classes...))
	row := make([]string, 4+L)
	for i, st := range rec.StartSec {
		p := probs[i*L : (i+1)*L]
		best := nn.Argmax(p)
		row[0], row[1], row[2], row[3] = fmt.Sprintf("%.3f", st), fmt.Sprintf("%.3f", st+rec.WindowSec), info.Classes[best], fmt.Sprintf("%.4f", p[best])
		for k, v := range p {
			row[4+k] = fmt.Sprintf("%.4f", v)
		}
		cw.Write(row)
	}
	cw.Flush()
	g := plots.Grid{Values: make([][]float64, L), DY: 1}
	if rec.N > 1 {
		g.X0, g.DX = rec.StartSec[0]+rec.WindowSec/2, rec.StartSec[1]-rec.StartSec[0]
	} else {
		g.X0, g.DX = rec.WindowSec/2, rec.WindowSec
	}
	for c := 0; c < L; c++ {
		g.Values[c] = make([]float64, rec.N)
		for i := 0; i < rec.N; i++ {
			g.Values[c][i] = float64(probs[i*L+c])
		}
	}
	if rec.N > PlotColumns {
		cols := plots.NewColumns(L, PlotColumns)
		for i := 0; i < rec.N; i++ {
			cols.Add(probs[i*L : (i+1)*L])
		}
		g = cols.Grid(g.X0, g.DX, 0, 1)
	}
	fig := plots.HeatMap{Title: "class probabilities over time: " + filepath.Base(in), XLabel: "time (s, window centres)", YLabel: "", BarLabel: "probability",
		Grid: g, YTicks: info.Classes}
	var pb bytes.Buffer
	if err := fig.WritePNG(&pb); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes(), pb.Bytes(), segs, rec
}

// TestTimelineStreamsAsTheWholeFile: the streaming Timeline writes the
// same CSV and PNG bytes and finds the same segments as the whole-file
// computation, for a float network (batches of 64) and a model that
// follows the bands' energy (so the most likely class changes): a 12 s
// recording at 44.1 kHz (resampled) at the model's overlap and at 97 %
// (345 windows, two batches), a fixture shorter than one window (padded,
// one window), and 40 s at 98 % (2,439 windows, more than PlotColumns).
// The CSV, whose first class needs quoting, reads back with encoding/csv
// with every row as wide as the header.
func TestTimelineStreamsAsTheWholeFile(t *testing.T) {
	fm := streamModel(t, 3)
	defer fm.Close()
	for _, m := range []Model{fm, bandModel{fm}} {
		timelineAgainstWholeFile(t, m)
	}
}

// bandModel's logit for class c is three times the mean normalised level
// of the c-th third of the bands.
type bandModel struct{ *FloatModel }

func (m bandModel) Predict(dst, x []float32, n int) {
	H, W, L := m.Net.Input.H, m.Net.Input.W, len(m.ModelInfo.Classes)
	for i := 0; i < n; i++ {
		win := x[i*H*W : (i+1)*H*W]
		for c := 0; c < L; c++ {
			var s float64
			lo, hi := c*H/L, (c+1)*H/L
			for _, v := range win[lo*W : hi*W] {
				s += float64(v)
			}
			dst[i*L+c] = float32(3 * s / float64((hi-lo)*W))
		}
	}
}

func timelineAgainstWholeFile(t *testing.T, m Model) {
	dir := t.TempDir()
	long, longer := filepath.Join(dir, "yard-44k1.wav"), filepath.Join(dir, "yard-40s.wav")
	yardRecording(t, long, 12, 44100, 4)
	yardRecording(t, longer, 40, 16000, 5)
	short := filepath.Join("testdata", "wav", "pcm_s16_16k.wav")
	ov := func(x float64) *float64 { return &x }
	for i, c := range []struct {
		in      string
		overlap *float64
	}{{long, nil}, {long, ov(0.97)}, {short, nil}, {longer, ov(0.98)}} {
		prefix := filepath.Join(dir, fmt.Sprintf("tl%d", i))
		res, err := Timeline(m, c.in, prefix, TimelineConfig{Overlap: c.overlap})
		if err != nil {
			t.Fatalf("%s: %v", c.in, err)
		}
		win := m.Info().Window
		if c.overlap != nil {
			win.Overlap = *c.overlap
		}
		wantCSV, wantPNG, wantSegs, rec := refTimeline(t, m, c.in, win)
		gotCSV, _ := os.ReadFile(res.CSV)
		gotPNG, _ := os.ReadFile(res.PNG)
		if !bytes.Equal(gotCSV, wantCSV) {
			t.Errorf("%s at overlap %g: CSV differs from the whole-file computation (%d bytes, want %d)", c.in, win.Overlap, len(gotCSV), len(wantCSV))
		}
		if !bytes.Equal(gotPNG, wantPNG) {
			t.Errorf("%s at overlap %g: PNG differs from the whole-file computation", c.in, win.Overlap)
		}
		got, _ := json.Marshal(res.Segments)
		want, _ := json.Marshal(wantSegs)
		if !bytes.Equal(got, want) || res.Windows != rec.N || res.WindowSec != rec.WindowSec || res.Overlap != win.Overlap {
			t.Errorf("%s at overlap %g: %d windows of %g s, segments %s; whole file %d of %g s, %s", c.in, win.Overlap, res.Windows, res.WindowSec, got, rec.N, rec.WindowSec, want)
		}
		t.Logf("%s at overlap %g: %d windows, %d segments", filepath.Base(c.in), win.Overlap, res.Windows, len(res.Segments))
		rows, err := csv.NewReader(bytes.NewReader(gotCSV)).ReadAll()
		if err != nil || len(rows) != res.Windows+1 || rows[0][4] != oddClasses[0] {
			t.Errorf("%s: CSV read back by encoding/csv: %d rows (%v), header %q", c.in, len(rows), err, rows[0])
		}
	}
}

// nanModel is a model whose outputs are NaN.
type nanModel struct{ *FloatModel }

func (m nanModel) Predict(dst, x []float32, n int) {
	for i := range dst {
		dst[i] = float32(math.NaN())
	}
}

// TestTimelineFailureLeavesNoOutputs: a result that cannot be reported
// (NaN probabilities have no JSON form) and a directory where the PNG
// goes fail the call with an error naming the problem, leaving no new
// file, the old ones as they were and no temporary file; an overlap
// outside [0, 1) is refused.
func TestTimelineFailureLeavesNoOutputs(t *testing.T) {
	dir := t.TempDir()
	in := filepath.Join(dir, "yard.wav")
	yardRecording(t, in, 3, 16000, 6)
	m := streamModel(t, 7)
	defer m.Close()
	prefix := filepath.Join(dir, "nan")
	if _, err := Timeline(nanModel{m}, in, prefix, TimelineConfig{}); err == nil || !strings.Contains(err.Error(), "yard.wav") {
		t.Errorf("NaN probabilities: error %v, want one naming yard.wav", err)
	}
	for _, p := range []string{prefix + ".timeline.csv", prefix + ".timeline.png"} {
		if _, err := os.Stat(p); !os.IsNotExist(err) {
			t.Errorf("a failed timeline left %s (%v)", p, err)
		}
	}
	keep := filepath.Join(dir, "keep")
	os.WriteFile(keep+".timeline.csv", []byte("old"), 0o644)
	os.Mkdir(keep+".timeline.png", 0o755)
	if _, err := Timeline(m, in, keep, TimelineConfig{}); err == nil || !strings.Contains(err.Error(), "keep.timeline.png") {
		t.Errorf("PNG target a directory: error %v, want one naming keep.timeline.png", err)
	}
	if b, _ := os.ReadFile(keep + ".timeline.csv"); string(b) != "old" {
		t.Errorf("a failed timeline changed %s.timeline.csv to %d bytes", keep, len(b))
	}
	noTemporaryFiles(t, dir)
	for _, o := range []float64{-0.25, 1, math.NaN()} {
		if _, err := Timeline(m, in, keep, TimelineConfig{Overlap: &o}); err == nil || !strings.Contains(err.Error(), "overlap") {
			t.Errorf("overlap %g: error %v, want one about the overlap", o, err)
		}
	}
}
