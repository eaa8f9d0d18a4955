package nn

import (
	"fmt"
	"math"
)

// FakeQuant simulates the quantisation of the tensor passing through it,
// for quantisation-aware training (Jacob et al. 2018 §3, eq. 12): in
// training it tracks the tensor's range [Lo, Hi] by an exponential moving
// average of batch minima and maxima (Decay, 0.99 by default: common
// practice, the paper gives no value), asks QParams for the scale and zero
// point of that range, and outputs scale·(clamp(round(x/scale) + zp) − zp)
// over the integer range [QMin, QMax]. Backward is the straight-through
// estimator: the gradient passes where x lies inside the representable
// range and is 0 outside (Krishnamoorthi 2018, eqs. 14–15). In inference it
// applies the same quantisation with the tracked range. Before QParams is
// set the layer is the identity (nn itself knows no quantisation scheme;
// package quant supplies it).
//
// The tracked range is state of the network (Params.State, role
// "range"), like batch-norm running statistics: [Fit] restores the best
// epoch's range together with its weights, and checkpoints carry it.
type FakeQuant struct {
	Decay      float64
	QMin, QMax int32
	QParams    func(lo, hi float64) (scale float64, zeroPoint int32)
	sz         int
	rng        []float32 // (3): lo, hi, seen (1 once a training pass set the range); view into Params.State
	lo, hi     float32   // representable range of the current pass, for backward
}

// Range returns the tracked range [lo, hi] and whether a training pass has
// set it (before that the layer is the identity).
func (l *FakeQuant) Range() (lo, hi float64, seen bool) {
	if l.rng == nil {
		return 0, 0, false
	}
	return float64(l.rng[0]), float64(l.rng[1]), l.rng[2] != 0
}

// NewFakeQuant returns a fake-quantisation layer for int8 (−128..127).
func NewFakeQuant(decay float64) *FakeQuant {
	if decay == 0 {
		decay = 0.99
	}
	return &FakeQuant{Decay: decay, QMin: -128, QMax: 127}
}

// Kind implements Layer.
func (l *FakeQuant) Kind() string { return "fakequant" }

// Spec implements Layer.
func (l *FakeQuant) Spec() string { return fmt.Sprintf("fakequant decay=%g", l.Decay) }

func (l *FakeQuant) elementwise() {}

func (l *FakeQuant) setup(in Shape) (Shape, error) {
	if !(l.Decay > 0 && l.Decay < 1) {
		return Shape{}, shapeErr("fakequant decay %g outside (0, 1)", l.Decay)
	}
	l.sz = in.Size()
	return in, nil
}
func (l *FakeQuant) params() []ParamSpec { return nil }
func (l *FakeQuant) state() []ParamSpec {
	return []ParamSpec{{Role: "range", Shape: []int{3}}}
}
func (l *FakeQuant) bind(_, _, state [][]float32) { l.rng = state[0] }
func (l *FakeQuant) plan(int)                     {}

// forward: x and out are (N, H, W, C).
func (l *FakeQuant) forward(p *Pass, out, x []float32, n int) {
	x, out = x[:n*l.sz], out[:n*l.sz]
	if p.Train {
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, v := range x {
			lo, hi = math.Min(lo, float64(v)), math.Max(hi, float64(v))
		}
		if l.rng[2] == 0 {
			l.rng[0], l.rng[1], l.rng[2] = float32(lo), float32(hi), 1
		} else {
			l.rng[0] = float32(l.Decay*float64(l.rng[0]) + (1-l.Decay)*lo)
			l.rng[1] = float32(l.Decay*float64(l.rng[1]) + (1-l.Decay)*hi)
		}
	}
	rlo, rhi, seen := l.Range()
	if l.QParams == nil || !seen {
		copy(out, x)
		l.lo, l.hi = float32(math.Inf(-1)), float32(math.Inf(1))
		return
	}
	scale, zp := l.QParams(rlo, rhi)
	inv := 1 / scale
	l.lo, l.hi = float32(scale*float64(l.QMin-zp)), float32(scale*float64(l.QMax-zp))
	for i, v := range x {
		q := math.Round(float64(v)*inv) + float64(zp)
		q = math.Max(float64(l.QMin), math.Min(float64(l.QMax), q))
		out[i] = float32(scale * (q - float64(zp)))
	}
}

// backward passes dout where lo ≤ x ≤ hi (straight-through estimator).
func (l *FakeQuant) backward(_ *Pass, dx, dout, x, _ []float32, n int) {
	if dx == nil {
		return
	}
	for i, v := range x[:n*l.sz] {
		if v >= l.lo && v <= l.hi {
			dx[i] += dout[i]
		}
	}
}
