package nn

import (
	"fmt"

	"github.com/pipit-audio/pipit/internal/kernels"
)

// Padding modes of [Padding].
const (
	PadValid    = "valid"    // no padding
	PadSame     = "same"     // output ceil(in/stride); extra row/column at the bottom/right
	PadExplicit = "explicit" // Top, Bottom, Left, Right as given
)

// Padding is the zero padding of a convolution or pooling window.
type Padding struct {
	Mode                     string
	Top, Bottom, Left, Right int // PadExplicit only
}

// resolve returns output size and leading pad along one axis for input
// size in, kernel k, stride s; trailing pad is implied.
func (p Padding) resolve(in, k, s int, vertical bool) (out, lead int, err error) {
	switch p.Mode {
	case PadValid, "":
		if in < k {
			return 0, 0, shapeErr("input %d smaller than kernel %d with valid padding", in, k)
		}
		return (in-k)/s + 1, 0, nil
	case PadSame:
		// TensorFlow's "SAME" rule: out = ceil(in/s), total padding
		// max((out-1)·s + k - in, 0), the odd pixel at the end (common practice).
		out = (in + s - 1) / s
		total := max((out-1)*s+k-in, 0)
		return out, total / 2, nil
	case PadExplicit:
		a, b := p.Left, p.Right
		if vertical {
			a, b = p.Top, p.Bottom
		}
		if a < 0 || b < 0 || a >= k || b >= k {
			return 0, 0, shapeErr("explicit padding %d,%d must be in 0..kernel-1 (%d)", a, b, k-1)
		}
		if in+a+b < k {
			return 0, 0, shapeErr("padded input %d smaller than kernel %d", in+a+b, k)
		}
		return (in+a+b-k)/s + 1, a, nil
	}
	return 0, 0, shapeErr("unknown padding %q", p.Mode)
}

func (p Padding) spec() string {
	switch p.Mode {
	case PadExplicit:
		return fmt.Sprintf("pad=%d,%d,%d,%d", p.Top, p.Bottom, p.Left, p.Right)
	case "":
		return "pad=valid"
	}
	return "pad=" + p.Mode
}

// geometry resolves the window geometry of kernel (kh, kw), strides (sh, sw)
// and padding p on input in.
func geometry(in Shape, kh, kw, sh, sw int, p Padding) (kernels.ConvGeom, error) {
	if kh < 1 || kw < 1 || sh < 1 || sw < 1 {
		return kernels.ConvGeom{}, shapeErr("kernel %dx%d and stride %dx%d must be positive", kh, kw, sh, sw)
	}
	oh, top, err := p.resolve(in.H, kh, sh, true)
	if err != nil {
		return kernels.ConvGeom{}, err
	}
	ow, left, err := p.resolve(in.W, kw, sw, false)
	if err != nil {
		return kernels.ConvGeom{}, err
	}
	return kernels.ConvGeom{H: in.H, W: in.W, C: in.C, KH: kh, KW: kw, SH: sh, SW: sw, PadTop: top, PadLeft: left, OH: oh, OW: ow}, nil
}

// Conv2DConfig configures a [Conv2D]. Zero strides mean 1.
type Conv2DConfig struct {
	Out       int // output channels OutC (spec: out=N)
	KH, KW    int // kernel size
	SH, SW    int // strides
	Pad       Padding
	Bias      bool // add a per-channel bias (leave off before batch norm)
	Pointwise bool // written as "pointwise" in specs (1×1, stride 1, no padding)
}

// Conv2D is a 2-D convolution, channels-last (layout: see the package
// doc), computed per sample as im2col followed by a matrix product; a 1×1
// stride-1 unpadded convolution (pointwise) multiplies the input directly.
//
// out[n][oh][ow][o] = Bias[o] + Σ_{kh,kw,c} x[n][oh·SH−top+kh][ow·SW−left+kw][c] · Weight[o][kh][kw][c]
// (MobileNets eq. 1), zero outside x.
type Conv2D struct {
	cfg        Conv2DConfig
	g          kernels.ConvGeom
	direct     bool      // pointwise: x is already the column matrix
	Weight     []float32 // (OutC, KH, KW, InC), view into Params.Data
	Bias       []float32 // (OutC), nil without bias
	WeightGrad []float32 // Weight's shape, view into Params.Grad
	BiasGrad   []float32
	wT         []float32   // (KH·KW·InC, OutC) transposed weights, refreshed by forward
	cols       [][]float32 // per shard (OH·OW, KH·KW·InC) im2col workspace, sized by plan
	dcols      [][]float32 // per shard, same shape, backward only
	scratch    [][]float32 // per shard (KH·KW·InC, OutC), ConvWeightGrad's workspace
	grads      shardGrads
	// set by forward/backward for runShard
	x, out, dx, dout []float32
}

