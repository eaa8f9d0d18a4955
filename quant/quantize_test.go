package quant

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/pipit-audio/pipit/nn"
)

func randomNet(t *testing.T, arch string, seed uint64) (*nn.Network, []float32, int) {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 1))
	net, err := nn.Arch(arch, 8, seed)
	if err != nil {
		t.Fatal(err)
	}
	randomiseBN(net, rng)
	n := 48
	x := make([]float32, n*nn.ReferenceInput.Size())
	for i := range x {
		x[i] = float32(rng.NormFloat64())
	}
	return net, x, n
}

func TestQuantizeTracksFloat(t *testing.T) {
	// The dequantised int8 logits track the float logits: correlation and
	// error are reported; per-channel 8-bit on these small networks should
	// keep the logit correlation above 0.99 (common practice: 8-bit PTQ
	// costs well under a percent of top-1 on CNNs, Krishnamoorthi 2018
	// Table 3).
	archs := nn.ArchNames()
	if testing.Short() {
		archs = []string{"separable"}
	}
	for _, arch := range archs {
		for _, sch := range []Scheme{{Weights: PerChannel}, {Weights: PerTensor}, {Weights: PerChannel, Pow2: true}} {
			net, x, n := randomNet(t, arch, 2)
			m, rep, err := Quantize(net, x, n, nil, Config{Method: MethodAuto, Scheme: sch})
			if err != nil {
				t.Fatal(err)
			}
			if err := m.CheckOverflow(); err != nil {
				t.Error(err)
			}
			t.Logf("%s %+v: method %s, logit corr %.4f, max err %.3g, last SQNR %.1f dB", arch, sch, rep.Method, rep.LogitCorr, rep.LogitMaxErr, rep.Layers[len(rep.Layers)-1].SQNRdB)
			min := 0.99
			if sch.Pow2 {
				min = 0.95
			}
			if rep.LogitCorr < min {
				t.Errorf("%s %+v: logit correlation %.4f < %.2f", arch, sch, rep.LogitCorr, min)
			}
			for _, l := range rep.Layers {
				if math.IsNaN(l.SQNRdB) || l.MarginBits <= 0 {
					t.Errorf("%s layer %d: SQNR %g, margin %g bits", arch, l.Index, l.SQNRdB, l.MarginBits)
				}
			}
			if rep.FloatBytes != 4*rep.WeightBytes {
				t.Error("int8 weights are not 1/4 of the float bytes")
			}
			net.Close()
		}
	}
}
