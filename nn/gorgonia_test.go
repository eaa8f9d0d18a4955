package nn

import (
	"math"
	"math/rand/v2"
	"testing"

	G "gorgonia.org/gorgonia"
	"gorgonia.org/tensor"
)

// Gorgonia's autodiff (gorgonia.org/gorgonia v0.9.18, float64, NCHW) is an
// independent oracle for the forward and backward passes of convolution,
// dense and pooling layers: the scalar Σ out·r is built as a graph, and
// G.Grad gives its gradient with respect to the input and the weights.

// nhwcToNCHW converts (N, H, W, C) data to (N, C, H, W) float64.
func nhwcToNCHW(x []float32, n int, s Shape) []float64 {
	out := make([]float64, len(x))
	for i := 0; i < n; i++ {
		for h := 0; h < s.H; h++ {
			for w := 0; w < s.W; w++ {
				for c := 0; c < s.C; c++ {
					out[((i*s.C+c)*s.H+h)*s.W+w] = float64(x[((i*s.H+h)*s.W+w)*s.C+c])
				}
			}
		}
	}
	return out
}

type oracleCase struct {
	name string
	in   Shape
	n    int
	// build returns pipit's layer and the gorgonia node computed from xn
	// (and the pipit-layout weight tensors' gorgonia nodes via wnodes).
	layer func() Layer
	graph func(g *G.ExprGraph, x *G.Node, l Layer) (out *G.Node, weights []*G.Node)
	// toPipit maps gorgonia's weight gradient (index k) back to pipit's layout
	toPipit func(l Layer, k int, grad []float64) []float64
}

func TestLayersAgainstGorgonia(t *testing.T) {
	cases := []oracleCase{
		{
			name: "conv 3x3 stride 2 pad 1", in: Shape{7, 9, 3}, n: 2,
			layer: func() Layer {
				return NewConv2D(Conv2DConfig{Out: 4, KH: 3, KW: 3, SH: 2, SW: 2, Pad: Padding{Mode: PadExplicit, Top: 1, Bottom: 1, Left: 1, Right: 1}})
			},
			graph: func(g *G.ExprGraph, x *G.Node, l Layer) (*G.Node, []*G.Node) {
				c := l.(*Conv2D)
				w := G.NewTensor(g, tensor.Float64, 4, G.WithShape(4, 3, 3, 3), G.WithName("w"),
					G.WithValue(tensor.New(tensor.WithShape(4, 3, 3, 3), tensor.WithBacking(ohwiToOIHW(c.Weight, 4, 3, 3, 3)))))
				y := G.Must(G.Conv2d(x, w, tensor.Shape{3, 3}, []int{1, 1}, []int{2, 2}, []int{1, 1}))
				return y, []*G.Node{w}
			},
			toPipit: func(l Layer, _ int, grad []float64) []float64 { return oihwToOHWI(grad, 4, 3, 3, 3) },
		},
		{
			name: "conv 3x2 stride 1x2 valid", in: Shape{6, 8, 2}, n: 3,
			layer: func() Layer {
				return NewConv2D(Conv2DConfig{Out: 3, KH: 3, KW: 2, SH: 1, SW: 2, Pad: Padding{Mode: PadValid}})
			},
			graph: func(g *G.ExprGraph, x *G.Node, l Layer) (*G.Node, []*G.Node) {
				c := l.(*Conv2D)
				w := G.NewTensor(g, tensor.Float64, 4, G.WithShape(3, 2, 3, 2), G.WithName("w"),
					G.WithValue(tensor.New(tensor.WithShape(3, 2, 3, 2), tensor.WithBacking(ohwiToOIHW(c.Weight, 3, 3, 2, 2)))))
				y := G.Must(G.Conv2d(x, w, tensor.Shape{3, 2}, []int{0, 0}, []int{1, 2}, []int{1, 1}))
				return y, []*G.Node{w}
			},
			toPipit: func(l Layer, _ int, grad []float64) []float64 { return oihwToOHWI(grad, 3, 3, 2, 2) },
		},
		{
			name: "dense", in: Shape{1, 1, 6}, n: 4,
			layer: func() Layer { return NewDense(5) },
			graph: func(g *G.ExprGraph, x *G.Node, l Layer) (*G.Node, []*G.Node) {
				d := l.(*Dense)
				wt := make([]float64, 6*5) // (In, Out) = Weightᵀ
				for o := 0; o < 5; o++ {
					for i := 0; i < 6; i++ {
						wt[i*5+o] = float64(d.Weight[o*6+i])
					}
				}
				w := G.NewMatrix(g, tensor.Float64, G.WithShape(6, 5), G.WithName("w"), G.WithValue(tensor.New(tensor.WithShape(6, 5), tensor.WithBacking(wt))))
				x2 := G.Must(G.Reshape(x, tensor.Shape{4, 6}))
				y := G.Must(G.Mul(x2, w))
				return y, []*G.Node{w}
			},
			toPipit: func(l Layer, _ int, grad []float64) []float64 {
				out := make([]float64, 30)
				for o := 0; o < 5; o++ {
					for i := 0; i < 6; i++ {
						out[o*6+i] = grad[i*5+o]
					}
				}
				return out
			},
		},
		{
			name: "maxpool 2x2 stride 2", in: Shape{6, 8, 3}, n: 2,
			layer: func() Layer { return NewMaxPool(2, 2, 2, 2, Padding{Mode: PadValid}) },
			graph: func(g *G.ExprGraph, x *G.Node, _ Layer) (*G.Node, []*G.Node) {
				return G.Must(G.MaxPool2D(x, tensor.Shape{2, 2}, []int{0, 0}, []int{2, 2})), nil
			},
		},
		{
			name: "maxpool 3x3 stride 2", in: Shape{7, 7, 2}, n: 2,
			layer: func() Layer { return NewMaxPool(3, 3, 2, 2, Padding{Mode: PadValid}) },
			graph: func(g *G.ExprGraph, x *G.Node, _ Layer) (*G.Node, []*G.Node) {
				return G.Must(G.MaxPool2D(x, tensor.Shape{3, 3}, []int{0, 0}, []int{2, 2})), nil
			},
		},
		{
			name: "global average pool", in: Shape{4, 5, 3}, n: 2,
			layer: func() Layer { return NewGlobalAvgPool() },
			graph: func(g *G.ExprGraph, x *G.Node, _ Layer) (*G.Node, []*G.Node) {
				return G.Must(G.Mean(G.Must(G.Mean(x, 3)), 2)), nil // (N, C); gorgonia's GlobalAveragePool2D has no gradient
			},
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) { runOracle(t, c) })
	}
}

