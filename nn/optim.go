package nn

import (
	"fmt"
	"math"
)

// Optimizer kinds accepted by [OptimizerConfig].Kind.
const (
	OptSGD   = "sgd"
	OptAdam  = "adam"
	OptAdamW = "adamw"
)

// OptimizerConfig configures an [Optimizer]. Zero values take the defaults
// given per field.
type OptimizerConfig struct {
	Kind        string  `json:"kind"`         // "sgd", "adam" (L2 decay) or "adamw" (decoupled decay)
	Momentum    float64 `json:"momentum"`     // SGD; 0 is plain SGD
	Nesterov    bool    `json:"nesterov"`     // SGD with momentum
	Beta1       float64 `json:"beta1"`        // Adam; default 0.9
	Beta2       float64 `json:"beta2"`        // Adam; default 0.999
	Eps         float64 `json:"eps"`          // Adam; default 1e-8
	WeightDecay float64 `json:"weight_decay"` // applied to entries with Decay set
	ClipNorm    float64 `json:"clip_norm"`    // clip the global gradient L2 norm to this; 0 = off
}

// Optimizer updates [Params] from their gradients. The update rules follow
// PyTorch's documented algorithms (torch.optim.SGD, Adam, AdamW):
//
//   - SGD: g ← g + λw; v ← μv + g; w ← w − η·(g + μv) with Nesterov,
//     w ← w − η·v without.
//   - Adam: g ← g + λw; m ← β1·m + (1−β1)g; s ← β2·s + (1−β2)g²;
//     w ← w − η·m̂/(√ŝ + ε), m̂ = m/(1−β1^t), ŝ = s/(1−β2^t).
//   - AdamW: as Adam without the λw term, and w ← w − ηλw first
//     (Loshchilov & Hutter 2019, arXiv:1711.05101).
//
// Moment buffers have the layout of Params.Data. Step allocates nothing.
type Optimizer struct {
	Cfg   OptimizerConfig
	Steps int64     // completed steps (t)
	M, V  []float32 // first moment (SGD velocity) and second moment
	decay []bool    // per element: weight decay applies
}

// NewOptimizer validates cfg and returns an optimizer for p.
func NewOptimizer(cfg OptimizerConfig, p *Params) (*Optimizer, error) {
	if cfg.Kind == "" {
		cfg.Kind = OptAdam
	}
	if cfg.Beta1 == 0 {
		cfg.Beta1 = 0.9
	}
	if cfg.Beta2 == 0 {
		cfg.Beta2 = 0.999
	}
	if cfg.Eps == 0 {
		cfg.Eps = 1e-8
	}
	switch {
	case cfg.Kind != OptSGD && cfg.Kind != OptAdam && cfg.Kind != OptAdamW:
		return nil, fmt.Errorf("nn: optimizer %q (want sgd, adam or adamw)", cfg.Kind)
	case cfg.Momentum < 0 || cfg.Momentum >= 1, cfg.Beta1 < 0 || cfg.Beta1 >= 1, cfg.Beta2 < 0 || cfg.Beta2 >= 1:
		return nil, fmt.Errorf("nn: optimizer momentum/betas must be in [0, 1)")
	case cfg.Nesterov && cfg.Momentum == 0:
		return nil, fmt.Errorf("nn: Nesterov momentum needs momentum > 0")
	case cfg.WeightDecay < 0 || cfg.ClipNorm < 0 || !(cfg.Eps > 0):
		return nil, fmt.Errorf("nn: weight decay, clip norm must be ≥ 0 and eps > 0")
	}
	o := &Optimizer{Cfg: cfg, M: make([]float32, len(p.Data)), decay: make([]bool, len(p.Data))}
	if cfg.Kind != OptSGD {
		o.V = make([]float32, len(p.Data))
	}
	for _, e := range p.Entries {
		for i := e.Offset; i < e.Offset+e.Size; i++ {
			o.decay[i] = e.Decay
		}
	}
	return o, nil
}

// ClipGradients scales p.Grad so its global L2 norm is at most maxNorm and
// returns the norm before clipping. A non-finite norm is an error wrapping
// [ErrNonFinite].
func ClipGradients(p *Params, maxNorm float64) (float64, error) {
	var s float64
	for _, g := range p.Grad {
		s += float64(g) * float64(g)
	}
	norm := math.Sqrt(s)
	if math.IsNaN(norm) || math.IsInf(norm, 0) {
		return norm, fmt.Errorf("%w: gradient norm %g", ErrNonFinite, norm)
	}
	if maxNorm > 0 && norm > maxNorm {
		k := float32(maxNorm / norm)
		for i := range p.Grad {
			p.Grad[i] *= k
		}
	}
	return norm, nil
}

