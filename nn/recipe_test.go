package nn

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

type distillGolden struct {
	Torch       string    `json:"torch"`
	Classes     int       `json:"classes"`
	Smoothing   float64   `json:"smoothing"`
	Temperature float64   `json:"temperature"`
	Weight      float64   `json:"weight"`
	Logits      []float32 `json:"logits"`
	Teacher     []float32 `json:"teacher"`
	Targets     []float32 `json:"targets"`
	SoftLoss    float64   `json:"soft_loss"`
	SoftGrad    []float64 `json:"soft_grad"`
	DistLoss    float64   `json:"distill_loss"`
	DistGrad    []float64 `json:"distill_grad"`
}

// TestSoftTargetsMatchPyTorch checks ForwardSoft (with label smoothing)
// and DistillLoss against the values and autograd gradients that
// testdata/gen/distill_golden.py computed with PyTorch 1.13 in float64 on
// the same float32 inputs. Tolerance 1e-5 relative: pipit sums in float64
// but stores gradients in float32 (about 6e-8 relative).
func TestSoftTargetsMatchPyTorch(t *testing.T) {
	raw, err := os.ReadFile(filepath.Join("testdata", "distill_golden.json"))
	if err != nil {
		t.Fatal(err)
	}
	var g distillGolden
	if err := json.Unmarshal(raw, &g); err != nil {
		t.Fatal(err)
	}
	dz := make([]float32, len(g.Logits))
	close := func(what string, got, want float64) {
		t.Helper()
		if math.Abs(got-want) > 1e-5*math.Max(1, math.Abs(want)) {
			t.Errorf("%s: got %.8g, PyTorch %s %.8g", what, got, g.Torch, want)
		}
	}
	soft := &SoftmaxCrossEntropy{Classes: g.Classes, Smoothing: g.Smoothing}
	loss, _, err := soft.ForwardSoft(g.Logits, g.Targets, dz)
	if err != nil {
		t.Fatal(err)
	}
	close("soft-target loss", loss, g.SoftLoss)
	for i, w := range g.SoftGrad {
		close("soft-target gradient", float64(dz[i]), w)
	}
	hard := &SoftmaxCrossEntropy{Classes: g.Classes}
	loss, _, err = DistillLoss(hard, Distill{Temperature: g.Temperature, Weight: g.Weight}, g.Logits, g.Teacher, g.Targets, dz)
	if err != nil {
		t.Fatal(err)
	}
	close("distillation loss", loss, g.DistLoss)
	for i, w := range g.DistGrad {
		close("distillation gradient", float64(dz[i]), w)
	}
}

// TestDistillGradientFiniteDifferences compares DistillLoss's gradient with
// central differences of its loss (step 1e-2 on float32 logits; the loss
// is smooth, so the truncation error is O(h²·third derivative) ≈ 1e-5;
// tolerance 1e-3 absolute, common practice for float32 checks).
func TestDistillGradientFiniteDifferences(t *testing.T) {
	const L, N, h = 4, 3, 1e-2
	rng := rand.New(rand.NewPCG(3, 4))
	z, v := make([]float32, N*L), make([]float32, N*L)
	for i := range z {
		z[i], v[i] = float32(2*rng.NormFloat64()), float32(2*rng.NormFloat64())
	}
	q := make([]float32, N*L)
	OneHot(q, []int{0, 2, 3}, L)
	w := []float32{1, 2, 0.5, 1}
	for _, d := range []Distill{{Temperature: 1, Weight: 0.5}, {Temperature: 4, Weight: 0.9}, {Temperature: 2.5, Weight: 1}} {
		hard := &SoftmaxCrossEntropy{Classes: L, Smoothing: 0.1, ClassWeights: w}
		dz := make([]float32, N*L)
		if _, _, err := DistillLoss(hard, d, z, v, q, dz); err != nil {
			t.Fatal(err)
		}
		for i := range z {
			keep := z[i]
			z[i] = keep + h
			up, _, _ := DistillLoss(hard, d, z, v, q, nil)
			z[i] = keep - h
			down, _, _ := DistillLoss(hard, d, z, v, q, nil)
			z[i] = keep
			fd := (up - down) / (2 * h)
			if math.Abs(fd-float64(dz[i])) > 1e-3 {
				t.Errorf("T=%g weight %g: d loss/d z[%d] = %.6f, finite differences %.6f", d.Temperature, d.Weight, i, dz[i], fd)
			}
		}
	}
}

