package quant

import (
	"fmt"

	"github.com/pipit-audio/pipit/internal/kernels"
)

// The integer-only engine. Every kernel below takes and returns integer
// slices only (int8 activations and weights, int32 bias, multipliers and
// shifts); accumulation is int32 (int64 only inside the fixed-point
// multiply, as in Jacob et al. 2018). Layout is channels-last as in package nn.

// requant maps an int32 accumulator to int8 with multiplier (m0, shift),
// output zero point zp and clamp [lo, hi].
func requant(acc, m0, shift, zp, lo, hi int32) int8 {
	v := Rescale(acc, m0, int(shift)) + zp
	if v < lo {
		v = lo
	} else if v > hi {
		v = hi
	}
	return int8(v)
}

// convInt8: x (H, W, InC) with zero point xzp, w (OutC, KH, KW, InC), out
// (OH, OW, OutC). Padding positions hold the real value 0 (q = xzp) and so
// contribute nothing to Σ (x − xzp)·w.
func convInt8(g kernels.ConvGeom, x []int8, xzp int32, w []int8, bias, mult, shift []int32, ozp, lo, hi int32, out []int8) {
	oc := len(bias)
	k := g.KH * g.KW * g.C
	for oh := 0; oh < g.OH; oh++ {
		for ow := 0; ow < g.OW; ow++ {
			o := out[(oh*g.OW+ow)*oc : (oh*g.OW+ow+1)*oc]
			for c := 0; c < oc; c++ {
				acc := bias[c]
				wc := w[c*k : (c+1)*k]
				for kh := 0; kh < g.KH; kh++ {
					ih := oh*g.SH - g.PadTop + kh
					if ih < 0 || ih >= g.H {
						continue
					}
					for kw := 0; kw < g.KW; kw++ {
						iw := ow*g.SW - g.PadLeft + kw
						if iw < 0 || iw >= g.W {
							continue
						}
						xs := x[(ih*g.W+iw)*g.C : (ih*g.W+iw+1)*g.C]
						ws := wc[(kh*g.KW+kw)*g.C : (kh*g.KW+kw+1)*g.C]
						for i, v := range xs {
							acc += (int32(v) - xzp) * int32(ws[i])
						}
					}
				}
				o[c] = requant(acc, mult[c], shift[c], ozp, lo, hi)
			}
		}
	}
}

// depthwiseInt8: x (H, W, C), w (KH, KW, C), out (OH, OW, C).
func depthwiseInt8(g kernels.ConvGeom, x []int8, xzp int32, w []int8, bias, mult, shift []int32, ozp, lo, hi int32, out []int8) {
	c := g.C
	acc := make([]int32, c)
	for oh := 0; oh < g.OH; oh++ {
		for ow := 0; ow < g.OW; ow++ {
			copy(acc, bias)
			for kh := 0; kh < g.KH; kh++ {
				ih := oh*g.SH - g.PadTop + kh
				if ih < 0 || ih >= g.H {
					continue
				}
				for kw := 0; kw < g.KW; kw++ {
					iw := ow*g.SW - g.PadLeft + kw
					if iw < 0 || iw >= g.W {
						continue
					}
					xs := x[(ih*g.W+iw)*c : (ih*g.W+iw+1)*c]
					ws := w[(kh*g.KW+kw)*c : (kh*g.KW+kw+1)*c]
					for ch := range acc {
						acc[ch] += (int32(xs[ch]) - xzp) * int32(ws[ch])
					}
				}
			}
			o := out[(oh*g.OW+ow)*c : (oh*g.OW+ow+1)*c]
			for ch, a := range acc {
				o[ch] = requant(a, mult[ch], shift[ch], ozp, lo, hi)
			}
		}
	}
}

// denseInt8: x (In), w (Out, In), out (Out).
func denseInt8(x []int8, xzp int32, w []int8, bias, mult, shift []int32, ozp, lo, hi int32, out []int8) {
	in := len(x)
	for o := range out {
		acc := bias[o]
		for i, v := range w[o*in : (o+1)*in] {
			acc += (int32(x[i]) - xzp) * int32(v)
		}
		out[o] = requant(acc, mult[o], shift[o], ozp, lo, hi)
	}
}

