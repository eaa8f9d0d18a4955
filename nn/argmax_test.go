package nn

import "testing"

func TestArgmax(t *testing.T) {
	for _, c := range []struct {
		v    []float32
		want int
	}{
		{nil, -1},
		{[]float32{3}, 0},
		{[]float32{-5, -2, -9}, 1}, // all negative
		{[]float32{1, 4, 4, 0}, 1}, // ties: the first
	} {
		if got := Argmax(c.v); got != c.want {
			t.Errorf("Argmax(%v) = %d, want %d", c.v, got, c.want)
		}
	}
	if got := Argmax([]int8{-128, 127, -1, 127}); got != 1 {
		t.Errorf("Argmax(int8) = %d, want 1", got)
	}
}
