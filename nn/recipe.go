package nn

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// Recipe holds the training-recipe elements [Fit] applies beyond plain
// labelled batches (FitConfig.Recipe). The zero value changes nothing.
// Label smoothing and class weights stay on the trainer's
// [SoftmaxCrossEntropy]; weight decay and the schedule on the trainer's
// optimiser and [Schedule].
type Recipe struct {
	// MixupAlpha > 0 mixes every batch with itself in a shuffled order,
	// x = λ·x_i + (1−λ)·x_j and targets likewise, λ ~ Beta(α, α) drawn
	// once per batch (Zhang et al. 2018, "mixup: Beyond Empirical Risk
	// Minimization", ICLR, eq. 1 and Fig. 1a).
	MixupAlpha float64
	// Balanced draws each epoch's order with every class equally often
	// (see [BalancedOrder]); the training set must implement [Labeler].
	Balanced bool
	// Teacher, if not nil, adds knowledge distillation from its logits on
	// the same (mixed) batch, run in inference mode; see [Distill].
	Teacher *Network
	Distill Distill
}

// Labeler is a [SampleSource] that can tell a sample's label without
// building its input (datasets.Set implements it).
type Labeler interface {
	Label(i int) int
}

// Check validates r for a network with the given input shape and classes.
func (r *Recipe) Check(input Shape, classes int) error {
	if !(r.MixupAlpha >= 0) || math.IsInf(r.MixupAlpha, 0) {
		return fmt.Errorf("nn: mixup alpha %g must be ≥ 0", r.MixupAlpha)
	}
	if r.Teacher != nil {
		if r.Teacher.Input != input {
			return fmt.Errorf("nn: teacher input %v, student input %v", r.Teacher.Input, input)
		}
		if r.Teacher.Output().Size() != classes {
			return fmt.Errorf("nn: teacher has %d outputs, student %d", r.Teacher.Output().Size(), classes)
		}
		if err := r.Distill.Check(); err != nil {
			return err
		}
	}
	return nil
}

// soft reports whether the recipe trains on target distributions.
func (r *Recipe) soft() bool { return r != nil && (r.MixupAlpha > 0 || r.Teacher != nil) }

// Distill configures knowledge distillation (Hinton, Vinyals & Dean 2015,
// "Distilling the Knowledge in a Neural Network", arXiv:1503.02531 §2):
// with student logits z, teacher logits v and targets q,
//
//	loss = (1−Weight)·CE(q, softmax(z)) + Weight·T²·KL(softmax(v/T) ‖ softmax(z/T))
//
// The T² keeps the soft term's gradient, T·(softmax(z/T) − softmax(v/T)),
// on the scale of the hard term's as T changes (the paper's §2, last
// paragraph). The KL divergence differs from the paper's cross-entropy
// with soft targets by the teacher's entropy, a constant, so the gradient
// is the same and a perfect match scores 0.
type Distill struct {
	Temperature float64 // T > 0; 0 means 4
	Weight      float64 // in [0, 1]; 0 means 0.5
}

func (d Distill) resolved() Distill {
	if d.Temperature == 0 {
		d.Temperature = 4
	}
	if d.Weight == 0 {
		d.Weight = 0.5
	}
	return d
}

// Check validates d.
func (d Distill) Check() error {
	d = d.resolved()
	if !(d.Temperature > 0) || math.IsInf(d.Temperature, 0) {
		return fmt.Errorf("nn: distillation temperature %g must be positive", d.Temperature)
	}
	if !(d.Weight >= 0 && d.Weight <= 1) {
		return fmt.Errorf("nn: distillation weight %g outside [0, 1]", d.Weight)
	}
	return nil
}

