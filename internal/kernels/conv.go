package kernels

// ConvForward computes one sample of a channels-last convolution,
// out (OH·OW, oc) = patches(x) · wT, adding to out's values when add is
// set and overwriting them otherwise. x is (H, W, C), w (oc, KH·KW·C) the
// weights and wT (KH·KW·C, oc) their transpose. With AVX2 it reads the patches straight from x
// (implicit GEMM): for each output row and kernel row kh, the patches of
// the row's interior columns are rows KW·C long at a stride of SW·C in x,
// so one blocked product per (row, kh) covers them, and border columns
// take the kernel columns that fall inside x. The portable path builds
// the im2col matrix in cols (g.ColSize() values). It panics on short
// slices.
func ConvForward(g ConvGeom, oc int, x, w, wT, out, cols []float32, add bool) {
	k := g.KH * g.KW * g.C
	checkLen("ConvForward x", len(x), g.H*g.W*g.C)
	checkLen("ConvForward wT", len(wT), k*oc)
	checkLen("ConvForward out", len(out), g.OH*g.OW*oc)
	if !useSIMD || oc < 8 {
		Im2col(g, x, cols)
		GemmWeights(g.OH*g.OW, oc, k, cols, w, wT, out, add)
		return
	}
	seg := g.KW * g.C
	lo, hi := g.interiorCols()
	for oh := 0; oh < g.OH; oh++ {
		row := out[oh*g.OW*oc : (oh+1)*g.OW*oc]
		first := !add
		for kh := 0; kh < g.KH; kh++ {
			ih := oh*g.SH - g.PadTop + kh
			if ih < 0 || ih >= g.H {
				continue
			}
			if hi > lo {
				gemmBlocked(hi-lo, oc, seg, x[(ih*g.W+lo*g.SW-g.PadLeft)*g.C:], g.SW*g.C, 1,
					wT[kh*seg*oc:], oc, row[lo*oc:], oc, !first)
			}
			for ow := 0; ow < g.OW; ow++ {
				if ow == lo && hi > lo {
					ow = hi - 1
					continue
				}
				iw0 := ow*g.SW - g.PadLeft
				kw0, kw1 := max(0, -iw0), min(g.KW, g.W-iw0)
				if kw1 <= kw0 {
					if first {
						clear(row[ow*oc : (ow+1)*oc])
					}
					continue
				}
				gemmBlocked(1, oc, (kw1-kw0)*g.C, x[(ih*g.W+iw0+kw0)*g.C:], 0, 1,
					wT[(kh*g.KW+kw0)*g.C*oc:], oc, row[ow*oc:], oc, !first)
			}
			first = false
		}
		if first {
			clear(row)
		}
	}
}

