package quant

import (
	"bytes"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"
	"time"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant/cref"
)

// yardRecording is 2.5 s of an invented timber-yard scene at 16 kHz, 16
// bit: a 1.2 kHz saw whine with a harmonic over pink-ish noise, louder in
// the middle.
func yardRecording(n int, seed uint64) []int16 {
	rng := rand.New(rand.NewPCG(seed, 2))
	p := make([]int16, n)
	var lp float64
	for i := range p {
		lp = 0.97*lp + 0.03*rng.NormFloat64()
		env := 0.2 + 0.8*math.Exp(-math.Pow(float64(i-n/2)/float64(n/5), 2))
		v := env*(0.3*math.Sin(2*math.Pi*1200*float64(i)/16000)+0.1*math.Sin(2*math.Pi*2400*float64(i)/16000)) + 0.5*lp
		p[i] = int16(math.Max(-32768, math.Min(32767, math.Round(v*32768*0.8))))
	}
	return p
}

// TestEmulatedCortexM4 cross-compiles the reference runtime and the C
// front end for a Cortex-M4 (arm-none-eabi-gcc, cref.M4Flags), runs them
// under QEMU's mps2-an386 and requires the logits of every test input to
// equal the Go engine's bit for bit, the front end's inputs made on the
// emulated core from a recording to match the Go front end (≥ 99.9 %
// identical, ≤ 1 LSB), and the network's logits on those inputs to equal
// the Go engine's. It skips when the cross tools are missing.
func TestEmulatedCortexM4(t *testing.T) {
	tools, err := cref.FindM4Tools()
	if err != nil {
		t.Skip(err)
	}
	net, m, blob, doc, x := exportedModel(t, "separable")
	defer net.Close()
	cfg := features.DefaultConfig()
	pcm := yardRecording(40000, 1)
	ex, err := features.NewExtractor(cfg)
	if err != nil {
		t.Fatal(err)
	}
	samples := make([]float32, len(pcm))
	for i, v := range pcm {
		samples[i] = float32(v) / 32768
	}
	mat, err := ex.Compute(samples)
	if err != nil {
		t.Fatal(err)
	}
	acc := features.NewBandStatsAccumulator(cfg.Bands)
	frames := mat.Shape()[1]
	if err := acc.Add(mat.Data().([]float32), frames); err != nil {
		t.Fatal(err)
	}
	st, _ := acc.Stats()
	W, hopFrames := m.Input.W, 31
	feHdr, _, err := cref.FrontEndCHeader(cref.FrontEnd{Config: cfg, Stats: st, InputScale: m.InputQ.Scale, InputZeroPoint: m.InputQ.ZeroPoint, Frames: W, HopFrames: hopFrames}, "yard")
	if err != nil {
		t.Fatal(err)
	}
	in := m.Input.Size()
	var inputs [][]int8
	for s := 0; s < 3; s++ {
		q := make([]int8, in)
		m.InputQ.QuantizeInput(q, x[s*in:(s+1)*in])
		inputs = append(inputs, q)
	}
	job := cref.M4Job{Prefix: "yard", NetHeader: CHeader(blob, doc, "yard"), FEHeader: feHdr, Inputs: inputs,
		InputSize: in, OutputSize: m.Layers[len(m.Layers)-1].OutShape.Size(), Layers: len(m.Layers), PCM: pcm, Chunk: 160}
	dir := t.TempDir()
	if d := os.Getenv("PIPIT_KEEP_M4"); d != "" {
		dir = d
	}
	elf, sizes, err := cref.BuildM4(dir, tools, job)
	if err != nil {
		t.Fatal(err)
	}
	r, err := cref.RunM4(elf, tools, job, 90*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	for k, q := range inputs {
		outs := m.RunAll(q)
		if !bytes.Equal(i8b(outs[len(outs)-1]), i8b(r.Logits[k])) {
			t.Errorf("input %d: emulated Cortex-M4 logits %v, Go engine %v", k, r.Logits[k], outs[len(outs)-1])
		}
		if !bytes.Equal(i8b(outs[len(outs)-1]), i8b(r.FastLogits[k])) {
			t.Errorf("input %d: fast kernels' logits %v, Go engine %v", k, r.FastLogits[k], outs[len(outs)-1])
		}
	}
	if r.RequantCases == 0 || r.RequantBad != 0 {
		t.Errorf("on the core, pipit_requant_fast differs from pipit_requant in %d of %d cases", r.RequantBad, r.RequantCases)
	}
	for i, l := range doc.Layers {
		if l.MACs > 0 {
			per := func(ticks uint64) float64 {
				return float64(ticks*cref.InstructionsPerTick) / float64(len(inputs)) / float64(l.MACs)
			}
			t.Logf("layer %d %s: %.2f instructions per MAC (reference), %.2f (fast kernels)", i, l.Op, per(r.LayerTicks[i]), per(r.FastLayerTicks[i]))
		}
	}
	// Go's inputs from the same recording: normalised, quantised windows of
	// W frames every hopFrames frames.
	data := mat.Data().([]float32)
	st.Apply(data)
	wantInputs := 0
	same, total, worst := 0, 0, 0
	for start := 0; start+W <= frames; start += hopFrames {
		win := make([]float32, cfg.Bands*W)
		for b := 0; b < cfg.Bands; b++ {
			copy(win[b*W:(b+1)*W], data[b*frames+start:b*frames+start+W])
		}
		q := make([]int8, in)
		m.InputQ.QuantizeInput(q, win)
		if wantInputs >= len(r.RecInputs) {
			break
		}
		got := r.RecInputs[wantInputs]
		for i := range q {
			d := int(got[i]) - int(q[i])
			total++
			if d == 0 {
				same++
			}
			worst = max(worst, d, -d)
		}
		outs := m.RunAll(got)
		if !bytes.Equal(i8b(outs[len(outs)-1]), i8b(r.RecLogits[wantInputs])) {
			t.Errorf("recording input %d: emulated logits differ from the Go engine's on the same input", wantInputs)
		}
		wantInputs++
	}
	if wantInputs != len(r.RecInputs) || r.Frames != uint64(frames) {
		t.Errorf("emulated front end: %d inputs from %d frames, Go %d from %d", len(r.RecInputs), r.Frames, wantInputs, frames)
	}
	if total == 0 || float64(same) < 0.999*float64(total) || worst > 1 {
		t.Errorf("emulated front end: %d of %d int8 values equal Go's, worst %d LSB", same, total, worst)
	}
	// The toolchain's sizes against the cost models (32-bit target).
	c, _ := features.CostOnDevice(cfg, W)
	tables := 0
	for name, n := range sizes.Symbols {
		if strings.HasPrefix(name, "yard_fe_") {
			tables += n
		}
	}
	if sizes.Symbols["fe"] != c.RAMBytes || tables != c.TableBytes || sizes.Symbols["pool"] != doc.Memory.PoolBytes || sizes.Symbols["yard_blob"] != len(blob) {
		t.Errorf("arm-none-eabi-nm: front-end state %d B (model %d), tables %d B (model %d), pool %d B (plan %d), blob %d B (%d)",
			sizes.Symbols["fe"], c.RAMBytes, tables, c.TableBytes, sizes.Symbols["pool"], doc.Memory.PoolBytes, sizes.Symbols["yard_blob"], len(blob))
	}
	// Code size against the cost model's measured constants (a quarter of
	// slack for other compiler versions).
	for _, c := range []struct {
		name       string
		got, model int
	}{{"runtime", sizes.RuntimeCode, nn.RuntimeCodeBytes}, {"front end", sizes.FrontEndCode, features.FrontEndCodeBytes}} {
		if math.Abs(float64(c.got-c.model)) > 0.25*float64(c.model) {
			t.Errorf("%s code: %d bytes from arm-none-eabi-size, cost model %d", c.name, c.got, c.model)
		}
	}
	netInstr := float64(r.NetTicks*cref.InstructionsPerTick) / float64(len(r.RecInputs))
	t.Logf("sizes %+v; stack %d B; front end %.0f instructions/frame; network %.0f instructions/inference (%.2f per MAC); front-end inputs %d/%d values equal",
		sizes, r.StackBytes, float64(r.FETicks*cref.InstructionsPerTick)/float64(r.Frames), netInstr, netInstr/float64(doc.Totals.MACs), same, total)
}
