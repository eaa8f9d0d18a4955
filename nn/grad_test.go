package nn

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// gradCheck compares a layer's backward with central finite differences of
// the scalar f = Σ out·r (r random) with respect to sampled inputs and
// parameters. Evaluated in float32, so the step is 1e-2 and the tolerance
// relative 2e-2 plus an absolute 2e-3 (float32 rounding of sums of a few
// hundred terms; see gradTol).
func gradCheck(t *testing.T, name string, l Layer, in Shape, n int, train bool) {
	t.Helper()
	const h, gradTol, absTol = 1e-2, 2e-2, 2e-3
	net, err := New(in, []Layer{l}, 42)
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	defer net.Close()
	net.Plan(n)
	rng := rand.New(rand.NewPCG(1, 2))
	x := make([]float32, n*in.Size())
	for i := range x {
		x[i] = float32(rng.NormFloat64())
	}
	if r, ok := l.(*ReLU); ok {
		// keep inputs 3h away from the kinks at 0 and Cap, where finite
		// differences straddle two linear pieces
		for i, v := range x {
			v *= 4
			for _, k := range []float32{0, r.Cap} {
				if d := v - k; d > -3*h && d < 3*h {
					v = k + 3*h
				}
			}
			x[i] = v
		}
	}
	outSz := n * net.Output().Size()
	r := make([]float32, outSz)
	for i := range r {
		r[i] = float32(rng.NormFloat64())
	}
	f := func() float64 {
		out := make([]float32, outSz)
		net.pass.Train, net.pass.RNG = train, rand.New(rand.NewPCG(9, 9))
		l.forward(&net.pass, out, x, n)
		var s float64
		for i, v := range out {
			s += float64(v) * float64(r[i])
		}
		return s
	}
	// analytic
	out := make([]float32, outSz)
	net.pass.Train, net.pass.RNG = train, rand.New(rand.NewPCG(9, 9))
	l.forward(&net.pass, out, x, n)
	dx := make([]float32, len(x))
	net.Params.ZeroGrad()
	l.backward(&net.pass, dx, r, x, out, n)
	grad := append([]float32(nil), net.Params.Grad...)
	check := func(what string, v *float32, analytic float32) {
		old := *v
		*v = old + h
		fp := f()
		*v = old - h
		fm := f()
		*v = old
		num := (fp - fm) / (2 * h)
		if d := math.Abs(num - float64(analytic)); d > absTol+gradTol*math.Abs(num) {
			t.Errorf("%s: d/d%s analytic %.5g, numeric %.5g", name, what, analytic, num)
		}
	}
	for _, i := range sample(rng, len(x), 40) {
		check(fmt.Sprintf("x[%d]", i), &x[i], dx[i])
	}
	for _, i := range sample(rng, len(net.Params.Data), 40) {
		check(fmt.Sprintf("param[%d]", i), &net.Params.Data[i], grad[i])
	}
}

func sample(rng *rand.Rand, n, k int) []int {
	if n <= k {
		idx := make([]int, n)
		for i := range idx {
			idx[i] = i
		}
		return idx
	}
	return rng.Perm(n)[:k]
}

func TestLayerGradients(t *testing.T) {
	same, valid := Padding{Mode: PadSame}, Padding{Mode: PadValid}
	expl := Padding{Mode: PadExplicit, Top: 1, Bottom: 0, Left: 2, Right: 1}
	cases := []struct {
		name  string
		l     func() Layer
		in    Shape
		n     int
		train bool
	}{
		{"conv 3x3 same", func() Layer { return NewConv2D(Conv2DConfig{Out: 4, KH: 3, KW: 3, Pad: same, Bias: true}) }, Shape{5, 6, 3}, 3, true},
		{"conv 3x2 stride 2x1 valid", func() Layer {
			return NewConv2D(Conv2DConfig{Out: 3, KH: 3, KW: 2, SH: 2, SW: 1, Pad: valid, Bias: true})
		}, Shape{7, 5, 2}, 2, true},
		{"conv explicit pad stride 2", func() Layer { return NewConv2D(Conv2DConfig{Out: 2, KH: 3, KW: 3, SH: 2, SW: 2, Pad: expl}) }, Shape{6, 7, 2}, 2, true},
		{"pointwise", func() Layer { return NewPointwise(5, true) }, Shape{3, 4, 3}, 3, true},
		{"depthwise 3x3 s2 same", func() Layer { return NewDepthwise(DepthwiseConfig{KH: 3, KW: 3, SH: 2, SW: 2, Pad: same, Bias: true}) }, Shape{7, 6, 3}, 2, true},
		{"depthwise 2x3 valid", func() Layer { return NewDepthwise(DepthwiseConfig{KH: 2, KW: 3, Pad: valid}) }, Shape{5, 5, 2}, 2, true},
		{"dense", func() Layer { return NewDense(4) }, Shape{2, 3, 2}, 3, true},
		{"batchnorm train", func() Layer { return NewBatchNorm(0, 0) }, Shape{3, 4, 3}, 4, true},
		{"batchnorm inference", func() Layer { return NewBatchNorm(0, 0) }, Shape{3, 4, 3}, 2, false},
		{"relu", func() Layer { return NewReLU() }, Shape{3, 3, 2}, 2, true},
		{"relu6", func() Layer { return NewReLU6() }, Shape{3, 3, 2}, 2, true},
		{"maxpool 2x2", func() Layer { return NewMaxPool(2, 2, 2, 2, valid) }, Shape{4, 6, 2}, 2, true},
		{"maxpool 3x2 s1 same", func() Layer { return NewMaxPool(3, 2, 1, 1, same) }, Shape{4, 5, 2}, 2, true},
		{"avgpool 2x3 s2", func() Layer { return NewAvgPool(2, 3, 2, 2, valid) }, Shape{5, 7, 2}, 2, true},
		{"avgpool same", func() Layer { return NewAvgPool(3, 3, 2, 2, same) }, Shape{5, 5, 1}, 2, true},
		{"globalavgpool", func() Layer { return NewGlobalAvgPool() }, Shape{3, 5, 4}, 3, true},
		{"dropout", func() Layer { return NewDropout(0.3) }, Shape{3, 3, 2}, 2, true},
		{"flatten", func() Layer { return NewFlatten() }, Shape{2, 3, 2}, 2, true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) { gradCheck(t, c.name, c.l(), c.in, c.n, c.train) })
	}
}

