package nn

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// ReferenceInput is the input of the reference architectures: 40 mel
// bands × 61 frames × 1 channel, one second at pipit's default front end.
var ReferenceInput = Shape{H: 40, W: 61, C: 1}

// ArchKnobs are the size knobs of the built-in architecture families.
// The zero value is the reference network of each name.
type ArchKnobs struct {
	// Width multiplies every channel count (convolution, pointwise and
	// hidden dense outputs; not the class outputs). Each product is
	// rounded to the nearest multiple of 8, at least 8, because the AVX2
	// kernels of internal/kernels process 8 float32 lanes at a time and
	// are fastest when channel counts are multiples of 8. 0 means 1.
	Width float64 `json:"width"`
	// Blocks is the number of depthwise-separable blocks of "separable"
	// (1..8; 0 means 3, the reference). Block i has stride 2 for i < 2
	// and stride 1 after, and 32 pointwise channels for i = 0, 64 after
	// (before Width). Other families have no blocks and reject Blocks ≠ 0.
	Blocks int `json:"blocks"`
}

// MaxSeparableBlocks bounds [ArchKnobs].Blocks.
const MaxSeparableBlocks = 8

// channels scales c by the width multiplier w and rounds to a multiple of
// 8 (at least 8).
func channels(c int, w float64) int {
	if w == 0 || w == 1 {
		return c
	}
	n := int(math.Round(float64(c)*w/8)) * 8
	return max(n, 8)
}

// The reference architectures, as functions of the knobs writing layer
// specs with the class count as %d. Convolutions followed by batch norm
// carry no bias (batch norm's β takes its place, common practice).
var archBuilders = map[string]func(k ArchKnobs) string{
	// 3×3 convolutions of 16, 32, 32 with BN+ReLU, 2×2 max pooling after
	// the first two, global average pool, dense 32 + ReLU, dense N.
	"pooled": func(k ArchKnobs) string {
		return fmt.Sprintf(`conv out=%d kernel=3x3 stride=1 pad=same bias=false
batchnorm
relu
maxpool size=2x2 stride=2x2
conv out=%d kernel=3x3 stride=1 pad=same bias=false
batchnorm
relu
maxpool size=2x2 stride=2x2
conv out=%d kernel=3x3 stride=1 pad=same bias=false
batchnorm
relu
globalavgpool
dense out=%d
relu
dense out=%%d
`, channels(16, k.Width), channels(32, k.Width), channels(32, k.Width), channels(32, k.Width))
	},
	// the same with the first two convolutions at stride 2 and no pooling.
	"strided": func(k ArchKnobs) string {
		return fmt.Sprintf(`conv out=%d kernel=3x3 stride=2 pad=same bias=false
batchnorm
relu
conv out=%d kernel=3x3 stride=2 pad=same bias=false
batchnorm
relu
conv out=%d kernel=3x3 stride=1 pad=same bias=false
batchnorm
relu
globalavgpool
dense out=%d
relu
dense out=%%d
`, channels(16, k.Width), channels(32, k.Width), channels(32, k.Width), channels(32, k.Width))
	},
	// 3×3 stride-2 convolution of 16, then depthwise 3×3 + pointwise
	// blocks (reference: three, strides 2, 2, 1, pointwise 32, 64, 64),
	// all with BN+ReLU, global average pool, dense N.
	"separable": func(k ArchKnobs) string {
		blocks := k.Blocks
		if blocks == 0 {
			blocks = 3
		}
		var b strings.Builder
		fmt.Fprintf(&b, "conv out=%d kernel=3x3 stride=2 pad=same bias=false\nbatchnorm\nrelu\n", channels(16, k.Width))
		for i := 0; i < blocks; i++ {
			stride, out := 1, 64
			if i < 2 {
				stride = 2
			}
			if i == 0 {
				out = 32
			}
			fmt.Fprintf(&b, "depthwise kernel=3x3 stride=%d pad=same bias=false\nbatchnorm\nrelu\npointwise out=%d bias=false\nbatchnorm\nrelu\n", stride, channels(out, k.Width))
		}
		b.WriteString("globalavgpool\ndense out=%d\n")
		return b.String()
	},
}

// ArchNames returns the names of the built-in architectures.
func ArchNames() []string {
	var names []string
	for k := range archBuilders {
		names = append(names, k)
	}
	sort.Strings(names)
	return names
}

// ArchSpec returns the layer spec of a built-in architecture for classes
// outputs, with its input line.
func ArchSpec(name string, classes int) (string, error) {
	return ArchSpecFor(name, classes, ReferenceInput, ArchKnobs{})
}

// ArchSpecFor returns the layer spec, with its input line, of the built-in
// architecture family name on input in with the knobs k. At the zero knobs
// and [ReferenceInput] it equals [ArchSpec].
func ArchSpecFor(name string, classes int, in Shape, k ArchKnobs) (string, error) {
	build, ok := archBuilders[name]
	if !ok {
		return "", fmt.Errorf("nn: unknown architecture %q (have %s)", name, strings.Join(ArchNames(), ", "))
	}
	if classes < 2 {
		return "", fmt.Errorf("nn: architecture %s needs at least 2 classes, got %d", name, classes)
	}
	if !(k.Width >= 0 && k.Width <= 8) {
		return "", fmt.Errorf("nn: architecture %s: width multiplier %g: want 0 < width ≤ 8", name, k.Width)
	}
	if k.Blocks != 0 && name != "separable" {
		return "", fmt.Errorf("nn: architecture %s has no depthwise-separable blocks (blocks %d)", name, k.Blocks)
	}
	if k.Blocks < 0 || k.Blocks > MaxSeparableBlocks {
		return "", fmt.Errorf("nn: architecture %s: %d blocks: want 1..%d", name, k.Blocks, MaxSeparableBlocks)
	}
	if in.H < 1 || in.W < 1 || in.C < 1 {
		return "", fmt.Errorf("nn: architecture %s: input %v: want positive dimensions", name, in)
	}
	return fmt.Sprintf("input shape=%s\n"+build(k), in, classes), nil
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
