package plots

import "fmt"

// Columns gathers the columns of a heat map one at a time (a frame's
// bands, a window's class probabilities) in bounded memory: it keeps at
// most Max columns, and when Max are full and another arrives,
// neighbouring pairs are merged into their mean. Each column of the
// result is thus the mean of Per consecutive inputs, Per a power of two
// (the last column of fewer); up to Max inputs are kept as they came.
type Columns struct {
	rows, max int
	per       int       // inputs per full column
	sum       []float64 // (columns, rows) sums
	cnt       []int     // inputs in each column
}

// NewColumns returns a Columns for inputs of rows values, keeping at most
// maxCols columns (at least 2).
func NewColumns(rows, maxCols int) *Columns {
	if rows < 1 || maxCols < 2 {
		panic(fmt.Sprintf("plots: NewColumns(%d, %d): want at least 1 row and 2 columns", rows, maxCols))
	}
	return &Columns{rows: rows, max: maxCols, per: 1}
}

// Add takes the next input column; it panics unless len(v) is the number
// of rows.
func (c *Columns) Add(v []float32) {
	if len(v) != c.rows {
		panic(fmt.Sprintf("plots: Columns.Add: %d values for %d rows", len(v), c.rows))
	}
	n := len(c.cnt)
	if n == 0 || c.cnt[n-1] == c.per {
		if n == c.max {
			c.halve()
			n = len(c.cnt)
		}
		if n == 0 || c.cnt[n-1] == c.per {
			c.sum = append(c.sum, make([]float64, c.rows)...)
			c.cnt = append(c.cnt, 0)
			n++
		}
	}
	s := c.sum[(n-1)*c.rows : n*c.rows]
	for r, x := range v {
		s[r] += float64(x)
	}
	c.cnt[n-1]++
}

// halve merges neighbouring pairs of the (full) columns and doubles Per.
func (c *Columns) halve() {
	n := len(c.cnt)
	m := (n + 1) / 2
	for j := 0; j < m; j++ {
		dst := c.sum[j*c.rows : (j+1)*c.rows]
		a := c.sum[2*j*c.rows : (2*j+1)*c.rows]
		cnt := c.cnt[2*j]
		if 2*j+1 < n {
			b := c.sum[(2*j+1)*c.rows : (2*j+2)*c.rows]
			for r := range dst {
				dst[r] = a[r] + b[r]
			}
			cnt += c.cnt[2*j+1]
		} else {
			copy(dst, a)
		}
		c.cnt[j] = cnt
	}
	c.sum, c.cnt = c.sum[:m*c.rows], c.cnt[:m]
	c.per *= 2
}

// Len returns the number of columns kept.
func (c *Columns) Len() int { return len(c.cnt) }

// Per returns the number of inputs in each column but the last.
func (c *Columns) Per() int { return c.per }

// Grid returns the columns as a heat-map grid, each the mean of its
// inputs: with input i at x = x0 + i·dx, column j is drawn at the centre
// of its inputs, x0 + (j·Per + (Per−1)/2)·dx, and row r at y0 + r·dy.
// While Per is 1 the grid holds the inputs as they came.
func (c *Columns) Grid(x0, dx, y0, dy float64) Grid {
	g := Grid{Values: make([][]float64, c.rows), X0: x0 + float64(c.per-1)/2*dx, DX: float64(c.per) * dx, Y0: y0, DY: dy}
	for r := range g.Values {
		g.Values[r] = make([]float64, len(c.cnt))
		for j, k := range c.cnt {
			g.Values[r][j] = c.sum[j*c.rows+r] / float64(k)
		}
	}
	return g
}