// Step applies one update with learning rate lr, clipping first when
// Cfg.ClipNorm > 0. It returns the gradient norm before clipping.
func (o *Optimizer) Step(p *Params, lr float64) (float64, error) {
	norm, err := ClipGradients(p, o.Cfg.ClipNorm)
	if err != nil {
		return norm, err
	}
	o.Steps++
	c := o.Cfg
	wd := c.WeightDecay
	w, g, m := p.Data, p.Grad, o.M
	switch c.Kind {
	case OptSGD:
		mu := c.Momentum
		for i := range w {
			gi := float64(g[i])
			if wd != 0 && o.decay[i] {
				gi += wd * float64(w[i])
			}
			if mu == 0 {
				w[i] = float32(float64(w[i]) - lr*gi)
				continue
			}
			v := mu*float64(m[i]) + gi
			m[i] = float32(v)
			if c.Nesterov {
				gi += mu * v
			} else {
				gi = v
			}
			w[i] = float32(float64(w[i]) - lr*gi)
		}
	default:
		b1, b2 := c.Beta1, c.Beta2
		bc1 := 1 - math.Pow(b1, float64(o.Steps))
		bc2 := 1 - math.Pow(b2, float64(o.Steps))
		decoupled := c.Kind == OptAdamW
		v := o.V
		for i := range w {
			wi, gi := float64(w[i]), float64(g[i])
			if wd != 0 && o.decay[i] {
				if decoupled {
					wi -= lr * wd * wi
				} else {
					gi += wd * wi
				}
			}
			mi := b1*float64(m[i]) + (1-b1)*gi
			vi := b2*float64(v[i]) + (1-b2)*gi*gi
			m[i], v[i] = float32(mi), float32(vi)
			w[i] = float32(wi - lr*(mi/bc1)/(math.Sqrt(vi/bc2)+c.Eps))
		}
	}
	return norm, nil
}

// Schedule kinds accepted by [Schedule].Kind.
const (
	SchedConstant = "constant"
	SchedStep     = "step"
	SchedCosine   = "cosine"
)

// Schedule gives the learning rate at each step: a linear warm-up from 0
// over WarmupSteps, then "constant" (Base), "step" (Base·Gamma^⌊(t−warm-up)/StepEvery⌋)
// or "cosine" (Base·(Final + (1−Final)·½(1+cos(π·progress)))
// over TotalSteps, after Loshchilov & Hutter 2017, arXiv:1608.03983).
type Schedule struct {
	Kind        string  `json:"kind"`
	Base        float64 `json:"base"`
	WarmupSteps int64   `json:"warmup_steps"`
	StepEvery   int64   `json:"step_every"` // "step"
	Gamma       float64 `json:"gamma"`      // "step"; default 0.1
	TotalSteps  int64   `json:"total_steps"`
	Final       float64 `json:"final"` // "cosine": final fraction of Base
}

// Check validates s.
func (s Schedule) Check() error {
	switch {
	case !(s.Base > 0):
		return fmt.Errorf("nn: learning rate %g must be positive", s.Base)
	case s.Kind == SchedStep && s.StepEvery < 1:
		return fmt.Errorf("nn: step schedule needs step_every ≥ 1")
	case s.Kind == SchedCosine && s.TotalSteps < 1:
		return fmt.Errorf("nn: cosine schedule needs total_steps ≥ 1")
	case s.Kind != SchedConstant && s.Kind != SchedStep && s.Kind != SchedCosine && s.Kind != "":
		return fmt.Errorf("nn: schedule %q (want constant, step or cosine)", s.Kind)
	case s.WarmupSteps < 0 || s.Final < 0 || s.Final > 1:
		return fmt.Errorf("nn: warm-up steps must be ≥ 0 and final fraction in [0, 1]")
	}
	return nil
}

// At returns the learning rate for step t (0-based).
func (s Schedule) At(t int64) float64 {
	if t < s.WarmupSteps {
		return s.Base * float64(t+1) / float64(s.WarmupSteps)
	}
	t -= s.WarmupSteps
	switch s.Kind {
	case SchedStep:
		g := s.Gamma
		if g == 0 {
			g = 0.1
		}
		return s.Base * math.Pow(g, float64(t/s.StepEvery))
	case SchedCosine:
		span := s.TotalSteps - s.WarmupSteps
		if span < 1 {
			span = 1
		}
		prog := math.Min(float64(t)/float64(span), 1)
		return s.Base * (s.Final + (1-s.Final)*0.5*(1+math.Cos(math.Pi*prog)))
	}
	return s.Base
}
