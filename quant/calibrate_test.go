package quant

import (
	"bytes"
	"errors"
	"math/rand/v2"
	"testing"

	"github.com/pipit-audio/pipit/nn"
)

// A per-tensor export comes back per-tensor: the granularity is a field
// of the scheme, not only words (issue #11: Import hard-coded per-channel).
func TestImportKeepsPerTensor(t *testing.T) {
	net, x, n := randomNet(t, "separable", 3)
	defer net.Close()
	m, _, err := Quantize(net, x, n, nil, Config{Method: MethodMinMax, Scheme: Scheme{Weights: PerTensor}})
	if err != nil {
		t.Fatal(err)
	}
	blob, doc, err := Export(m)
	if err != nil {
		t.Fatal(err)
	}
	if doc.Scheme.Granularity != PerTensor {
		t.Fatalf("scheme granularity %q, want %s", doc.Scheme.Granularity, PerTensor)
	}
	js, _ := doc.MarshalScheme()
	back, err := Import(blob, js)
	if err != nil {
		t.Fatal(err)
	}
	if back.Scheme != m.Scheme {
		t.Errorf("imported scheme %+v, exported %+v", back.Scheme, m.Scheme)
	}
	_, doc2, _ := Export(back)
	js2, _ := doc2.MarshalScheme()
	if !bytes.Equal(js, js2) {
		t.Error("re-exported scheme differs from the first export")
	}
	// A scheme naming an unknown granularity is refused.
	bad := bytes.Replace(js, []byte(`"weight_granularity": "per-tensor"`), []byte(`"weight_granularity": "per-row"`), 1)
	if _, err := Import(blob, bad); !errors.Is(err, ErrFormat) {
		t.Errorf("unknown granularity: error %v, want ErrFormat", err)
	}
}

// overflowNet is a dense layer over 80000 non-negative inputs with equal
// weights: every weight quantises to 127 and the input zero point is −128,
// so the worst-case accumulator is 80000·127·255 = 2.59e9 > 2^31 − 1.
func overflowNet(t *testing.T) (*nn.Network, []float32, int) {
	t.Helper()
	net, err := nn.New(nn.Shape{H: 2, W: 40000, C: 1}, []nn.Layer{nn.NewFlatten(), nn.NewDense(2)}, 1)
	if err != nil {
		t.Fatal(err)
	}
	d := net.Layers[1].(*nn.Dense)
	for i := range d.Weight {
		d.Weight[i] = 0.01
	}
	rng := rand.New(rand.NewPCG(1, 2))
	n := 4
	x := make([]float32, n*net.Input.Size())
	for i := range x {
		x[i] = rng.Float32()
	}
	return net, x, n
}

// Both the post-training and the quantisation-aware model are checked for
// accumulator overflow (issue #11: the QAT model was written unchecked).
func TestOverflowRefusedAfterPTQAndQAT(t *testing.T) {
	net, x, n := overflowNet(t)
	defer net.Close()
	if _, _, err := Quantize(net, x, n, nil, Config{Method: MethodMinMax}); !errors.Is(err, ErrOverflow) {
		t.Errorf("post-training: error %v, want ErrOverflow", err)
	}
	q, err := NewQAT(net, Scheme{Weights: PerChannel})
	if err != nil {
		t.Fatal(err)
	}
	defer q.Net.Close()
	q.Net.Forward(x, n, true, nil) // a training pass: the fake-quant layers see their ranges
	if _, err := q.Quantize(); !errors.Is(err, ErrOverflow) {
		t.Errorf("QAT: error %v, want ErrOverflow", err)
	}
}

// genSource makes windows on the fly: a calibration set that is never in
// memory as a whole.
type genSource struct {
	n, in int
}

func (g genSource) Len() int { return g.n }
func (g genSource) Sample(i, _ int, dst []float32) int {
	rng := rand.New(rand.NewPCG(uint64(i), 7))
	for k := range dst {
		dst[k] = float32(rng.NormFloat64())
	}
	return i % 8
}

// Calibration streams its windows and keeps the float activations of at
// most SQNRWindows of them, whatever the set's size (issue #11: it kept
// every layer's activation of every window, 0.1–0.3 MB each).
func TestCalibrateKeepsABoundedSQNRSample(t *testing.T) {
	net, err := nn.Arch("separable", 8, 2)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	for _, n := range []int{40, 3*SQNRWindows + 5} {
		_, rep, err := Calibrate(net, genSource{n: n, in: net.Input.Size()}, Config{Method: MethodMinMax})
		if err != nil {
			t.Fatal(err)
		}
		want := min(n, SQNRWindows)
		if n > SQNRWindows {
			every := (n + SQNRWindows - 1) / SQNRWindows
			want = (n + every - 1) / every
		}
		if rep.SQNRWindows != want || rep.SQNRWindows > SQNRWindows {
			t.Errorf("%d windows: SQNR on %d, want %d (at most %d)", n, rep.SQNRWindows, want, SQNRWindows)
		}
	}
}
