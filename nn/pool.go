package nn

import (
	"fmt"

	"github.com/pipit-audio/pipit/internal/kernels"
)

// Pool is a max or average pooling window over each channel.
// Max pooling ignores padded positions; average pooling divides by the
// number of real (unpadded) positions in the window (PyTorch's
// count_include_pad=False).
type Pool struct {
	Max              bool
	KH, KW           int
	SH, SW           int
	Pad              Padding
	g                kernels.ConvGeom
	arg              []int32 // (N, OH, OW, C) flat input index of each max, filled by forward, read by backward
	x, out, dx, dout []float32
}

// NewMaxPool returns a max-pooling layer; zero strides default to the
// window size.
func NewMaxPool(kh, kw, sh, sw int, pad Padding) *Pool {
	return newPool(true, kh, kw, sh, sw, pad)
}

// NewAvgPool returns an average-pooling layer; zero strides default to the
// window size.
func NewAvgPool(kh, kw, sh, sw int, pad Padding) *Pool {
	return newPool(false, kh, kw, sh, sw, pad)
}

func newPool(max bool, kh, kw, sh, sw int, pad Padding) *Pool {
	if sh == 0 {
		sh = kh
	}
	if sw == 0 {
		sw = kw
	}
	return &Pool{Max: max, KH: kh, KW: kw, SH: sh, SW: sw, Pad: pad}
}

// Kind implements Layer.
func (l *Pool) Kind() string {
	if l.Max {
		return "maxpool"
	}
	return "avgpool"
}

// Spec implements Layer.
func (l *Pool) Spec() string {
	return fmt.Sprintf("%s size=%dx%d stride=%dx%d %s", l.Kind(), l.KH, l.KW, l.SH, l.SW, l.Pad.spec())
}

// Geometry returns the planned window geometry.
func (l *Pool) Geometry() kernels.ConvGeom { return l.g }

func (l *Pool) setup(in Shape) (Shape, error) {
	g, err := geometry(in, l.KH, l.KW, l.SH, l.SW, l.Pad)
	if err != nil {
		return Shape{}, fmt.Errorf("%s on %v: %w", l.Kind(), in, err)
	}
	l.g = g
	return Shape{g.OH, g.OW, in.C}, nil
}

func (l *Pool) params() []ParamSpec      { return nil }
func (l *Pool) state() []ParamSpec       { return nil }
func (l *Pool) bind(_, _, _ [][]float32) {}

func (l *Pool) plan(n int) {
	if l.Max && len(l.arg) < n*l.g.OH*l.g.OW*l.g.C {
		l.arg = make([]int32, n*l.g.OH*l.g.OW*l.g.C)
	}
}

// forward: x is (N, H, W, C); out is (N, OH, OW, C).
func (l *Pool) forward(p *Pass, out, x []float32, n int) {
	l.x, l.out = x, out
	p.exec.run(l, phaseForward, n)
}

// backward routes dout to the max positions (max) or spreads it evenly
// over each window (average), accumulating into dx.
func (l *Pool) backward(p *Pass, dx, dout, x, out []float32, n int) {
	if dx == nil {
		return
	}
	l.dx, l.dout = dx, dout
	p.exec.run(l, phaseBackward, n)
}

func (l *Pool) runShard(phase, _, lo, hi int) {
	g := l.g
	c := g.C
	inSize, outSize := g.H*g.W*c, g.OH*g.OW*c
	for i := lo; i < hi; i++ {
		for oh := 0; oh < g.OH; oh++ {
			h0, h1 := max(oh*g.SH-g.PadTop, 0), min(oh*g.SH-g.PadTop+g.KH, g.H)
			for ow := 0; ow < g.OW; ow++ {
				w0, w1 := max(ow*g.SW-g.PadLeft, 0), min(ow*g.SW-g.PadLeft+g.KW, g.W)
				o := i*outSize + (oh*g.OW+ow)*c
				switch {
				case phase == phaseForward && l.Max:
					l.maxWindow(l.out[o:o+c], l.arg[o:o+c], i*inSize, h0, h1, w0, w1)
				case phase == phaseForward:
					l.avgWindow(l.out[o:o+c], i*inSize, h0, h1, w0, w1)
				case l.Max:
					for ch, at := range l.arg[o : o+c] {
						l.dx[at] += l.dout[o+ch] // out = x[arg]
					}
				default:
					count := float32((h1 - h0) * (w1 - w0)) // out = Σ x / count
					d := l.dout[o : o+c]
					for ih := h0; ih < h1; ih++ {
						for iw := w0; iw < w1; iw++ {
							b := i*inSize + (ih*g.W+iw)*c
							dxs := l.dx[b : b+c]
							for ch, v := range d {
								dxs[ch] += v / count
							}
						}
					}
				}
			}
		}
	}
}

// maxWindow writes the per-channel maximum over the window rows [h0, h1)
// and columns [w0, w1) of the sample at x offset base into best, and its
// flat input index into arg; ties keep the first position in row-major
// order.
func (l *Pool) maxWindow(best []float32, arg []int32, base, h0, h1, w0, w1 int) {
	g := l.g
	c := g.C
	first := true
	for ih := h0; ih < h1; ih++ {
		for iw := w0; iw < w1; iw++ {
			b := base + (ih*g.W+iw)*c
			xs := l.x[b : b+c]
			if first {
				copy(best, xs)
				for ch := range arg {
					arg[ch] = int32(b + ch)
				}
				first = false
				continue
			}
			for ch, v := range xs {
				if v > best[ch] {
					best[ch], arg[ch] = v, int32(b+ch)
				}
			}
		}
	}
}

