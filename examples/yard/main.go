// Command yard walks through pipit's library without the CLI, on a small
// synthetic timber-yard corpus: generate clips, cut them into windows with
// group-safe folds, train the separable network, quantise it to int8,
// compare float and int8 on the held-out fold, and export blob + scheme.
//
//	go run ./examples/yard [DIR]
package main

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
)

func main() {
	dir, err := os.MkdirTemp("", "yard")
	if len(os.Args) > 1 {
		dir, err = os.Args[1], os.MkdirAll(os.Args[1], 0o755)
	}
	check(err)

	// 1. A corpus: 8 classes × 12 clips × 1 s, 3 folds.
	corpus, err := datasets.Synthesize(filepath.Join(dir, "corpus"), datasets.SynthConfig{ClipsPerClass: 12, Folds: 3, Seed: 4}, nil)
	check(err)
	test, rest := corpus.Split(0)

	// 2. Windows of 61 frames (the reference input), normalised by the
	// training windows' statistics; training windows augmented.
	fe := features.DefaultConfig()
	win := datasets.WindowConfig{Frames: nn.ReferenceInput.W, Overlap: 0.5, Pad: datasets.PadZeros}
	trainSet, err := datasets.Load(corpus, rest, datasets.Options{FrontEnd: fe, Window: win, KeepAudio: true})
	check(err)
	testSet, err := datasets.Load(corpus, test, datasets.Options{FrontEnd: fe, Window: win})
	check(err)
	stats, err := trainSet.ComputeStats()
	check(err)
	trainSet.Stats, testSet.Stats = stats, stats
	trainSet.Aug, trainSet.Seed = datasets.DefaultAugment(), 1

	// 3. Train (validating on the test fold here, to keep the example short;
	// pipit train keeps a separate validation fold).
	net, err := nn.Arch("separable", len(corpus.Classes), 1)
	check(err)
	defer net.Close()
	const epochs, batch = 60, 16
	steps := int64(epochs * ((trainSet.Len() + batch - 1) / batch))
	tr, err := nn.NewTrainer(net, &nn.SoftmaxCrossEntropy{Classes: len(corpus.Classes)}, nn.OptimizerConfig{Kind: nn.OptAdamW, WeightDecay: 1e-4},
		nn.Schedule{Kind: nn.SchedCosine, Base: 0.005, WarmupSteps: steps / 10, TotalSteps: steps}, 1)
	check(err)
	hist, err := nn.Fit(tr, nn.FitConfig{Epochs: epochs, Batch: batch, Seed: 1}, trainSet, testSet, nil, nil)
	check(err)
	fmt.Printf("trained %d epochs; cost: %+v\n", len(hist), costLine(net))

	// 4. int8: calibrate on the training windows, compare on the test fold.
	in := trainSet.InputSize()
	x := make([]float32, trainSet.Len()*in)
	y := make([]int, trainSet.Len())
	trainSet.Aug = nil
	for i := range y {
		y[i] = trainSet.Sample(i, 0, x[i*in:(i+1)*in])
	}
	q, rep, err := quant.Quantize(net, x, len(y), y, quant.Config{})
	check(err)
	floatOK, int8OK := 0, 0
	buf := make([]float32, in)
	for i := 0; i < testSet.Len(); i++ {
		label := testSet.Sample(i, 0, buf)
		if argmax(net.Forward(buf, 1, false, nil)) == label {
			floatOK++
		}
		if argmax(q.Run(buf)) == label {
			int8OK++
		}
	}
	n := float64(testSet.Len())
	fmt.Printf("test fold: float %.3f, int8 %.3f (ranges by %s, logit correlation %.4f)\n", float64(floatOK)/n, float64(int8OK)/n, rep.Method, rep.LogitCorr)

	// 5. Export for a device.
	blob, scheme, err := quant.Export(q)
	check(err)
	js, err := scheme.MarshalScheme()
	check(err)
	check(os.WriteFile(filepath.Join(dir, "model.blob"), blob, 0o644))
	check(os.WriteFile(filepath.Join(dir, "model.scheme.json"), js, 0o644))
	fmt.Printf("export: %d-byte blob (CRC-32 %s), %d-byte RAM pool, %d MACs, in %s\n", len(blob), scheme.Blob.CRC32, scheme.Memory.PoolBytes, scheme.Totals.MACs, dir)
}

func costLine(net *nn.Network) string {
	c := nn.Cost(net, 1)
	return fmt.Sprintf("%d MACs, %d parameters, %d B RAM (int8)", c.MACs, c.Params, c.RAMBytes)
}

func argmax(v []float32) int {
	best := 0
	for i := range v {
		if v[i] > v[best] {
			best = i
		}
	}
	return best
}

func check(err error) {
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
}
