package quant

import (
	"fmt"
	"math"

	"github.com/pipit-audio/pipit/nn"
)

// Config configures [Quantize].
type Config struct {
	Method string // MethodMinMax, MethodPercentile, MethodMSE or MethodAuto (default)
	Scheme Scheme
}

// LayerReport describes one integer layer after calibration.
type LayerReport struct {
	Index        int     `json:"index"`
	Op           string  `json:"op"`
	Act          string  `json:"activation"`
	OutScale     float64 `json:"out_scale"`
	OutZeroPoint int32   `json:"out_zero_point"`
	SQNRdB       float64 `json:"sqnr_db"`              // float activation vs dequantised int8 activation
	MaxAcc       int64   `json:"max_abs_acc"`          // worst-case |accumulator| from weights, bias and input range
	MarginBits   float64 `json:"overflow_margin_bits"` // log2((2^31−1) / MaxAcc)
}

// Report summarises a quantisation.
type Report struct {
	Method        string             `json:"method"`
	Layers        []LayerReport      `json:"layers"`
	Tried         map[string]float64 `json:"tried,omitempty"`   // auto: calibration score per method
	SQNRWindows   int                `json:"sqnr_windows"`      // calibration windows the SQNR and logit figures are computed on (at most SQNRWindows)
	LogitCorr     float64            `json:"logit_correlation"` // Pearson, float vs dequantised int8 logits
	LogitMaxErr   float64            `json:"logit_max_abs_error"`
	WeightBytes   int64              `json:"int8_weight_bytes"`
	FloatBytes    int64              `json:"float_weight_bytes"` // the same weights as float32
	OverheadBytes int64              `json:"overhead_bytes"`     // int32 bias, multiplier, shift
}

// SQNRWindows bounds the calibration windows whose float activations
// [Calibrate] keeps to compute the per-layer SQNR and the logit agreement:
// evenly spaced windows, at most this many, whatever the size of the
// calibration set (a window of the separable network keeps about 0.2 MB of
// activations).
const SQNRWindows = 256

// sliceSource is n inputs in one slice, with labels or none.
type sliceSource struct {
	x      []float32
	in     int
	labels []int
}

func (s *sliceSource) Len() int { return len(s.x) / s.in }
func (s *sliceSource) Sample(i, _ int, dst []float32) int {
	copy(dst, s.x[i*s.in:(i+1)*s.in])
	if s.labels == nil {
		return 0
	}
	return s.labels[i]
}

// Quantize is [Calibrate] on n calibration inputs x (N, Input) held in
// memory, with labels (nil: choose the method by SQNR alone).
func Quantize(net *nn.Network, x []float32, n int, labels []int, cfg Config) (*Model, *Report, error) {
	if n < 1 || len(x) != n*net.Input.Size() {
		return nil, nil, fmt.Errorf("quant: %d calibration values for %d inputs of %d", len(x), n, net.Input.Size())
	}
	if labels != nil && len(labels) != n {
		return nil, nil, fmt.Errorf("quant: %d labels for %d calibration inputs", len(labels), n)
	}
	return calibrate(net, &sliceSource{x: x, in: net.Input.Size(), labels: labels}, labels != nil, cfg)
}

// Calibrate calibrates and quantises net on the windows of calib, read in
// batches as a stream: every tensor's range observer keeps a bounded
// sample of its values, and float activations are kept only for
// [SQNRWindows] evenly spaced windows, so memory does not grow with the
// calibration set. With MethodAuto every method is tried and the one with
// the best int8 accuracy on the calibration labels is kept (ties go to
// the higher logit SQNR). The network is run in inference mode; it is not
// changed. The model's worst-case accumulators are checked against int32
// ([Model.CheckOverflow]); an overflow is an error.
func Calibrate(net *nn.Network, calib nn.SampleSource, cfg Config) (*Model, *Report, error) {
	return calibrate(net, calib, true, cfg)
}

