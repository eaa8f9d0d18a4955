package nn

import (
	"fmt"
	"strings"
	"testing"
)

// referenceSpecsBefore are the reference architectures as literal specs,
// copied from before the families took knobs: at the zero knobs the
// families must write exactly these (the export goldens depend on them).
var referenceSpecsBefore = map[string]string{
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

func TestArchFamiliesReproduceReference(t *testing.T) {
	for name, want := range referenceSpecsBefore {
		got, err := ArchSpec(name, 5)
		if err != nil {
			t.Fatal(err)
		}
		if w := fmt.Sprintf("input shape=40x61x1\n"+want, 5); got != w {
			t.Errorf("%s: spec changed:\n%s\nwant\n%s", name, got, w)
		}
		got1, _ := ArchSpecFor(name, 5, ReferenceInput, ArchKnobs{Width: 1})
		if got1 != got {
			t.Errorf("%s: width 1 differs from the reference", name)
		}
	}
}

func TestArchKnobs(t *testing.T) {
	// Width 0.5 halves 16, 32, 64 to 8, 16, 32; width 0.3 gives 16·0.3 =
	// 4.8 → 8 (the floor of 8), 32·0.3 = 9.6 → 8, 64·0.3 = 19.2 → 16.
	for _, c := range []struct {
		w    float64
		want []int
	}{{0.5, []int{8, 16, 32, 32}}, {0.3, []int{8, 8, 16, 16}}, {1.5, []int{24, 48, 96, 96}}} {
		s, err := ArchSpecFor("separable", 4, Shape{H: 20, W: 31, C: 1}, ArchKnobs{Width: c.w, Blocks: 4})
		if err != nil {
			t.Fatal(err)
		}
		net, err := FromSpec(s, Shape{}, 1)
		if err != nil {
			t.Fatal(err)
		}
		var got []int
		strides := 0
		for _, line := range strings.Split(s, "\n") {
			var ch int
			if strings.HasPrefix(line, "conv ") || strings.HasPrefix(line, "pointwise ") {
				fmt.Sscanf(line[strings.Index(line, "out="):], "out=%d", &ch)
				got = append(got, ch)
			}
			if strings.HasPrefix(line, "depthwise") && strings.Contains(line, "stride=2") {
				strides++
			}
		}
		in := net.Input
		net.Close()
		if in != (Shape{H: 20, W: 31, C: 1}) {
			t.Errorf("input %v", in)
		}
		// conv, then 4 pointwise: c0, c1, c2, c2, c2.
		want := []int{c.want[0], c.want[1], c.want[2], c.want[2], c.want[2]}
		if fmt.Sprint(got) != fmt.Sprint(want) {
			t.Errorf("width %g: channels %v, want %v", c.w, got, want)
		}
		if strides != 2 {
			t.Errorf("width %g: %d stride-2 depthwise blocks, want 2", c.w, strides)
		}
		for _, ch := range got {
			if ch%8 != 0 {
				t.Errorf("width %g: %d channels, not a multiple of 8", c.w, ch)
			}
		}
	}
	if _, err := ArchSpecFor("pooled", 4, ReferenceInput, ArchKnobs{Blocks: 2}); err == nil {
		t.Error("blocks on pooled: want an error")
	}
	if _, err := ArchSpecFor("separable", 4, ReferenceInput, ArchKnobs{Blocks: 9}); err == nil {
		t.Error("9 blocks: want an error")
	}
	if _, err := ArchSpecFor("separable", 4, ReferenceInput, ArchKnobs{Width: -1}); err == nil {
		t.Error("negative width: want an error")
	}
}
