package nn

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// quadrantTask makes n samples of an 8×8×1 image with a bright 3×3 blob in
// the quadrant given by the label (4 classes) on unit-variance noise: a
// task a small CNN separates, and a test that training really learns.
func quadrantTask(rng *rand.Rand, n int) ([]float32, []int) {
	x := make([]float32, n*64)
	y := make([]int, n)
	for i := range y {
		c := rng.IntN(4)
		y[i] = c
		for j := 0; j < 64; j++ {
			x[i*64+j] = float32(rng.NormFloat64())
		}
		r0, c0 := (c/2)*4+rng.IntN(2), (c%2)*4+rng.IntN(2)
		for dr := 0; dr < 3; dr++ {
			for dc := 0; dc < 3; dc++ {
				x[i*64+(r0+dr)*8+c0+dc] += 2
			}
		}
	}
	return x, y
}

const tinySpec = `input shape=8x8x1
conv out=8 kernel=3 pad=same bias=false
batchnorm
relu
maxpool size=2
conv out=16 kernel=3 pad=same
relu
dropout rate=0.1
globalavgpool
dense out=4
`

func newTinyTrainer(t testing.TB, seed uint64) *Trainer {
	net, err := FromSpec(tinySpec, Shape{}, seed)
	if err != nil {
		t.Fatal(err)
	}
	tr, err := NewTrainer(net, &SoftmaxCrossEntropy{Classes: 4}, OptimizerConfig{Kind: OptAdam, ClipNorm: 5},
		Schedule{Kind: SchedCosine, Base: 0.02, WarmupSteps: 10, TotalSteps: 300}, seed)
	if err != nil {
		t.Fatal(err)
	}
	return tr
}

func accuracy(net *Network, x []float32, y []int) float64 {
	out := make([]float32, len(y)*4)
	net.Predict(out, x, len(y), 64)
	ok := 0
	for i, label := range y {
		best := 0
		for c := 1; c < 4; c++ {
			if out[i*4+c] > out[i*4+best] {
				best = c
			}
		}
		if best == label {
			ok++
		}
	}
	return float64(ok) / float64(len(y))
}

func TestTrainingLearns(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	tr := newTinyTrainer(t, 7)
	defer tr.Net.Close()
	for step := 0; step < 300; step++ {
		x, y := quadrantTask(rng, 32)
		if _, err := tr.Step(x, y); err != nil {
			t.Fatal(err)
		}
	}
	x, y := quadrantTask(rand.New(rand.NewPCG(99, 99)), 500)
	if acc := accuracy(tr.Net, x, y); acc < 0.95 {
		t.Errorf("held-out accuracy %.3f after 300 steps, want ≥ 0.95", acc)
	} else {
		t.Logf("held-out accuracy %.3f", acc)
	}
}

// trainSteps runs k steps on a fixed data stream and returns the weights.
func trainSteps(t *testing.T, tr *Trainer, from, k int) []float32 {
	for step := from; step < from+k; step++ {
		x, y := quadrantTask(rand.New(rand.NewPCG(uint64(step), 5)), 32)
		if _, err := tr.Step(x, y); err != nil {
			t.Fatal(err)
		}
	}
	return append([]float32(nil), tr.Net.Params.Data...)
}

func sameBits(a, b []float32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			return false
		}
	}
	return true
}