// ForwardSoft is [SoftmaxCrossEntropy.Forward] with a target distribution
// per sample instead of a label: targets is (N, L), each row summing to 1.
// Label smoothing applies to the targets, q' = (1−ε)·q + ε/L; a sample's
// weight is Σ_c q_c·w_c. With one-hot targets it gives exactly what
// Forward gives. correct counts samples whose largest logit is at the
// largest target.
func (l *SoftmaxCrossEntropy) ForwardSoft(logits, targets, dlogits []float32) (loss float64, correct int, err error) {
	L := l.Classes
	n := len(targets) / L
	if len(targets) != n*L || len(logits) < n*L || (dlogits != nil && len(dlogits) < n*L) {
		panic(fmt.Sprintf("nn: SoftmaxCrossEntropy.ForwardSoft: %d logits, %d targets, %d gradient slots for %d classes", len(logits), len(targets), len(dlogits), L))
	}
	if len(l.prob) != L {
		l.prob = make([]float64, L)
	}
	var wsum float64
	for i := 0; i < n; i++ {
		wsum += l.softWeight(targets[i*L : (i+1)*L])
	}
	if !(wsum > 0) {
		return 0, 0, fmt.Errorf("nn: targets carry zero total class weight")
	}
	eps := l.Smoothing
	for i := 0; i < n; i++ {
		z, q := logits[i*L:(i+1)*L], targets[i*L:(i+1)*L]
		if argmax32(z) == argmax32(q) {
			correct++
		}
		logSum := l.logSumExp(z)
		w := l.softWeight(q)
		var li float64
		for c, v := range z {
			qc := (1-eps)*float64(q[c]) + eps/float64(L)
			li -= qc * (float64(v) - logSum)
			if dlogits != nil {
				dlogits[i*L+c] = float32(w * (l.prob[c] - qc) / wsum)
			}
		}
		loss += w * li
	}
	loss /= wsum
	if math.IsNaN(loss) || math.IsInf(loss, 0) {
		return loss, correct, fmt.Errorf("%w: loss %g", ErrNonFinite, loss)
	}
	return loss, correct, nil
}

// logSumExp returns log Σ exp(z_c) and leaves softmax(z) in l.prob.
func (l *SoftmaxCrossEntropy) logSumExp(z []float32) float64 {
	zmax := math.Inf(-1)
	for _, v := range z {
		zmax = math.Max(zmax, float64(v))
	}
	var sum float64
	for c, v := range z {
		e := math.Exp(float64(v) - zmax)
		l.prob[c] = e
		sum += e
	}
	for c := range z {
		l.prob[c] /= sum
	}
	return math.Log(sum) + zmax
}

func (l *SoftmaxCrossEntropy) softWeight(q []float32) float64 {
	if l.ClassWeights == nil {
		return 1
	}
	var w float64
	for c, v := range q {
		w += float64(v) * float64(l.ClassWeights[c])
	}
	return w
}

func argmax32(v []float32) int {
	best := 0
	for c := range v {
		if v[c] > v[best] {
			best = c
		}
	}
	return best
}

// DistillLoss returns the loss of [Distill] over a batch and adds its
// gradient with respect to the student logits into dlogits (N, L) if not
// nil: dlogits is first set to (1−Weight) times the gradient of
// hard.ForwardSoft, then Weight·T·(softmax(z/T) − softmax(v/T))/N is
// added. The batch loss is the mean over samples of the soft term (class
// weights do not apply to it).
func DistillLoss(hard *SoftmaxCrossEntropy, d Distill, logits, teacher, targets, dlogits []float32) (loss float64, correct int, err error) {
	d = d.resolved()
	L := hard.Classes
	n := len(targets) / L
	if len(teacher) < n*L {
		panic(fmt.Sprintf("nn: DistillLoss: %d teacher logits for %d samples × %d classes", len(teacher), n, L))
	}
	ce, correct, err := hard.ForwardSoft(logits, targets, dlogits)
	if err != nil {
		return ce, correct, err
	}
	a, T := d.Weight, d.Temperature
	if dlogits != nil {
		for i := range dlogits[:n*L] {
			dlogits[i] *= float32(1 - a)
		}
	}
	var kl float64
	var bufS, bufT [64]float64 // no allocation for up to 64 classes
	ps, pt := bufS[:0], bufT[:0]
	if L > len(bufS) {
		ps, pt = make([]float64, 0, L), make([]float64, 0, L)
	}
	ps, pt = ps[:L], pt[:L] // student and teacher at T
	for i := 0; i < n; i++ {
		softmaxT(ps, logits[i*L:(i+1)*L], T)
		softmaxT(pt, teacher[i*L:(i+1)*L], T)
		for c := range ps {
			if pt[c] > 0 {
				kl += pt[c] * (math.Log(pt[c]) - math.Log(ps[c]))
			}
			if dlogits != nil {
				dlogits[i*L+c] += float32(a * T * (ps[c] - pt[c]) / float64(n))
			}
		}
	}
	loss = (1-a)*ce + a*T*T*kl/float64(n)
	if math.IsNaN(loss) || math.IsInf(loss, 0) {
		return loss, correct, fmt.Errorf("%w: loss %g", ErrNonFinite, loss)
	}
	return loss, correct, nil
}

