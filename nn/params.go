package nn

import "fmt"

// ParamEntry is one named tensor in a [Params] buffer.
type ParamEntry struct {
	Name   string // "<layer index>.<kind>.<role>", e.g. "0.conv.weight"
	Shape  []int  // row-major shape, e.g. (OutC, KH, KW, InC)
	Offset int    // first element in the buffer
	Size   int    // product of Shape
	Decay  bool   // weight decay applies (weights yes; biases, batch norm no)
}

// Params holds every trainable parameter of a network in one contiguous
// buffer Data, the gradients in a twin buffer Grad of the same layout, and
// the non-trainable state (batch-norm running statistics) in State. The
// entry tables give each tensor's name, shape and offset; layers hold
// views (subslices) into the buffers. Optimisers, checkpoints and export
// walk the buffers in table order, which is the network's layer order.
type Params struct {
	Data, Grad []float32
	Entries    []ParamEntry // into Data and Grad
	State      []float32
	StateTable []ParamEntry // into State
}

// ZeroGrad sets every gradient to zero; layers' Backward methods
// accumulate, so training calls this once per step.
func (p *Params) ZeroGrad() { clear(p.Grad) }

// Entry returns the entry with the given name.
func (p *Params) Entry(name string) (ParamEntry, bool) {
	for _, e := range p.Entries {
		if e.Name == name {
			return e, true
		}
	}
	for _, e := range p.StateTable {
		if e.Name == name {
			return e, true
		}
	}
	return ParamEntry{}, false
}

// Count returns the number of trainable parameters.
func (p *Params) Count() int { return len(p.Data) }

// String summarises the buffer sizes.
func (p *Params) String() string {
	return fmt.Sprintf("nn.Params{%d trainable in %d tensors, %d state}", len(p.Data), len(p.Entries), len(p.State))
}
