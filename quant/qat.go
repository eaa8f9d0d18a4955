package quant

import (
	"fmt"
	"math"
	"strings"

	"github.com/pipit-audio/pipit/nn"
)

// QAT carries a network through quantisation-aware fine-tuning (Jacob et al.
// 2018 §3; Krishnamoorthi 2018 §3.2, fine-tuning from a float model): the
// float network is folded (batch norm into the preceding layers), every
// operation's output and the input pass through an nn.FakeQuant layer
// that quantises with this package's activation rule, and during each
// training step the weights are replaced by their fake-quantised values
// (per channel or per tensor, as the scheme says) while the update goes to
// float master weights (the straight-through estimator for weights).
type QAT struct {
	Net     *nn.Network // the network to fine-tune (owns its workers: Close it)
	scheme  Scheme
	inputFQ *nn.FakeQuant
	opFQ    []*nn.FakeQuant // per folded operation; nil for pooling
	master  []float32
	snap    []float32
	weights []nn.ParamEntry // MAC weight tensors
	started bool
}

// NewQAT builds the fine-tuning network from a trained float network.
// Its inference output before any training equals net's (up to folding
// rounding).
func NewQAT(net *nn.Network, s Scheme) (*QAT, error) {
	if s.Weights == "" {
		s.Weights = PerChannel
	}
	fl, err := Fold(net)
	if err != nil {
		return nil, err
	}
	var b strings.Builder
	fmt.Fprintf(&b, "input shape=%s\nfakequant\n", net.Input)
	for _, f := range fl {
		g := f.Geom
		pad := func() string {
			bottom := max(0, (g.OH-1)*g.SH+g.KH-g.H-g.PadTop)
			right := max(0, (g.OW-1)*g.SW+g.KW-g.W-g.PadLeft)
			return fmt.Sprintf("pad=%d,%d,%d,%d", g.PadTop, bottom, g.PadLeft, right)
		}
		switch f.Op {
		case OpConv:
			fmt.Fprintf(&b, "conv out=%d kernel=%dx%d stride=%dx%d %s bias=true\n", f.Out.C, g.KH, g.KW, g.SH, g.SW, pad())
		case OpDepthwise:
			fmt.Fprintf(&b, "depthwise kernel=%dx%d stride=%dx%d %s bias=true\n", g.KH, g.KW, g.SH, g.SW, pad())
		case OpDense:
			fmt.Fprintf(&b, "dense out=%d\n", f.Out.Size())
		case OpMaxPool, OpAvgPool:
			fmt.Fprintf(&b, "%s size=%dx%d stride=%dx%d %s\n", f.Op, g.KH, g.KW, g.SH, g.SW, pad())
		case OpGlobalAvgPool:
			b.WriteString("globalavgpool\n")
		}
		switch f.Act {
		case ActReLU:
			b.WriteString("relu\n")
		case ActReLU6:
			b.WriteString("relu6\n")
		}
		if f.Bias != nil {
			b.WriteString("fakequant\n")
		}
	}
	qnet, err := nn.FromSpec(b.String(), nn.Shape{}, 1)
	if err != nil {
		return nil, fmt.Errorf("quant: QAT network: %w", err)
	}
	q := &QAT{Net: qnet, scheme: s}
	qp := func(lo, hi float64) (float64, int32) {
		p := activationParams(lo, hi, s.Pow2)
		return p.Scale, p.ZeroPoint
	}
	op := 0
	for i, l := range qnet.Layers {
		switch v := l.(type) {
		case *nn.FakeQuant:
			v.QParams = qp
			if i == 0 {
				q.inputFQ = v
			} else {
				q.opFQ[len(q.opFQ)-1] = v
			}
		case *nn.Conv2D, *nn.Depthwise, *nn.Dense, *nn.Pool, *nn.GlobalAvgPool:
			f := fl[op]
			op++
			q.opFQ = append(q.opFQ, nil)
			switch v := v.(type) {
			case *nn.Conv2D:
				copy(v.Weight, f.Weight)
				copy(v.Bias, f.Bias)
			case *nn.Depthwise:
				copy(v.Weight, f.Weight)
				copy(v.Bias, f.Bias)
			case *nn.Dense:
				copy(v.Weight, f.Weight)
				copy(v.Bias, f.Bias)
			}
		}
	}
	for _, e := range qnet.Params.Entries {
		if strings.HasSuffix(e.Name, ".weight") {
			q.weights = append(q.weights, e)
		}
	}
	return q, nil
}

