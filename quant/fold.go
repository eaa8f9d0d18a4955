package quant

import (
	"fmt"
	"math"

	"github.com/pipit-audio/pipit/internal/kernels"
	"github.com/pipit-audio/pipit/nn"
)

// Operations of a folded or quantised network.
const (
	OpConv          = "conv"      // also pointwise: a 1×1 convolution
	OpDepthwise     = "depthwise" // multiplier 1
	OpDense         = "dense"
	OpMaxPool       = "maxpool"
	OpAvgPool       = "avgpool"
	OpGlobalAvgPool = "globalavgpool"
)

// Fused activations.
const (
	ActNone  = "none"
	ActReLU  = "relu"
	ActReLU6 = "relu6"
)

// FloatLayer is one operation of a network after batch-norm folding and
// activation fusion, still in float32.
type FloatLayer struct {
	Op       string
	In, Out  nn.Shape
	Geom     kernels.ConvGeom // conv, depthwise, pooling
	Weight   []float32        // conv (OutC, KH, KW, InC); depthwise (KH, KW, C); dense (Out, In)
	Bias     []float32        // (OutC); always present for MAC operations after folding
	Act      string           // fused activation
	NetIndex int              // index of the nn layer whose output equals this operation's output
}

// MACs returns multiply-accumulates per inference, as nn.Cost counts them.
func (l *FloatLayer) MACs() int64 { return macCount(l.Op, l.Geom, l.Out.C, len(l.Weight)) }

// macCount counts the multiply-accumulates of one operation: kernel taps
// times output values (MobileNets §3.1); a dense layer's are its weights.
func macCount(op string, g kernels.ConvGeom, outC, weights int) int64 {
	switch op {
	case OpConv:
		return int64(g.OH*g.OW) * int64(outC) * int64(g.KH*g.KW*g.C)
	case OpDepthwise:
		return int64(g.OH*g.OW) * int64(g.C) * int64(g.KH*g.KW)
	case OpDense:
		return int64(weights)
	}
	return 0
}

// Fold converts net into folded operations: every batch norm is folded
// into the convolution, depthwise or dense layer before it,
// W' = W·γ/σ, b' = (b − μ)·γ/σ + β with σ = √(running var + ε)
// (Krishnamoorthi 2018, eqs. 20–21), ReLU and ReLU6 following a MAC layer
// become its fused activation, and dropout and flatten vanish. Other
// orders (batch norm or ReLU without a MAC layer before them, a ReLU with
// another cap) are an error naming the layer. The weights are copies; net
// is not changed.
func Fold(net *nn.Network) ([]FloatLayer, error) {
	var out []FloatLayer
	in := net.Input
	for i := 0; i < len(net.Layers); i++ {
		l := net.Layers[i]
		var fl FloatLayer
		switch v := l.(type) {
		case *nn.Conv2D:
			fl = FloatLayer{Op: OpConv, Geom: v.Geometry(), Weight: append([]float32(nil), v.Weight...), Bias: biasOrZero(v.Bias, v.Config().Out)}
		case *nn.Depthwise:
			g := v.Geometry()
			fl = FloatLayer{Op: OpDepthwise, Geom: g, Weight: append([]float32(nil), v.Weight...), Bias: biasOrZero(v.Bias, g.C)}
		case *nn.Dense:
			fl = FloatLayer{Op: OpDense, Weight: append([]float32(nil), v.Weight...), Bias: append([]float32(nil), v.Bias...)}
		case *nn.Pool:
			op := OpAvgPool
			if v.Max {
				op = OpMaxPool
			}
			fl = FloatLayer{Op: op, Geom: v.Geometry()}
		case *nn.GlobalAvgPool:
			fl = FloatLayer{Op: OpGlobalAvgPool}
		case *nn.Dropout, *nn.Flatten, *nn.FakeQuant:
			in = net.Shapes[i]
			if len(out) > 0 {
				out[len(out)-1].NetIndex, out[len(out)-1].Out = i, in
			}
			continue
		default:
			return nil, fmt.Errorf("quant: layer %d (%s) must follow a convolution, depthwise or dense layer to be folded or fused", i, l.Kind())
		}
		fl.In, fl.Out, fl.Act, fl.NetIndex = in, net.Shapes[i], ActNone, i
		if fl.Bias != nil { // MAC layer: fold a following batch norm, fuse a following ReLU
			if i+1 < len(net.Layers) {
				if bn, ok := net.Layers[i+1].(*nn.BatchNorm); ok {
					foldBN(&fl, bn)
					i++
					fl.NetIndex = i
				}
			}
			if i+1 < len(net.Layers) {
				if r, ok := net.Layers[i+1].(*nn.ReLU); ok {
					switch r.Cap {
					case 0:
						fl.Act = ActReLU
					case 6:
						fl.Act = ActReLU6
					default:
						return nil, fmt.Errorf("quant: layer %d: ReLU capped at %g is not supported (only 0 or 6)", i+1, r.Cap)
					}
					i++
					fl.NetIndex = i
				}
			}
		}
		out = append(out, fl)
		in = fl.Out
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("quant: network has no operations")
	}
	return out, nil
}

