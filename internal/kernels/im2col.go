package kernels

// ConvGeom is the geometry of a channels-last 2-D convolution or pooling
// window for one sample: input (H, W, C), kernel (KH, KW), strides
// (SH, SW), zero padding PadTop and PadLeft (bottom and right padding
// follow from OH and OW), output (OH, OW).
type ConvGeom struct {
	H, W, C         int
	KH, KW          int
	SH, SW          int
	PadTop, PadLeft int
	OH, OW          int
}

// ColSize returns the length of the im2col matrix, OH·OW·KH·KW·C.
func (g ConvGeom) ColSize() int { return g.OH * g.OW * g.KH * g.KW * g.C }

// Im2col writes the patches of x (H, W, C) into cols (OH·OW, KH·KW·C):
// row p = oh·OW + ow holds x[oh·SH − PadTop + kh][ow·SW − PadLeft + kw][c]
// at column (kh·KW + kw)·C + c, zero outside x. It panics on short slices.
func Im2col(g ConvGeom, x, cols []float32) {
	checkLen("Im2col x", len(x), g.H*g.W*g.C)
	checkLen("Im2col cols", len(cols), g.ColSize())
	if g.C == 1 && g.KW == 3 {
		im2col1x3(g, x, cols)
		return
	}
	rowLen := g.KH * g.KW * g.C
	for oh := 0; oh < g.OH; oh++ {
		for ow := 0; ow < g.OW; ow++ {
			row := cols[(oh*g.OW+ow)*rowLen : (oh*g.OW+ow+1)*rowLen]
			for kh := 0; kh < g.KH; kh++ {
				ih := oh*g.SH - g.PadTop + kh
				seg := row[kh*g.KW*g.C : (kh+1)*g.KW*g.C]
				if ih < 0 || ih >= g.H {
					clear(seg)
					continue
				}
				iw0 := ow*g.SW - g.PadLeft
				if iw0 >= 0 && iw0+g.KW <= g.W {
					copy(seg, x[(ih*g.W+iw0)*g.C:(ih*g.W+iw0+g.KW)*g.C])
					continue
				}
				for kw := 0; kw < g.KW; kw++ {
					iw := iw0 + kw
					dst := seg[kw*g.C : (kw+1)*g.C]
					if iw < 0 || iw >= g.W {
						clear(dst)
					} else {
						copy(dst, x[(ih*g.W+iw)*g.C:(ih*g.W+iw+1)*g.C])
					}
				}
			}
		}
	}
}

// im2col1x3 is Im2col for one input channel and kernels three wide (a
// first convolution on a spectrogram), where the general loop would spend
// a call to memmove on every three values.
func im2col1x3(g ConvGeom, x, cols []float32) {
	k := g.KH * 3
	for oh := 0; oh < g.OH; oh++ {
		for ow := 0; ow < g.OW; ow++ {
			row := cols[(oh*g.OW+ow)*k : (oh*g.OW+ow+1)*k]
			iw0 := ow*g.SW - g.PadLeft
			inside := iw0 >= 0 && iw0+3 <= g.W
			for kh := 0; kh < g.KH; kh++ {
				ih := oh*g.SH - g.PadTop + kh
				seg := row[kh*3 : kh*3+3 : kh*3+3]
				if ih < 0 || ih >= g.H {
					seg[0], seg[1], seg[2] = 0, 0, 0
					continue
				}
				xr := x[ih*g.W : (ih+1)*g.W]
				if inside {
					src := xr[iw0 : iw0+3 : iw0+3]
					seg[0], seg[1], seg[2] = src[0], src[1], src[2]
					continue
				}
				for kw := range 3 {
					v := float32(0)
					if iw := iw0 + kw; iw >= 0 && iw < g.W {
						v = xr[iw]
					}
					seg[kw] = v
				}
			}
		}
	}
}

// Col2im accumulates cols (OH·OW, KH·KW·C) back into dx (H, W, C), the
// adjoint of [Im2col]: dx += Im2colᵀ(cols). Padding positions are dropped.
// It panics on short slices.
func Col2im(g ConvGeom, cols, dx []float32) {
	checkLen("Col2im dx", len(dx), g.H*g.W*g.C)
	checkLen("Col2im cols", len(cols), g.ColSize())
	rowLen := g.KH * g.KW * g.C
	for oh := 0; oh < g.OH; oh++ {
		for ow := 0; ow < g.OW; ow++ {
			row := cols[(oh*g.OW+ow)*rowLen : (oh*g.OW+ow+1)*rowLen]
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
					src := row[(kh*g.KW+kw)*g.C : (kh*g.KW+kw+1)*g.C]
					dst := dx[(ih*g.W+iw)*g.C : (ih*g.W+iw+1)*g.C]
					dst = dst[:len(src)]
					for c, v := range src {
						dst[c] += v
					}
				}
			}
		}
	}
}