func calibrate(net *nn.Network, src nn.SampleSource, labelled bool, cfg Config) (*Model, *Report, error) {
	if cfg.Method == "" {
		cfg.Method = MethodAuto
	}
	if cfg.Scheme.Weights == "" {
		cfg.Scheme.Weights = PerChannel
	}
	if cfg.Scheme.Weights != PerChannel && cfg.Scheme.Weights != PerTensor {
		return nil, nil, fmt.Errorf("quant: weight granularity %q (want %s or %s)", cfg.Scheme.Weights, PerChannel, PerTensor)
	}
	n := src.Len()
	if n < 1 {
		return nil, nil, fmt.Errorf("quant: empty calibration set")
	}
	fl, err := Fold(net)
	if err != nil {
		return nil, nil, err
	}
	// Observe the input and every folded layer's output over the calibration
	// set; keep the activations of every every-th window for the SQNR.
	obs := make([]*observer, len(fl)+1)
	for i := range obs {
		obs[i] = newObserver()
	}
	every := (n + SQNRWindows - 1) / SQNRWindows
	kept := make([][]float32, len(fl)+1) // (sample windows, tensor size) per tensor
	const batch = 32
	in := net.Input.Size()
	xb := make([]float32, batch*in)
	for lo := 0; lo < n; lo += batch {
		hi := min(lo+batch, n)
		for i := lo; i < hi; i++ {
			src.Sample(i, 0, xb[(i-lo)*in:(i-lo+1)*in])
		}
		x := xb[:(hi-lo)*in]
		net.Forward(x, hi-lo, false, nil)
		obs[0].add(x)
		for i, f := range fl {
			obs[i+1].add(net.Activation(f.NetIndex, hi-lo))
		}
		for i := lo; i < hi; i++ {
			if i%every != 0 {
				continue
			}
			kept[0] = append(kept[0], x[(i-lo)*in:(i-lo+1)*in]...)
			for k, f := range fl {
				sz := f.Out.Size()
				kept[k+1] = append(kept[k+1], net.Activation(f.NetIndex, hi-lo)[(i-lo)*sz:(i-lo+1)*sz]...)
			}
		}
	}
	sample := len(kept[0]) / in
	build := func(method string) (*Model, error) {
		act := make([]QParams, len(obs))
		for i, o := range obs {
			a, b, err := o.rangeFor(method)
			if err != nil {
				return nil, fmt.Errorf("quant: tensor %d: %w", i, err)
			}
			act[i] = activationParams(a, b, cfg.Scheme.Pow2)
		}
		layers, err := quantizeLayers(fl, act, cfg.Scheme)
		if err != nil {
			return nil, err
		}
		return &Model{Version: ModelVersion, Scheme: cfg.Scheme, Method: method, Input: net.Input, InputQ: act[0], Classes: net.Output().Size(), Layers: layers}, nil
	}
	methods := []string{cfg.Method}
	if cfg.Method == MethodAuto {
		methods = []string{MethodMinMax, MethodPercentile, MethodMSE}
	}
	var best *Model
	var bestRep *Report
	bestScore, bestSQNR := math.Inf(-1), math.Inf(-1)
	tried := map[string]float64{}
	for _, meth := range methods {
		m, err := build(meth)
		if err != nil {
			return nil, nil, err
		}
		rep := m.analyse(kept, sample)
		score := rep.Layers[len(rep.Layers)-1].SQNRdB
		sqnr := score
		if labelled {
			score = m.accuracy(src)
		}
		tried[meth] = score
		if score > bestScore || (score == bestScore && sqnr > bestSQNR) {
			best, bestRep, bestScore, bestSQNR = m, rep, score, sqnr
		}
	}
	if cfg.Method == MethodAuto {
		bestRep.Tried = tried
	}
	bestRep.Method = best.Method
	if err := best.CheckOverflow(); err != nil {
		return nil, nil, err
	}
	return best, bestRep, nil
}

