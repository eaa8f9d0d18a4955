package quant_test

import (
	"fmt"
	"math/rand/v2"
	"strings"

	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
)

// Quantise a network to int8 from a calibration set and check how well the
// integer engine tracks the float network.
func ExampleQuantize() {
	net, _ := nn.Arch("separable", 8, 1)
	defer net.Close()
	rng := rand.New(rand.NewPCG(1, 2))
	n := 16
	x := make([]float32, n*net.Input.Size())
	for i := range x {
		x[i] = float32(rng.NormFloat64())
	}
	m, rep, err := quant.Quantize(net, x, n, nil, quant.Config{Method: quant.MethodMinMax})
	if err != nil {
		panic(err)
	}
	fmt.Println("layers:", len(m.Layers), "int8 weight bytes:", rep.WeightBytes, "overhead:", rep.OverheadBytes)
	fmt.Println("logit correlation above 0.99:", rep.LogitCorr > 0.99)
	// Output:
	// layers: 9 int8 weight bytes: 8320 overhead: 3552
	// logit correlation above 0.99: true
}

// Represent a real rescale factor as a fixed-point multiplier and apply it
// to an accumulator the way an integer runtime does.
func ExampleEncodeRescale() {
	m0, shift, _ := quant.EncodeRescale(0.01) // 0.02·0.05/0.1
	fmt.Println(m0, shift, quant.Rescale(12345, m0, shift))
	// Output:
	// 1374389535 6 123
}

// Export a quantised network for a device: blob, scheme and C header.
func ExampleExport() {
	net, _ := nn.FromSpec("input shape=8x8x1\nconv out=4 kernel=3 pad=same\nrelu\nglobalavgpool\ndense out=2", nn.Shape{}, 1)
	defer net.Close()
	x := make([]float32, 4*64)
	for i := range x {
		x[i] = float32(i%9) - 4
	}
	m, _, err := quant.Quantize(net, x, 4, nil, quant.Config{Method: quant.MethodMinMax})
	if err != nil {
		panic(err)
	}
	blob, scheme, err := quant.Export(m)
	if err != nil {
		panic(err)
	}
	header := quant.CHeader(blob, scheme, "tiny")
	fmt.Println("layers:", len(scheme.Layers), "weight bytes:", scheme.Totals.WeightBytes, "RAM pool:", scheme.Memory.PoolBytes, "header mentions pool:", strings.Contains(header, "TINY_POOL_BYTES 320"))
	// Output:
	// layers: 3 weight bytes: 44 RAM pool: 320 header mentions pool: true
}
