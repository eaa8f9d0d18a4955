package quant

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/pipit-audio/pipit/nn"
)

// randomiseBN gives every batch norm non-trivial statistics so folding is
// really exercised.
func randomiseBN(net *nn.Network, rng *rand.Rand) {
	for _, l := range net.Layers {
		if bn, ok := l.(*nn.BatchNorm); ok {
			for c := range bn.Gamma {
				bn.Gamma[c] = float32(0.5 + rng.Float64())
				bn.Beta[c] = float32(rng.Float64() - 0.5)
				bn.RunMean[c] = float32(rng.Float64() - 0.5)
				bn.RunVar[c] = float32(0.5 + 1.5*rng.Float64())
			}
		}
	}
}

func TestFoldMatchesNetwork(t *testing.T) {
	// The folded float network equals the unfolded one in inference mode
	// within 1e-5 (relative to the output scale): the bar.
	rng := rand.New(rand.NewPCG(1, 1))
	for _, arch := range nn.ArchNames() {
		net, _ := nn.Arch(arch, 8, 3)
		randomiseBN(net, rng)
		layers, err := Fold(net)
		if err != nil {
			t.Fatal(err)
		}
		x := make([]float32, 4*nn.ReferenceInput.Size())
		for i := range x {
			x[i] = float32(rng.NormFloat64())
		}
		want := net.Forward(x, 4, false, nil)
		outs := FloatForward(layers, x, 4)
		got := outs[len(outs)-1]
		var worst, scale float64
		for i := range want {
			worst = math.Max(worst, math.Abs(float64(got[i]-want[i])))
			scale = math.Max(scale, math.Abs(float64(want[i])))
		}
		if worst > 1e-5*math.Max(scale, 1) {
			t.Errorf("%s: folded output differs by %.3g (scale %.3g)", arch, worst, scale)
		}
		// every folded op's output equals the nn activation it names
		for li, l := range layers {
			a := net.Activation(l.NetIndex, 4)
			for i := range a {
				if math.Abs(float64(a[i]-outs[li][i])) > 1e-4*(1+math.Abs(float64(a[i]))) {
					t.Fatalf("%s: op %d (%s) differs from nn layer %d", arch, li, l.Op, l.NetIndex)
				}
			}
		}
		net.Close()
	}
	// Batch-norm folding of Krishnamoorthi 2018 (arXiv:1806.08342), eqs.
	// 20–21, W' = γW/σ and b' = β − γμ/σ, worked by hand:
	// γ = 2, σ = 4 (var 16, ε → 0), μ = 1, β = 0.5, W = 3 → W' = 1.5, b' = 0.
	net, _ := nn.FromSpec("input shape=1x1x1\ndense out=1\nbatchnorm eps=1e-12", nn.Shape{}, 1)
	d := net.Layers[0].(*nn.Dense)
	bn := net.Layers[1].(*nn.BatchNorm)
	d.Weight[0], d.Bias[0] = 3, 0
	bn.Gamma[0], bn.Beta[0], bn.RunMean[0], bn.RunVar[0] = 2, 0.5, 1, 16
	layers, _ := Fold(net)
	if math.Abs(float64(layers[0].Weight[0])-1.5) > 1e-6 || math.Abs(float64(layers[0].Bias[0])) > 1e-6 {
		t.Errorf("folded W = %g, b = %g; want 1.5 and 0", layers[0].Weight[0], layers[0].Bias[0])
	}
	net.Close()
	bad, _ := nn.FromSpec("input shape=4x4x1\nmaxpool size=2\nrelu\ndense out=2", nn.Shape{}, 1)
	if _, err := Fold(bad); err == nil {
		t.Error("ReLU after a pool folded without error")
	}
	bad.Close()
}
