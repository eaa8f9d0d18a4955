package nn_test

import (
	"fmt"
	"math/rand/v2"

	"github.com/pipit-audio/pipit/nn"
)

// Build a network from a layer spec, as a researcher trying a new
// architecture would.
func ExampleFromSpec() {
	spec := `input shape=40x61x1
conv out=8 kernel=3 stride=2 pad=same bias=false
batchnorm
relu
globalavgpool
dense out=4
`
	net, err := nn.FromSpec(spec, nn.Shape{}, 1)
	if err != nil {
		panic(err)
	}
	defer net.Close()
	fmt.Println("output:", net.Output(), "parameters:", net.Params.Count())
	// Output:
	// output: 1x1x4 parameters: 124
}

// Check a built-in architecture against the m4-half device budget before
// training it.
func ExampleCost() {
	net, err := nn.Arch("separable", 8, 1)
	if err != nil {
		panic(err)
	}
	defer net.Close()
	// int8: weights 8320 B + 296 output channels × 12 B (bias, multiplier, shift)
	r := nn.Cost(net, 1)
	ips, _ := nn.InferencesPerSecond(1.0, 0.5)
	v := r.Check(nn.Profiles["m4-half"], ips)
	fmt.Printf("MACs %d, RAM %d B, flash %d B, %.0f MAC/s, fits %v\n", r.MACs, r.RAMBytes, r.FlashBytes, v.MACsPerSecond, v.Fits)
	// Output:
	// MACs 475072, RAM 12480 B, flash 11872 B, 950144 MAC/s, fits true
}

// Train a tiny classifier on synthetic data: class 0 images are dark,
// class 1 bright.
func Example_trainTiny() {
	net, _ := nn.FromSpec("input shape=4x4x1\nconv out=4 kernel=3 pad=same\nrelu\nglobalavgpool\ndense out=2", nn.Shape{}, 1)
	defer net.Close()
	tr, err := nn.NewTrainer(net, &nn.SoftmaxCrossEntropy{Classes: 2}, nn.OptimizerConfig{Kind: nn.OptAdam}, nn.Schedule{Base: 0.05}, 1)
	if err != nil {
		panic(err)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	batch := func() ([]float32, []int) {
		x, y := make([]float32, 16*16), make([]int, 16)
		for i := range y {
			y[i] = i % 2
			for j := 0; j < 16; j++ {
				x[i*16+j] = float32(y[i]*2-1) + 0.5*float32(rng.NormFloat64())
			}
		}
		return x, y
	}
	var last nn.StepResult
	for step := 0; step < 50; step++ {
		x, y := batch()
		last, _ = tr.Step(x, y)
	}
	fmt.Printf("accuracy on the last batch: %d/16\n", last.Correct)
	// Output:
	// accuracy on the last batch: 16/16
}

// BalancedOrder draws an epoch in which a skewed training set's classes
// appear equally often.
func ExampleBalancedOrder() {
	labels := []int{0, 0, 0, 0, 0, 0, 0, 0, 1, 2} // 8, 1 and 1 samples
	order := make([]int, len(labels))
	nn.BalancedOrder(order, labels, rand.New(rand.NewPCG(1, 2)))
	perClass := make([]int, 3)
	for _, i := range order {
		perClass[labels[i]]++
	}
	fmt.Println(perClass[0]+perClass[1]+perClass[2], "places; each class 3 or 4:", perClass[0] >= 3 && perClass[1] >= 3 && perClass[2] >= 3)
	// Output: 10 places; each class 3 or 4: true
}

// Mixup blends a batch with itself; the targets stay distributions.
func ExampleMixup() {
	const n, in, classes = 4, 3, 2
	x := make([]float32, n*in)
	targets := make([]float32, n*classes)
	nn.OneHot(targets, []int{0, 1, 1, 0}, classes)
	perm := make([]int, n)
	nn.Mixup(x, targets, make([]float32, n*in), n, in, classes, 0.4, perm, rand.New(rand.NewPCG(3, 4)))
	for i := 0; i < n; i++ {
		fmt.Printf("%.3f ", targets[2*i]+targets[2*i+1])
	}
	// Output: 1.000 1.000 1.000 1.000
}
