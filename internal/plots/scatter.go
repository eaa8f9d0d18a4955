package plots

import (
	"fmt"
	"image/color"
	"io"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Points is one set of markers of a scatter chart.
type Points struct {
	Name  string
	X, Y  []float64
	Color color.Color
	Shape draw.GlyphDrawer // nil: a circle
	Size  vg.Length        // zero: 3 points
}

// Scatter describes a figure of markers, optional connecting lines (Lines)
// and optional vertical reference lines (VLines, e.g. a budget).
type Scatter struct {
	Title, XLabel, YLabel string
	Points                []Points
	Lines                 []Series // drawn as lines, in plotutil colours
	VLines                []VLine
	LogX                  bool
	Width, Height         vg.Length // zero: 6 × 4 inches
}

// VLine is a vertical dashed line at X.
type VLine struct {
	Name string
	X    float64
}

// WritePNG draws s and writes the PNG to w.
func (s Scatter) WritePNG(w io.Writer) error {
	p := plot.New()
	p.Title.Text = s.Title
	p.X.Label.Text = s.XLabel
	p.Y.Label.Text = s.YLabel
	if s.LogX {
		p.X.Scale = plot.LogScale{}
		p.X.Tick.Marker = plot.LogTicks{Prec: -1}
	}
	p.Add(plotter.NewGrid())
	ylo, yhi := 1e300, -1e300
	for _, pt := range s.Points {
		for _, y := range pt.Y {
			ylo, yhi = min(ylo, y), max(yhi, y)
		}
	}
	for _, l := range s.Lines {
		pts := make(plotter.XYs, len(l.X))
		for j := range l.X {
			pts[j].X, pts[j].Y = l.X[j], l.Y[j]
		}
		if len(pts) < 2 {
			continue
		}
		line, err := plotter.NewLine(pts)
		if err != nil {
			return fmt.Errorf("plots: line %q: %w", l.Name, err)
		}
		line.Width = vg.Points(1.2)
		if l.Dashed {
			line.Dashes = []vg.Length{vg.Points(5), vg.Points(3)}
		}
		p.Add(line)
		p.Legend.Add(l.Name, line)
	}
	for _, v := range s.VLines {
		if ylo > yhi {
			ylo, yhi = 0, 1
		}
		pad := 0.05*(yhi-ylo) + 1e-3
		line, err := plotter.NewLine(plotter.XYs{{X: v.X, Y: ylo - pad}, {X: v.X, Y: yhi + pad}})
		if err != nil {
			return fmt.Errorf("plots: line %q: %w", v.Name, err)
		}
		line.Color = color.RGBA{R: 200, A: 255}
		line.Width = vg.Points(1.5)
		line.Dashes = []vg.Length{vg.Points(6), vg.Points(3)}
		p.Add(line)
		p.Legend.Add(v.Name, line)
	}
	for _, pt := range s.Points {
		if len(pt.X) == 0 {
			continue
		}
		xy := make(plotter.XYs, len(pt.X))
		for j := range pt.X {
			xy[j].X, xy[j].Y = pt.X[j], pt.Y[j]
		}
		sc, err := plotter.NewScatter(xy)
		if err != nil {
			return fmt.Errorf("plots: points %q: %w", pt.Name, err)
		}
		if pt.Color != nil {
			sc.GlyphStyle.Color = pt.Color
		}
		if pt.Shape != nil {
			sc.GlyphStyle.Shape = pt.Shape
		} else {
			sc.GlyphStyle.Shape = draw.CircleGlyph{}
		}
		sc.GlyphStyle.Radius = vg.Points(3)
		if pt.Size != 0 {
			sc.GlyphStyle.Radius = pt.Size
		}
		p.Add(sc)
		p.Legend.Add(pt.Name, sc)
	}
	p.Legend.Top = false
	p.Legend.Left = false
	width, height := s.Width, s.Height
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
