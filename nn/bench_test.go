package nn

import (
	"fmt"
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

// BenchmarkLayerThroughput times forward + backward of each
// multiply-accumulating layer of the reference architectures on its own
// (batch 32, training mode) and reports GFLOP/s, counting 2 flops per MAC
// and three passes (forward, weight gradient, input gradient; two for a
// first layer, which has no input gradient). Compare with the ceiling of
// BenchmarkFMACeiling (internal/kernels).
func BenchmarkLayerThroughput(b *testing.B) {
	const batch = 32
	for _, arch := range ArchNames() {
		net, err := Arch(arch, 8, 1)
		if err != nil {
			b.Fatal(err)
		}
		defer net.Close()
		rng := rand.New(rand.NewPCG(2, 2))
		x := make([]float32, batch*ReferenceInput.Size())
		for i := range x {
			x[i] = float32(rng.NormFloat64())
		}
		net.Forward(x, batch, true, nil)
		for i, l := range net.Layers {
			ml, ok := l.(macLayer)
			if !ok {
				continue
			}
			b.Run(fmt.Sprintf("%s/%02d-%s", arch, i, l.Kind()), func(b *testing.B) {
				in, out := x, net.acts[i][:batch*net.Shapes[i].Size()]
				var dx []float32
				passes := int64(2)
				if i > 0 {
					in = net.acts[i-1][:batch*net.Shapes[i-1].Size()]
					dx = net.grads[i-1][:len(in)]
					passes = 3
				}
				dout := net.grads[i][:len(out)]
				for k := range dout {
					dout[k] = float32(rng.NormFloat64())
				}
				net.pass.Train = true
				for b.Loop() {
					l.forward(&net.pass, out, in, batch)
					l.backward(&net.pass, dx, dout, in, out, batch)
				}
				flops := 2 * passes * ml.macs() * batch
				b.ReportMetric(float64(flops)*float64(b.N)/b.Elapsed().Seconds()/1e9, "GFLOP/s")
			})
		}
	}
}