// roundDiv divides a by b > 0 rounding half away from zero.
func roundDiv(a, b int32) int32 {
	if a >= 0 {
		return (a + b/2) / b
	}
	return -((-a + b/2) / b)
}

// poolInt8: max or average over each window of x (H, W, C) into out
// (OH, OW, C); padded positions are ignored; the average is the rounded
// integer mean, so scale and zero point carry over.
func poolInt8(g kernels.ConvGeom, isMax bool, x, out []int8) {
	c := g.C
	for oh := 0; oh < g.OH; oh++ {
		h0, h1 := max(oh*g.SH-g.PadTop, 0), min(oh*g.SH-g.PadTop+g.KH, g.H)
		for ow := 0; ow < g.OW; ow++ {
			w0, w1 := max(ow*g.SW-g.PadLeft, 0), min(ow*g.SW-g.PadLeft+g.KW, g.W)
			for ch := 0; ch < c; ch++ {
				best, sum := int32(-128), int32(0)
				for ih := h0; ih < h1; ih++ {
					for iw := w0; iw < w1; iw++ {
						v := int32(x[(ih*g.W+iw)*c+ch])
						best = max(best, v)
						sum += v
					}
				}
				if !isMax {
					best = roundDiv(sum, int32((h1-h0)*(w1-w0)))
				}
				out[(oh*g.OW+ow)*c+ch] = int8(best)
			}
		}
	}
}

// globalAvgPoolInt8: x (HW, C) → out (C), rounded integer means.
func globalAvgPoolInt8(hw, c int, x, out []int8) {
	for ch := 0; ch < c; ch++ {
		var sum int32
		for q := 0; q < hw; q++ {
			sum += int32(x[q*c+ch])
		}
		out[ch] = int8(roundDiv(sum, int32(hw)))
	}
}

// runLayer applies one integer layer to one sample.
func runLayer(l *Layer, x, out []int8) {
	switch l.Op {
	case OpConv:
		convInt8(l.Geom, x, l.In.ZeroPoint, l.Weights, l.Bias, l.Mult, l.Shift, l.Out.ZeroPoint, l.ClampLo, l.ClampHi, out)
	case OpDepthwise:
		depthwiseInt8(l.Geom, x, l.In.ZeroPoint, l.Weights, l.Bias, l.Mult, l.Shift, l.Out.ZeroPoint, l.ClampLo, l.ClampHi, out)
	case OpDense:
		denseInt8(x, l.In.ZeroPoint, l.Weights, l.Bias, l.Mult, l.Shift, l.Out.ZeroPoint, l.ClampLo, l.ClampHi, out)
	case OpMaxPool, OpAvgPool:
		poolInt8(l.Geom, l.Op == OpMaxPool, x, out)
	case OpGlobalAvgPool:
		globalAvgPoolInt8(l.InShape.H*l.InShape.W, l.InShape.C, x, out)
	default:
		panic(fmt.Sprintf("quant: internal error: op %q", l.Op))
	}
}

// RunAll runs one int8 sample x (Input) through the model and returns
// every layer's int8 output (the last one is the logits). It allocates
// the outputs.
func (m *Model) RunAll(x []int8) [][]int8 {
	if len(x) != m.Input.Size() {
		panic(fmt.Sprintf("quant: Model.RunAll: len(x) = %d, want %d", len(x), m.Input.Size()))
	}
	outs := make([][]int8, len(m.Layers))
	cur := x
	for i := range m.Layers {
		outs[i] = make([]int8, m.Layers[i].OutShape.Size())
		runLayer(&m.Layers[i], cur, outs[i])
		cur = outs[i]
	}
	return outs
}

// Run quantises a float input with the model's input parameters, runs the
// integer engine and returns the dequantised logits.
func (m *Model) Run(x []float32) []float32 {
	q := make([]int8, len(x))
	m.InputQ.QuantizeInput(q, x)
	outs := m.RunAll(q)
	last := &m.Layers[len(m.Layers)-1]
	y := make([]float32, len(outs[len(outs)-1]))
	last.Out.Dequantize(y, outs[len(outs)-1])
	return y
}