// NewConv2D returns a convolution layer; the input shape is checked when
// the network is built.
func NewConv2D(cfg Conv2DConfig) *Conv2D {
	if cfg.SH == 0 {
		cfg.SH = 1
	}
	if cfg.SW == 0 {
		cfg.SW = 1
	}
	return &Conv2D{cfg: cfg}
}

// NewPointwise returns a 1×1 convolution with out output channels.
func NewPointwise(out int, bias bool) *Conv2D {
	return NewConv2D(Conv2DConfig{Out: out, KH: 1, KW: 1, SH: 1, SW: 1, Pad: Padding{Mode: PadValid}, Bias: bias, Pointwise: true})
}

// Kind implements Layer.
func (l *Conv2D) Kind() string {
	if l.cfg.Pointwise {
		return "pointwise"
	}
	return "conv"
}

// Spec implements Layer.
func (l *Conv2D) Spec() string {
	if l.cfg.Pointwise {
		return fmt.Sprintf("pointwise out=%d bias=%v", l.cfg.Out, l.cfg.Bias)
	}
	return fmt.Sprintf("conv out=%d kernel=%dx%d stride=%dx%d %s bias=%v", l.cfg.Out, l.cfg.KH, l.cfg.KW, l.cfg.SH, l.cfg.SW, l.cfg.Pad.spec(), l.cfg.Bias)
}

// Config returns the layer's configuration.
func (l *Conv2D) Config() Conv2DConfig { return l.cfg }

// Geometry returns the planned window geometry (valid after the network is built).
func (l *Conv2D) Geometry() kernels.ConvGeom { return l.g }

func (l *Conv2D) setup(in Shape) (Shape, error) {
	if l.cfg.Out < 1 {
		return Shape{}, shapeErr("conv: out=%d, want at least 1", l.cfg.Out)
	}
	g, err := geometry(in, l.cfg.KH, l.cfg.KW, l.cfg.SH, l.cfg.SW, l.cfg.Pad)
	if err != nil {
		return Shape{}, fmt.Errorf("conv on %v: %w", in, err)
	}
	l.g = g
	l.direct = g.KH == 1 && g.KW == 1 && g.SH == 1 && g.SW == 1 && g.PadTop == 0 && g.PadLeft == 0
	return Shape{g.OH, g.OW, l.cfg.Out}, nil
}

func (l *Conv2D) params() []ParamSpec {
	k := l.g.KH * l.g.KW * l.g.C
	ps := []ParamSpec{{Role: "weight", Shape: []int{l.cfg.Out, l.g.KH, l.g.KW, l.g.C}, Init: InitHe, FanIn: k, Decay: true}}
	if l.cfg.Bias {
		ps = append(ps, ParamSpec{Role: "bias", Shape: []int{l.cfg.Out}})
	}
	return ps
}

func (l *Conv2D) state() []ParamSpec { return nil }

func (l *Conv2D) bind(data, grad, _ [][]float32) {
	l.Weight, l.WeightGrad = data[0], grad[0]
	if l.cfg.Bias {
		l.Bias, l.BiasGrad = data[1], grad[1]
	}
}

func (l *Conv2D) plan(n int) {
	k := shardCount(n)
	if !l.direct && len(l.cols) < k {
		l.cols, l.dcols, l.scratch = make([][]float32, k), make([][]float32, k), make([][]float32, k)
		for s := range l.cols {
			l.cols[s] = make([]float32, l.g.ColSize())
			l.dcols[s] = make([]float32, l.g.ColSize())
			l.scratch[s] = make([]float32, len(l.Weight))
		}
	}
	l.grads.plan(k, len(l.Weight), len(l.Bias))
	if len(l.wT) < len(l.Weight) {
		l.wT = make([]float32, len(l.Weight))
	}
}

func (l *Conv2D) macs() int64 {
	return int64(l.g.OH) * int64(l.g.OW) * int64(l.cfg.Out) * int64(l.g.KH*l.g.KW*l.g.C)
}

const (
	phaseForward = iota
	phaseBackward
)