func runOracle(t *testing.T, c oracleCase) {
	const tol = 1e-4 // float32 pipit against float64 gorgonia, sums of < 100 terms
	l := c.layer()
	net, err := New(c.in, []Layer{l}, 3)
	if err != nil {
		t.Fatal(err)
	}
	defer net.Close()
	rng := rand.New(rand.NewPCG(5, 6))
	x := make([]float32, c.n*c.in.Size())
	for i := range x {
		x[i] = float32(rng.NormFloat64())
	}
	out := net.Shapes[0]
	r := make([]float32, c.n*out.Size())
	for i := range r {
		r[i] = float32(rng.NormFloat64())
	}
	// pipit
	net.Plan(c.n)
	y := make([]float32, len(r))
	l.forward(&net.pass, y, x, c.n)
	dx := make([]float32, len(x))
	net.Params.ZeroGrad()
	l.backward(&net.pass, dx, r, x, y, c.n)

	// gorgonia
	g := G.NewGraph()
	xn := G.NewTensor(g, tensor.Float64, 4, G.WithShape(c.n, c.in.C, c.in.H, c.in.W), G.WithName("x"),
		G.WithValue(tensor.New(tensor.WithShape(c.n, c.in.C, c.in.H, c.in.W), tensor.WithBacking(nhwcToNCHW(x, c.n, c.in)))))
	yn, weights := c.graph(g, xn, l)
	var rShape tensor.Shape = yn.Shape().Clone()
	var rData []float64
	if len(rShape) == 4 {
		rData = nhwcToNCHW(r, c.n, out)
	} else {
		rData = make([]float64, len(r))
		for i, v := range r {
			rData[i] = float64(v)
		}
	}
	rn := G.NewTensor(g, tensor.Float64, len(rShape), G.WithShape(rShape...), G.WithName("r"), G.WithValue(tensor.New(tensor.WithShape(rShape...), tensor.WithBacking(rData))))
	cost := G.Must(G.Sum(G.Must(G.HadamardProd(yn, rn))))
	wrt := append([]*G.Node{xn}, weights...)
	grads, err := G.Grad(cost, wrt...)
	if err != nil {
		t.Fatal(err)
	}
	var yv G.Value
	G.Read(yn, &yv)
	vm := G.NewTapeMachine(g)
	defer vm.Close()
	if err := vm.RunAll(); err != nil {
		t.Fatal(err)
	}
	// forward
	gy := yv.Data().([]float64)
	var want []float64
	if len(rShape) == 4 {
		want = nhwcToNCHW(y, c.n, out)
	} else {
		want = make([]float64, len(y))
		for i, v := range y {
			want[i] = float64(v)
		}
	}
	compare(t, "forward", want, gy, tol)
	// input gradient
	compare(t, "dx", nhwcToNCHW(dx, c.n, c.in), grads[0].Value().Data().([]float64), tol)
	// weight gradients
	for k := range weights {
		gw := c.toPipit(l, k, grads[k+1].Value().Data().([]float64))
		e := net.Params.Entries[k]
		mine := make([]float64, e.Size)
		for i := range mine {
			mine[i] = float64(net.Params.Grad[e.Offset+i])
		}
		compare(t, "d"+e.Name, mine, gw, tol)
	}
}

func compare(t *testing.T, what string, got, want []float64, tol float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d values, gorgonia %d", what, len(got), len(want))
	}
	for i := range got {
		if math.Abs(got[i]-want[i]) > tol*(1+math.Abs(want[i])) {
			t.Fatalf("%s[%d] = %.6g, gorgonia %.6g", what, i, got[i], want[i])
		}
	}
}

// ohwiToOIHW converts pipit's (OutC, KH, KW, InC) conv weight to gorgonia's
// (OutC, InC, KH, KW).
func ohwiToOIHW(w []float32, o, kh, kw, in int) []float64 {
	out := make([]float64, len(w))
	for a := 0; a < o; a++ {
		for h := 0; h < kh; h++ {
			for x := 0; x < kw; x++ {
				for c := 0; c < in; c++ {
					out[((a*in+c)*kh+h)*kw+x] = float64(w[((a*kh+h)*kw+x)*in+c])
				}
			}
		}
	}
	return out
}

func oihwToOHWI(w []float64, o, kh, kw, in int) []float64 {
	out := make([]float64, len(w))
	for a := 0; a < o; a++ {
		for h := 0; h < kh; h++ {
			for x := 0; x < kw; x++ {
				for c := 0; c < in; c++ {
					out[((a*kh+h)*kw+x)*in+c] = w[((a*in+c)*kh+h)*kw+x]
				}
			}
		}
	}
	return out
}
