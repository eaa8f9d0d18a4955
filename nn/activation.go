package nn

import (
	"fmt"

	"github.com/pipit-audio/pipit/internal/kernels"
)

// ReLU is max(0, x), or with Cap > 0 the clipped min(max(0, x), Cap)
// (ReLU6 for Cap = 6; Howard et al. 2017 §3.2 use it in MobileNets). Its
// gradient passes where 0 < x (and x < Cap): the subgradient at the kinks
// is 0, as in PyTorch.
type ReLU struct {
	Cap float32 // 0 for plain ReLU
	sz  int
	// set by forward/backward for runShard
	x, out, dx, dout []float32
}

// NewReLU returns max(0, x).
func NewReLU() *ReLU { return &ReLU{} }

// NewReLU6 returns min(max(0, x), 6).
func NewReLU6() *ReLU { return &ReLU{Cap: 6} }

// Kind implements Layer.
func (l *ReLU) Kind() string {
	if l.Cap == 6 {
		return "relu6"
	}
	if l.Cap > 0 {
		return "relucap"
	}
	return "relu"
}

// Spec implements Layer.
func (l *ReLU) Spec() string {
	if l.Cap > 0 && l.Cap != 6 {
		return fmt.Sprintf("relucap max=%g", l.Cap)
	}
	return l.Kind()
}

func (l *ReLU) elementwise() {}

func (l *ReLU) setup(in Shape) (Shape, error) {
	if l.Cap < 0 {
		return Shape{}, shapeErr("relu cap %g < 0", l.Cap)
	}
	l.sz = in.Size()
	return in, nil
}
func (l *ReLU) params() []ParamSpec      { return nil }
func (l *ReLU) state() []ParamSpec       { return nil }
func (l *ReLU) bind(_, _, _ [][]float32) {}
func (l *ReLU) plan(int)                 {}

// forward: x and out are (N, H, W, C); out may not alias x. Samples are
// split over the network's workers.
func (l *ReLU) forward(p *Pass, out, x []float32, n int) {
	l.x, l.out = x, out
	p.exec.run(l, phaseForward, n)
}

// backward writes dout into dx where the input was inside (0, Cap), 0
// elsewhere.
func (l *ReLU) backward(p *Pass, dx, dout, x, _ []float32, n int) {
	if dx == nil {
		return
	}
	l.x, l.dx, l.dout = x, dx, dout
	p.exec.run(l, phaseBackward, n)
}

// writesDx implements dxWriter: backward overwrites dx.
func (l *ReLU) writesDx() {}

// hi returns the upper clamp: Cap, or +Inf for plain ReLU.
func (l *ReLU) hi() float32 {
	if l.Cap > 0 {
		return l.Cap
	}
	return posInf32
}

func (l *ReLU) runShard(phase, _, lo, hi int) {
	a, b := lo*l.sz, hi*l.sz
	switch phase {
	case phaseForward:
		kernels.Clamp(l.out[a:b], l.x[a:b], 0, l.hi())
	case phaseBackward:
		kernels.MaskSet(l.dx[a:b], l.dout[a:b], l.x[a:b], 0, l.hi())
	}
}

// Flatten reshapes (H, W, C) to 1×1×(H·W·C); channels-last order is kept,
// so it copies values unchanged. Dense flattens by itself; Flatten exists
// so specs can say so.
type Flatten struct{ sz int }

// NewFlatten returns a flatten layer.
func NewFlatten() *Flatten { return &Flatten{} }

// Kind implements Layer.
func (l *Flatten) Kind() string { return "flatten" }

// Spec implements Layer.
func (l *Flatten) Spec() string { return "flatten" }

func (l *Flatten) elementwise() {}

func (l *Flatten) setup(in Shape) (Shape, error) { l.sz = in.Size(); return Shape{1, 1, l.sz}, nil }
func (l *Flatten) params() []ParamSpec           { return nil }
func (l *Flatten) state() []ParamSpec            { return nil }
func (l *Flatten) bind(_, _, _ [][]float32)      {}
func (l *Flatten) plan(int)                      {}
func (l *Flatten) forward(_ *Pass, out, x []float32, n int) {
	copy(out[:n*l.sz], x[:n*l.sz])
}
func (l *Flatten) backward(_ *Pass, dx, dout, _, _ []float32, n int) {
	if dx == nil {
		return
	}
	for i, v := range dout[:n*l.sz] {
		dx[i] += v
	}
}