// avgWindow writes the per-channel mean over the window (summed in row-major
// order) into out.
func (l *Pool) avgWindow(out []float32, base, h0, h1, w0, w1 int) {
	g := l.g
	c := g.C
	clear(out)
	for ih := h0; ih < h1; ih++ {
		for iw := w0; iw < w1; iw++ {
			b := base + (ih*g.W+iw)*c
			for ch, v := range l.x[b : b+c] {
				out[ch] += v
			}
		}
	}
	count := float32((h1 - h0) * (w1 - w0))
	for ch := range out {
		out[ch] /= count
	}
}

// GlobalAvgPool averages each channel over all H·W positions; its output
// is 1×1×C.
type GlobalAvgPool struct {
	hw, c int
}

// NewGlobalAvgPool returns a global average pool.
func NewGlobalAvgPool() *GlobalAvgPool { return &GlobalAvgPool{} }

// Kind implements Layer.
func (l *GlobalAvgPool) Kind() string { return "globalavgpool" }

// Spec implements Layer.
func (l *GlobalAvgPool) Spec() string { return "globalavgpool" }

func (l *GlobalAvgPool) setup(in Shape) (Shape, error) {
	l.hw, l.c = in.H*in.W, in.C
	return Shape{1, 1, in.C}, nil
}
func (l *GlobalAvgPool) params() []ParamSpec      { return nil }
func (l *GlobalAvgPool) state() []ParamSpec       { return nil }
func (l *GlobalAvgPool) bind(_, _, _ [][]float32) {}
func (l *GlobalAvgPool) plan(int)                 {}

// forward: x is (N, H, W, C); out is (N, 1, 1, C). Sums are in float64.
func (l *GlobalAvgPool) forward(_ *Pass, out, x []float32, n int) {
	c := l.c
	inv := 1 / float64(l.hw)
	for i := 0; i < n; i++ {
		o := out[i*c : (i+1)*c]
		xi := x[i*l.hw*c : (i+1)*l.hw*c]
		for ch := range o {
			var s float64
			for q := ch; q < len(xi); q += c {
				s += float64(xi[q])
			}
			o[ch] = float32(s * inv)
		}
	}
}

// backward spreads dout/(H·W) over every position.
func (l *GlobalAvgPool) backward(_ *Pass, dx, dout, _, _ []float32, n int) {
	if dx == nil {
		return
	}
	c := l.c
	inv := 1 / float32(l.hw)
	for i := 0; i < n; i++ {
		d := dout[i*c : (i+1)*c]
		dxi := dx[i*l.hw*c : (i+1)*l.hw*c]
		for q := 0; q < len(dxi); q += c {
			for ch, v := range d {
				dxi[q+ch] += v * inv
			}
		}
	}
}

// Dropout zeroes each value with probability Rate during training and
// scales the rest by 1/(1−Rate) (inverted dropout, Srivastava et al. 2014);
// in inference it is the identity. Masks come from the [Pass] RNG, drawn
// in index order, so they are reproducible from the seed.
type Dropout struct {
	Rate float64
	sz   int
	mask []float32 // (N, H, W, C) 0 or 1/(1−Rate), filled by forward, read by backward
	on   bool
}

// NewDropout returns a dropout layer.
func NewDropout(rate float64) *Dropout { return &Dropout{Rate: rate} }

// Kind implements Layer.
func (l *Dropout) Kind() string { return "dropout" }

// Spec implements Layer.
func (l *Dropout) Spec() string { return fmt.Sprintf("dropout rate=%g", l.Rate) }

func (l *Dropout) elementwise() {}

func (l *Dropout) setup(in Shape) (Shape, error) {
	if !(l.Rate >= 0 && l.Rate < 1) {
		return Shape{}, shapeErr("dropout rate %g outside [0, 1)", l.Rate)
	}
	l.sz = in.Size()
	return in, nil
}
func (l *Dropout) params() []ParamSpec      { return nil }
func (l *Dropout) state() []ParamSpec       { return nil }
func (l *Dropout) bind(_, _, _ [][]float32) {}
func (l *Dropout) plan(n int) {
	if len(l.mask) < n*l.sz {
		l.mask = make([]float32, n*l.sz)
	}
}

func (l *Dropout) forward(p *Pass, out, x []float32, n int) {
	l.on = p.Train && l.Rate > 0
	if !l.on {
		copy(out[:n*l.sz], x[:n*l.sz])
		return
	}
	keep := float32(1 / (1 - l.Rate))
	for i, v := range x[:n*l.sz] {
		m := float32(0)
		if p.RNG.Float64() >= l.Rate {
			m = keep
		}
		l.mask[i] = m
		out[i] = v * m
	}
}

func (l *Dropout) backward(_ *Pass, dx, dout, _, _ []float32, n int) {
	if dx == nil {
		return
	}
	for i, v := range dout[:n*l.sz] {
		if l.on {
			v *= l.mask[i]
		}
		dx[i] += v
	}
}
