package nn

import (
	"fmt"

	"github.com/pipit-audio/pipit/internal/kernels"
)

// DepthwiseConfig configures a [Depthwise] convolution (multiplier 1).
// Zero strides mean 1.
type DepthwiseConfig struct {
	KH, KW int
	SH, SW int
	Pad    Padding
	Bias   bool
}

// Depthwise is a depthwise 2-D convolution with channel multiplier 1: each
// channel is convolved with its own KH×KW kernel (MobileNets eq. 3),
// out[n][oh][ow][c] = Bias[c] + Σ_{kh,kw} x[n][oh·SH−top+kh][ow·SW−left+kw][c]·Weight[kh][kw][c].
type Depthwise struct {
	cfg              DepthwiseConfig
	g                kernels.ConvGeom
	Weight           []float32 // (KH, KW, C), channels last, view into Params.Data
	Bias             []float32 // (C) or nil
	WeightGrad       []float32
	BiasGrad         []float32
	grads            shardGrads
	x, out, dx, dout []float32
}

// NewDepthwise returns a depthwise convolution layer.
func NewDepthwise(cfg DepthwiseConfig) *Depthwise {
	if cfg.SH == 0 {
		cfg.SH = 1
	}
	if cfg.SW == 0 {
		cfg.SW = 1
	}
	return &Depthwise{cfg: cfg}
}

// Kind implements Layer.
func (l *Depthwise) Kind() string { return "depthwise" }

// Spec implements Layer.
func (l *Depthwise) Spec() string {
	return fmt.Sprintf("depthwise kernel=%dx%d stride=%dx%d %s bias=%v", l.cfg.KH, l.cfg.KW, l.cfg.SH, l.cfg.SW, l.cfg.Pad.spec(), l.cfg.Bias)
}

// Config returns the layer's configuration.
func (l *Depthwise) Config() DepthwiseConfig { return l.cfg }

// Geometry returns the planned window geometry.
func (l *Depthwise) Geometry() kernels.ConvGeom { return l.g }

func (l *Depthwise) setup(in Shape) (Shape, error) {
	g, err := geometry(in, l.cfg.KH, l.cfg.KW, l.cfg.SH, l.cfg.SW, l.cfg.Pad)
	if err != nil {
		return Shape{}, fmt.Errorf("depthwise on %v: %w", in, err)
	}
	l.g = g
	return Shape{g.OH, g.OW, in.C}, nil
}

func (l *Depthwise) params() []ParamSpec {
	ps := []ParamSpec{{Role: "weight", Shape: []int{l.g.KH, l.g.KW, l.g.C}, Init: InitHe, FanIn: l.g.KH * l.g.KW, Decay: true}}
	if l.cfg.Bias {
		ps = append(ps, ParamSpec{Role: "bias", Shape: []int{l.g.C}})
	}
	return ps
}

func (l *Depthwise) state() []ParamSpec { return nil }

func (l *Depthwise) bind(data, grad, _ [][]float32) {
	l.Weight, l.WeightGrad = data[0], grad[0]
	if l.cfg.Bias {
		l.Bias, l.BiasGrad = data[1], grad[1]
	}
}

func (l *Depthwise) plan(n int) { l.grads.plan(shardCount(n), len(l.Weight), len(l.Bias)) }

func (l *Depthwise) macs() int64 {
	return int64(l.g.OH) * int64(l.g.OW) * int64(l.g.C) * int64(l.g.KH*l.g.KW)
}

// forward: x is (N, H, W, C); out is (N, OH, OW, C).
func (l *Depthwise) forward(p *Pass, out, x []float32, n int) {
	l.x, l.out = x, out
	p.exec.run(l, phaseForward, n)
}

// backward accumulates into dx (if not nil), WeightGrad and BiasGrad.
func (l *Depthwise) backward(p *Pass, dx, dout, x, out []float32, n int) {
	l.x, l.dx, l.dout = x, dx, dout
	l.grads.zero(shardCount(n))
	p.exec.run(l, phaseBackward, n)
	l.grads.reduce(shardCount(n), l.WeightGrad, l.BiasGrad)
}

func (l *Depthwise) runShard(phase, s, lo, hi int) {
	g := l.g
	inSize, outSize := g.H*g.W*g.C, g.OH*g.OW*g.C
	for i := lo; i < hi; i++ {
		xi := l.x[i*inSize : (i+1)*inSize]
		switch phase {
		case phaseForward:
			oi := l.out[i*outSize : (i+1)*outSize]
			if l.Bias != nil {
				for q := 0; q < g.OH*g.OW; q++ {
					copy(oi[q*g.C:(q+1)*g.C], l.Bias)
				}
			} else {
				clear(oi)
			}
			kernels.DepthwiseForward(g, xi, l.Weight, oi)
		case phaseBackward:
			di := l.dout[i*outSize : (i+1)*outSize]
			var dxi []float32
			if l.dx != nil {
				dxi = l.dx[i*inSize : (i+1)*inSize]
			}
			kernels.DepthwiseBackward(g, xi, l.Weight, di, dxi, l.grads.w[s])
			if l.Bias != nil {
				bg := l.grads.b[s]
				for q := 0; q < g.OH*g.OW; q++ {
					for c, v := range di[q*g.C : (q+1)*g.C] {
						bg[c] += v
					}
				}
			}
		}
	}
}
