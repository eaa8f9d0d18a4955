package nn

import (
	"math/rand/v2"
	"runtime"
	"testing"
)

// TestTrainingBytesMatchesAllocation checks the estimate against what the
// Go runtime reports (runtime.MemStats.TotalAlloc) for building a
// trainer and taking one step, for the reference networks: the estimate
// must cover the bulk of it, within a factor of 1.3 either way (the
// remainder is inputs, the loss and small per-layer buffers).
func TestTrainingBytesMatchesAllocation(t *testing.T) {
	for _, name := range []string{"pooled", "separable", "strided"} {
		for _, batch := range []int{8, 32} {
			var before, after runtime.MemStats
			runtime.GC()
			runtime.ReadMemStats(&before)
			net, err := Arch(name, 8, 1)
			if err != nil {
				t.Fatal(err)
			}
			tr, err := NewTrainer(net, &SoftmaxCrossEntropy{Classes: 8}, OptimizerConfig{Kind: OptAdamW}, Schedule{Kind: SchedConstant, Base: 1e-3, TotalSteps: 1}, 1)
			if err != nil {
				t.Fatal(err)
			}
			rng := rand.New(rand.NewPCG(1, 2))
			x := make([]float32, batch*net.Input.Size())
			for i := range x {
				x[i] = float32(rng.NormFloat64())
			}
			labels := make([]int, batch)
			if _, err := tr.Step(x, labels); err != nil {
				t.Fatal(err)
			}
			runtime.ReadMemStats(&after)
			got := float64(after.TotalAlloc - before.TotalAlloc - uint64(4*len(x)))
			est := float64(TrainingBytes(net, batch))
			net.Close()
			t.Logf("%s batch %d: estimate %.2f MB, allocated %.2f MB (ratio %.2f)", name, batch, est/1e6, got/1e6, est/got)
			if r := est / got; r < 1/1.3 || r > 1.3 {
				t.Errorf("%s batch %d: estimate %.0f B, Go allocated %.0f B (ratio %.2f), want within 1.3×", name, batch, est, got, r)
			}
		}
	}
}

// TestTrainingBytesHugeConv is the case of a layer spec far beyond any
// machine: 100000 filters on the reference input, batch 32, is about
// 31 GB of activations alone (40·61·100000 floats × 4 B × 32 × 2), and
// the estimate must say so without allocating it.
func TestTrainingBytesHugeConv(t *testing.T) {
	net, err := FromSpec("conv out=100000 kernel=3 pad=same\nglobalavgpool\ndense out=8", ReferenceInput, 1)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	if got := TrainingBytes(net, 32); got < 60e9 {
		t.Errorf("estimate %d B, want at least 60 GB (two buffers of 31 GB)", got)
	}
}