// ConvWeightGrad adds one sample's weight gradient Σ_positions dout ⊗
// patch to dw (oc, KH·KW·C), dout being (OH·OW, oc). With AVX2 it reads
// the patches straight from x like [ConvForward]; when a kernel row's
// KW·C values are not a multiple of 8 (a first convolution, C = 1) it
// computes the transposed gradient into scratch (KH·KW·C·oc values) and
// adds it transposed. The portable path builds the im2col matrix in cols.
// It panics on short slices.
func ConvWeightGrad(g ConvGeom, oc int, x, dout, dw, cols, scratch []float32) {
	k := g.KH * g.KW * g.C
	checkLen("ConvWeightGrad x", len(x), g.H*g.W*g.C)
	checkLen("ConvWeightGrad dout", len(dout), g.OH*g.OW*oc)
	checkLen("ConvWeightGrad dw", len(dw), oc*k)
	seg := g.KW * g.C
	direct := seg%8 == 0
	if !useSIMD || (!direct && oc%8 != 0) {
		Im2col(g, x, cols)
		GemmTN(oc, k, g.OH*g.OW, dout, cols, dw)
		return
	}
	if !direct {
		checkLen("ConvWeightGrad scratch", len(scratch), k*oc)
		clear(scratch[:k*oc])
	}
	lo, hi := g.interiorCols()
	for oh := 0; oh < g.OH; oh++ {
		for kh := 0; kh < g.KH; kh++ {
			ih := oh*g.SH - g.PadTop + kh
			if ih < 0 || ih >= g.H {
				continue
			}
			if hi > lo {
				xs := x[(ih*g.W+lo*g.SW-g.PadLeft)*g.C:]
				ds := dout[(oh*g.OW+lo)*oc:]
				if direct {
					gemmBlocked(oc, seg, hi-lo, ds, 1, oc, xs, g.SW*g.C, dw[kh*seg:], k, true)
				} else {
					gemmBlocked(seg, oc, hi-lo, xs, 1, g.SW*g.C, ds, oc, scratch[kh*seg*oc:], oc, true)
				}
			}
			for ow := 0; ow < g.OW; ow++ {
				if ow == lo && hi > lo {
					ow = hi - 1
					continue
				}
				iw0 := ow*g.SW - g.PadLeft
				kw0, kw1 := max(0, -iw0), min(g.KW, g.W-iw0)
				if kw1 <= kw0 {
					continue
				}
				n := (kw1 - kw0) * g.C
				xs := x[(ih*g.W+iw0+kw0)*g.C:]
				ds := dout[(oh*g.OW+ow)*oc:]
				q := (kh*g.KW + kw0) * g.C
				if direct {
					gemmBlocked(oc, n, 1, ds, 1, oc, xs, 0, dw[q:], k, true)
				} else {
					gemmBlocked(n, oc, 1, xs, 1, 0, ds, oc, scratch[q*oc:], oc, true)
				}
			}
		}
	}
	if !direct {
		for o := 0; o < oc; o++ {
			dwo := dw[o*k : (o+1)*k]
			for q := range dwo {
				dwo[q] += scratch[q*oc+o]
			}
		}
	}
}

// ConvInputGrad adds one sample's input gradient to dx (H, W, C): the
// adjoint of [ConvForward] applied to dout (OH·OW, oc), with w the
// untransposed weights (oc, KH·KW·C). With AVX2, when a kernel row's
// KW·C values are a multiple of 8 and the patches of neighbouring output
// columns start at least 16 values apart (SW·C ≥ 16, so the rows one
// kernel call adds to never overlap), it adds dout·W straight into dx
// per output row and kernel row; otherwise it forms the patch gradients
// in dcols (g.ColSize() values) and scatters them with [Col2im]. It
// panics on short slices.
func ConvInputGrad(g ConvGeom, oc int, w, dout, dx, dcols []float32) {
	k := g.KH * g.KW * g.C
	checkLen("ConvInputGrad w", len(w), oc*k)
	checkLen("ConvInputGrad dout", len(dout), g.OH*g.OW*oc)
	checkLen("ConvInputGrad dx", len(dx), g.H*g.W*g.C)
	seg := g.KW * g.C
	if !useSIMD || seg%8 != 0 || g.SW*g.C < 16 {
		GemmNNSet(g.OH*g.OW, k, oc, dout, w, dcols)
		Col2im(g, dcols, dx)
		return
	}
	lo, hi := g.interiorCols()
	for oh := 0; oh < g.OH; oh++ {
		for kh := 0; kh < g.KH; kh++ {
			ih := oh*g.SH - g.PadTop + kh
			if ih < 0 || ih >= g.H {
				continue
			}
			if hi > lo {
				gemmBlocked(hi-lo, seg, oc, dout[(oh*g.OW+lo)*oc:], oc, 1, w[kh*seg:], k,
					dx[(ih*g.W+lo*g.SW-g.PadLeft)*g.C:], g.SW*g.C, true)
			}
			for ow := 0; ow < g.OW; ow++ {
				if ow == lo && hi > lo {
					ow = hi - 1
					continue
				}
				iw0 := ow*g.SW - g.PadLeft
				kw0, kw1 := max(0, -iw0), min(g.KW, g.W-iw0)
				if kw1 <= kw0 {
					continue
				}
				gemmBlocked(1, (kw1-kw0)*g.C, oc, dout[(oh*g.OW+ow)*oc:], 0, 1, w[(kh*g.KW+kw0)*g.C:], k,
					dx[(ih*g.W+iw0+kw0)*g.C:], 0, true)
			}
		}
	}
}