// TestDistillMatchedTeacher: when teacher and student logits agree the
// KL term and its gradient vanish, and weight 0 leaves the hard loss
// (derived here from the definition).
func TestDistillMatchedTeacher(t *testing.T) {
	z := []float32{1, -2, 0.5, 3, 0, 0}
	q := make([]float32, 6)
	OneHot(q, []int{2, 0}, 3)
	hard := &SoftmaxCrossEntropy{Classes: 3}
	ce, _, _ := hard.ForwardSoft(z, q, nil)
	got, _, _ := DistillLoss(hard, Distill{Temperature: 3, Weight: 1}, z, z, q, nil)
	if math.Abs(got) > 1e-12 {
		t.Errorf("matched teacher, weight 1: loss %g, want 0", got)
	}
	got, _, _ = DistillLoss(hard, Distill{Temperature: 3, Weight: 0.25}, z, z, q, nil)
	if math.Abs(got-0.75*ce) > 1e-12 {
		t.Errorf("matched teacher, weight 0.25: loss %g, want 0.75·CE = %g", got, 0.75*ce)
	}
}

// TestForwardSoftOneHotIsForward: one-hot targets give Forward's loss and
// gradient, with smoothing and class weights.
func TestForwardSoftOneHotIsForward(t *testing.T) {
	const L = 5
	rng := rand.New(rand.NewPCG(9, 9))
	labels := []int{0, 4, 2, 2, 1, 3, 4}
	z := make([]float32, len(labels)*L)
	for i := range z {
		z[i] = float32(3 * rng.NormFloat64())
	}
	q := make([]float32, len(z))
	OneHot(q, labels, L)
	l := &SoftmaxCrossEntropy{Classes: L, Smoothing: 0.2, ClassWeights: []float32{1, 0.5, 2, 1, 3}}
	d1, d2 := make([]float32, len(z)), make([]float32, len(z))
	a, ca, err := l.Forward(z, labels, d1)
	if err != nil {
		t.Fatal(err)
	}
	b, cb, err := l.ForwardSoft(z, q, d2)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(a-b) > 1e-12 || ca != cb {
		t.Errorf("Forward %g (%d right), ForwardSoft %g (%d right)", a, ca, b, cb)
	}
	for i := range d1 {
		if math.Abs(float64(d1[i]-d2[i])) > 1e-7 {
			t.Errorf("gradient %d: Forward %g, ForwardSoft %g", i, d1[i], d2[i])
		}
	}
}