func TestSoftmaxCrossEntropyGradient(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, c := range []struct {
		name    string
		weights []float32
		smooth  float64
	}{{"plain", nil, 0}, {"weighted", []float32{0.5, 2, 1}, 0}, {"smoothed", nil, 0.1}, {"both", []float32{1, 3, 0.5}, 0.2}} {
		loss := &SoftmaxCrossEntropy{Classes: 3, ClassWeights: c.weights, Smoothing: c.smooth}
		logits := make([]float32, 4*3)
		for i := range logits {
			logits[i] = float32(rng.NormFloat64() * 2)
		}
		labels := []int{0, 2, 1, 2}
		d := make([]float32, len(logits))
		if _, _, err := loss.Forward(logits, labels, d); err != nil {
			t.Fatal(err)
		}
		for i := range logits {
			old := logits[i]
			logits[i] = old + 1e-2
			lp, _, _ := loss.Forward(logits, labels, nil)
			logits[i] = old - 1e-2
			lm, _, _ := loss.Forward(logits, labels, nil)
			logits[i] = old
			num := (lp - lm) / 2e-2
			if math.Abs(num-float64(d[i])) > 1e-3+1e-2*math.Abs(num) {
				t.Errorf("%s: dloss/dz[%d] = %g, numeric %g", c.name, i, d[i], num)
			}
		}
	}
}

func TestFakeQuant(t *testing.T) {
	// With a scale of 0.5 and zero point 0 over int8: 0.3 → round(0.6) = 1 →
	// 0.5; −0.74 → −1 → −0.5; 100 → clamped to 127 → 63.5, gradient 0 there.
	l := NewFakeQuant(0.5)
	l.QParams = func(lo, hi float64) (float64, int32) { return 0.5, 0 }
	net, err := New(Shape{1, 1, 3}, []Layer{l}, 1)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	out := net.Forward([]float32{0.3, -0.74, 100}, 1, true, nil)
	for i, want := range []float32{0.5, -0.5, 63.5} {
		if out[i] != want {
			t.Errorf("out[%d] = %g, want %g", i, out[i], want)
		}
	}
	if lo, hi, _ := l.Range(); lo != float64(float32(-0.74)) || hi != 100 {
		t.Errorf("first range [%g, %g], want the batch's", lo, hi)
	}
	net.Forward([]float32{0, 0, 0}, 1, true, nil)                                   // EMA: 0.5·old + 0.5·0
	if lo, hi, _ := l.Range(); math.Abs(lo+0.37) > 1e-6 || math.Abs(hi-50) > 1e-6 { // float32 state: within 1e-6
		t.Errorf("EMA range [%g, %g], want [-0.37, 50]", lo, hi)
	}
	dx := make([]float32, 3)
	l.backward(&net.pass, dx, []float32{1, 1, 1}, []float32{0.3, -0.74, 100}, nil, 1)
	if dx[0] != 1 || dx[1] != 1 || dx[2] != 0 {
		t.Errorf("straight-through gradient %v, want [1 1 0]", dx)
	}
}

// The fake-quant range is network state, so Fit's restore of the best
// epoch (a copy of Params.State) and checkpoints carry it with the weights
// (issue #11: QAT paired the best epoch's weights with the last epoch's
// ranges, and checkpoints dropped them).
func TestFakeQuantRangeIsNetworkState(t *testing.T) {
	fq := NewFakeQuant(0.5)
	net, err := New(Shape{1, 1, 4}, []Layer{fq, NewDense(2)}, 1)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	net.Forward([]float32{-1, 0, 1, 2}, 1, true, nil)
	best := append([]float32(nil), net.Params.State...)
	lo0, hi0, _ := fq.Range()
	net.Forward([]float32{-8, 0, 1, 9}, 1, true, nil) // a later epoch moves the range
	if lo, hi, _ := fq.Range(); lo == lo0 || hi == hi0 {
		t.Fatalf("range [%g, %g] did not move", lo, hi)
	}
	copy(net.Params.State, best) // what Fit does with the best epoch
	if lo, hi, seen := fq.Range(); lo != lo0 || hi != hi0 || !seen {
		t.Errorf("after restoring the best state: range [%g, %g] (seen %v), want [%g, %g]", lo, hi, seen, lo0, hi0)
	}
	tr, err := NewTrainer(net, &SoftmaxCrossEntropy{Classes: 2}, OptimizerConfig{Kind: OptAdam}, Schedule{Base: 1e-3}, 1)
	if err != nil {
		t.Fatal(err)
	}
	b, err := tr.MarshalCheckpoint(nil)
	if err != nil {
		t.Fatal(err)
	}
	ck, err := ParseCheckpoint("fq.pnet", b)
	if err != nil {
		t.Fatal(err)
	}
	defer ck.Trainer.Net.Close()
	back := ck.Trainer.Net.Layers[0].(*FakeQuant)
	if lo, hi, seen := back.Range(); lo != lo0 || hi != hi0 || !seen {
		t.Errorf("checkpoint round trip: range [%g, %g] (seen %v), want [%g, %g]", lo, hi, seen, lo0, hi0)
	}
}
