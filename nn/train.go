package nn

import (
	"fmt"
	"math/rand/v2"
)

// Trainer runs training steps of a classifier network: forward with batch
// statistics, softmax cross-entropy, backward, optimiser step. Its whole
// state (network, optimiser, schedule position, dropout RNG) is saved and
// restored by [Trainer.WriteCheckpoint] and [ReadCheckpoint], and a
// restored trainer continues bit-identically.
type Trainer struct {
	Net   *Network
	Loss  *SoftmaxCrossEntropy
	Opt   *Optimizer
	Sched Schedule
	// BeforeStep and AfterStep, if set, run around every step (after the
	// forward/backward/update, before the next); quantisation-aware
	// training uses them to swap fake-quantised weights in and out.
	BeforeStep, AfterStep func()
	pcg                   *rand.PCG
	rng                   *rand.Rand
	dz                    []float32 // (N, L) logit gradients
}

// StepResult reports one training step.
type StepResult struct {
	Loss     float64 // mean loss over the batch (before the update)
	Correct  int     // samples whose arg-max logit was the label
	LR       float64 // learning rate used
	GradNorm float64 // global gradient L2 norm before clipping
}

// NewTrainer returns a trainer; seed drives dropout masks only (weights
// were initialised by the network's own seed).
func NewTrainer(net *Network, loss *SoftmaxCrossEntropy, opt OptimizerConfig, sched Schedule, seed uint64) (*Trainer, error) {
	if err := loss.Check(); err != nil {
		return nil, err
	}
	if out := net.Output(); out.Size() != loss.Classes {
		return nil, fmt.Errorf("nn: network gives %d outputs for %d classes", out.Size(), loss.Classes)
	}
	if sched.Kind == "" {
		sched.Kind = SchedConstant
	}
	if err := sched.Check(); err != nil {
		return nil, err
	}
	o, err := NewOptimizer(opt, net.Params)
	if err != nil {
		return nil, err
	}
	pcg := rand.NewPCG(seed, seed^0xda3e39cb94b95bdb)
	return &Trainer{Net: net, Loss: loss, Opt: o, Sched: sched, pcg: pcg, rng: rand.New(pcg)}, nil
}

// Step trains on one batch: x (N, H, W, C) with labels (N). After the
// first batch of a given size it allocates nothing. Errors: a label out of
// range, or a non-finite loss or gradient (wrapping [ErrNonFinite]), in
// which case the parameters are left as they were.
func (t *Trainer) Step(x []float32, labels []int) (StepResult, error) {
	n := len(labels)
	L := t.Loss.Classes
	if cap(t.dz) < n*L {
		t.dz = make([]float32, n*L)
	}
	dz := t.dz[:n*L]
	if t.BeforeStep != nil {
		t.BeforeStep()
	}
	if t.AfterStep != nil {
		defer t.AfterStep()
	}
	logits := t.Net.Forward(x, n, true, t.rng)
	loss, correct, err := t.Loss.Forward(logits, labels, dz)
	if err != nil {
		return StepResult{}, err
	}
	t.Net.Params.ZeroGrad()
	t.Net.Backward(x, dz, n)
	lr := t.Sched.At(t.Opt.Steps)
	norm, err := t.Opt.Step(t.Net.Params, lr)
	if err != nil {
		return StepResult{}, err
	}
	return StepResult{Loss: loss, Correct: correct, LR: lr, GradNorm: norm}, nil
}

// Predict writes the network's outputs for n samples of x into dst
// (n, L) in inference mode, running batch samples at a time.
func (net *Network) Predict(dst, x []float32, n, batch int) {
	in, out := net.Input.Size(), net.Output().Size()
	if batch < 1 {
		batch = 32
	}
	for lo := 0; lo < n; lo += batch {
		hi := min(lo+batch, n)
		y := net.Forward(x[lo*in:hi*in], hi-lo, false, nil)
		copy(dst[lo*out:hi*out], y)
	}
}