// forward: x is (N, H, W, InC); out is (N, OH, OW, OutC). The weights are
// transposed once per call so that every product is C += A·B with
// contiguous rows of B (the layout of the blocked matrix kernels).
func (l *Conv2D) forward(p *Pass, out, x []float32, n int) {
	l.x, l.out = x, out
	kernels.Transpose(l.wT, l.Weight, l.cfg.Out, l.g.KH*l.g.KW*l.g.C)
	p.exec.run(l, phaseForward, n)
}

// backward: dout has out's shape; accumulates into dx (if not nil),
// WeightGrad and BiasGrad.
func (l *Conv2D) backward(p *Pass, dx, dout, x, out []float32, n int) {
	l.x, l.dx, l.dout = x, dx, dout
	l.grads.zero(shardCount(n))
	p.exec.run(l, phaseBackward, n)
	l.grads.reduce(shardCount(n), l.WeightGrad, l.BiasGrad)
}

func (l *Conv2D) runShard(phase, s, lo, hi int) {
	g := l.g
	inSize, outSize := g.H*g.W*g.C, g.OH*g.OW*l.cfg.Out
	pos, k, oc := g.OH*g.OW, g.KH*g.KW*g.C, l.cfg.Out
	if l.direct {
		// pointwise: the shard's input is already its (samples·positions, InC)
		// column matrix, so each product runs once over the whole shard.
		rows := (hi - lo) * pos
		xs := l.x[lo*inSize : hi*inSize]
		switch phase {
		case phaseForward:
			l.product(l.out[lo*outSize:hi*outSize], xs, rows)
		case phaseBackward:
			ds := l.dout[lo*outSize : hi*outSize]
			kernels.GemmTN(oc, k, rows, ds, xs, l.grads.w[s])
			l.biasGrad(s, ds, rows)
			if l.dx != nil {
				kernels.GemmNN(rows, k, oc, ds, l.Weight, l.dx[lo*inSize:hi*inSize])
			}
		}
		return
	}
	for i := lo; i < hi; i++ {
		xi := l.x[i*inSize : (i+1)*inSize]
		switch phase {
		case phaseForward:
			oi := l.out[i*outSize : (i+1)*outSize]
			if l.Bias != nil {
				for q := 0; q < pos; q++ {
					copy(oi[q*oc:(q+1)*oc], l.Bias)
				}
			}
			kernels.ConvForward(g, oc, xi, l.Weight, l.wT, oi, l.cols[s], l.Bias != nil)
		case phaseBackward:
			di := l.dout[i*outSize : (i+1)*outSize]
			// out = patches·Wᵀ ⇒ dW += doutᵀ·patches, dpatches = dout·W
			kernels.ConvWeightGrad(g, oc, xi, di, l.grads.w[s], l.cols[s], l.scratch[s])
			l.biasGrad(s, di, pos)
			if l.dx != nil {
				kernels.ConvInputGrad(g, oc, l.Weight, di, l.dx[i*inSize:(i+1)*inSize], l.dcols[s])
			}
		}
	}
}

// product sets out (rows, OutC) = cols (rows, K) · Wᵀ + Bias.
func (l *Conv2D) product(out, cols []float32, rows int) {
	oc, k := l.cfg.Out, l.g.KH*l.g.KW*l.g.C
	if l.Bias != nil {
		for q := 0; q < rows; q++ {
			copy(out[q*oc:(q+1)*oc], l.Bias)
		}
	}
	kernels.GemmWeights(rows, oc, k, cols, l.Weight, l.wT, out, l.Bias != nil)
}

// biasGrad adds the column sums of dout (rows, OutC) to shard s's bias
// gradient.
func (l *Conv2D) biasGrad(s int, dout []float32, rows int) {
	if l.Bias == nil {
		return
	}
	oc := l.cfg.Out
	bg := l.grads.b[s]
	for q := 0; q < rows; q++ {
		for o, v := range dout[q*oc : (q+1)*oc] {
			bg[o] += v
		}
	}
}

// shardGrads holds per-shard partial weight and bias gradients, reduced in
// shard order so results do not depend on the number of workers.
type shardGrads struct {
	w, b [][]float32
}

func (g *shardGrads) plan(k, nw, nb int) {
	for len(g.w) < k {
		g.w = append(g.w, make([]float32, nw))
		g.b = append(g.b, make([]float32, nb))
	}
}

func (g *shardGrads) zero(k int) {
	for s := 0; s < k; s++ {
		clear(g.w[s])
		clear(g.b[s])
	}
}

func (g *shardGrads) reduce(k int, w, b []float32) {
	for s := 0; s < k; s++ {
		for i, v := range g.w[s] {
			w[i] += v
		}
		for i, v := range g.b[s] {
			b[i] += v
		}
	}
}
