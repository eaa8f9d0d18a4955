package quant

import (
	"fmt"
	"math"
	"sort"
)

// Calibration methods: how an activation range is chosen from the values seen.
const (
	MethodMinMax     = "minmax"     // the observed minimum and maximum
	MethodPercentile = "percentile" // the 0.01 % and 99.99 % quantiles (Percentile)
	MethodMSE        = "mse"        // the clipping of [min, max] that minimises quantisation MSE
	MethodAuto       = "auto"       // try all three and keep the best on the calibration set
)

// Percentile is the upper quantile MethodPercentile keeps (the lower one is
// 100 − Percentile).
const Percentile = 99.99

// maxObserved bounds the values an observer keeps per tensor; beyond it
// every k-th value is kept (a deterministic subsample).
const maxObserved = 1 << 20

// observer collects values of one tensor over the calibration set.
type observer struct {
	lo, hi float64
	vals   []float32
	seen   int
}

func newObserver() *observer { return &observer{lo: math.Inf(1), hi: math.Inf(-1)} }

func (o *observer) add(x []float32) {
	for _, v := range x {
		f := float64(v)
		o.lo, o.hi = math.Min(o.lo, f), math.Max(o.hi, f)
		o.seen++
		if len(o.vals) < maxObserved {
			o.vals = append(o.vals, v)
		} else if o.seen%8 == 0 {
			o.vals[(o.seen/8)%maxObserved] = v
		}
	}
}

// rangeFor returns the range [a, b] the method chooses.
func (o *observer) rangeFor(method string) (float64, float64, error) {
	if o.seen == 0 || math.IsInf(o.lo, 0) || math.IsNaN(o.lo) || math.IsNaN(o.hi) || math.IsInf(o.hi, 0) {
		return 0, 0, fmt.Errorf("quant: no finite calibration values")
	}
	switch method {
	case MethodMinMax:
		return o.lo, o.hi, nil
	case MethodPercentile:
		s := append([]float32(nil), o.vals...)
		sort.Slice(s, func(i, j int) bool { return s[i] < s[j] })
		at := func(p float64) float64 { return float64(s[int(math.Round(p/100*float64(len(s)-1)))]) }
		return at(100 - Percentile), at(Percentile), nil
	case MethodMSE:
		// Search a grid of clippings [α·lo, α·hi] (0 stays inside), keeping
		// the one with the least mean squared quantisation error on the
		// observed values (a subsample of at most 65536).
		step := max(1, len(o.vals)/65536)
		bestA, bestErr := 1.0, math.Inf(1)
		for k := 0; k <= 40; k++ {
			a := 0.2 + 0.8*float64(k)/40
			p := activationParams(a*o.lo, a*o.hi, false)
			var e float64
			for i := 0; i < len(o.vals); i += step {
				v := float64(o.vals[i])
				d := v - p.dequant(p.quant(v))
				e += d * d
			}
			if e < bestErr {
				bestA, bestErr = a, e
			}
		}
		return bestA * o.lo, bestA * o.hi, nil
	}
	return 0, 0, fmt.Errorf("quant: unknown calibration method %q", method)
}

// QParams are the affine parameters of an int8 tensor:
// real = Scale·(q − ZeroPoint), q in [−128, 127].
type QParams struct {
	Scale     float64 `json:"scale"`
	ZeroPoint int32   `json:"zero_point"`
}

// activationParams chooses int8 parameters covering [a, b] widened to
// include 0, with the zero point an exact integer (the range is nudged so
// 0 is representable, Jacob et al. 2018 §3 eq. 13); with pow2 the scale is
// rounded up to a power of two.
func activationParams(a, b float64, pow2 bool) QParams {
	a, b = math.Min(a, 0), math.Max(b, 0)
	if b-a < 1e-8 {
		b = a + 1e-8
	}
	scale := (b - a) / 255
	if pow2 {
		scale = math.Pow(2, math.Ceil(math.Log2(scale)))
	}
	zp := math.Round(-128 - a/scale)
	zp = math.Max(-128, math.Min(127, zp))
	return QParams{Scale: scale, ZeroPoint: int32(zp)}
}

func (p QParams) quant(v float64) int32 {
	q := math.Round(v/p.Scale) + float64(p.ZeroPoint)
	return int32(math.Max(-128, math.Min(127, q)))
}

func (p QParams) dequant(q int32) float64 { return p.Scale * float64(q-p.ZeroPoint) }

// QuantizeInput converts float values to int8 with p (round half away
// from zero, saturating), as a device does with its features.
func (p QParams) QuantizeInput(dst []int8, x []float32) {
	for i, v := range x {
		dst[i] = int8(p.quant(float64(v)))
	}
}

// Dequantize converts int8 values back to float.
func (p QParams) Dequantize(dst []float32, q []int8) {
	for i, v := range q {
		dst[i] = float32(p.dequant(int32(v)))
	}
}
