package plots

import (
	"bytes"
	"image/png"
	"testing"
)

func TestLevelTimelinePNG(t *testing.T) {
	c := LevelTimeline{Title: "t", XLabel: "s", YLabel: "LAF", T: []float64{0, 1, 2, 3}, Level: []float64{-40, -20, -30, -45},
		Spans: []LevelSpan{{0.5, 2, "saw"}, {2.5, 3, "other"}}, Classes: []string{"saw", "alarm"}}
	var buf bytes.Buffer
	if err := c.WritePNG(&buf); err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(&buf)
	if err != nil {
		t.Fatalf("output is not a PNG: %v", err)
	}
	// 10 × 4.5 inches at vgimg's default 96 dpi.
	if b := img.Bounds(); b.Dx() != 960 || b.Dy() != 432 {
		t.Errorf("PNG is %v, want 960 × 432", b)
	}
	if err := (LevelTimeline{T: []float64{1}, Level: nil}).WritePNG(&buf); err == nil {
		t.Error("mismatched curve accepted")
	}
}
