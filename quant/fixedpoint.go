package quant

import (
	"fmt"
	"math"
)

// SaturatingRoundingDoublingHighMul returns the high 32 bits of 2·a·b,
// rounded to nearest with ties toward +∞, saturating the single overflow
// case a = b = −2^31 to 2^31 − 1: the definition of gemmlowp's
// fixedpoint.h function of the same name (the ARM NEON VQRDMULH
// instruction). Viewing int32 as fixed-point values in [−1, 1), it is
// their product.
func SaturatingRoundingDoublingHighMul(a, b int32) int32 {
	if a == math.MinInt32 && b == math.MinInt32 {
		return math.MaxInt32
	}
	ab := int64(a) * int64(b)
	nudge := int64(1 << 30)
	if ab < 0 {
		nudge = 1 - (1 << 30)
	}
	return int32((ab + nudge) / (1 << 31)) // Go's / truncates toward zero, as C++'s does
}

// RoundingDivideByPOT returns x / 2^exponent rounded to nearest, ties away
// from zero, computed with an arithmetic shift and a remainder test as in
// gemmlowp's fixedpoint.h RoundingDivideByPOT. It panics unless
// 0 ≤ exponent ≤ 31 (a programmer error: shifts come from
// [QuantizeMultiplier]).
func RoundingDivideByPOT(x int32, exponent int) int32 {
	if exponent < 0 || exponent > 31 {
		panic(fmt.Sprintf("quant: RoundingDivideByPOT: exponent %d outside 0..31", exponent))
	}
	mask := int32(uint32(1)<<exponent - 1)
	remainder := x & mask
	threshold := mask >> 1
	if x < 0 {
		threshold++
	}
	r := x >> exponent
	if remainder > threshold {
		r++
	}
	return r
}

// QuantizeMultiplier represents a positive real multiplier M as
// M ≈ m0·2^(−31)·2^(−shift) with m0 in [2^30, 2^31) (Jacob et al. 2018,
// eq. 6: M = 2^(−n)·M0, M0 ∈ [0.5, 1)). The mantissa is the int32 nearest
// to M0·2^31, computed in float64 with math.Frexp (exact), rounded half
// away from zero; when that rounds up to 2^31 it is halved and the shift
// decremented. shift may be negative (M ≥ 1: a left shift before the
// multiply). M outside [2^−40, 2^20] is an error: such a rescale means
// broken calibration.
func QuantizeMultiplier(m float64) (m0 int32, shift int, err error) {
	if !(m >= 0x1p-40 && m <= 0x1p20) {
		return 0, 0, fmt.Errorf("quant: multiplier %g outside [2^-40, 2^20]", m)
	}
	frac, exp := math.Frexp(m) // m = frac·2^exp, frac in [0.5, 1)
	q := int64(math.Round(frac * (1 << 31)))
	if q == 1<<31 {
		q /= 2
		exp++
	}
	return int32(q), -exp, nil
}

// MultiplyByQuantizedMultiplier computes round(acc·m0·2^(−31)·2^(−shift))
// as the integer pipeline does: for shift < 0 a saturating left shift of
// acc by −shift first, then [SaturatingRoundingDoublingHighMul] with m0,
// then [RoundingDivideByPOT] by shift (if positive).
func MultiplyByQuantizedMultiplier(acc, m0 int32, shift int) int32 {
	if shift < 0 {
		v := int64(acc) << uint(-shift)
		if v > math.MaxInt32 {
			v = math.MaxInt32
		} else if v < math.MinInt32 {
			v = math.MinInt32
		}
		return SaturatingRoundingDoublingHighMul(int32(v), m0)
	}
	return RoundingDivideByPOT(SaturatingRoundingDoublingHighMul(acc, m0), shift)
}
