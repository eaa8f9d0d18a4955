package nn

import (
	"errors"
	"strings"
	"testing"
)

func TestSpecRoundTrip(t *testing.T) {
	for _, name := range ArchNames() {
		net, err := Arch(name, 5, 1)
		if err != nil {
			t.Fatal(err)
		}
		again, err := FromSpec(net.Spec(), Shape{}, 1)
		if err != nil {
			t.Fatalf("%s: rebuilding from Spec(): %v\n%s", name, err, net.Spec())
		}
		if again.Spec() != net.Spec() || len(again.Params.Data) != len(net.Params.Data) {
			t.Errorf("%s: spec does not round-trip", name)
		}
		net.Close()
		again.Close()
	}
}

func TestSpecShapes(t *testing.T) {
	// Output shapes by hand: "same" gives ceil(in/stride); valid gives
	// floor((in-k)/s)+1; explicit padding adds to the input first.
	spec := `# a comment line
input shape=40x61x1
conv out=8 kernel=3x5 stride=2x3 pad=same   # 20x21x8
maxpool size=2 stride=2                          # 10x10x8
depthwise kernel=3 pad=1,1,0,2                    # (10+2-3)+1=10, (10+2-3)+1=10
avgpool size=3x2 stride=1 pad=valid               # 8x9x8
pointwise out=4 bias=false                    # 8x9x4
relu6
dropout rate=0.5
flatten                                           # 1x1x288
dense out=3
`
	net, err := FromSpec(spec, Shape{}, 1)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	want := []Shape{{20, 21, 8}, {10, 10, 8}, {10, 10, 8}, {8, 9, 8}, {8, 9, 4}, {8, 9, 4}, {8, 9, 4}, {1, 1, 288}, {1, 1, 3}}
	for i, s := range want {
		if net.Shapes[i] != s {
			t.Errorf("layer %d (%s) output %v, want %v", i, net.Layers[i].Kind(), net.Shapes[i], s)
		}
	}
}

func TestSpecErrors(t *testing.T) {
	cases := map[string]string{
		"unknown layer":      "convolve out=3",
		"missing out":        "conv kernel=3",
		"bad kernel":         "conv out=3 kernel=0",
		"bad pair":           "conv out=3 kernel=3x3x3",
		"not key=value":      "conv 16",
		"unknown argument":   "relu slope=0.1",
		"duplicate argument": "dense out=3 out=4",
		"bad pad":            "conv out=1 kernel=3 pad=big",
		"input twice":        "input shape=2x2x1\ninput shape=2x2x1\nrelu",
		"no layers":          "# nothing\n",
		"bad bool":           "pointwise out=2 bias=maybe",
	}
	for name, spec := range cases {
		_, _, _, err := ParseSpec(spec)
		if !errors.Is(err, ErrSpec) {
			t.Errorf("%s: error %v, want ErrSpec", name, err)
		}
	}
	var se *SpecError
	_, _, _, err := ParseSpec("relu\nconv out=x kernel=3")
	if !errors.As(err, &se) || se.Line != 2 || !strings.Contains(err.Error(), "line 2") {
		t.Errorf("error %v does not name line 2", err)
	}
	// Shapes that cannot be planned are ErrShape from FromSpec.
	if _, err := FromSpec("conv out=2 kernel=5", Shape{3, 3, 1}, 1); !errors.Is(err, ErrShape) {
		t.Errorf("kernel larger than input: error %v, want ErrShape", err)
	}
	if _, err := FromSpec("dense out=3", Shape{}, 1); !errors.Is(err, ErrShape) {
		t.Errorf("no input shape: error %v", err)
	}
}
