package nn

import (
	"math/rand/v2"
	"testing"
)

var benchSink float64

// BenchmarkTrainStep times one training step (forward, loss, backward,
// Adam) of each reference architecture at batch 32 on 40×61×1 inputs with
// 8 classes; samples/s is reported as a custom metric. Compare with
// scripts/bench_train.sh, which runs the same steps in PyTorch.
func BenchmarkTrainStep(b *testing.B) {
	for _, arch := range ArchNames() {
		b.Run(arch, func(b *testing.B) {
			net, err := Arch(arch, 8, 1)
			if err != nil {
				b.Fatal(err)
			}
			defer net.Close()
			tr, err := NewTrainer(net, &SoftmaxCrossEntropy{Classes: 8}, OptimizerConfig{Kind: OptAdam}, Schedule{Base: 1e-3}, 1)
			if err != nil {
				b.Fatal(err)
			}
			const batch = 32
			rng := rand.New(rand.NewPCG(1, 1))
			x := make([]float32, batch*ReferenceInput.Size())
			for i := range x {
				x[i] = float32(rng.NormFloat64())
			}
			y := make([]int, batch)
			for i := range y {
				y[i] = i % 8
			}
			tr.Step(x, y)
			b.ReportAllocs()
			b.ResetTimer()
			for b.Loop() {
				r, err := tr.Step(x, y)
				if err != nil {
					b.Fatal(err)
				}
				benchSink += r.Loss
			}
			b.ReportMetric(float64(batch*b.N)/b.Elapsed().Seconds(), "samples/s")
		})
	}
}

// BenchmarkForward times inference (batch 1) of each architecture.
func BenchmarkForward(b *testing.B) {
	for _, arch := range ArchNames() {
		b.Run(arch, func(b *testing.B) {
			net, _ := Arch(arch, 8, 1)
			defer net.Close()
			x := make([]float32, ReferenceInput.Size())
			net.Forward(x, 1, false, nil)
			b.ReportAllocs()
			for b.Loop() {
				benchSink += float64(net.Forward(x, 1, false, nil)[0])
			}
		})
	}
}
