package quant

import (
	"encoding/json"
	"fmt"
	"math"

	"github.com/pipit-audio/pipit/internal/kernels"
	"github.com/pipit-audio/pipit/nn"
)

// Weight granularities of [Scheme].
const (
	PerChannel = "per-channel"
	PerTensor  = "per-tensor"
)

// Scheme says how a network is quantised; it is recorded in every
// quantised model so a runtime never guesses.
type Scheme struct {
	Weights string `json:"weights"`    // PerChannel (default) or PerTensor
	Pow2    bool   `json:"pow2_scale"` // all scales powers of two (multipliers exact shifts)
}

// Layer is one integer operation. Weights are int8 symmetric (zero point
// 0); Bias is int32 at scale In.Scale·WeightScale[c]; Mult and Shift hold
// each output channel's requantisation multiplier (per-tensor schemes
// repeat the same values); outputs are clamped to [ClampLo, ClampHi].
// Pooling layers keep their input's parameters (In == Out).
type Layer struct {
	Op          string           `json:"op"`
	InShape     nn.Shape         `json:"in_shape"`
	OutShape    nn.Shape         `json:"out_shape"`
	Geom        kernels.ConvGeom `json:"geometry"`
	Act         string           `json:"activation"`
	In          QParams          `json:"input"`
	Out         QParams          `json:"output"`
	Weights     []int8           `json:"weights,omitempty"`
	WeightScale []float64        `json:"weight_scale,omitempty"`
	Bias        []int32          `json:"bias,omitempty"`
	Mult        []int32          `json:"multiplier,omitempty"`
	Shift       []int32          `json:"shift,omitempty"`
	ClampLo     int32            `json:"clamp_lo"`
	ClampHi     int32            `json:"clamp_hi"`
	NetIndex    int              `json:"net_index"`
}

// Model is a quantised network.
type Model struct {
	Version int             `json:"version"`
	Scheme  Scheme          `json:"scheme"`
	Method  string          `json:"method"`
	Input   nn.Shape        `json:"input_shape"`
	InputQ  QParams         `json:"input_q"`
	Classes int             `json:"classes"`
	Layers  []Layer         `json:"layers"`
	Meta    json.RawMessage `json:"meta,omitempty"` // opaque to quant (front end, class names, ...)
}

// ModelVersion is the version of the quantised model format.
const ModelVersion = 1

// isMAC reports whether the operation has weights.
func (l *Layer) isMAC() bool { return l.Op == OpConv || l.Op == OpDepthwise || l.Op == OpDense }

// outChannels returns the number of output channels of a MAC layer.
func (l *Layer) outChannels() int { return len(l.Bias) }

// quantizeLayers builds integer layers from folded float layers and the
// activation parameters of the input (act[0]) and of every layer's
// output (act[i+1]).
func quantizeLayers(fl []FloatLayer, act []QParams, s Scheme) ([]Layer, error) {
	act = append([]QParams(nil), act...)
	var out []Layer
	for i := range fl {
		f := &fl[i]
		l := Layer{Op: f.Op, InShape: f.In, OutShape: f.Out, Geom: f.Geom, Act: f.Act, In: act[i], Out: act[i+1], NetIndex: f.NetIndex}
		if !l.isMAC() {
			l.Out = l.In // pooling keeps scale and zero point, and so does what reads it
			act[i+1] = l.In
			l.ClampLo, l.ClampHi = -128, 127
			out = append(out, l)
			continue
		}
		oc := len(f.Bias)
		scales, chanOf := weightScales(f.Weight, oc, f.Op == OpDepthwise, s)
		l.WeightScale = scales
		l.Weights = make([]int8, len(f.Weight))
		for i, w := range f.Weight {
			q := math.Round(float64(w) / l.WeightScale[chanOf(i)])
			l.Weights[i] = int8(math.Max(-127, math.Min(127, q)))
		}
		l.Bias = make([]int32, oc)
		l.Mult = make([]int32, oc)
		l.Shift = make([]int32, oc)
		for c := 0; c < oc; c++ {
			bs := l.In.Scale * l.WeightScale[c]
			b := math.Round(float64(f.Bias[c]) / bs)
			if math.Abs(b) > math.MaxInt32 {
				return nil, fmt.Errorf("quant: layer %d (%s) channel %d: bias %g does not fit int32 at scale %g", i, f.Op, c, f.Bias[c], bs)
			}
			l.Bias[c] = int32(b)
			m0, sh, err := EncodeRescale(bs / l.Out.Scale)
			if err != nil {
				return nil, fmt.Errorf("quant: layer %d (%s) channel %d: %w", i, f.Op, c, err)
			}
			l.Mult[c], l.Shift[c] = m0, int32(sh)
		}
		l.ClampLo, l.ClampHi = -128, 127
		switch f.Act {
		case ActReLU:
			l.ClampLo = max(-128, l.Out.ZeroPoint)
		case ActReLU6:
			l.ClampLo = max(-128, l.Out.ZeroPoint)
			l.ClampHi = min(127, l.Out.quant(6))
		}
		out = append(out, l)
	}
	return out, nil
}

// weightScales returns the symmetric int8 scale of every output channel of
// weights w (per tensor when the scheme says so) and the map from a weight
// index to its channel: output-channel-major layouts, except depthwise
// (KH, KW, C), whose channel is the fastest axis. Conversion and
// quantisation-aware training both use it, so they agree on the grid.
func weightScales(w []float32, oc int, depthwise bool, s Scheme) ([]float64, func(int) int) {
	per := len(w) / oc
	chanOf := func(i int) int { return i / per }
	if depthwise {
		chanOf = func(i int) int { return i % oc }
	}
	maxAbs := make([]float64, oc)
	for i, v := range w {
		c := chanOf(i)
		maxAbs[c] = math.Max(maxAbs[c], math.Abs(float64(v)))
	}
	if s.Weights == PerTensor {
		m := 0.0
		for _, v := range maxAbs {
			m = math.Max(m, v)
		}
		for c := range maxAbs {
			maxAbs[c] = m
		}
	}
	scales := make([]float64, oc)
	for c, m := range maxAbs {
		scales[c] = weightScale(m, s.Pow2)
	}
	return scales, chanOf
}

// WeightBytes returns the int8 weight bytes and the overhead bytes (int32
// bias, multiplier and shift per output channel) of m.
func (m *Model) WeightBytes() (weights, overhead int64) {
	for i := range m.Layers {
		l := &m.Layers[i]
		weights += int64(len(l.Weights))
		overhead += 4 * int64(len(l.Bias)+len(l.Mult)+len(l.Shift))
	}
	return weights, overhead
}
