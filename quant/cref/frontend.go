package cref

import (
	_ "embed"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/pipit-audio/pipit/features"
)

// FrontEndHeader and FrontEndSource are the C99 log-mel front end
// (c/pipit_fe.h, c/pipit_fe.c) that turns 16-bit PCM into the int8 input of
// an exported network.
var (
	//go:embed c/pipit_fe.h
	FrontEndHeader []byte
	//go:embed c/pipit_fe.c
	FrontEndSource []byte
)

// FrontEnd is what the generated front-end header is made from: the
// model's front end, its normalisation statistics, the network input's
// quantisation and how network inputs are cut from the frame stream.
type FrontEnd struct {
	Config         features.Config
	Stats          *features.BandStats
	InputScale     float64 // network input scale
	InputZeroPoint int32   // network input zero point
	Frames         int     // frames per network input (its W)
	HopFrames      int     // frames between the starts of consecutive inputs
	// Seal is the export's seal (quant.SchemeDoc.Seal), recorded in the
	// header as PREFIX_FE_SEAL; empty records none.
	Seal string
}

// FrontEndLayout is the front end's entry in the scheme description
// (field "device_front_end"): its cost model figures and the C names it
// defines.
type FrontEndLayout struct {
	Header    string              `json:"header"` // file name of the generated header
	Source    []string            `json:"source"` // pipit_fe.h, pipit_fe.c
	StateType string              `json:"state_type"`
	Frames    int                 `json:"frames"`
	HopFrames int                 `json:"hop_frames"`
	Cost      features.DeviceCost `json:"cost"`
}

// check validates f for code generation.
func (f FrontEnd) check() error {
	switch {
	case f.Stats == nil || len(f.Stats.Mean) != f.Config.Bands || len(f.Stats.Std) != f.Config.Bands:
		return fmt.Errorf("cref: front end: band statistics for %d bands are missing", f.Config.Bands)
	case !(f.InputScale > 0) || math.IsInf(f.InputScale, 0):
		return fmt.Errorf("cref: front end: input scale %g", f.InputScale)
	case f.InputZeroPoint < -128 || f.InputZeroPoint > 127:
		return fmt.Errorf("cref: front end: input zero point %d outside [-128, 127]", f.InputZeroPoint)
	case f.Frames < 1 || f.HopFrames < 1:
		return fmt.Errorf("cref: front end: %d frames per input, %d between inputs", f.Frames, f.HopFrames)
	case f.Config.FFTSize > 1<<16 || f.Config.Bands > 1<<15:
		return fmt.Errorf("cref: front end: FFT size %d or %d bands too large for the C tables", f.Config.FFTSize, f.Config.Bands)
	}
	return nil
}

// cf formats v as an exact C99 float literal (hexadecimal, float32).
func cf(v float64) string {
	f := float32(v)
	if f == 0 {
		return "0.0f"
	}
	return strconv.FormatFloat(float64(f), 'x', -1, 32) + "f"
}

func floatArray(b *strings.Builder, name string, v []float64) {
	fmt.Fprintf(b, "static const float %s[%d] = {", name, len(v))
	for i, x := range v {
		if i%6 == 0 {
			b.WriteString("\n  ")
		}
		b.WriteString(cf(x))
		b.WriteString(", ")
	}
	b.WriteString("\n};\n")
}

func u16Array(b *strings.Builder, name string, v []int) {
	fmt.Fprintf(b, "static const uint16_t %s[%d] = {", name, len(v))
	for i, x := range v {
		if i%12 == 0 {
			b.WriteString("\n  ")
		}
		fmt.Fprintf(b, "%d, ", x)
	}
	b.WriteString("\n};\n")
}

