package nn

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
)

// Network is a chain of layers on a fixed per-sample input shape, with all
// parameters in one [Params] buffer. Build one with [New], [FromSpec] or
// [Arch]; call Plan (or let Forward do it) before running batches.
// A Network is not safe for concurrent use.
type Network struct {
	Input  Shape
	Layers []Layer
	Shapes []Shape // Shapes[i] is the output of Layers[i]
	Params *Params

	planned int         // largest batch planned for
	acts    [][]float32 // (planned, Shapes[i]) outputs
	grads   [][]float32 // same shapes, gradients of the outputs
	exec    *executor
	pass    Pass
	closed  bool // Close was called
}

// New builds a network for per-sample input shape in from layers, and
// initialises its parameters from seed (He-normal weights, zero biases,
// batch norm γ = 1, β = 0, running variance 1). It returns an error
// wrapping [ErrShape] if a layer cannot take its input.
func New(in Shape, layers []Layer, seed uint64) (*Network, error) {
	return newBounded(in, layers, seed, MaxParams)
}

// MaxParams bounds the trainable parameters of a network New builds
// (2^28 float32 values, 1 GiB).
const MaxParams = 1 << 28

// newBounded is New with a bound on the parameter count, checked before
// anything is allocated.
func newBounded(in Shape, layers []Layer, seed uint64, maxParams int) (*Network, error) {
	if !in.valid() || in.H > 1<<16 || in.W > 1<<16 || in.C > 1<<16 {
		return nil, shapeErr("input shape %v", in)
	}
	if len(layers) == 0 {
		return nil, shapeErr("network has no layers")
	}
	n := &Network{Input: in, Layers: layers, Params: &Params{}}
	cur := in
	var specs [][]ParamSpec
	var states [][]ParamSpec
	for i, l := range layers {
		out, err := l.setup(cur)
		if err != nil {
			return nil, fmt.Errorf("nn: layer %d (%s): %w", i, l.Kind(), err)
		}
		if !out.valid() {
			return nil, shapeErr("layer %d (%s) gives empty output %v", i, l.Kind(), out)
		}
		n.Shapes = append(n.Shapes, out)
		cur = out
		specs = append(specs, l.params())
		states = append(states, l.state())
	}
	total := 0
	for _, group := range [][][]ParamSpec{specs, states} {
		for _, ps := range group {
			for _, s := range ps {
				size := 1
				for _, d := range s.Shape {
					if d < 1 || size > maxParams/d {
						return nil, shapeErr("more than %d parameters", maxParams)
					}
					size *= d
				}
				if total += size; total > maxParams {
					return nil, shapeErr("more than %d parameters", maxParams)
				}
			}
		}
	}
	p := n.Params
	for i, ps := range specs {
		for _, s := range ps {
			size := prod(s.Shape)
			p.Entries = append(p.Entries, ParamEntry{Name: fmt.Sprintf("%d.%s.%s", i, layers[i].Kind(), s.Role), Shape: s.Shape, Offset: len(p.Data), Size: size, Decay: s.Decay})
			p.Data = append(p.Data, make([]float32, size)...)
		}
	}
	for i, ps := range states {
		for _, s := range ps {
			size := prod(s.Shape)
			p.StateTable = append(p.StateTable, ParamEntry{Name: fmt.Sprintf("%d.%s.%s", i, layers[i].Kind(), s.Role), Shape: s.Shape, Offset: len(p.State), Size: size})
			p.State = append(p.State, make([]float32, size)...)
		}
	}
	p.Data = p.Data[:len(p.Data):len(p.Data)]
	p.Grad = make([]float32, len(p.Data))
	// Bind views and initialise in table order.
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	ei, si := 0, 0
	for i, l := range layers {
		var data, grad, state [][]float32
		for _, s := range specs[i] {
			e := p.Entries[ei]
			ei++
			d := p.Data[e.Offset : e.Offset+e.Size : e.Offset+e.Size]
			data = append(data, d)
			grad = append(grad, p.Grad[e.Offset:e.Offset+e.Size:e.Offset+e.Size])
			initParam(d, s, rng)
		}
		for _, s := range states[i] {
			e := p.StateTable[si]
			si++
			d := p.State[e.Offset : e.Offset+e.Size : e.Offset+e.Size]
			state = append(state, d)
			initParam(d, s, rng)
		}
		l.bind(data, grad, state)
	}
	n.exec = newExecutor()
	n.pass.exec = n.exec
	return n, nil
}