// softmaxT writes softmax(z/T) into p.
func softmaxT(p []float64, z []float32, T float64) {
	zmax := math.Inf(-1)
	for _, v := range z {
		zmax = math.Max(zmax, float64(v))
	}
	var sum float64
	for c, v := range z {
		p[c] = math.Exp((float64(v) - zmax) / T)
		sum += p[c]
	}
	for c := range p {
		p[c] /= sum
	}
}

// OneHot writes the one-hot rows of labels into targets (N, L).
func OneHot(targets []float32, labels []int, classes int) {
	clear(targets[:len(labels)*classes])
	for i, y := range labels {
		targets[i*classes+y] = 1
	}
}

// Mixup mixes a batch with itself in place (Zhang et al. 2018, eq. 1):
// x is (N, in) and targets (N, L); with λ ~ Beta(α, α) drawn once for the
// batch and a random permutation π, row i becomes λ·row_i + (1−λ)·row_π(i)
// in both. scratch must hold N·max(in, L) values. It returns λ. Each
// target row still sums to 1 (up to float32 rounding) when it did before.
func Mixup(x, targets, scratch []float32, n, in, classes int, alpha float64, perm []int, rng *rand.Rand) float64 {
	lam := BetaSample(rng, alpha, alpha)
	for i := range perm[:n] {
		perm[i] = i
	}
	rng.Shuffle(n, func(i, j int) { perm[i], perm[j] = perm[j], perm[i] })
	mix := func(v []float32, w int) {
		copy(scratch[:n*w], v[:n*w])
		l, m := float32(lam), float32(1-lam)
		for i := 0; i < n; i++ {
			a, b := v[i*w:(i+1)*w], scratch[perm[i]*w:(perm[i]+1)*w]
			for k := range a {
				a[k] = l*a[k] + m*b[k]
			}
		}
	}
	mix(x, in)
	mix(targets, classes)
	return lam
}

// BetaSample draws from Beta(a, b) as X/(X+Y) with X ~ Gamma(a), Y ~
// Gamma(b) (a standard identity; e.g. Devroye 1986, "Non-Uniform Random
// Variate Generation", ch. IX.4).
func BetaSample(rng *rand.Rand, a, b float64) float64 {
	x, y := gammaSample(rng, a), gammaSample(rng, b)
	if x+y == 0 {
		return 0.5
	}
	return x / (x + y)
}

// gammaSample draws from Gamma(shape k, scale 1) by Marsaglia & Tsang
// 2000 ("A Simple Method for Generating Gamma Variables", ACM TOMS 26(3)),
// with their boost U^(1/k) for k < 1.
func gammaSample(rng *rand.Rand, k float64) float64 {
	if k < 1 {
		return gammaSample(rng, k+1) * math.Pow(rng.Float64(), 1/k)
	}
	d := k - 1.0/3
	c := 1 / math.Sqrt(9*d)
	for {
		x := rng.NormFloat64()
		v := 1 + c*x
		if v <= 0 {
			continue
		}
		v = v * v * v
		u := rng.Float64()
		if math.Log(u) < 0.5*x*x+d-d*v+d*math.Log(v) {
			return d * v
		}
	}
}