// accuracy is the fraction of src's windows whose int8 arg-max logit is
// their label.
func (m *Model) accuracy(src nn.SampleSource) float64 {
	n := src.Len()
	x := make([]float32, m.Input.Size())
	q := make([]int8, len(x))
	correct := 0
	for i := 0; i < n; i++ {
		label := src.Sample(i, 0, x)
		m.InputQ.QuantizeInput(q, x)
		outs := m.RunAll(q)
		if nn.Argmax(outs[len(outs)-1]) == label {
			correct++
		}
	}
	return float64(correct) / float64(n)
}

// analyse runs the integer engine over the n sample windows whose float
// input and activations are acts[0] and acts[i+1], and compares every
// layer with the float activations.
func (m *Model) analyse(acts [][]float32, n int) *Report {
	rep := &Report{Method: m.Method, SQNRWindows: n}
	L := len(m.Layers)
	sig := make([]float64, L)
	noise := make([]float64, L)
	in := m.Input.Size()
	q := make([]int8, in)
	var sx, sy, sxx, syy, sxy float64
	var cnt float64
	for s := 0; s < n; s++ {
		m.InputQ.QuantizeInput(q, acts[0][s*in:(s+1)*in])
		outs := m.RunAll(q)
		for i, l := range m.Layers {
			sz := l.OutShape.Size()
			f := acts[i+1][s*sz : (s+1)*sz]
			for j, v := range outs[i] {
				d := l.Out.dequant(int32(v))
				sig[i] += float64(f[j]) * float64(f[j])
				e := float64(f[j]) - d
				noise[i] += e * e
				if i == L-1 {
					fv := float64(f[j])
					sx, sy, sxx, syy, sxy, cnt = sx+fv, sy+d, sxx+fv*fv, syy+d*d, sxy+fv*d, cnt+1
					rep.LogitMaxErr = math.Max(rep.LogitMaxErr, math.Abs(e))
				}
			}
		}
	}
	rep.LogitCorr = (cnt*sxy - sx*sy) / math.Sqrt((cnt*sxx-sx*sx)*(cnt*syy-sy*sy))
	for i := range m.Layers {
		l := &m.Layers[i]
		lr := LayerReport{Index: i, Op: l.Op, Act: l.Act, OutScale: l.Out.Scale, OutZeroPoint: l.Out.ZeroPoint, SQNRdB: 10 * math.Log10(sig[i]/math.Max(noise[i], 1e-30))}
		lr.MaxAcc, lr.MarginBits = l.worstAccumulator()
		rep.Layers = append(rep.Layers, lr)
	}
	rep.WeightBytes, rep.OverheadBytes = m.WeightBytes()
	rep.FloatBytes = 4 * rep.WeightBytes
	return rep
}

// worstAccumulator bounds |acc| of a MAC layer over every possible int8
// input: |bias| + Σ|w|·max|q − zp| per output channel, and returns the
// largest bound with its margin to int32 in bits.
func (l *Layer) worstAccumulator() (int64, float64) {
	if !l.isMAC() {
		return 0, 31
	}
	dx := int64(max(127-l.In.ZeroPoint, l.In.ZeroPoint+128))
	oc := l.outChannels()
	sum := make([]int64, oc)
	per := len(l.Weights) / oc
	for i, w := range l.Weights {
		c := i / per
		if l.Op == OpDepthwise {
			c = i % oc
		}
		a := int64(w)
		if a < 0 {
			a = -a
		}
		sum[c] += a * dx
	}
	var worst int64
	for c, s := range sum {
		b := int64(l.Bias[c])
		if b < 0 {
			b = -b
		}
		worst = max(worst, s+b)
	}
	return worst, math.Log2(float64(math.MaxInt32) / math.Max(float64(worst), 1))
}

// CheckOverflow returns an error wrapping [ErrOverflow] naming the first
// layer whose worst-case accumulator does not fit int32.
func (m *Model) CheckOverflow() error {
	for i := range m.Layers {
		if w, _ := m.Layers[i].worstAccumulator(); w > math.MaxInt32 {
			return fmt.Errorf("%w: layer %d (%s): worst-case accumulator %d exceeds int32", ErrOverflow, i, m.Layers[i].Op, w)
		}
	}
	return nil
}
