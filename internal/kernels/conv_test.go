package kernels

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// TestConvAgainstIm2col checks the implicit-GEMM convolution and weight
// gradient on both paths against the naive sums over every geometry of
// the kernel tests (padding on all sides, strides 1–3, one to 32 channels,
// no interior column) and output widths that take the 16-, 8- and
// scalar-column paths.
func TestConvAgainstIm2col(t *testing.T) {
	withPaths(t, func(t *testing.T, _ bool) {
		rng := rand.New(rand.NewPCG(21, 22))
		for gi, g := range geoms {
			for _, oc := range []int{16, 8, 24, 3} {
				t.Run(fmt.Sprintf("geom%d/oc%d", gi, oc), func(t *testing.T) {
					k := g.KH * g.KW * g.C
					x := randSlice(rng, g.H*g.W*g.C)
					wT := randSlice(rng, k*oc)
					cols := make([]float32, g.ColSize())
					scratch := make([]float32, k*oc)
					pos := g.OH * g.OW
					want := make([]float64, pos*oc)
					for oh := 0; oh < g.OH; oh++ {
						for ow := 0; ow < g.OW; ow++ {
							for o := 0; o < oc; o++ {
								var s float64
								for kh := 0; kh < g.KH; kh++ {
									for kw := 0; kw < g.KW; kw++ {
										for c := 0; c < g.C; c++ {
											xv := at(g, x, oh*g.SH-g.PadTop+kh, ow*g.SW-g.PadLeft+kw, c)
											s += float64(xv) * float64(wT[((kh*g.KW+kw)*g.C+c)*oc+o])
										}
									}
								}
								want[(oh*g.OW+ow)*oc+o] = s
							}
						}
					}
					for _, add := range []bool{false, true} {
						out := randSlice(rng, pos*oc)
						before := append([]float32(nil), out...)
						w := make([]float32, oc*k)
						Transpose(w, wT, k, oc)
						ConvForward(g, oc, x, w, wT, out, cols, add)
						for i, v := range out {
							w := want[i]
							if add {
								w += float64(before[i])
							}
							if !near(v, w) {
								t.Fatalf("ConvForward add=%v: [%d] = %g, want %g", add, i, v, w)
							}
						}
					}
					dout := randSlice(rng, pos*oc)
					// input gradient: the adjoint, <dout, conv(x')> = <ConvInputGrad(dout), x'>
					// checked entry by entry against the naive scatter
					w := make([]float32, oc*k)
					Transpose(w, wT, k, oc)
					dx := randSlice(rng, len(x))
					dx0 := append([]float32(nil), dx...)
					ConvInputGrad(g, oc, w, dout, dx, make([]float32, g.ColSize()))
					wantDx := make([]float64, len(x))
					for i, v := range dx0 {
						wantDx[i] = float64(v)
					}
					for oh := 0; oh < g.OH; oh++ {
						for ow := 0; ow < g.OW; ow++ {
							for kh := 0; kh < g.KH; kh++ {
								for kw := 0; kw < g.KW; kw++ {
									ih, iw := oh*g.SH-g.PadTop+kh, ow*g.SW-g.PadLeft+kw
									if ih < 0 || ih >= g.H || iw < 0 || iw >= g.W {
										continue
									}
									for c := 0; c < g.C; c++ {
										for o := 0; o < oc; o++ {
											wantDx[(ih*g.W+iw)*g.C+c] += float64(dout[(oh*g.OW+ow)*oc+o]) * float64(w[o*k+(kh*g.KW+kw)*g.C+c])
										}
									}
								}
							}
						}
					}
					for i := range dx {
						if !near(dx[i], wantDx[i]) {
							t.Fatalf("ConvInputGrad: dx[%d] = %g, want %g", i, dx[i], wantDx[i])
						}
					}
					dw := randSlice(rng, oc*k)
					dw0 := append([]float32(nil), dw...)
					ConvWeightGrad(g, oc, x, dout, dw, cols, scratch)
					for o := 0; o < oc; o++ {
						for kh := 0; kh < g.KH; kh++ {
							for kw := 0; kw < g.KW; kw++ {
								for c := 0; c < g.C; c++ {
									q := (kh*g.KW+kw)*g.C + c
									s := float64(dw0[o*k+q])
									for oh := 0; oh < g.OH; oh++ {
										for ow := 0; ow < g.OW; ow++ {
											s += float64(dout[(oh*g.OW+ow)*oc+o]) * float64(at(g, x, oh*g.SH-g.PadTop+kh, ow*g.SW-g.PadLeft+kw, c))
										}
									}
									if !near(dw[o*k+q], s) {
										t.Fatalf("ConvWeightGrad: dw[%d][%d] = %g, want %g", o, q, dw[o*k+q], s)
									}
								}
							}
						}
					}
				})
			}
		}
	})
}
