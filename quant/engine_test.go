package quant

import (
	"reflect"
	"testing"
)

// TestKernelsAreIntegerOnly proves the engine's kernels take and return
// only integer data: no parameter or result of any kernel is (or contains)
// a floating-point type.
func TestKernelsAreIntegerOnly(t *testing.T) {
	kernels := map[string]any{
		"convInt8": convInt8, "depthwiseInt8": depthwiseInt8, "denseInt8": denseInt8,
		"poolInt8": poolInt8, "globalAvgPoolInt8": globalAvgPoolInt8, "requant": requant, "roundDiv": roundDiv,
		"MulQ31Round": MulQ31Round, "ShiftRightRound": ShiftRightRound,
		"Rescale": Rescale,
	}
	var hasFloat func(reflect.Type) bool
	hasFloat = func(t reflect.Type) bool {
		switch t.Kind() {
		case reflect.Float32, reflect.Float64, reflect.Complex64, reflect.Complex128:
			return true
		case reflect.Slice, reflect.Array, reflect.Pointer:
			return hasFloat(t.Elem())
		case reflect.Struct:
			for i := 0; i < t.NumField(); i++ {
				if hasFloat(t.Field(i).Type) {
					return true
				}
			}
		}
		return false
	}
	for name, k := range kernels {
		ft := reflect.TypeOf(k)
		for i := 0; i < ft.NumIn(); i++ {
			if hasFloat(ft.In(i)) {
				t.Errorf("%s: parameter %d is %v", name, i, ft.In(i))
			}
		}
		for i := 0; i < ft.NumOut(); i++ {
			if hasFloat(ft.Out(i)) {
				t.Errorf("%s: result %d is %v", name, i, ft.Out(i))
			}
		}
	}
}

func TestIntegerPoolingRounding(t *testing.T) {
	// Means rounded half away from zero: (1+2)/2 = 1.5 → 2, (−1−2)/2 → −2,
	// (1+1+1+2)/4 = 1.25 → 1.
	if roundDiv(3, 2) != 2 || roundDiv(-3, 2) != -2 || roundDiv(5, 4) != 1 || roundDiv(-5, 4) != -1 {
		t.Errorf("roundDiv: %d %d %d %d", roundDiv(3, 2), roundDiv(-3, 2), roundDiv(5, 4), roundDiv(-5, 4))
	}
	out := make([]int8, 2)
	globalAvgPoolInt8(2, 2, []int8{1, -1, 2, -2}, out)
	if out[0] != 2 || out[1] != -2 {
		t.Errorf("global average pool %v, want [2 -2]", out)
	}
}
