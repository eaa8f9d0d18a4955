package pipit

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
)

// fakeModel is a float model of the pooled network with random weights
// and band statistics of its own.
func fakeModel(t *testing.T, seed uint64) *FloatModel {
	t.Helper()
	net, err := nn.Arch("pooled", 3, seed)
	if err != nil {
		t.Fatal(err)
	}
	st := &features.BandStats{Version: features.BandStatsVersion, Frames: 1}
	r := rand.New(rand.NewPCG(seed, 9))
	for range net.Input.H {
		st.Mean = append(st.Mean, -40+10*r.Float64())
		st.Std = append(st.Std, 5+5*r.Float64())
	}
	info := &datasets.ModelInfo{Version: datasets.ModelInfoVersion, Classes: []string{"saw", "planer", "quiet"},
		FrontEnd: features.DefaultConfig(), Stats: st}
	return &FloatModel{Net: net, ModelInfo: info}
}

// TestEnsembleMeanProbability checks the ensemble against its definition,
// computed here apart: each member normalises the raw window with its own
// statistics, and the ensemble's softmax is the mean of the members'.
func TestEnsembleMeanProbability(t *testing.T) {
	a, b := fakeModel(t, 1), fakeModel(t, 2)
	e, err := NewEnsemble(a, b)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	if e.Info().Stats != nil {
		t.Fatal("ensemble info carries band statistics; its inputs are raw")
	}
	const n = 5
	in := a.Net.Input.Size()
	x := make([]float32, n*in)
	r := rand.New(rand.NewPCG(3, 4))
	for i := range x {
		x[i] = float32(-60 + 40*r.Float64())
	}
	got := Probabilities(e, x, n)
	want := make([]float64, n*3)
	for _, m := range []*FloatModel{a, b} {
		xn := append([]float32(nil), x...)
		for i := 0; i < n; i++ {
			m.ModelInfo.Stats.Apply(xn[i*in : (i+1)*in])
		}
		for i, p := range Probabilities(m, xn, n) {
			want[i] += float64(p) / 2
		}
	}
	for i := range got {
		if math.Abs(float64(got[i])-want[i]) > 1e-6 {
			t.Fatalf("probability %d: ensemble %v, mean of members %v", i, got[i], want[i])
		}
	}
	// different members must matter, or the check above proves nothing
	pa := Probabilities(a, x, n)
	same := true
	for i := range pa {
		same = same && math.Abs(float64(pa[i])-want[i]) < 1e-6
	}
	if same {
		t.Fatal("the two members give the same probabilities; the test cannot tell a mean from a copy")
	}
}

func TestEnsembleRefusesMismatch(t *testing.T) {
	a, b := fakeModel(t, 1), fakeModel(t, 2)
	defer a.Close()
	defer b.Close()
	b.ModelInfo.Classes = []string{"saw", "quiet", "planer"}
	if _, err := NewEnsemble(a, b); err == nil {
		t.Fatal("ensemble of models with other class orders accepted")
	}
	if _, err := NewEnsemble(); err == nil {
		t.Fatal("empty ensemble accepted")
	}
}