func TestDeterministicAcrossGOMAXPROCS(t *testing.T) {
	old := runtime.GOMAXPROCS(1)
	defer runtime.GOMAXPROCS(old)
	tr1 := newTinyTrainer(t, 3)
	w1 := trainSteps(t, tr1, 0, 20)
	tr1.Net.Close()
	runtime.GOMAXPROCS(2)
	tr2 := newTinyTrainer(t, 3)
	w2 := trainSteps(t, tr2, 0, 20)
	tr2.Net.Close()
	if !sameBits(w1, w2) {
		t.Error("weights after 20 steps differ between GOMAXPROCS 1 and 2")
	}
	// and for the reference architecture with many shards
	for _, arch := range ArchNames() {
		var ws [2][]float32
		for i, procs := range []int{1, 2} {
			runtime.GOMAXPROCS(procs)
			net, _ := Arch(arch, 4, 1)
			tr, _ := NewTrainer(net, &SoftmaxCrossEntropy{Classes: 4}, OptimizerConfig{Kind: OptSGD, Momentum: 0.9, Nesterov: true}, Schedule{Base: 0.01}, 1)
			rng := rand.New(rand.NewPCG(1, 1))
			x := make([]float32, 16*ReferenceInput.Size())
			for j := range x {
				x[j] = float32(rng.NormFloat64())
			}
			y := []int{0, 1, 2, 3, 0, 1, 2, 3, 0, 1, 2, 3, 0, 1, 2, 3}
			for s := 0; s < 3; s++ {
				if _, err := tr.Step(x, y); err != nil {
					t.Fatal(err)
				}
			}
			ws[i] = append([]float32(nil), net.Params.Data...)
			net.Close()
		}
		if !sameBits(ws[0], ws[1]) {
			t.Errorf("%s: weights differ between GOMAXPROCS 1 and 2", arch)
		}
	}
}

func TestCheckpointResumeBitIdentical(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "run.pnet")
	ref := newTinyTrainer(t, 5)
	want := trainSteps(t, ref, 0, 30)
	ref.Net.Close()

	tr := newTinyTrainer(t, 5)
	trainSteps(t, tr, 0, 12)
	if err := tr.WriteCheckpoint(path, []byte(`{"note":"test"}`)); err != nil {
		t.Fatal(err)
	}
	tr.Net.Close()
	ck, err := ReadCheckpoint(path)
	if err != nil {
		t.Fatal(err)
	}
	defer ck.Trainer.Net.Close()
	if string(ck.Meta) != `{"note":"test"}` {
		t.Errorf("meta %s", ck.Meta)
	}
	got := trainSteps(t, ck.Trainer, 12, 18)
	if !sameBits(got, want) {
		t.Error("training resumed from a checkpoint diverged from uninterrupted training")
	}
	// BN running statistics came back too.
	if !sameBits(ck.Trainer.Net.Params.State, ref.Net.Params.State) {
		t.Error("batch-norm running statistics differ after resume")
	}
}

func TestCheckpointDamage(t *testing.T) {
	tr := newTinyTrainer(t, 5)
	defer tr.Net.Close()
	good, err := tr.MarshalCheckpoint(nil)
	if err != nil {
		t.Fatal(err)
	}
	flip := append([]byte(nil), good...)
	flip[len(flip)/2] ^= 1
	badVersion := append([]byte(nil), good...)
	badVersion[8] = 99
	cases := map[string]struct {
		data []byte
		is   error
	}{
		"crc":       {flip, nil},
		"truncated": {good[:len(good)-10], nil},
		"empty":     {nil, nil},
		"magic":     {append([]byte("NOTACKPT"), good[8:]...), nil},
		"version":   {badVersion, ErrUnsupportedVersion},
	}
	for name, c := range cases {
		_, err := ParseCheckpoint("x.pnet", c.data)
		if err == nil {
			t.Errorf("%s: no error", name)
			continue
		}
		if c.is != nil && !errors.Is(err, c.is) {
			t.Errorf("%s: error %v, want %v", name, err, c.is)
		}
		if !bytes.Contains([]byte(err.Error()), []byte("x.pnet")) {
			t.Errorf("%s: error %q does not name the file", name, err)
		}
	}
	// Loading into a different network is a mismatch, into the same one works.
	p0 := filepath.Join(t.TempDir(), "w.pnet")
	os.WriteFile(p0, good, 0o644)
	other, _ := Arch("separable", 4, 1)
	defer other.Close()
	if err := LoadWeights(other, p0); !errors.Is(err, ErrCheckpointMismatch) {
		t.Errorf("LoadWeights into another network: error %v, want ErrCheckpointMismatch", err)
	}
	same, _ := FromSpec(tinySpec, Shape{}, 99)
	defer same.Close()
	if err := LoadWeights(same, p0); err != nil || !sameBits(same.Params.Data, tr.Net.Params.Data) {
		t.Errorf("LoadWeights into the same network: %v", err)
	}
	// Writing over an existing file is atomic: a failed write keeps it.
	dir := t.TempDir()
	p := filepath.Join(dir, "a.pnet")
	os.WriteFile(p, good, 0o644)
	if err := tr.WriteCheckpoint(filepath.Join(dir, "missing", "b.pnet"), nil); err == nil {
		t.Error("write into a missing directory gave no error")
	}
}

