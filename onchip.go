package pipit

import (
	"bytes"
	"fmt"
	"os"
	"time"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
	"github.com/pipit-audio/pipit/quant/cref"
)

// OnchipReport is what [Onchip] measured on the emulated Cortex-M4.
type OnchipReport struct {
	Machine string `json:"machine"`
	Flags   string `json:"flags"`
	// bit-exactness
	TestInputs       int  `json:"test_inputs"`
	LogitsBitExact   bool `json:"logits_bit_exact"` // network on the test inputs vs the Go engine
	RecordingInputs  int  `json:"recording_inputs"` // inputs the front end made on the core
	RecLogitsExact   bool `json:"recording_logits_bit_exact"`
	FeaturesSame     int  `json:"front_end_values_identical"`
	FeaturesTotal    int  `json:"front_end_values"`
	FeaturesWorstLSB int  `json:"front_end_worst_lsb"`
	SamePredictions  int  `json:"same_predictions"` // argmax on the core's features = argmax of the Go path
	// sizes
	Sizes          cref.M4Sizes `json:"sizes"`
	CodeModel      int          `json:"code_bytes_model"`
	ConstBytes     int          `json:"const_bytes"` // blob + layer table + front-end tables (nm)
	ConstModel     int          `json:"const_bytes_model"`
	StaticRAM      int          `json:"static_ram_bytes"` // pool + front-end state (nm)
	StaticRAMModel int          `json:"static_ram_bytes_model"`
	StackBytes     int          `json:"stack_bytes"`
	// instructions (QEMU counts instructions, not cycles)
	InstrPerFrame     float64   `json:"front_end_instructions_per_frame"`
	InstrPerFlop      float64   `json:"front_end_instructions_per_flop"`
	InstrPerInference float64   `json:"network_instructions_per_inference"`
	InstrPerMAC       float64   `json:"network_instructions_per_mac"`
	LayerInstrPerMAC  []float64 `json:"layer_instructions_per_mac"` // 0 for layers without MACs
	// the faster kernels of pipit_rt_fast.c (DSP extension), same bits
	FastLogitsBitExact    bool      `json:"fast_kernels_logits_bit_exact"`
	FastRequantChecked    uint64    `json:"fast_requant_cases_checked"` // on the core, against pipit_requant
	FastRequantDiffer     uint64    `json:"fast_requant_cases_differing"`
	FastInstrPerInference float64   `json:"fast_kernels_instructions_per_inference"`
	FastInstrPerMAC       float64   `json:"fast_kernels_instructions_per_mac"`
	FastLayerInstrPerMAC  []float64 `json:"fast_kernels_layer_instructions_per_mac"`
	FastScratchBytes      int       `json:"fast_kernels_scratch_bytes"`
	InstrPerSecond        float64   `json:"instructions_per_second_of_audio"`
	Seconds               float64   `json:"seconds"`
}