func prod(s []int) int {
	p := 1
	for _, v := range s {
		p *= v
	}
	return p
}

func initParam(d []float32, s ParamSpec, rng *rand.Rand) {
	switch s.Init {
	case InitOne:
		for i := range d {
			d[i] = 1
		}
	case InitHe:
		std := math.Sqrt(2 / float64(s.FanIn))
		for i := range d {
			d[i] = float32(rng.NormFloat64() * std)
		}
	}
}

// Output returns the per-sample output shape.
func (n *Network) Output() Shape { return n.Shapes[len(n.Shapes)-1] }

// Plan sizes activation buffers and layer workspaces for batches of up to
// batch samples. It is the only method that allocates; Forward and
// Backward call it when given a larger batch.
func (n *Network) Plan(batch int) {
	n.checkOpen("Plan")
	if batch <= n.planned {
		return
	}
	n.acts = n.acts[:0]
	n.grads = n.grads[:0]
	for i, s := range n.Shapes {
		n.acts = append(n.acts, make([]float32, batch*s.Size()))
		n.grads = append(n.grads, make([]float32, batch*s.Size()))
		n.Layers[i].plan(batch)
	}
	n.planned = batch
}

// Forward runs batch samples of x (N, H, W, C) through the network and
// returns the output (N, Output().Size()), a view that the next call
// overwrites. train selects batch statistics and dropout; rng supplies
// dropout masks (it may be nil when train is false or there is no
// dropout). It panics if len(x) is not batch·Input.Size() or the network
// has been closed.
func (n *Network) Forward(x []float32, batch int, train bool, rng *rand.Rand) []float32 {
	n.checkOpen("Forward")
	if len(x) != batch*n.Input.Size() {
		panic(fmt.Sprintf("nn: Network.Forward: len(x) = %d, want %d·%d", len(x), batch, n.Input.Size()))
	}
	n.Plan(batch)
	n.pass.Train, n.pass.RNG = train, rng
	in := x
	for i, l := range n.Layers {
		out := n.acts[i][:batch*n.Shapes[i].Size()]
		l.forward(&n.pass, out, in, batch)
		in = out
	}
	return in
}

// Backward propagates dout (N, Output().Size()), the gradient of the loss
// with respect to the last Forward's output, back through the network,
// accumulating parameter gradients into Params.Grad (call
// Params.ZeroGrad first). It does not compute the gradient of the input.
// It panics if the network has been closed.
func (n *Network) Backward(x, dout []float32, batch int) {
	n.checkOpen("Backward")
	last := len(n.Layers) - 1
	copy(n.grads[last][:batch*n.Shapes[last].Size()], dout)
	for i := last; i >= 0; i-- {
		var dx, in []float32
		if i > 0 {
			sz := batch * n.Shapes[i-1].Size()
			dx, in = n.grads[i-1][:sz], n.acts[i-1][:sz]
			if _, ok := n.Layers[i].(dxWriter); !ok {
				clear(dx)
			}
		} else {
			in = x
		}
		sz := batch * n.Shapes[i].Size()
		n.Layers[i].backward(&n.pass, dx, n.grads[i][:sz], in, n.acts[i][:sz], batch)
	}
}

// Activation returns layer i's output from the last Forward (a view).
func (n *Network) Activation(i, batch int) []float32 {
	return n.acts[i][:batch*n.Shapes[i].Size()]
}

// Spec returns the layer spec that rebuilds the network (see the package
// doc), starting with its input line.
func (n *Network) Spec() string {
	var b strings.Builder
	fmt.Fprintf(&b, "input shape=%s\n", n.Input)
	for _, l := range n.Layers {
		b.WriteString(l.Spec())
		b.WriteByte('\n')
	}
	return b.String()
}

// Close stops the network's worker goroutines. Running the network
// afterwards (Plan, Forward, Backward and what calls them) panics with a
// message saying so; closing twice is harmless.
func (n *Network) Close() {
	n.closed = true
	n.exec.close()
}

// checkOpen panics when the network has been closed: its workers are gone
// and a pass would wait for them for ever.
func (n *Network) checkOpen(method string) {
	if n.closed {
		panic("nn: Network." + method + " called after Close: the network's workers are stopped; build or load a new network")
	}
}