func TestTrainStepDoesNotAllocate(t *testing.T) {
	tr := newTinyTrainer(t, 1)
	defer tr.Net.Close()
	x, y := quadrantTask(rand.New(rand.NewPCG(1, 2)), 32)
	tr.Step(x, y) // first batch plans
	if n := testing.AllocsPerRun(20, func() {
		if _, err := tr.Step(x, y); err != nil {
			t.Fatal(err)
		}
	}); n != 0 {
		t.Errorf("Trainer.Step allocates %v times per step after the first batch", n)
	}
}

func TestOptimizerFirstSteps(t *testing.T) {
	// Hand-worked from the update rules (PyTorch torch.optim docs):
	// w = 1, g = 0.5, lr = 0.1.
	//  SGD, momentum 0.9: v = 0.5, w = 1 − 0.05 = 0.95.
	//  SGD Nesterov 0.9: v = 0.5, g' = 0.5 + 0.45 = 0.95, w = 0.905.
	//  Adam: m̂ = 0.5, v̂ = 0.25, w = 1 − 0.1·0.5/(0.5+1e-8) ≈ 0.9.
	//  AdamW, decay 0.1: w = 1 − 0.1·0.1·1 = 0.99, then − 0.1 → 0.89.
	cases := []struct {
		cfg  OptimizerConfig
		want float64
	}{
		{OptimizerConfig{Kind: OptSGD, Momentum: 0.9}, 0.95},
		{OptimizerConfig{Kind: OptSGD, Momentum: 0.9, Nesterov: true}, 0.905},
		{OptimizerConfig{Kind: OptAdam}, 0.9},
		{OptimizerConfig{Kind: OptAdamW, WeightDecay: 0.1}, 0.89},
	}
	for _, c := range cases {
		p := &Params{Data: []float32{1}, Grad: []float32{0.5}, Entries: []ParamEntry{{Name: "w", Shape: []int{1}, Size: 1, Decay: true}}}
		o, err := NewOptimizer(c.cfg, p)
		if err != nil {
			t.Fatal(err)
		}
		o.Step(p, 0.1)
		if math.Abs(float64(p.Data[0])-c.want) > 1e-6 {
			t.Errorf("%+v: w = %.7f, want %.7f", c.cfg, p.Data[0], c.want)
		}
	}
	// Clipping: gradient (3, 4) has norm 5; clipped to 1 → (0.6, 0.8).
	p := &Params{Data: []float32{0, 0}, Grad: []float32{3, 4}}
	if n, _ := ClipGradients(p, 1); n != 5 || math.Abs(float64(p.Grad[0])-0.6) > 1e-7 || math.Abs(float64(p.Grad[1])-0.8) > 1e-7 {
		t.Errorf("clip: norm %g, grad %v", n, p.Grad)
	}
}

