package kernels

// maxRowTaps bounds the kernel taps (KH·KW) the depthwise row kernels take.
const maxRowTaps = 64

// interiorCols returns the output columns [lo, hi) whose windows lie
// entirely inside the input's width.
func (g ConvGeom) interiorCols() (lo, hi int) {
	lo = (g.PadLeft + g.SW - 1) / g.SW
	if g.W-g.KW+g.PadLeft < 0 {
		return lo, lo
	}
	hi = min((g.W-g.KW+g.PadLeft)/g.SW+1, g.OW)
	return lo, max(hi, lo)
}

// rowTaps fills the byte offsets of the taps of output row oh that fall
// inside the input's height: x offsets relative to output column 0's
// window origin and weight offsets. It returns the tap count.
func (g ConvGeom) rowTaps(oh int, xoffs, woffs *[maxRowTaps]int) int {
	n := 0
	c := g.C
	for kh := 0; kh < g.KH; kh++ {
		ih := oh*g.SH - g.PadTop + kh
		if ih < 0 || ih >= g.H {
			continue
		}
		for kw := 0; kw < g.KW; kw++ {
			xoffs[n] = ((ih*g.W + kw - g.PadLeft) * c) * 4
			woffs[n] = (kh*g.KW + kw) * c * 4
			n++
		}
	}
	return n
}

// depthwiseForwardSIMD is DepthwiseForward with the AVX2 row kernel on
// each output row's interior columns; the border columns take the
// per-position path.
func depthwiseForwardSIMD(g ConvGeom, x, w, out []float32) {
	var xoffs, woffs [maxRowTaps]int
	c := g.C
	lo, hi := g.interiorCols()
	for oh := 0; oh < g.OH; oh++ {
		n := g.rowTaps(oh, &xoffs, &woffs)
		if hi > lo && n > 0 {
			dwFwdRowAVX2(&out[(oh*g.OW+lo)*c], &x[lo*g.SW*c], &w[0], hi-lo, c, g.SW*c*4, &xoffs[0], &woffs[0], n)
		}
		for ow := 0; ow < g.OW; ow++ {
			if ow == lo && hi > lo {
				ow = hi - 1
				continue
			}
			depthwiseForwardAt(g, x, w, out, oh, ow)
		}
	}
}

// depthwiseBackwardSIMD is DepthwiseBackward (with dx) on the AVX2 row
// kernel, border columns per position.
func depthwiseBackwardSIMD(g ConvGeom, x, w, dout, dx, dw []float32) {
	var xoffs, woffs [maxRowTaps]int
	c := g.C
	lo, hi := g.interiorCols()
	for oh := 0; oh < g.OH; oh++ {
		n := g.rowTaps(oh, &xoffs, &woffs)
		if hi > lo && n > 0 {
			dwBackRowAVX2(&dout[(oh*g.OW+lo)*c], &x[lo*g.SW*c], &w[0], &dx[lo*g.SW*c], &dw[0], hi-lo, c, g.SW*c*4, &xoffs[0], &woffs[0], n)
		}
		for ow := 0; ow < g.OW; ow++ {
			if ow == lo && hi > lo {
				ow = hi - 1
				continue
			}
			depthwiseBackwardAt(g, x, w, dout, dx, dw, oh, ow)
		}
	}
}