// TestMixupLabelsSumToOne: after Mixup every target row sums to 1, each
// row is λ·own + (1−λ)·partner in targets and inputs alike, and the
// partners form a permutation.
func TestMixupLabelsSumToOne(t *testing.T) {
	const n, in, L = 16, 7, 5
	rng := rand.New(rand.NewPCG(5, 6))
	for trial := 0; trial < 20; trial++ {
		x := make([]float32, n*in)
		for i := range x {
			x[i] = float32(rng.NormFloat64())
		}
		labels := make([]int, n)
		for i := range labels {
			labels[i] = rng.IntN(L)
		}
		x0 := append([]float32(nil), x...)
		q := make([]float32, n*L)
		OneHot(q, labels, L)
		perm := make([]int, n)
		lam := Mixup(x, q, make([]float32, n*in), n, in, L, 0.4, perm, rng)
		if !(lam >= 0 && lam <= 1) {
			t.Fatalf("λ = %g", lam)
		}
		seen := make([]bool, n)
		for i := 0; i < n; i++ {
			seen[perm[i]] = true
			var s float64
			for c := 0; c < L; c++ {
				s += float64(q[i*L+c])
				want := lam * b2f(labels[i] == c)
				want += (1 - lam) * b2f(labels[perm[i]] == c)
				if math.Abs(float64(q[i*L+c])-want) > 1e-6 {
					t.Fatalf("target %d,%d = %g, want %g", i, c, q[i*L+c], want)
				}
			}
			if math.Abs(s-1) > 1e-6 {
				t.Errorf("trial %d: target row %d sums to %.8f", trial, i, s)
			}
			for k := 0; k < in; k++ {
				want := float32(lam)*x0[i*in+k] + float32(1-lam)*x0[perm[i]*in+k]
				if math.Abs(float64(x[i*in+k]-want)) > 1e-6 {
					t.Fatalf("input %d,%d = %g, want %g", i, k, x[i*in+k], want)
				}
			}
		}
		for i, ok := range seen {
			if !ok {
				t.Fatalf("partner order is not a permutation: %d unused", i)
			}
		}
	}
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// TestBetaSampleMoments: mean a/(a+b) and variance ab/((a+b)²(a+b+1)) of
// the Beta distribution (its standard moments, e.g. Johnson, Kotz &
// Balakrishnan 1995, "Continuous Univariate Distributions" vol. 2 ch. 25).
// 40000 draws: the standard error of the mean is below 0.002, so 0.01 is
// five standard errors.
func TestBetaSampleMoments(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, p := range [][2]float64{{0.2, 0.2}, {0.4, 0.4}, {2, 5}, {1, 1}} {
		a, b := p[0], p[1]
		const n = 40000
		var s, s2 float64
		for i := 0; i < n; i++ {
			v := BetaSample(rng, a, b)
			if !(v >= 0 && v <= 1) {
				t.Fatalf("Beta(%g, %g) drew %g", a, b, v)
			}
			s += v
			s2 += v * v
		}
		mean := s / n
		vr := s2/n - mean*mean
		wm, wv := a/(a+b), a*b/((a+b)*(a+b)*(a+b+1))
		if math.Abs(mean-wm) > 0.01 || math.Abs(vr-wv) > 0.01 {
			t.Errorf("Beta(%g, %g): mean %.4f variance %.4f, want %.4f and %.4f", a, b, mean, vr, wm, wv)
		}
	}
}

// TestBalancedOrderCounts: on a corpus of 50, 10 and 3 samples an epoch of
// 63 gives each class 21 places; every minority sample appears ⌊21/m⌋ or
// ⌈21/m⌉ times, no majority sample twice.
func TestBalancedOrderCounts(t *testing.T) {
	var labels []int
	for c, m := range []int{50, 10, 3} {
		for i := 0; i < m; i++ {
			labels = append(labels, c)
		}
	}
	rng := rand.New(rand.NewPCG(2, 3))
	for _, n := range []int{63, 64, 65, 7} {
		order := make([]int, n)
		BalancedOrder(order, labels, rng)
		perClass := make([]int, 3)
		perSample := make([]int, len(labels))
		for _, i := range order {
			perClass[labels[i]]++
			perSample[i]++
		}
		for c, k := range perClass {
			if k != n/3 && k != n/3+1 {
				t.Errorf("n=%d: class %d has %d places, want %d or %d", n, c, k, n/3, n/3+1)
			}
		}
		sizes := []int{50, 10, 3}
		start := 0
		for c, m := range sizes {
			lo, hi := perClass[c]/m, (perClass[c]+m-1)/m
			for i := start; i < start+m; i++ {
				if perSample[i] < lo || perSample[i] > hi {
					t.Errorf("n=%d: sample %d of class %d drawn %d times, want %d..%d", n, i, c, perSample[i], lo, hi)
				}
			}
			start += m
		}
	}
}

// TestStepSoftOneHotIsStep: StepSoft with one-hot targets trains like Step
// (to float32 rounding of the two gradient formulas).
func TestStepSoftOneHotIsStep(t *testing.T) {
	a, b := newTinyTrainer(t, 4), newTinyTrainer(t, 4)
	defer a.Net.Close()
	defer b.Net.Close()
	for step := 0; step < 5; step++ {
		x, y := quadrantTask(rand.New(rand.NewPCG(uint64(step), 8)), 16)
		q := make([]float32, len(y)*4)
		OneHot(q, y, 4)
		ra, err := a.Step(x, y)
		if err != nil {
			t.Fatal(err)
		}
		rb, err := b.StepSoft(x, q, nil, Distill{})
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(ra.Loss-rb.Loss) > 1e-5 || ra.Correct != rb.Correct {
			t.Fatalf("step %d: Step loss %g (%d right), StepSoft %g (%d right)", step, ra.Loss, ra.Correct, rb.Loss, rb.Correct)
		}
	}
	for i := range a.Net.Params.Data {
		if d := math.Abs(float64(a.Net.Params.Data[i] - b.Net.Params.Data[i])); d > 1e-4 {
			t.Fatalf("parameter %d differs by %g after 5 steps", i, d)
		}
	}
}

type plainSource struct {
	x [][]float32
	y []int
}

func (s plainSource) Len() int                           { return len(s.y) }
func (s plainSource) Sample(i, _ int, dst []float32) int { copy(dst, s.x[i]); return s.y[i] }

type labelledSource struct{ plainSource }

func (s labelledSource) Label(i int) int { return s.y[i] }

// TestFitRecipe runs Fit with mixup, balanced sampling and a teacher (the
// tiny network itself, another seed), and checks that balanced sampling
// refuses a source without labels and a mismatched teacher is refused.
func TestFitRecipe(t *testing.T) {
	xs, ys := quadrantTask(rand.New(rand.NewPCG(11, 12)), 96)
	in := len(xs) / len(ys)
	src := plainSource{y: ys}
	for i := range ys {
		src.x = append(src.x, xs[i*in:(i+1)*in])
	}
	teacher, err := FromSpec(tinySpec, Shape{}, 77)
	if err != nil {
		t.Fatal(err)
	}
	defer teacher.Close()
	tr := newTinyTrainer(t, 3)
	defer tr.Net.Close()
	cfg := FitConfig{Epochs: 2, Batch: 16, Seed: 1, Recipe: &Recipe{MixupAlpha: 0.4, Balanced: true, Teacher: teacher, Distill: Distill{Temperature: 2, Weight: 0.5}}}
	if _, err := Fit(tr, cfg, src, nil, nil, nil); err == nil {
		t.Error("balanced sampling accepted a source without labels")
	}
	hist, err := Fit(tr, cfg, labelledSource{src}, nil, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(hist) != 2 || !(hist[1].Loss > 0) {
		t.Errorf("history %+v", hist)
	}
	for _, spec := range []string{"input shape=4x4x1\nglobalavgpool\ndense out=4\n", "input shape=8x8x1\nglobalavgpool\ndense out=3\n"} {
		other, err := FromSpec(spec, Shape{}, 1)
		if err != nil {
			t.Fatal(err)
		}
		defer other.Close()
		cfg.Recipe.Teacher = other
		if _, err := Fit(tr, cfg, labelledSource{src}, nil, nil, nil); err == nil {
			t.Errorf("a teacher %q was accepted", spec)
		}
	}
	cfg.Recipe.Teacher, cfg.Recipe.MixupAlpha = teacher, -1
	if _, err := Fit(tr, cfg, labelledSource{src}, nil, nil, nil); err == nil {
		t.Error("negative mixup alpha accepted")
	}
}