// BalancedOrder fills order (len n, the epoch's length) with sample
// indices so that every class present in labels gets ⌊n/K⌋ or ⌈n/K⌉
// places (K classes present; which classes get the extra place is drawn
// at random), and shuffles it. Within a class, samples are taken in a
// fresh random order, pass after pass, so a minority sample appears
// ⌊m⌋ or ⌈m⌉ times where m is its class's places over its count, and a
// majority sample at most once. Sampling of this kind is common practice
// for skewed corpora (e.g. Buda, Maki & Mazurowski 2018, Neural Networks
// 106, "oversampling").
func BalancedOrder(order, labels []int, rng *rand.Rand) {
	n := len(order)
	byClass := map[int][]int{}
	var classes []int
	for i, y := range labels {
		if _, ok := byClass[y]; !ok {
			classes = append(classes, y)
		}
		byClass[y] = append(byClass[y], i)
	}
	K := len(classes)
	if K == 0 {
		return
	}
	places := make([]int, K)
	for k := range places {
		places[k] = n / K
	}
	extra := rng.Perm(K)
	for _, k := range extra[:n%K] {
		places[k]++
	}
	pos := 0
	for k, y := range classes {
		idx := byClass[y]
		for left := places[k]; left > 0; {
			rng.Shuffle(len(idx), func(i, j int) { idx[i], idx[j] = idx[j], idx[i] })
			take := min(left, len(idx))
			pos += copy(order[pos:], idx[:take])
			left -= take
		}
	}
	rng.Shuffle(n, func(i, j int) { order[i], order[j] = order[j], order[i] })
}

// StepSoft trains on one batch of target distributions: x (N, H, W, C),
// targets (N, L). teacher, if not nil, holds teacher logits (N, L) and
// adds distillation d ([DistillLoss]). Like [Trainer.Step], it leaves the
// parameters as they were on a non-finite loss or gradient.
func (t *Trainer) StepSoft(x, targets, teacher []float32, d Distill) (StepResult, error) {
	L := t.Loss.Classes
	n := len(targets) / L
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
	var loss float64
	var correct int
	var err error
	if teacher != nil {
		loss, correct, err = DistillLoss(t.Loss, d, logits, teacher, targets, dz)
	} else {
		loss, correct, err = t.Loss.ForwardSoft(logits, targets, dz)
	}
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

// recipeState holds the buffers [Fit] uses for a soft-target recipe.
type recipeState struct {
	r                *Recipe
	targets, scratch []float32
	teacher          []float32
	perm             []int
	pcg              *rand.PCG
	rng              *rand.Rand
}

func newRecipeState(r *Recipe, batch, in, classes int, seed uint64) *recipeState {
	pcg := rand.NewPCG(seed, 0x6d1c)
	return &recipeState{r: r, targets: make([]float32, batch*classes), scratch: make([]float32, batch*max(in, classes)),
		teacher: make([]float32, batch*classes), perm: make([]int, batch), pcg: pcg, rng: rand.New(pcg)}
}

// step runs one recipe step on the batch x (b samples) with labels y.
func (s *recipeState) step(tr *Trainer, x []float32, y []int) (StepResult, error) {
	L, in, b := tr.Loss.Classes, tr.Net.Input.Size(), len(y)
	tg := s.targets[:b*L]
	OneHot(tg, y, L)
	if s.r.MixupAlpha > 0 {
		Mixup(x, tg, s.scratch, b, in, L, s.r.MixupAlpha, s.perm, s.rng)
	}
	var teacher []float32
	if s.r.Teacher != nil {
		teacher = s.teacher[:b*L]
		copy(teacher, s.r.Teacher.Forward(x[:b*in], b, false, nil))
	}
	return tr.StepSoft(x[:b*in], tg, teacher, s.r.Distill)
}