// FrontEndCHeader returns the C header <prefix>_fe.h for f: the window,
// twiddle, mel and normalisation tables as const arrays (float32, written
// as exact hexadecimal literals), the pipit_fe_config_t that points at
// them, a state type <prefix>_fe_state_t holding every buffer at its exact
// size, an init macro and #defines of the sizes. It also returns the
// layout for the scheme description, whose byte counts are the cost model
// of [features.CostOnDevice] (the tests compare both with the compiled C).
// The C front end needs a power-of-two FFT size; other settings are an
// error.
func FrontEndCHeader(f FrontEnd, prefix string) (string, *FrontEndLayout, error) {
	if err := f.check(); err != nil {
		return "", nil, err
	}
	cost, err := features.CostOnDevice(f.Config, f.Frames)
	if err != nil {
		return "", nil, fmt.Errorf("cref: front end: %w", err)
	}
	c := f.Config
	win, err := features.WindowFunc(c.Window, c.WindowSamples, !c.SymmetricWindow)
	if err != nil {
		return "", nil, fmt.Errorf("cref: front end: %w", err)
	}
	for i := range win {
		win[i] /= 32768 // the PCM scale of features (16-bit samples / 2^15), exact
	}
	tw := make([]float64, c.FFTSize)
	for j := 0; j < c.FFTSize/2; j++ {
		s, co := math.Sincos(2 * math.Pi * float64(j) / float64(c.FFTSize))
		tw[2*j], tw[2*j+1] = co, -s
	}
	var start, length []int
	var mel []float64
	for _, fl := range features.MelFilterbank(c.MelScale, c.Bands, c.FFTSize, c.SampleRateHz, c.FMinHz, c.FMaxHz, c.MelNorm == features.MelNormArea) {
		start = append(start, fl.Start)
		length = append(length, len(fl.Weights))
		mel = append(mel, fl.Weights...)
	}
	invStd := make([]float64, c.Bands)
	for i, s := range f.Stats.Std {
		invStd[i] = float64(float32(1 / s)) // as features.BandStats.Apply
	}
	up := strings.ToUpper(prefix)
	var b strings.Builder
	fmt.Fprintf(&b, "/* Generated by pipit export: do not edit. C front end for the front end\n * %s\n * feeding inputs of %d frames every %d frames. */\n", strings.ReplaceAll(c.String(), "*/", "* /"), f.Frames, f.HopFrames)
	fmt.Fprintf(&b, "#ifndef %s_FE_H\n#define %s_FE_H\n\n#include \"pipit_fe.h\"\n\n", up, up)
	if f.Seal != "" {
		fmt.Fprintf(&b, "/* The export's seal: the same in its scheme and in every header it generated. */\n#define %s_FE_SEAL \"%s\"\n\n", up, f.Seal)
	}
	defs := []struct {
		name string
		v    any
	}{{"RATE_HZ", c.SampleRateHz}, {"WINDOW", c.WindowSamples}, {"HOP", c.HopSamples}, {"FFT", c.FFTSize}, {"BANDS", c.Bands},
		{"FRAMES", f.Frames}, {"HOP_FRAMES", f.HopFrames}, {"MEL_WEIGHTS", len(mel)},
		{"RAM_BYTES", cost.RAMBytes}, {"TABLE_BYTES", cost.TableBytes}, {"FLOPS_PER_FRAME", fmt.Sprintf("%dL", cost.FlopsPerFrame)}}
	for _, d := range defs {
		fmt.Fprintf(&b, "#define %s_FE_%s %v\n", up, d.name, d.v)
	}
	b.WriteString("\n")
	floatArray(&b, prefix+"_fe_win", win)
	floatArray(&b, prefix+"_fe_twiddle", tw)
	u16Array(&b, prefix+"_fe_band_start", start)
	u16Array(&b, prefix+"_fe_band_len", length)
	floatArray(&b, prefix+"_fe_mel", mel)
	floatArray(&b, prefix+"_fe_mean", f.Stats.Mean)
	floatArray(&b, prefix+"_fe_inv_std", invStd)
	floorDB := 0.0
	if c.Log == features.LogDecibel {
		floorDB = c.FloorBelowPeakDB
	}
	flag := func(v bool) int {
		if v {
			return 1
		}
		return 0
	}
	fmt.Fprintf(&b, "\nstatic const pipit_fe_config_t %s_fe_config = {\n  %d, %d, %d, %d, %d, %d, %d, %d, %d, %d,\n  %s, %s, %s, %d,\n  %[1]s_fe_win, %[1]s_fe_twiddle, %[1]s_fe_band_start, %[1]s_fe_band_len, %[1]s_fe_mel, %[1]s_fe_mean, %[1]s_fe_inv_std};\n\n",
		prefix, c.WindowSamples, c.HopSamples, c.FFTSize, (c.FFTSize-c.WindowSamples)/2, c.Bands, f.Frames, f.HopFrames,
		flag(c.Spectrum == features.SpectrumMagnitude), flag(c.Log == features.LogDecibel), flag(c.PadEnds),
		cf(c.LogFloor), cf(floorDB), cf(1/f.InputScale), f.InputZeroPoint)
	fmt.Fprintf(&b, "/* Every buffer of one front end at its exact size (RAM). */\ntypedef struct {\n  pipit_fe_t fe;\n  int16_t ring[%d];\n  float work[%d];\n  float logmel[%d];\n  int8_t features[%d];\n} %s_fe_state_t;\n\n",
		c.WindowSamples, c.FFTSize, c.Bands, c.Bands*f.Frames, prefix)
	fmt.Fprintf(&b, "/* %s_FE_INIT(&state) binds a %s_fe_state_t to the tables and resets it. */\n#define %s_FE_INIT(s) pipit_fe_init(&(s)->fe, &%s_fe_config, (s)->ring, (s)->work, (s)->logmel, (s)->features)\n\n#endif\n",
		up, prefix, up, prefix)
	lay := &FrontEndLayout{Header: prefix + "_fe.h", Source: []string{"pipit_fe.h", "pipit_fe.c"}, StateType: prefix + "_fe_state_t",
		Frames: f.Frames, HopFrames: f.HopFrames, Cost: cost}
	return b.String(), lay, nil
}

