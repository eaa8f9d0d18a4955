// Package plots draws the PNG figures of pipit's commands with
// gonum.org/v1/plot: heat maps with a colour bar (log-mel matrices,
// confusion matrices) and line charts (training curves).
package plots

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"github.com/pipit-audio/pipit/internal/fsutil"
)

// Grid is a matrix to draw as a heat map: Values[r][c] is drawn at column c
// (x = X0 + c·DX) and row r (y = Y0 + r·DY).
type Grid struct {
	Values [][]float64
	X0, DX float64
	Y0, DY float64
}

// Dims, Z, X and Y implement plotter.GridXYZ.
func (g Grid) Dims() (c, r int) {
	if len(g.Values) == 0 {
		return 0, 0
	}
	return len(g.Values[0]), len(g.Values)
}

// Z implements plotter.GridXYZ.
func (g Grid) Z(c, r int) float64 { return g.Values[r][c] }

// X implements plotter.GridXYZ.
func (g Grid) X(c int) float64 { return g.X0 + float64(c)*g.DX }

// Y implements plotter.GridXYZ.
func (g Grid) Y(r int) float64 { return g.Y0 + float64(r)*g.DY }

// HeatMap describes one heat-map figure.
type HeatMap struct {
	Title, XLabel, YLabel, BarLabel string
	Grid                            Grid
	Width, Height                   vg.Length // whole figure; zero: 8 × 4 inches
	// XTicks and YTicks, if set, label every column and row by name.
	XTicks, YTicks []string
	// Annotate writes each cell's value (as an integer) in the cell.
	Annotate bool
}

// WritePNG draws h with a vertical colour bar on the right and writes the
// PNG to w. The colours span the finite values; NaN and infinite cells
// are drawn in the heat map's NaN colour. It returns an error for an
// empty grid or one without a finite value.
func (h HeatMap) WritePNG(w io.Writer) error {
	cols, rows := h.Grid.Dims()
	if cols == 0 || rows == 0 {
		return fmt.Errorf("plots: empty grid")
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, row := range h.Grid.Values {
		for _, v := range row {
			if !math.IsNaN(v) && !math.IsInf(v, 0) { // such cells are drawn in the NaN colour
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
	}
	if math.IsInf(lo, 1) {
		return fmt.Errorf("plots: no finite value to draw")
	}
	if !(hi > lo) {
		hi = lo + 1 // a constant matrix still gets a usable colour bar
	}
	width, height := h.Width, h.Height
	if width == 0 {
		width, height = 8*vg.Inch, 4*vg.Inch
	}
	pal := moreland.ExtendedBlackBody()
	pal.SetMin(lo)
	pal.SetMax(hi)
	hm := plotter.NewHeatMap(h.Grid, pal.Palette(255))
	hm.Min, hm.Max = lo, hi
	hm.Rasterized = cols*rows > 4096 // vector cells stay crisp for small matrices
	p := plot.New()
	p.Title.Text = h.Title
	p.X.Label.Text = h.XLabel
	p.Y.Label.Text = h.YLabel
	p.Add(hm)
	if h.Annotate {
		var xy plotter.XYLabels
		for r := 0; r < rows; r++ {
			for c := 0; c < cols; c++ {
				xy.XYs = append(xy.XYs, plotter.XY{X: h.Grid.X(c), Y: h.Grid.Y(r)})
				xy.Labels = append(xy.Labels, fmt.Sprintf("%.0f", h.Grid.Values[r][c]))
			}
		}
		labels, err := plotter.NewLabels(xy)
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		for i := range labels.TextStyle {
			labels.TextStyle[i].Color = color.RGBA{R: 60, G: 160, B: 255, A: 255}
			labels.TextStyle[i].XAlign = draw.XCenter
			labels.TextStyle[i].YAlign = draw.YCenter
		}
		p.Add(labels)
	}
	if len(h.XTicks) > 0 {
		var t plot.ConstantTicks
		for i, name := range h.XTicks {
			t = append(t, plot.Tick{Value: h.Grid.X(i), Label: name})
		}
		p.X.Tick.Marker = t
		p.X.Tick.Label.Rotation = math.Pi / 5
		p.X.Tick.Label.XAlign = draw.XRight
	}
	if len(h.YTicks) > 0 {
		var t plot.ConstantTicks
		for i, name := range h.YTicks {
			t = append(t, plot.Tick{Value: h.Grid.Y(i), Label: name})
		}
		p.Y.Tick.Marker = t
	}

	cb := plot.New()
	bar := &plotter.ColorBar{ColorMap: pal, Vertical: true}
	cb.Add(bar)
	cb.HideX()
	cb.Y.Padding = 0
	cb.Y.Label.Text = h.BarLabel
	cb.Title.Text = " " // keep the bar's top level with the heat map's

	img := vgimg.New(width, height)
	dc := draw.New(img)
	barW := vg.Length(1.1) * vg.Inch
	p.Draw(draw.Crop(dc, 0, -barW, 0, 0))
	cb.Draw(draw.Crop(dc, width-barW+vg.Length(0.2)*vg.Inch, 0, 0, 0))
	_, err := vgimg.PngCanvas{Canvas: img}.WriteTo(w)
	return err
}

// Series is one line of a line chart.
type Series struct {
	Name   string
	X, Y   []float64
	Dashed bool
}

// LineChart describes a figure of one or more lines.
type LineChart struct {
	Title, XLabel, YLabel string
	Series                []Series
	Width, Height         vg.Length // zero: 6 × 4 inches
}

// WritePNG draws c and writes the PNG to w.
func (c LineChart) WritePNG(w io.Writer) error {
	p := plot.New()
	p.Title.Text = c.Title
	p.X.Label.Text = c.XLabel
	p.Y.Label.Text = c.YLabel
	p.Add(plotter.NewGrid())
	for i, s := range c.Series {
		pts := make(plotter.XYs, len(s.X))
		for j := range s.X {
			pts[j].X, pts[j].Y = s.X[j], s.Y[j]
		}
		l, err := plotter.NewLine(pts)
		if err != nil {
			return fmt.Errorf("plots: series %q: %w", s.Name, err)
		}
		l.Color = plotutil.Color(i)
		l.Width = vg.Points(1.5)
		if s.Dashed {
			l.Dashes = []vg.Length{vg.Points(5), vg.Points(3)}
		}
		p.Add(l)
		p.Legend.Add(s.Name, l)
	}
	p.Legend.Top = true
	width, height := c.Width, c.Height
	if width == 0 {
		width, height = 6*vg.Inch, 4*vg.Inch
	}
	wt, err := p.WriterTo(width, height, "png")
	if err != nil {
		return err
	}
	_, err = wt.WriteTo(w)
	return err
}

// SavePNG writes a figure to path atomically.
func SavePNG(path string, fig interface{ WritePNG(io.Writer) error }) error {
	return fsutil.WriteWith(path, fig.WritePNG)
}