// Onchip exports q (network and C front end), cross-compiles it with the
// board harness for a Cortex-M4F (cref.M4Flags), runs it under QEMU's
// mps2-an386 in dir, and compares with the Go engine: the network's logits
// on nInputs inputs the Go front end made from the recording a (resampled
// to the model's rate and rounded to 16 bits), and front end + network on
// the whole recording pushed chunk samples at a time. It also reports the
// toolchain's sizes against the cost model, the stack high-water mark and
// instruction counts (QEMU counts instructions, not cycles). It needs the
// cross tools (cref.FindM4Tools).
func Onchip(q *quant.Model, a *features.Audio, nInputs, chunk int, dir string) (*OnchipReport, error) {
	t0 := time.Now()
	tools, err := cref.FindM4Tools()
	if err != nil {
		return nil, err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	fe, note, err := DeviceFrontEnd(q)
	if err != nil {
		return nil, err
	}
	if note != "" {
		return nil, fmt.Errorf("pipit: %s", note)
	}
	info, err := datasets.ParseModelInfo("model", q.Meta)
	if err != nil {
		return nil, err
	}
	cfg := fe.Config
	x := a.Samples
	if a.SampleRateHz != cfg.SampleRateHz {
		r, err := features.NewResampler(a.SampleRateHz, cfg.SampleRateHz)
		if err != nil {
			return nil, err
		}
		x = r.Resample(nil, x)
	}
	pcm := toPCM16(x)
	for i := range x {
		x[i] = float32(pcm[i]) / 32768 // the Go path sees the same 16-bit samples
	}
	// Go's inputs from the recording: normalised, quantised windows of W
	// frames every HopFrames frames.
	ex, err := features.NewExtractor(cfg)
	if err != nil {
		return nil, err
	}
	mat, err := ex.Compute(x)
	if err != nil {
		return nil, fmt.Errorf("pipit: recording: %w", err)
	}
	frames, W, M := mat.Shape()[1], fe.Frames, cfg.Bands
	data := mat.Data().([]float32)
	info.Stats.Apply(data)
	var goInputs [][]int8
	for start := 0; start+W <= frames; start += fe.HopFrames {
		win := make([]float32, M*W)
		for b := 0; b < M; b++ {
			copy(win[b*W:(b+1)*W], data[b*frames+start:b*frames+start+W])
		}
		in := make([]int8, len(win))
		q.InputQ.QuantizeInput(in, win)
		goInputs = append(goInputs, in)
	}
	if len(goInputs) == 0 {
		return nil, fmt.Errorf("pipit: recording of %d samples is shorter than one model window", len(pcm))
	}
	tests := goInputs[:min(max(nInputs, 1), len(goInputs))]
	blob, doc, err := quant.Export(q)
	if err != nil {
		return nil, err
	}
	feHdr, lay, err := cref.FrontEndCHeader(fe, CPrefix)
	if err != nil {
		return nil, err
	}
	last := q.Layers[len(q.Layers)-1]
	job := cref.M4Job{Prefix: CPrefix, NetHeader: quant.CHeader(blob, doc, CPrefix), FEHeader: feHdr, Inputs: tests, InputSize: q.Input.Size(),
		OutputSize: last.OutShape.Size(), Layers: len(q.Layers), PCM: pcm, Chunk: chunk}
	elf, sizes, err := cref.BuildM4(dir, tools, job)
	if err != nil {
		return nil, err
	}
	r, err := cref.RunM4(elf, tools, job, 100*time.Second)
	if err != nil {
		return nil, err
	}
	rep := &OnchipReport{Machine: "qemu-system-arm -M mps2-an386 (Cortex-M4F), -icount shift=0", Flags: fmt.Sprint(cref.M4Flags),
		TestInputs: len(tests), LogitsBitExact: true, RecordingInputs: len(r.RecInputs), RecLogitsExact: true, Sizes: *sizes, StackBytes: r.StackBytes}
	logits := func(in []int8) []int8 { o := q.RunAll(in); return o[len(o)-1] }
	rep.FastLogitsBitExact = true
	for k, in := range tests {
		rep.LogitsBitExact = rep.LogitsBitExact && bytes.Equal(int8Bytes(logits(in)), int8Bytes(r.Logits[k]))
		rep.FastLogitsBitExact = rep.FastLogitsBitExact && bytes.Equal(int8Bytes(logits(in)), int8Bytes(r.FastLogits[k]))
	}
	rep.FastRequantChecked, rep.FastRequantDiffer = r.RequantCases, r.RequantBad
	rep.FastScratchBytes = sizes.Symbols["scratch"]
	if len(r.RecInputs) != len(goInputs) {
		return nil, fmt.Errorf("pipit: the emulated front end made %d inputs from the recording, Go %d", len(r.RecInputs), len(goInputs))
	}
	for k, in := range r.RecInputs {
		rep.RecLogitsExact = rep.RecLogitsExact && bytes.Equal(int8Bytes(logits(in)), int8Bytes(r.RecLogits[k]))
		for i, v := range in {
			d := int(v) - int(goInputs[k][i])
			rep.FeaturesTotal++
			if d == 0 {
				rep.FeaturesSame++
			}
			rep.FeaturesWorstLSB = max(rep.FeaturesWorstLSB, d, -d)
		}
		if nn.Argmax(r.RecLogits[k]) == nn.Argmax(logits(goInputs[k])) {
			rep.SamePredictions++
		}
	}
	c := lay.Cost
	rep.CodeModel = nn.RuntimeCodeBytes + features.FrontEndCodeBytes
	for name, n := range sizes.Symbols {
		switch {
		case name == "pool" || name == "fe":
			rep.StaticRAM += n
		case name == "scratch": // the fast kernels' buffer, reported apart
		case name != CPrefix+"_model":
			rep.ConstBytes += n
		}
	}
	rep.ConstModel = len(blob) + 96*len(q.Layers) + c.TableBytes // blob + layer table (pipit_layer_t: 24 int32) + front-end tables
	rep.StaticRAMModel = doc.Memory.PoolBytes + c.RAMBytes
	rep.InstrPerFrame = float64(r.FETicks*cref.InstructionsPerTick) / float64(r.Frames)
	rep.InstrPerFlop = rep.InstrPerFrame / float64(c.FlopsPerFrame)
	rep.InstrPerInference = float64(r.NetTicks*cref.InstructionsPerTick) / float64(len(r.RecInputs))
	rep.InstrPerMAC = rep.InstrPerInference / float64(doc.Totals.MACs)
	var fastTicks uint64
	for i, l := range doc.Layers {
		v, f := 0.0, 0.0
		if l.MACs > 0 {
			v = float64(r.LayerTicks[i]*cref.InstructionsPerTick) / float64(len(tests)) / float64(l.MACs)
			f = float64(r.FastLayerTicks[i]*cref.InstructionsPerTick) / float64(len(tests)) / float64(l.MACs)
		}
		rep.LayerInstrPerMAC = append(rep.LayerInstrPerMAC, v)
		rep.FastLayerInstrPerMAC = append(rep.FastLayerInstrPerMAC, f)
		fastTicks += r.FastLayerTicks[i]
	}
	rep.FastInstrPerInference = float64(fastTicks*cref.InstructionsPerTick) / float64(len(tests))
	rep.FastInstrPerMAC = rep.FastInstrPerInference / float64(doc.Totals.MACs)
	ips, _ := nn.InferencesPerSecond(float64(info.Window.Samples(cfg))/float64(cfg.SampleRateHz), info.Window.Overlap)
	rep.InstrPerSecond = rep.InstrPerFrame*c.FramesPerSecond + rep.InstrPerInference*ips
	rep.Seconds = time.Since(t0).Seconds()
	return rep, nil
}
