package plots

import (
	"fmt"
	"image/color"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/plotutil"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// LevelSpan is a labelled stretch of time drawn under a level curve.
type LevelSpan struct {
	Start, End float64
	Label      string
}

// LevelTimeline is a level-over-time figure: one curve (T, Level) and,
// in a band under it, coloured spans (events) with their labels written
// on the wider ones, one colour per entry of Classes, and a legend.
type LevelTimeline struct {
	Title, XLabel, YLabel string
	T, Level              []float64
	Spans                 []LevelSpan
	Classes               []string  // legend order; spans of other labels are grey
	Width, Height         vg.Length // zero: 10 × 4.5 inches
}

// WritePNG draws c and writes the PNG to w. It returns an error when the
// curve is empty or its slices differ in length.
func (c LevelTimeline) WritePNG(w io.Writer) error {
	if len(c.T) == 0 || len(c.T) != len(c.Level) {
		return fmt.Errorf("plots: level curve of %d times and %d levels", len(c.T), len(c.Level))
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range c.Level {
		lo, hi = math.Min(lo, v), math.Max(hi, v)
	}
	if !(hi > lo) {
		hi = lo + 1
	}
	rng := hi - lo
	bandTop := lo - 0.06*rng
	bandBot := lo - 0.22*rng
	p := plot.New()
	p.Title.Text = c.Title
	p.X.Label.Text = c.XLabel
	p.Y.Label.Text = c.YLabel
	p.Add(plotter.NewGrid())
	colourOf := func(label string) color.Color {
		for i, name := range c.Classes {
			if name == label {
				return plotutil.Color(i)
			}
		}
		return color.Gray{Y: 160}
	}
	xmax := c.T[len(c.T)-1]
	var labels plotter.XYLabels
	for _, s := range c.Spans {
		poly, err := plotter.NewPolygon(plotter.XYs{{X: s.Start, Y: bandBot}, {X: s.End, Y: bandBot}, {X: s.End, Y: bandTop}, {X: s.Start, Y: bandTop}})
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		poly.Color = colourOf(s.Label)
		poly.LineStyle.Width = 0
		p.Add(poly)
		if s.End-s.Start > 0.03*xmax {
			labels.XYs = append(labels.XYs, plotter.XY{X: (s.Start + s.End) / 2, Y: bandBot - 0.02*rng})
			labels.Labels = append(labels.Labels, s.Label)
		}
	}
	pts := make(plotter.XYs, len(c.T))
	for i := range c.T {
		pts[i].X, pts[i].Y = c.T[i], c.Level[i]
	}
	line, err := plotter.NewLine(pts)
	if err != nil {
		return fmt.Errorf("plots: %w", err)
	}
	line.Color = color.Gray{Y: 30}
	line.Width = vg.Points(1)
	p.Add(line)
	p.Legend.Add(c.YLabel, line)
	if len(labels.Labels) > 0 {
		l, err := plotter.NewLabels(labels)
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		for i := range l.TextStyle {
			l.TextStyle[i].XAlign = draw.XCenter
			l.TextStyle[i].YAlign = draw.YTop
			l.TextStyle[i].Font.Size = vg.Points(7)
		}
		p.Add(l)
	}
	for _, name := range c.Classes {
		used := false
		for _, s := range c.Spans {
			used = used || s.Label == name
		}
		if !used {
			continue
		}
		sw, err := plotter.NewPolygon(plotter.XYs{{X: 0, Y: 0}, {X: 1, Y: 0}, {X: 1, Y: 1}})
		if err != nil {
			return fmt.Errorf("plots: %w", err)
		}
		sw.Color = colourOf(name)
		sw.LineStyle.Width = 0
		p.Legend.Add(name, sw)
	}
	p.Legend.Top = true
	p.Legend.Left = false
	p.Legend.TextStyle.Font.Size = vg.Points(8)
	p.Y.Min = bandBot - 0.08*rng
	p.Y.Max = hi + 0.25*rng // room for the legend
	p.X.Min = 0
	p.X.Max = xmax
	width, height := c.Width, c.Height
	if width == 0 {
		width, height = 10*vg.Inch, 4.5*vg.Inch
	}
	wt, err := p.WriterTo(width, height, "png")
	if err != nil {
		return err
	}
	_, err = wt.WriteTo(w)
	return err
}