// Attach makes tr (which must train q.Net) fake-quantise weights in every
// step.
func (q *QAT) Attach(tr *nn.Trainer) {
	tr.BeforeStep = q.beforeStep
	tr.AfterStep = q.afterStep
}

// beforeStep, on the first step, keeps the float weights as the master
// copy and installs their fake-quantised values.
func (q *QAT) beforeStep() {
	if q.started {
		return
	}
	q.started = true
	q.master = append([]float32(nil), q.Net.Params.Data...)
	q.snap = make([]float32, len(q.master))
	q.install()
}

// afterStep moves the step's update onto the master weights and installs
// their new fake-quantised values.
func (q *QAT) afterStep() {
	d := q.Net.Params.Data
	for i := range d {
		q.master[i] += d[i] - q.snap[i]
	}
	q.install()
}

// install writes fake-quantised master weights (and the other parameters
// as they are) into the network, remembering what it wrote.
func (q *QAT) install() {
	d := q.Net.Params.Data
	copy(d, q.master)
	for _, e := range q.weights {
		w := d[e.Offset : e.Offset+e.Size]
		fakeQuantWeights(w, e, q.scheme)
	}
	copy(q.snap, d)
}

// fakeQuantWeights rounds w to the int8 grid quantizeLayers will use.
func fakeQuantWeights(w []float32, e nn.ParamEntry, s Scheme) {
	depthwise := strings.Contains(e.Name, ".depthwise.")
	oc := e.Shape[0]
	if depthwise {
		oc = e.Shape[len(e.Shape)-1]
	}
	scales, chanOf := weightScales(w, oc, depthwise, s)
	for i, v := range w {
		sc := scales[chanOf(i)]
		w[i] = float32(sc * math.Max(-127, math.Min(127, math.Round(float64(v)/sc))))
	}
}

// weightScale is the symmetric int8 weight scale for a channel whose
// largest magnitude is m.
func weightScale(m float64, pow2 bool) float64 {
	sc := math.Max(m, 1e-12) / 127
	if pow2 {
		sc = math.Pow(2, math.Ceil(math.Log2(sc)))
	}
	return sc
}

// Quantize quantises the fine-tuned network with the ranges its FakeQuant
// layers tracked (the method is recorded as "qat"). Like [Calibrate] it
// checks the worst-case accumulators against int32: an overflow is an
// error wrapping [ErrOverflow].
func (q *QAT) Quantize() (*Model, error) {
	fl, err := Fold(q.Net)
	if err != nil {
		return nil, err
	}
	if len(fl) != len(q.opFQ) || q.inputFQ == nil {
		return nil, fmt.Errorf("quant: QAT network has not been trained")
	}
	lo, hi, seen := q.inputFQ.Range()
	if !seen {
		return nil, fmt.Errorf("quant: QAT network has not been trained")
	}
	act := make([]QParams, len(fl)+1)
	act[0] = activationParams(lo, hi, q.scheme.Pow2)
	for i, fq := range q.opFQ {
		if fq == nil {
			act[i+1] = act[i] // pooling keeps its input's parameters
			continue
		}
		lo, hi, _ := fq.Range()
		act[i+1] = activationParams(lo, hi, q.scheme.Pow2)
	}
	layers, err := quantizeLayers(fl, act, q.scheme)
	if err != nil {
		return nil, err
	}
	m := &Model{Version: ModelVersion, Scheme: q.scheme, Method: "qat", Input: q.Net.Input, InputQ: act[0], Classes: q.Net.Output().Size(), Layers: layers}
	if err := m.Validate(); err != nil {
		return nil, err
	}
	if err := m.CheckOverflow(); err != nil {
		return nil, err
	}
	return m, nil
}
