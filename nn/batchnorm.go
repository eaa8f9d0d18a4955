package nn

import (
	"fmt"
	"math"
)

// BatchNorm normalises each channel (Ioffe & Szegedy 2015,
// arXiv:1502.03167): in training with the batch's mean and biased variance
// over N·H·W positions, y = Gamma·(x−μ_B)/√(σ²_B+Eps) + Beta, updating the
// running statistics as r = (1−Momentum)·r + Momentum·batch (the variance
// term unbiased by M/(M−1), as PyTorch's BatchNorm2d does); in inference
// with the running statistics. The derivation of Backward is in
// docs/derivations.md.
type BatchNorm struct {
	Momentum, Eps float64
	c, hw         int
	Gamma, Beta   []float32 // (C), views into Params.Data
	GammaGrad     []float32
	BetaGrad      []float32
	RunMean       []float32 // (C), views into Params.State
	RunVar        []float32
	// filled by forward in training, read by backward:
	xhat             []float32   // (N, H, W, C) normalised input
	invstd           []float64   // (C) 1/√(σ²_B+Eps)
	train            bool        // forward ran with batch statistics
	mean             []float64   // (C) μ_B in training, the running mean in inference
	n                int         // batch size of the last forward
	part             [][]float64 // per shard (2C) partial sums
	sumDy, sumDyXhat []float64   // (C), filled by backward
	scale, shift     []float32   // (C) inference affine
	x, out, dx, dout []float32
}

// NewBatchNorm returns a batch-norm layer with PyTorch's defaults when
// momentum and eps are zero (0.1 and 1e-5, common practice).
func NewBatchNorm(momentum, eps float64) *BatchNorm {
	if momentum == 0 {
		momentum = 0.1
	}
	if eps == 0 {
		eps = 1e-5
	}
	return &BatchNorm{Momentum: momentum, Eps: eps}
}

// Kind implements Layer.
func (l *BatchNorm) Kind() string { return "batchnorm" }

// Spec implements Layer.
func (l *BatchNorm) Spec() string {
	return fmt.Sprintf("batchnorm momentum=%g eps=%g", l.Momentum, l.Eps)
}

func (l *BatchNorm) elementwise() {}

func (l *BatchNorm) setup(in Shape) (Shape, error) {
	if !(l.Momentum > 0 && l.Momentum <= 1) || !(l.Eps > 0) {
		return Shape{}, shapeErr("batchnorm: momentum %g must be in (0, 1] and eps %g positive", l.Momentum, l.Eps)
	}
	l.c, l.hw = in.C, in.H*in.W
	return in, nil
}

func (l *BatchNorm) params() []ParamSpec {
	return []ParamSpec{{Role: "gamma", Shape: []int{l.c}, Init: InitOne}, {Role: "beta", Shape: []int{l.c}}}
}

func (l *BatchNorm) state() []ParamSpec {
	return []ParamSpec{{Role: "mean", Shape: []int{l.c}}, {Role: "var", Shape: []int{l.c}, Init: InitOne}}
}

func (l *BatchNorm) bind(data, grad, state [][]float32) {
	l.Gamma, l.Beta, l.GammaGrad, l.BetaGrad = data[0], data[1], grad[0], grad[1]
	l.RunMean, l.RunVar = state[0], state[1]
}

func (l *BatchNorm) plan(n int) {
	if len(l.xhat) < n*l.hw*l.c {
		l.xhat = make([]float32, n*l.hw*l.c)
	}
	if l.invstd == nil {
		l.invstd, l.mean = make([]float64, l.c), make([]float64, l.c)
		l.sumDy, l.sumDyXhat = make([]float64, l.c), make([]float64, l.c)
		l.scale, l.shift = make([]float32, l.c), make([]float32, l.c)
	}
	for len(l.part) < shardCount(n) {
		l.part = append(l.part, make([]float64, 2*l.c))
	}
}

const (
	bnPhaseSum = iota
	bnPhaseVar
	bnPhaseApply
	bnPhaseGradSums
	bnPhaseGradInput
)

// forward: x and out are (N, H, W, C).
func (l *BatchNorm) forward(p *Pass, out, x []float32, n int) {
	l.x, l.out, l.train, l.n = x, out, p.Train, n
	c := l.c
	if !p.Train {
		for ch := 0; ch < c; ch++ {
			inv := 1 / math.Sqrt(float64(l.RunVar[ch])+l.Eps)
			l.mean[ch], l.invstd[ch] = float64(l.RunMean[ch]), inv
			l.scale[ch] = float32(float64(l.Gamma[ch]) * inv)
			l.shift[ch] = float32(float64(l.Beta[ch]) - float64(l.Gamma[ch])*float64(l.RunMean[ch])*inv)
		}
		p.exec.run(l, bnPhaseApply, n)
		return
	}
	m := float64(n * l.hw)
	k := shardCount(n)
	p.exec.run(l, bnPhaseSum, n)
	l.sumParts(k, l.mean, nil)
	for ch := range l.mean {
		l.mean[ch] /= m
	}
	p.exec.run(l, bnPhaseVar, n)
	vars := l.invstd // reuse as scratch
	l.sumParts(k, vars, nil)
	for ch := 0; ch < c; ch++ {
		v := vars[ch] / m
		unbiased := v
		if m > 1 {
			unbiased = v * m / (m - 1)
		}
		l.RunMean[ch] = float32((1-l.Momentum)*float64(l.RunMean[ch]) + l.Momentum*l.mean[ch])
		l.RunVar[ch] = float32((1-l.Momentum)*float64(l.RunVar[ch]) + l.Momentum*unbiased)
		l.invstd[ch] = 1 / math.Sqrt(v+l.Eps)
	}
	p.exec.run(l, bnPhaseApply, n)
}

