package plots

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestColumnsMeans: against the definition, for input counts below, at
// and far above the limit: the result has at most Max columns of the mean
// of Per consecutive inputs, Per the smallest power of two that fits them
// all, centred at the mean x of their inputs; below the limit the inputs
// come back unchanged.
func TestColumnsMeans(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	const rows = 3
	for _, c := range [][2]int{{8, 1}, {8, 7}, {8, 8}, {8, 9}, {8, 16}, {8, 17}, {8, 100}, {8, 1000}, {5, 6}, {5, 11}, {5, 999}} {
		maxCols, n := c[0], c[1]
		in := make([][]float32, n)
		cs := NewColumns(rows, maxCols)
		for i := range in {
			in[i] = []float32{rng.Float32(), rng.Float32() * 10, -rng.Float32()}
			cs.Add(in[i])
		}
		per := 1
		for (n+per-1)/per > maxCols {
			per *= 2
		}
		cols := (n + per - 1) / per
		x0, dx := 0.25, 0.5
		g := cs.Grid(x0, dx, 0, 1)
		if cs.Per() != per || cs.Len() != cols || len(g.Values[0]) != cols {
			t.Fatalf("%d inputs: %d columns of %d, want %d of %d", n, cs.Len(), cs.Per(), cols, per)
		}
		for j := 0; j < cols; j++ {
			lo, hi := j*per, min((j+1)*per, n)
			for r := 0; r < rows; r++ {
				var s float64
				for i := lo; i < hi; i++ {
					s += float64(in[i][r])
				}
				want := s / float64(hi-lo)
				if d := math.Abs(g.Values[r][j] - want); d > 1e-12 || (per == 1 && g.Values[r][j] != float64(in[j][r])) {
					t.Fatalf("%d inputs: column %d row %d is %v, mean of inputs %d..%d is %v", n, j, r, g.Values[r][j], lo, hi-1, want)
				}
			}
			if j < cols-1 || hi-lo == per {
				if wantX := x0 + (float64(lo)+float64(hi-1))/2*dx; math.Abs(g.X(j)-wantX) > 1e-12 {
					t.Fatalf("%d inputs: column %d at x = %v, its inputs' centre is %v", n, j, g.X(j), wantX)
				}
			}
		}
	}
}
