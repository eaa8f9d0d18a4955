package quant

import (
	"fmt"
	"math"
)

// MulQ31Round multiplies two Q31 fixed-point numbers (int32 read as
// values in [−1, 1), value = raw/2^31) and rounds the product to Q31:
//
//	MulQ31Round(a, b) = ⌊(a·b + 2^30) / 2^31⌋
//
// that is, the high 32 bits of 2·a·b rounded to nearest with ties toward
// +∞. The single product that does not fit, (−2^31)·(−2^31) = +1, gives
// 2^31 − 1. This is the fixed-point multiply by M0 of Jacob et al. 2018
// (eqs. 5–6 and Appendix B); its rounding is that of the paper's
// reference code (google/gemmlowp, fixedpoint/fixedpoint.h), which
// computes it as a truncating division of a·b plus a sign-dependent
// nudge, as here.
func MulQ31Round(a, b int32) int32 {
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

// ShiftRightRound divides x by 2^exponent and rounds to nearest, ties
// away from zero:
//
//	ShiftRightRound(x, e) = sign(x)·⌊(|x| + 2^(e−1)) / 2^e⌋
//
// computed with an arithmetic right shift and a test of the bits shifted
// out. Jacob et al. 2018 (Appendix B) ask for a shift with "correct
// round-to-nearest behavior" and give −12/2^3 = −2; ties away from zero are
// the rule of the paper's reference code (google/gemmlowp,
// fixedpoint/fixedpoint.h). It panics unless 0 ≤ exponent ≤ 31 (a
// programmer error: shifts come from [EncodeRescale]).
func ShiftRightRound(x int32, exponent int) int32 {
	if exponent < 0 || exponent > 31 {
		panic(fmt.Sprintf("quant: ShiftRightRound: exponent %d outside 0..31", exponent))
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

// EncodeRescale represents a positive real multiplier M (the rescale
// S_in·S_w/S_out of Jacob et al. 2018, eq. 5) as
//
//	M ≈ m0·2^(−31)·2^(−shift),  m0 ∈ [2^30, 2^31)
//
// (eq. 6: M = 2^(−n)·M0, M0 ∈ [0.5, 1), m0 the int32 nearest to
// M0·2^31). The mantissa is computed in float64 with math.Frexp (exact),
// rounded half away from zero; when that rounds up to 2^31 it is halved
// and the shift decremented. shift may be negative (M ≥ 1: a left shift
// before the multiply). M outside [2^−40, 2^20] is an error: such a
// rescale means broken calibration.
func EncodeRescale(m float64) (m0 int32, shift int, err error) {
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

// Rescale applies an encoded multiplier to an accumulator as the integer
// pipeline does:
//
//	shift ≥ 0: Rescale(acc, m0, shift) = ShiftRightRound(MulQ31Round(acc, m0), shift)
//	shift < 0: Rescale(acc, m0, shift) = MulQ31Round(sat32(acc·2^(−shift)), m0)
//
// which approximates round(acc·m0·2^(−31)·2^(−shift)); sat32 clamps to
// the int32 range.
func Rescale(acc, m0 int32, shift int) int32 {
	if shift < 0 {
		v := int64(acc) << uint(-shift)
		if v > math.MaxInt32 {
			v = math.MaxInt32
		} else if v < math.MinInt32 {
			v = math.MinInt32
		}
		return MulQ31Round(int32(v), m0)
	}
	return ShiftRightRound(MulQ31Round(acc, m0), shift)
}
