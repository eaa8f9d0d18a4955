package nn

import "math/rand/v2"

// ParamSpec declares one tensor a layer needs.
type ParamSpec struct {
	Role  string // "weight", "bias", "gamma", "beta", "mean", "var"
	Shape []int
	Init  InitKind
	FanIn int  // for InitHe
	Decay bool // weight decay applies
}

// InitKind says how a parameter starts.
type InitKind int

// Initialisers.
const (
	InitZero InitKind = iota // all zeros
	InitOne                  // all ones
	InitHe                   // normal, std √(2/FanIn) (He et al. 2015, arXiv:1502.01852)
)

// Pass carries what one forward/backward pass needs besides the buffers.
type Pass struct {
	Train bool       // batch statistics, dropout on
	RNG   *rand.Rand // dropout masks; only used when Train
	exec  *executor
}

// Layer is one step of a [Network]. Implementations are the types of this
// package; the interface has unexported methods so that the network can
// rely on their contracts:
//
//   - setup validates the input shape and returns the output shape;
//   - params/state declare tensors, bound as views by bind;
//   - plan sizes work buffers for batches of up to n samples (the only
//     method that allocates);
//   - forward computes out from x, both (N, H, W, C) for n samples;
//   - backward accumulates into dx (nil for the first layer) and into the
//     parameter gradients, given dout and the x and out of forward;
//     layers that implement dxWriter overwrite dx instead, so the network
//     need not clear it first.
type Layer interface {
	// Kind returns the spec keyword of the layer ("conv", "relu", ...).
	Kind() string
	// Spec returns the layer's spec line (see the package doc).
	Spec() string

	setup(in Shape) (Shape, error)
	params() []ParamSpec
	state() []ParamSpec
	bind(data, grad, state [][]float32)
	plan(n int)
	forward(p *Pass, out, x []float32, n int)
	backward(p *Pass, dx, dout, x, out []float32, n int)
}

// inPlaceLayer marks elementwise layers whose output can share the input's
// buffer once batch norm is folded and activations fused (the cost
// model's memory plan).
type inPlaceLayer interface{ elementwise() }

// dxWriter marks layers whose backward writes every value of dx rather
// than adding to it.
type dxWriter interface{ writesDx() }

// macLayer is implemented by layers that multiply-accumulate.
type macLayer interface {
	// macs returns multiply-accumulates per sample.
	macs() int64
}