// feDriver reads int16 PCM (little-endian) from argv[1] and pushes it in
// chunks of argv[2] samples, then flushes; it writes to argv[3], per frame,
// 'F', the M log-mel floats and the M int8 values of the new column, and
// per complete input 'W' and the (M, F) int8 window; built with
// PIPIT_FE_WITH_NET it also runs the network on each window and writes
// 'L' and the int8 logits.
const feDriver = `#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "fe.h"
#ifdef PIPIT_FE_WITH_NET
#include "model.h"
#endif

static %[1]s_fe_state_t st;
#ifdef PIPIT_FE_WITH_NET
static int8_t pool[%[2]s_POOL_BYTES];
#endif
static int8_t win[%[3]s_FE_BANDS * %[3]s_FE_FRAMES];

static void events(int ev, FILE *fo) {
  int32_t m, slot;
  if (ev & PIPIT_FE_FRAME) {
    slot = st.fe.col == 0 ? %[3]s_FE_FRAMES - 1 : st.fe.col - 1;
    fputc('F', fo);
    fwrite(st.logmel, sizeof(float), %[3]s_FE_BANDS, fo);
    for (m = 0; m < %[3]s_FE_BANDS; m++) fputc((unsigned char)st.features[m * %[3]s_FE_FRAMES + slot], fo);
  }
  if (ev & PIPIT_FE_WINDOW) {
    pipit_fe_window(&st.fe, win);
    fputc('W', fo);
    fwrite(win, 1, sizeof win, fo);
#ifdef PIPIT_FE_WITH_NET
    memcpy(pipit_input(&%[1]s_model, pool), win, sizeof win);
    if (pipit_run(&%[1]s_model, pool, sizeof pool) != PIPIT_OK) exit(5);
    fputc('L', fo);
    fwrite(pipit_output(&%[1]s_model, pool), 1, %[2]s_OUTPUT_SIZE, fo);
#endif
  }
}

int main(int argc, char **argv) {
  FILE *fi, *fo;
  long n, chunk, i;
  int16_t *pcm;
  unsigned char *raw;
  int ev;
  if (argc != 4) return 2;
  chunk = atol(argv[2]);
  fi = fopen(argv[1], "rb");
  fo = fopen(argv[3], "wb");
  if (!fi || !fo || chunk < 1) return 3;
  fseek(fi, 0, SEEK_END);
  n = ftell(fi) / 2;
  fseek(fi, 0, SEEK_SET);
  raw = (unsigned char *)malloc((size_t)(2 * n + 2));
  pcm = (int16_t *)malloc((size_t)(2 * n + 2));
  if (!raw || !pcm || fread(raw, 2, (size_t)n, fi) != (size_t)n) return 4;
  for (i = 0; i < n; i++) pcm[i] = (int16_t)(raw[2 * i] | (raw[2 * i + 1] << 8));
  %[3]s_FE_INIT(&st);
  for (i = 0; i < n; i += chunk) {
    int32_t left = (int32_t)(n - i < chunk ? n - i : chunk), used;
    const int16_t *p = pcm + i;
    while (left > 0) {
      ev = pipit_fe_push(&st.fe, p, left, &used);
      p += used;
      left -= used;
      events(ev, fo);
    }
  }
  while ((ev = pipit_fe_flush(&st.fe)) != 0) events(ev, fo);
  fclose(fi);
  fclose(fo);
  free(raw);
  free(pcm);
  return 0;
}
`

