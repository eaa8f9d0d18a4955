package quant

import (
	"math"
	"testing"

	"github.com/pipit-audio/pipit/nn"
)

func TestQATFineTuneThenQuantize(t *testing.T) {
	net, x, n := randomNet(t, "separable", 6)
	defer net.Close()
	want := append([]float32(nil), net.Forward(x, n, false, nil)...)
	q, err := NewQAT(net, Scheme{Weights: PerChannel})
	if err != nil {
		t.Fatal(err)
	}
	defer q.Net.Close()
	// Before training, the folded fine-tuning network is the float network.
	got := q.Net.Forward(x, n, false, nil)
	var worst, scale float64
	for i := range want {
		worst = math.Max(worst, math.Abs(float64(got[i]-want[i])))
		scale = math.Max(scale, math.Abs(float64(want[i])))
	}
	if worst > 1e-4*math.Max(1, scale) {
		t.Fatalf("QAT network differs from the float network by %.3g before training", worst)
	}
	if _, err := q.Quantize(); err == nil {
		t.Error("Quantize before training gave no error")
	}
	// Fine-tune a few steps towards the float network's own decisions.
	labels := make([]int, n)
	for i := range labels {
		best := 0
		for c := 1; c < 8; c++ {
			if want[i*8+c] > want[i*8+best] {
				best = c
			}
		}
		labels[i] = best
	}
	tr, err := nn.NewTrainer(q.Net, &nn.SoftmaxCrossEntropy{Classes: 8}, nn.OptimizerConfig{Kind: nn.OptAdam}, nn.Schedule{Base: 1e-4}, 1)
	if err != nil {
		t.Fatal(err)
	}
	q.Attach(tr)
	for step := 0; step < 10; step++ {
		if _, err := tr.Step(x, labels); err != nil {
			t.Fatal(err)
		}
	}
	// Weights in the network sit on the int8 grid of their channel.
	for _, e := range q.weights {
		w := q.Net.Params.Data[e.Offset : e.Offset+e.Size]
		fq := append([]float32(nil), w...)
		fakeQuantWeights(fq, e, q.scheme)
		for i := range w {
			if w[i] != fq[i] {
				t.Fatalf("%s[%d] = %g is not on its int8 grid (%g)", e.Name, i, w[i], fq[i])
			}
		}
	}
	m, err := q.Quantize()
	if err != nil {
		t.Fatal(err)
	}
	if m.Method != "qat" {
		t.Errorf("method %q", m.Method)
	}
	// The integer engine reproduces the fake-quantised float network: the
	// only differences are requantisation rounding (≤ 1 output LSB per
	// layer, compounding) and integer pooling.
	sim := q.Net.Forward(x, n, false, nil)
	last := m.Layers[len(m.Layers)-1].Out
	in := m.Input.Size()
	agree := 0
	var maxErr float64
	for s := 0; s < n; s++ {
		y := m.Run(x[s*in : (s+1)*in])
		bi, bs := 0, 0
		for c := range y {
			maxErr = math.Max(maxErr, math.Abs(float64(y[c]-sim[s*8+c])))
			if y[c] > y[bi] {
				bi = c
			}
			if sim[s*8+c] > sim[s*8+bs] {
				bs = c
			}
		}
		if bi == bs {
			agree++
		}
	}
	t.Logf("int8 engine vs fake-quant network: max logit difference %.3g (output scale %.3g), arg-max agreement %d/%d", maxErr, last.Scale, agree, n)
	if maxErr > 8*last.Scale || float64(agree) < 0.9*float64(n) {
		t.Errorf("engine and fake-quant network disagree: max difference %.3g (scale %.3g), %d/%d arg-max", maxErr, last.Scale, agree, n)
	}
}