func TestSchedules(t *testing.T) {
	s := Schedule{Kind: SchedCosine, Base: 1, WarmupSteps: 10, TotalSteps: 110}
	// warm-up: step 0 → 0.1, step 9 → 1; cosine: halfway (step 60) → 0.5; end → 0.
	for _, c := range []struct {
		t    int64
		want float64
	}{{0, 0.1}, {9, 1}, {10, 1}, {60, 0.5}, {110, 0}, {500, 0}} {
		if got := s.At(c.t); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("cosine At(%d) = %g, want %g", c.t, got, c.want)
		}
	}
	st := Schedule{Kind: SchedStep, Base: 1, StepEvery: 10, Gamma: 0.5}
	if st.At(9) != 1 || st.At(10) != 0.5 || st.At(25) != 0.25 {
		t.Errorf("step schedule: %g %g %g", st.At(9), st.At(10), st.At(25))
	}
}

// TestFitResumeBitIdentical stops a Fit with mixup and balanced epochs
// after every possible epoch, restarts it from the trainer checkpoint and
// the FitState saved then, and checks that parameters, best epoch and
// history end bit-identical to an uninterrupted run.
func TestFitResumeBitIdentical(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	x, y := quadrantTask(rng, 96)
	in := len(x) / len(y)
	xs := make([][]float32, len(y))
	for i := range xs {
		xs[i] = x[i*in : (i+1)*in]
	}
	train := labelledSource{plainSource{xs[:64], y[:64]}}
	val := plainSource{xs[64:], y[64:]}
	const epochs = 5
	cfg := func() FitConfig {
		return FitConfig{Epochs: epochs, Batch: 16, Seed: 9, Recipe: &Recipe{MixupAlpha: 0.3, Balanced: true}}
	}
	ref := newTinyTrainer(t, 5)
	defer ref.Net.Close()
	refHist, err := Fit(ref, cfg(), train, val, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	for stop := 1; stop < epochs; stop++ {
		tr := newTinyTrainer(t, 5)
		c := cfg()
		var saved *FitState
		errStop := errors.New("stop")
		c.Save = func(s *FitState) error {
			if s.EpochsDone == stop {
				saved = s
				if err := tr.WriteCheckpoint(filepath.Join(dir, "carry"), nil); err != nil {
					return err
				}
				return errStop
			}
			return nil
		}
		if _, err := Fit(tr, c, train, val, nil, nil); !errors.Is(err, errStop) {
			t.Fatalf("stop %d: %v", stop, err)
		}
		tr.Net.Close()
		// the state goes through JSON, as a file would carry it
		b, err := json.Marshal(saved)
		if err != nil {
			t.Fatal(err)
		}
		var back FitState
		if err := json.Unmarshal(b, &back); err != nil {
			t.Fatal(err)
		}
		ck, err := ReadCheckpoint(filepath.Join(dir, "carry"))
		if err != nil {
			t.Fatal(err)
		}
		c = cfg()
		c.Resume = &back
		hist, err := Fit(ck.Trainer, c, train, val, nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		if !sameBits(ck.Trainer.Net.Params.Data, ref.Net.Params.Data) || !sameBits(ck.Trainer.Net.Params.State, ref.Net.Params.State) {
			t.Errorf("resumed after epoch %d: parameters differ from the uninterrupted run", stop)
		}
		if len(hist) != len(refHist) {
			t.Fatalf("resumed after epoch %d: %d epochs of history, want %d", stop, len(hist), len(refHist))
		}
		for i := range hist {
			a, b := hist[i], refHist[i]
			if a.Loss != b.Loss || a.ValLoss != b.ValLoss || a.ValAcc != b.ValAcc || a.Best != b.Best || a.LR != b.LR {
				t.Errorf("resumed after epoch %d: epoch %d differs: %+v vs %+v", stop, i+1, a, b)
			}
		}
		ck.Trainer.Net.Close()
	}
	// a state that does not fit the run is refused
	bad := FitState{EpochsDone: epochs + 1}
	c := cfg()
	c.Resume = &bad
	tr := newTinyTrainer(t, 5)
	defer tr.Net.Close()
	if _, err := Fit(tr, c, train, val, nil, nil); err == nil || !strings.Contains(err.Error(), "epochs done") {
		t.Errorf("a state of %d epochs done for a run of %d: err %v", epochs+1, epochs, err)
	}
}
