package plots

import (
	"bytes"
	"image/png"
	"math"
	"testing"
)

func TestHeatMapPNG(t *testing.T) {
	g := Grid{Values: [][]float64{{0, 1, 2}, {3, 4, 5}}, DX: 0.016, DY: 1}
	var buf bytes.Buffer
	if err := (HeatMap{Title: "t", Grid: g}).WritePNG(&buf); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(&buf)
	if err != nil {
		t.Fatalf("output is not a PNG: %v", err)
	}
	// 8 × 4 inches at vgimg's default 96 dpi.
	if b := img.Bounds(); b.Dx() != 768 || b.Dy() != 384 {
		t.Errorf("PNG is %v, want 768×384", b)
	}
	buf.Reset()
	if err := (HeatMap{Grid: Grid{Values: [][]float64{{7, 7}}}}).WritePNG(&buf); err != nil {
		t.Errorf("constant grid: %v", err)
	}
	if err := (HeatMap{}).WritePNG(&buf); err == nil {
		t.Error("empty grid gave no error")
	}
	// NaN and infinite cells (a model gone wrong) are drawn, not a panic
	// of the palette; a grid with nothing finite is an error.
	nan, inf := math.NaN(), math.Inf(1)
	if err := (HeatMap{Grid: Grid{Values: [][]float64{{nan, 1, inf}, {0, -inf, 2}}, DX: 1, DY: 1}}).WritePNG(&buf); err != nil {
		t.Errorf("grid with NaN and infinite cells: %v", err)
	}
	if err := (HeatMap{Grid: Grid{Values: [][]float64{{nan, inf}}, DX: 1, DY: 1}}).WritePNG(&buf); err == nil {
		t.Error("grid without a finite value gave no error")
	}
}

func TestLineChartPNG(t *testing.T) {
	var buf bytes.Buffer
	c := LineChart{Title: "loss", Series: []Series{{Name: "train", X: []float64{1, 2, 3}, Y: []float64{1, 0.5, 0.2}}, {Name: "val", X: []float64{1, 2, 3}, Y: []float64{1.1, 0.7, 0.4}}}}
	if err := c.WritePNG(&buf); err != nil {
		t.Fatal(err)
	}
	if _, err := png.Decode(&buf); err != nil {
		t.Fatalf("output is not a PNG: %v", err)
	}
}
