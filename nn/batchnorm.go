package nn

import (
	"fmt"
	"math"

	"github.com/pipit-audio/pipit/internal/kernels"
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
	// filled by forward, read by backward:
	invstd     []float64   // (C) 1/√(σ²+Eps) of the statistics used
	train      bool        // forward ran with batch statistics
	mean       []float64   // (C) μ_B in training, the running mean in inference
	mean32     []float32   // (C) mean rounded to float32 (the kernels' shift)
	n          int         // batch size of the last forward
	part       [][]float64 // per shard (2C) partial sums
	sum1, sum2 []float64   // (C) reduced sums
	zero       []float32   // (C) zeros
	// per-channel coefficients of the kernels
	scale, shift     []float32 // forward: out = x·scale + shift
	ga, gb, gk       []float32 // backward: dx = ga·dy + gb·(x − mean32) + gk
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
	if l.invstd == nil {
		c := l.c
		l.invstd, l.mean, l.sum1, l.sum2 = make([]float64, c), make([]float64, c), make([]float64, c), make([]float64, c)
		l.mean32, l.zero = make([]float32, c), make([]float32, c)
		l.scale, l.shift = make([]float32, c), make([]float32, c)
		l.ga, l.gb, l.gk = make([]float32, c), make([]float32, c), make([]float32, c)
	}
	for len(l.part) < shardCount(n) {
		l.part = append(l.part, make([]float64, 2*l.c))
	}
}

const (
	bnPhaseSum = iota
	bnPhaseApply
	bnPhaseGradSums
	bnPhaseGradInput
)

// writesDx implements dxWriter: backward overwrites dx.
func (l *BatchNorm) writesDx() {}

// forward: x and out are (N, H, W, C). In training the batch's first two
// moments per channel come from one pass (Σx and Σx² in float64; the
// variance E[x²] − μ², which float64 keeps accurate for the ranges of
// float32 activations); both modes then apply out = x·scale + shift with
// scale = γ·invstd and shift = β − γ·μ·invstd, one fused multiply-add per
// value.
func (l *BatchNorm) forward(p *Pass, out, x []float32, n int) {
	l.x, l.out, l.train, l.n = x, out, p.Train, n
	c := l.c
	if p.Train {
		m := float64(n * l.hw)
		k := shardCount(n)
		p.exec.run(l, bnPhaseSum, n)
		l.sumParts(k, l.sum1, l.sum2)
		for ch := 0; ch < c; ch++ {
			mean := l.sum1[ch] / m
			v := max(l.sum2[ch]/m-mean*mean, 0)
			unbiased := v
			if m > 1 {
				unbiased = v * m / (m - 1)
			}
			l.RunMean[ch] = float32((1-l.Momentum)*float64(l.RunMean[ch]) + l.Momentum*mean)
			l.RunVar[ch] = float32((1-l.Momentum)*float64(l.RunVar[ch]) + l.Momentum*unbiased)
			l.mean[ch], l.invstd[ch] = mean, 1/math.Sqrt(v+l.Eps)
		}
	} else {
		for ch := 0; ch < c; ch++ {
			l.mean[ch], l.invstd[ch] = float64(l.RunMean[ch]), 1/math.Sqrt(float64(l.RunVar[ch])+l.Eps)
		}
	}
	for ch := 0; ch < c; ch++ {
		g := float64(l.Gamma[ch]) * l.invstd[ch]
		l.mean32[ch] = float32(l.mean[ch])
		l.scale[ch] = float32(g)
		l.shift[ch] = float32(float64(l.Beta[ch]) - g*l.mean[ch])
	}
	p.exec.run(l, bnPhaseApply, n)
}

// sumParts adds the per-shard partial sums in shard order: the first C
// entries of each part into a, the next C into b.
func (l *BatchNorm) sumParts(k int, a, b []float64) {
	clear(a)
	clear(b)
	for s := 0; s < k; s++ {
		for ch := 0; ch < l.c; ch++ {
			a[ch] += l.part[s][ch]
			b[ch] += l.part[s][l.c+ch]
		}
	}
}

// backward writes dx (if not nil) and accumulates GammaGrad and BetaGrad.
// With xhat = (x−μ)·invstd, after a training forward it differentiates
// through the batch statistics,
// dx = γ·invstd/M · (M·dy − Σdy − xhat·Σ(dy·xhat)); after an inference
// forward the statistics are constants and dx = γ·invstd·dy. Both are
// evaluated as dx = ga·dy + gb·(x − μ32) + gk with per-channel
// coefficients, μ32 being μ rounded to float32 (its rounding error is
// folded into gk and into Σ(dy·xhat) in float64).
func (l *BatchNorm) backward(p *Pass, dx, dout, x, out []float32, n int) {
	l.x, l.dx, l.dout = x, dx, dout
	p.exec.run(l, bnPhaseGradSums, n)
	l.sumParts(shardCount(n), l.sum1, l.sum2)
	m := float64(l.n * l.hw)
	for ch := 0; ch < l.c; ch++ {
		inv := l.invstd[ch]
		sumDy := l.sum1[ch]
		dmu := float64(l.mean32[ch]) - l.mean[ch]
		sumDyXhat := (l.sum2[ch] + dmu*sumDy) * inv // Σ dy·(x−μ)·invstd
		l.BetaGrad[ch] += float32(sumDy)            // y = γ·xhat + β
		l.GammaGrad[ch] += float32(sumDyXhat)       // ∂y/∂γ = xhat
		a := float64(l.Gamma[ch]) * inv
		var b, k float64
		if l.train {
			g := a / m
			b = -g * sumDyXhat * inv
			k = -g*sumDy + b*dmu
		}
		l.ga[ch], l.gb[ch], l.gk[ch] = float32(a), float32(b), float32(k)
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
		part := l.part[s]
		clear(part)
		x := l.x[a:b]
		kernels.ChanDot(x, x, l.zero, c, part[:c], part[c:])
	case bnPhaseApply:
		kernels.ChanAffine(l.out[a:b], l.x[a:b], l.scale, l.shift, c, negInf32, posInf32)
	case bnPhaseGradSums:
		part := l.part[s]
		clear(part)
		kernels.ChanDot(l.dout[a:b], l.x[a:b], l.mean32, c, part[:c], part[c:])
	case bnPhaseGradInput:
		kernels.ChanLinear(l.dx[a:b], l.dout[a:b], l.x[a:b], l.ga, l.mean32, l.gb, l.gk, c)
	}
}

var (
	posInf32 = float32(math.Inf(1))
	negInf32 = float32(math.Inf(-1))
)
