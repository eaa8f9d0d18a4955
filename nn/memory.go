package nn

// TrainingBytes estimates the memory, in bytes, that training net on
// batches of batch samples allocates: parameters, their gradients and
// the two optimiser moments of Adam/AdamW; batch-norm state; an
// activation and a gradient buffer of every layer output for the whole
// batch; the per-shard gradient copies of the parallel layers; and the
// im2col work buffers of the convolutions, one pair per shard. Inputs,
// the loss and Go's own overhead come on top, so a caller that refuses a
// run by this estimate should keep a margin. The estimate is computed
// from shapes alone: nothing is allocated.
func TrainingBytes(net *Network, batch int) int64 {
	if batch < 1 {
		batch = 1
	}
	const f = 4 // bytes per float32
	p := int64(len(net.Params.Data))
	total := f * (4*p + int64(len(net.Params.State)))
	var acts int64
	for _, s := range net.Shapes {
		acts += int64(s.Size())
	}
	total += 2 * f * int64(batch) * acts
	k := int64(shardCount(batch))
	for _, l := range net.Layers {
		switch l := l.(type) {
		case *Conv2D:
			total += k * f * int64(len(l.Weight)+len(l.Bias))
			if !l.direct {
				total += k * f * (2*int64(l.g.ColSize()) + int64(len(l.Weight)))
			}
		case *Dense:
			total += k * f * int64(len(l.Weight)+len(l.Bias))
		case *Depthwise:
			total += k * f * int64(len(l.Weight)+len(l.Bias))
		}
	}
	return total
}