// sumParts adds the per-shard partial sums in shard order: the first C
// entries of each part into a, the next C into b (if not nil).
func (l *BatchNorm) sumParts(k int, a, b []float64) {
	clear(a)
	if b != nil {
		clear(b)
	}
	for s := 0; s < k; s++ {
		for ch := 0; ch < l.c; ch++ {
			a[ch] += l.part[s][ch]
			if b != nil {
				b[ch] += l.part[s][l.c+ch]
			}
		}
	}
}

// backward accumulates into dx (if not nil), GammaGrad and BetaGrad. After
// a training forward it differentiates through the batch statistics,
// dx = Gamma·invstd/M · (M·dy − Σdy − xhat·Σ(dy·xhat)); after an inference
// forward the statistics are constants and dx = Gamma·invstd·dy.
func (l *BatchNorm) backward(p *Pass, dx, dout, x, out []float32, n int) {
	l.x, l.dx, l.dout = x, dx, dout
	p.exec.run(l, bnPhaseGradSums, n)
	l.sumParts(shardCount(n), l.sumDy, l.sumDyXhat)
	for ch := 0; ch < l.c; ch++ {
		l.BetaGrad[ch] += float32(l.sumDy[ch])      // y = γ·xhat + β
		l.GammaGrad[ch] += float32(l.sumDyXhat[ch]) // ∂y/∂γ = xhat
	}
	if dx != nil {
		p.exec.run(l, bnPhaseGradInput, n)
	}
}

func (l *BatchNorm) runShard(phase, s, lo, hi int) {
	c := l.c
	a, b := lo*l.hw*c, hi*l.hw*c
	switch phase {
	case bnPhaseSum:
		part := l.part[s][:c]
		clear(part)
		x := l.x[a:b]
		for q := 0; q < len(x); q += c {
			for ch, v := range x[q : q+c] {
				part[ch] += float64(v)
			}
		}
	case bnPhaseVar:
		part := l.part[s][:c]
		clear(part)
		x := l.x[a:b]
		for q := 0; q < len(x); q += c {
			for ch, v := range x[q : q+c] {
				d := float64(v) - l.mean[ch]
				part[ch] += d * d
			}
		}
	case bnPhaseApply:
		x, out := l.x[a:b], l.out[a:b]
		if !l.train {
			for q := 0; q < len(x); q += c {
				xs, os := x[q:q+c], out[q:q+c]
				for ch, v := range xs {
					os[ch] = v*l.scale[ch] + l.shift[ch]
				}
			}
			return
		}
		xh := l.xhat[a:b]
		for q := 0; q < len(x); q += c {
			for ch, v := range x[q : q+c] {
				h := float32((float64(v) - l.mean[ch]) * l.invstd[ch])
				xh[q+ch] = h
				out[q+ch] = l.Gamma[ch]*h + l.Beta[ch]
			}
		}
	case bnPhaseGradSums:
		part := l.part[s]
		clear(part)
		dy := l.dout[a:b]
		for q := 0; q < len(dy); q += c {
			for ch, v := range dy[q : q+c] {
				part[ch] += float64(v) // Σ dy (dBeta)
				part[c+ch] += float64(v) * l.xhatAt(a+q+ch, ch)
			}
		}
	case bnPhaseGradInput:
		dy, dx := l.dout[a:b], l.dx[a:b]
		if !l.train {
			for q := 0; q < len(dy); q += c {
				for ch, v := range dy[q : q+c] {
					dx[q+ch] += float32(float64(l.Gamma[ch]) * l.invstd[ch] * float64(v))
				}
			}
			return
		}
		xh := l.xhat[a:b]
		m := float64(l.n * l.hw)
		for q := 0; q < len(dy); q += c {
			for ch, v := range dy[q : q+c] {
				g := float64(l.Gamma[ch]) * l.invstd[ch] / m
				dx[q+ch] += float32(g * (m*float64(v) - l.sumDy[ch] - float64(xh[q+ch])*l.sumDyXhat[ch]))
			}
		}
	}
}

// xhatAt returns the normalised input at flat index i (channel ch): stored
// by a training forward, recomputed from the running statistics otherwise.
func (l *BatchNorm) xhatAt(i, ch int) float64 {
	if l.train {
		return float64(l.xhat[i])
	}
	return (float64(l.x[i]) - l.mean[ch]) * l.invstd[ch]
}
