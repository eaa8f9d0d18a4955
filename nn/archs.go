package nn

import (
	"fmt"
	"sort"
	"strings"
)

// ReferenceInput is the input of the reference architectures: 40 mel
// bands × 61 frames × 1 channel, one second at pipit's default front end.
var ReferenceInput = Shape{H: 40, W: 61, C: 1}

// The reference architectures, as layer specs with the class count as %d.
// Convolutions followed by batch norm carry no bias (batch norm's β takes
// its place, common practice).
var archSpecs = map[string]string{
	// 3×3 convolutions of 16, 32, 32 with BN+ReLU, 2×2 max pooling after
	// the first two, global average pool, dense 32 + ReLU, dense N.
	"pooled": `conv out=16 kernel=3x3 stride=1 pad=same bias=false
batchnorm
relu
maxpool size=2x2 stride=2x2
conv out=32 kernel=3x3 stride=1 pad=same bias=false
batchnorm
relu
maxpool size=2x2 stride=2x2
conv out=32 kernel=3x3 stride=1 pad=same bias=false
batchnorm
relu
globalavgpool
dense out=32
relu
dense out=%d
`,
	// the same with the first two convolutions at stride 2 and no pooling.
	"strided": `conv out=16 kernel=3x3 stride=2 pad=same bias=false
batchnorm
relu
conv out=32 kernel=3x3 stride=2 pad=same bias=false
batchnorm
relu
conv out=32 kernel=3x3 stride=1 pad=same bias=false
batchnorm
relu
globalavgpool
dense out=32
relu
dense out=%d
`,
	// 3×3 stride-2 convolution of 16, then three depthwise 3×3 (strides
	// 2, 2, 1) + pointwise (32, 64, 64) blocks, all with BN+ReLU, global
	// average pool, dense N.
	"separable": `conv out=16 kernel=3x3 stride=2 pad=same bias=false
batchnorm
relu
depthwise kernel=3x3 stride=2 pad=same bias=false
batchnorm
relu
pointwise out=32 bias=false
batchnorm
relu
depthwise kernel=3x3 stride=2 pad=same bias=false
batchnorm
relu
pointwise out=64 bias=false
batchnorm
relu
depthwise kernel=3x3 stride=1 pad=same bias=false
batchnorm
relu
pointwise out=64 bias=false
batchnorm
relu
globalavgpool
dense out=%d
`,
}

// ArchNames returns the names of the built-in architectures.
func ArchNames() []string {
	var names []string
	for k := range archSpecs {
		names = append(names, k)
	}
	sort.Strings(names)
	return names
}

// ArchSpec returns the layer spec of a built-in architecture for classes
// outputs, with its input line.
func ArchSpec(name string, classes int) (string, error) {
	s, ok := archSpecs[name]
	if !ok {
		return "", fmt.Errorf("nn: unknown architecture %q (have %s)", name, strings.Join(ArchNames(), ", "))
	}
	if classes < 2 {
		return "", fmt.Errorf("nn: architecture %s needs at least 2 classes, got %d", name, classes)
	}
	return fmt.Sprintf("input shape=%s\n"+s, ReferenceInput, classes), nil
}

// Arch builds a built-in architecture ("pooled", "strided" or
// "separable") for classes outputs on [ReferenceInput].
func Arch(name string, classes int, seed uint64) (*Network, error) {
	s, err := ArchSpec(name, classes)
	if err != nil {
		return nil, err
	}
	return FromSpec(s, Shape{}, seed)
}
