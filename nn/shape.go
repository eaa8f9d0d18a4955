package nn

import "fmt"

// Shape is the shape of one sample's activation, channels-last: H rows
// (mel bands for the input), W columns (frames), C channels. A batch of N
// samples is (N, H, W, C); see the package doc for the index formula.
type Shape struct{ H, W, C int }

// Size returns H·W·C.
func (s Shape) Size() int { return s.H * s.W * s.C }

// String formats s as HxWxC.
func (s Shape) String() string { return fmt.Sprintf("%dx%dx%d", s.H, s.W, s.C) }

func (s Shape) valid() bool { return s.H > 0 && s.W > 0 && s.C > 0 }
