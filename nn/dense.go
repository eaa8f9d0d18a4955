package nn

import (
	"fmt"

	"github.com/pipit-audio/pipit/internal/kernels"
)

// Dense is a fully connected layer on the flattened sample:
// out[n][o] = Bias[o] + Σ_i x[n][i]·Weight[o][i], with i running over the
// H·W·C input values in channels-last order. Its output shape is 1×1×Out.
type Dense struct {
	units            int // Out
	in               int
	Weight           []float32 // (Out, In), view into Params.Data
	Bias             []float32 // (Out)
	WeightGrad       []float32
	BiasGrad         []float32
	grads            shardGrads
	x, out, dx, dout []float32
}

// NewDense returns a fully connected layer with out outputs and a bias
// (spec: dense out=N).
func NewDense(out int) *Dense { return &Dense{units: out} }

// Kind implements Layer.
func (l *Dense) Kind() string { return "dense" }

// Spec implements Layer.
func (l *Dense) Spec() string { return fmt.Sprintf("dense out=%d", l.units) }

// Out returns the output width.
func (l *Dense) Out() int { return l.units }

func (l *Dense) setup(in Shape) (Shape, error) {
	if l.units < 1 {
		return Shape{}, shapeErr("dense: out=%d, want at least 1", l.units)
	}
	l.in = in.Size()
	return Shape{1, 1, l.units}, nil
}

func (l *Dense) params() []ParamSpec {
	return []ParamSpec{
		{Role: "weight", Shape: []int{l.units, l.in}, Init: InitHe, FanIn: l.in, Decay: true},
		{Role: "bias", Shape: []int{l.units}},
	}
}

func (l *Dense) state() []ParamSpec { return nil }

func (l *Dense) bind(data, grad, _ [][]float32) {
	l.Weight, l.WeightGrad, l.Bias, l.BiasGrad = data[0], grad[0], data[1], grad[1]
}

func (l *Dense) plan(n int) { l.grads.plan(shardCount(n), len(l.Weight), len(l.Bias)) }

func (l *Dense) macs() int64 { return int64(l.in) * int64(l.units) }

// forward: x is (N, In); out is (N, Out).
func (l *Dense) forward(p *Pass, out, x []float32, n int) {
	l.x, l.out = x, out
	p.exec.run(l, phaseForward, n)
}

// backward accumulates into dx (if not nil), WeightGrad and BiasGrad.
func (l *Dense) backward(p *Pass, dx, dout, x, out []float32, n int) {
	l.x, l.dx, l.dout = x, dx, dout
	l.grads.zero(shardCount(n))
	p.exec.run(l, phaseBackward, n)
	l.grads.reduce(shardCount(n), l.WeightGrad, l.BiasGrad)
}

func (l *Dense) runShard(phase, s, lo, hi int) {
	m := hi - lo
	x := l.x[lo*l.in : hi*l.in]
	switch phase {
	case phaseForward:
		out := l.out[lo*l.units : hi*l.units]
		for i := 0; i < m; i++ {
			copy(out[i*l.units:(i+1)*l.units], l.Bias)
		}
		kernels.GemmNT(m, l.units, l.in, x, l.Weight, out)
	case phaseBackward:
		dout := l.dout[lo*l.units : hi*l.units]
		// out = x·Wᵀ + b ⇒ dW += doutᵀ·x, db += Σ dout, dx += dout·W
		kernels.GemmTN(l.units, l.in, m, dout, x, l.grads.w[s])
		bg := l.grads.b[s]
		for i := 0; i < m; i++ {
			for o, v := range dout[i*l.units : (i+1)*l.units] {
				bg[o] += v
			}
		}
		if l.dx != nil {
			kernels.GemmNN(m, l.in, l.units, dout, l.Weight, l.dx[lo*l.in:hi*l.in])
		}
	}
}