// BuildFrontEnd writes the front end, its generated header feHeader
// (from [FrontEndCHeader] with prefix) and a test driver into dir and
// compiles them with cc as C99, all warnings as errors, with sanitize
// under AddressSanitizer and UndefinedBehaviorSanitizer. With netHeader
// (the output of quant.CHeader with the same prefix) non-empty, the
// driver also runs the network runtime on every complete input. It
// returns the executable's path; [RunFrontEnd] runs it.
func BuildFrontEnd(dir, feHeader, netHeader, prefix, cc string, sanitize bool) (string, error) {
	dir, err := filepath.Abs(dir)
	if err != nil {
		return "", fmt.Errorf("cref: %w", err)
	}
	files := map[string][]byte{"pipit_fe.h": FrontEndHeader, "pipit_fe.c": FrontEndSource, "fe.h": []byte(feHeader),
		"fe_driver.c": []byte(fmt.Sprintf(feDriver, prefix, upper(prefix), upper(prefix)))}
	args := []string{"-std=c99", "-O2", "-Wall", "-Wextra", "-Werror", "-pedantic", "-o", filepath.Join(dir, "pipit_fe_ref"), "fe_driver.c", "pipit_fe.c"}
	if netHeader != "" {
		files["model.h"], files["pipit_rt.h"], files["pipit_rt.c"] = []byte(netHeader), RuntimeHeader, RuntimeSource
		args = append([]string{"-DPIPIT_FE_WITH_NET"}, append(args, "pipit_rt.c")...)
	}
	args = append(args, "-lm")
	if sanitize {
		args = append([]string{"-fsanitize=address,undefined", "-fno-sanitize-recover=all", "-g"}, args...)
	}
	for name, data := range files {
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			return "", fmt.Errorf("cref: %w", err)
		}
	}
	cmd := exec.Command(cc, args...)
	cmd.Dir = dir
	if out, err := cmd.CombinedOutput(); err != nil {
		return "", fmt.Errorf("cref: %s %v: %v\n%s", cc, args, err, out)
	}
	return filepath.Join(dir, "pipit_fe_ref"), nil
}

// FrontEndOutput is what the C front end computed for one signal.
type FrontEndOutput struct {
	LogMel  [][]float32 // per frame, (M) before normalisation
	Columns [][]int8    // per frame, (M) the int8 column
	Windows [][]int8    // per complete input, (M, F)
	Logits  [][]int8    // per complete input, with a network
}

// RunFrontEnd runs an executable from [BuildFrontEnd] on pcm, pushed in
// chunks of chunk samples, for a front end of bands bands, frames frames
// per input and outputs logits per input (0 without a network).
func RunFrontEnd(exe string, pcm []int16, chunk, bands, frames, outputs int) (*FrontEndOutput, error) {
	dir := filepath.Dir(exe)
	in, out := filepath.Join(dir, "pcm.bin"), filepath.Join(dir, "fe_out.bin")
	raw := make([]byte, 2*len(pcm))
	for i, v := range pcm {
		binary.LittleEndian.PutUint16(raw[2*i:], uint16(v))
	}
	if err := os.WriteFile(in, raw, 0o644); err != nil {
		return nil, fmt.Errorf("cref: %w", err)
	}
	cmd := exec.Command(exe, in, strconv.Itoa(chunk), out)
	if msg, err := cmd.CombinedOutput(); err != nil {
		return nil, fmt.Errorf("cref: running %s: %v\n%s", exe, err, msg)
	}
	b, err := os.ReadFile(out)
	if err != nil {
		return nil, fmt.Errorf("cref: %w", err)
	}
	return parseFrontEndOutput(b, bands, frames, outputs)
}

func parseFrontEndOutput(b []byte, bands, frames, outputs int) (*FrontEndOutput, error) {
	r := &FrontEndOutput{}
	for len(b) > 0 {
		tag := b[0]
		b = b[1:]
		need := map[byte]int{'F': 5 * bands, 'W': bands * frames, 'L': outputs}[tag]
		if need == 0 || len(b) < need {
			return nil, fmt.Errorf("cref: front end output: bad record %q with %d bytes left", tag, len(b))
		}
		switch tag {
		case 'F':
			lm := make([]float32, bands)
			for i := range lm {
				lm[i] = math.Float32frombits(binary.LittleEndian.Uint32(b[4*i:]))
			}
			r.LogMel = append(r.LogMel, lm)
			r.Columns = append(r.Columns, bytesInt8(b[4*bands:5*bands]))
		case 'W':
			r.Windows = append(r.Windows, bytesInt8(b[:need]))
		case 'L':
			r.Logits = append(r.Logits, bytesInt8(b[:need]))
		}
		b = b[need:]
	}
	return r, nil
}

func bytesInt8(b []byte) []int8 {
	v := make([]int8, len(b))
	for i, x := range b {
		v[i] = int8(x)
	}
	return v
}