func biasOrZero(b []float32, n int) []float32 {
	if b == nil {
		return make([]float32, n)
	}
	return append([]float32(nil), b...)
}

// foldBN scales each output channel c of fl by γ_c/σ_c and shifts its bias.
func foldBN(fl *FloatLayer, bn *nn.BatchNorm) {
	outC := len(fl.Bias)
	s := make([]float64, outC)
	for c := range s {
		s[c] = float64(bn.Gamma[c]) / math.Sqrt(float64(bn.RunVar[c])+bn.Eps)
		fl.Bias[c] = float32((float64(fl.Bias[c])-float64(bn.RunMean[c]))*s[c] + float64(bn.Beta[c]))
	}
	switch fl.Op {
	case OpDepthwise: // (KH, KW, C): the channel is the last axis
		for i := range fl.Weight {
			fl.Weight[i] = float32(float64(fl.Weight[i]) * s[i%outC])
		}
	default: // (OutC, ...): the channel is the first axis
		per := len(fl.Weight) / outC
		for i := range fl.Weight {
			fl.Weight[i] = float32(float64(fl.Weight[i]) * s[i/per])
		}
	}
}

// FloatForward runs folded layers on n samples of x and returns every
// layer's output (N, Out). It is the float reference of the quantised
// network (and what Fold is checked against).
func FloatForward(layers []FloatLayer, x []float32, n int) [][]float32 {
	outs := make([][]float32, len(layers))
	cur := x
	for li := range layers {
		l := &layers[li]
		inSz, outSz := l.In.Size(), l.Out.Size()
		y := make([]float32, n*outSz)
		for s := 0; s < n; s++ {
			xi, yi := cur[s*inSz:(s+1)*inSz], y[s*outSz:(s+1)*outSz]
			floatOp(l, xi, yi)
		}
		outs[li] = y
		cur = y
	}
	return outs
}

func floatOp(l *FloatLayer, x, y []float32) {
	g := l.Geom
	switch l.Op {
	case OpConv:
		cols := make([]float32, g.ColSize())
		kernels.Im2col(g, x, cols)
		oc := l.Out.C
		for p := 0; p < g.OH*g.OW; p++ {
			copy(y[p*oc:(p+1)*oc], l.Bias)
		}
		kernels.GemmNT(g.OH*g.OW, oc, g.KH*g.KW*g.C, cols, l.Weight, y)
	case OpDepthwise:
		for p := 0; p < g.OH*g.OW; p++ {
			copy(y[p*g.C:(p+1)*g.C], l.Bias)
		}
		kernels.DepthwiseForward(g, x, l.Weight, y)
	case OpDense:
		copy(y, l.Bias)
		kernels.GemmNT(1, len(l.Bias), len(x), x, l.Weight, y)
	case OpMaxPool, OpAvgPool:
		for oh := 0; oh < g.OH; oh++ {
			for ow := 0; ow < g.OW; ow++ {
				h0, h1 := max(oh*g.SH-g.PadTop, 0), min(oh*g.SH-g.PadTop+g.KH, g.H)
				w0, w1 := max(ow*g.SW-g.PadLeft, 0), min(ow*g.SW-g.PadLeft+g.KW, g.W)
				for c := 0; c < g.C; c++ {
					acc := float32(math.Inf(-1))
					var sum float32
					for ih := h0; ih < h1; ih++ {
						for iw := w0; iw < w1; iw++ {
							v := x[(ih*g.W+iw)*g.C+c]
							acc = max(acc, v)
							sum += v
						}
					}
					if l.Op == OpAvgPool {
						acc = sum / float32((h1-h0)*(w1-w0))
					}
					y[(oh*g.OW+ow)*g.C+c] = acc
				}
			}
		}
	case OpGlobalAvgPool:
		c := l.In.C
		hw := l.In.H * l.In.W
		for ch := 0; ch < c; ch++ {
			var s float64
			for q := 0; q < hw; q++ {
				s += float64(x[q*c+ch])
			}
			y[ch] = float32(s / float64(hw))
		}
	}
	switch l.Act {
	case ActReLU:
		for i, v := range y {
			y[i] = max(v, 0)
		}
	case ActReLU6:
		for i, v := range y {
			y[i] = min(max(v, 0), 6)
		}
	}
}
