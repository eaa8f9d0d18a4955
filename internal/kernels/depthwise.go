package kernels

// DepthwiseForward computes out += depthwise(x, w) for one sample with
// multiplier 1: x (H, W, C), w (KH, KW, C), out (OH, OW, C),
// out[oh][ow][c] += Σ_{kh,kw} x[oh·SH−PadTop+kh][ow·SW−PadLeft+kw][c]·w[kh][kw][c]
// (MobileNets eq. 3), zero outside x. It panics on short slices.
func DepthwiseForward(g ConvGeom, x, w, out []float32) {
	checkLen("DepthwiseForward x", len(x), g.H*g.W*g.C)
	checkLen("DepthwiseForward w", len(w), g.KH*g.KW*g.C)
	checkLen("DepthwiseForward out", len(out), g.OH*g.OW*g.C)
	if useSIMD && g.C%8 == 0 && g.KH*g.KW <= maxRowTaps {
		depthwiseForwardSIMD(g, x, w, out)
		return
	}
	for oh := 0; oh < g.OH; oh++ {
		for ow := 0; ow < g.OW; ow++ {
			depthwiseForwardAt(g, x, w, out, oh, ow)
		}
	}
}

// depthwiseForwardAt adds output position (oh, ow) of [DepthwiseForward].
func depthwiseForwardAt(g ConvGeom, x, w, out []float32, oh, ow int) {
	c := g.C
	o := out[(oh*g.OW+ow)*c : (oh*g.OW+ow+1)*c]
	for kh := 0; kh < g.KH; kh++ {
		ih := oh*g.SH - g.PadTop + kh
		if ih < 0 || ih >= g.H {
			continue
		}
		for kw := 0; kw < g.KW; kw++ {
			iw := ow*g.SW - g.PadLeft + kw
			if iw < 0 || iw >= g.W {
				continue
			}
			xs := x[(ih*g.W+iw)*c : (ih*g.W+iw+1)*c]
			ws := w[(kh*g.KW+kw)*c : (kh*g.KW+kw+1)*c]
			xs, ws = xs[:len(o)], ws[:len(o)]
			if useSIMD && c >= 8 {
				fmaAVX2(&o[0], &xs[0], &ws[0], c)
				continue
			}
			for ch := range o {
				o[ch] += xs[ch] * ws[ch]
			}
		}
	}
}

// DepthwiseBackward accumulates the gradients of [DepthwiseForward] for
// one sample: dx += ∂/∂x and dw += ∂/∂w of Σ dout·out. dx may be nil
// (first layer). It panics on short slices.
func DepthwiseBackward(g ConvGeom, x, w, dout, dx, dw []float32) {
	checkLen("DepthwiseBackward x", len(x), g.H*g.W*g.C)
	checkLen("DepthwiseBackward dout", len(dout), g.OH*g.OW*g.C)
	checkLen("DepthwiseBackward dw", len(dw), g.KH*g.KW*g.C)
	if dx != nil && useSIMD && g.C%8 == 0 && g.KH*g.KW <= maxRowTaps {
		checkLen("DepthwiseBackward dx", len(dx), g.H*g.W*g.C)
		depthwiseBackwardSIMD(g, x, w, dout, dx, dw)
		return
	}
	for oh := 0; oh < g.OH; oh++ {
		for ow := 0; ow < g.OW; ow++ {
			depthwiseBackwardAt(g, x, w, dout, dx, dw, oh, ow)
		}
	}
}

// depthwiseBackwardAt adds output position (oh, ow)'s part of
// [DepthwiseBackward].
func depthwiseBackwardAt(g ConvGeom, x, w, dout, dx, dw []float32, oh, ow int) {
	c := g.C
	d := dout[(oh*g.OW+ow)*c : (oh*g.OW+ow+1)*c]
	for kh := 0; kh < g.KH; kh++ {
		ih := oh*g.SH - g.PadTop + kh
		if ih < 0 || ih >= g.H {
			continue
		}
		for kw := 0; kw < g.KW; kw++ {
			iw := ow*g.SW - g.PadLeft + kw
			if iw < 0 || iw >= g.W {
				continue
			}
			xs := x[(ih*g.W+iw)*c : (ih*g.W+iw+1)*c]
			dws := dw[(kh*g.KW+kw)*c : (kh*g.KW+kw+1)*c]
			xs, dws = xs[:len(d)], dws[:len(d)]
			var ws, dxs []float32
			if dx != nil {
				ws = w[(kh*g.KW+kw)*c : (kh*g.KW+kw+1)*c]
				dxs = dx[(ih*g.W+iw)*c : (ih*g.W+iw+1)*c]
				ws, dxs = ws[:len(d)], dxs[:len(d)]
			}
			if useSIMD && c >= 8 {
				fmaAVX2(&dws[0], &d[0], &xs[0], c)
				if dx != nil {
					fmaAVX2(&dxs[0], &d[0], &ws[0], c)
				}
				continue
			}
			for ch, v := range d {
				dws[ch] += v * xs[ch] // out = x·w ⇒ ∂/∂w = x
			}
			if dx != nil {
				for ch, v := range d {
					dxs[ch] += v * ws[ch] // ∂/∂x = w
				}
			}
		}
	}
}
