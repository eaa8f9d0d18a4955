package quant

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"
)

func TestFixedPointWorkedExamples(t *testing.T) {
	// Worked by hand from the definition of the rounding high multiply in
	// google/gemmlowp fixedpoint/fixedpoint.h (the reference code of
	// Jacob et al. 2018): MulQ31Round(a, b) = ⌊(a·b + 2^30)/2^31⌋ (ties
	// toward +∞), saturating (−2^31)·(−2^31).
	mul := []struct{ a, b, want int32 }{
		{math.MinInt32, math.MinInt32, math.MaxInt32}, // saturated
		{math.MinInt32, math.MaxInt32, -2147483647},
		{math.MaxInt32, math.MaxInt32, 2147483646},
		{1 << 30, 1 << 30, 1 << 29}, // 0.5·0.5 = 0.25
		{32768, 32768, 1},           // 2^30/2^31 = 0.5 → 1 (tie toward +∞)
		{-32768, 32768, 0},          // −0.5 → 0
		{-98304, 32768, -1},         // −1.5 → −1
		{98304, 32768, 2},           // 1.5 → 2
		{1, 1, 0},                   // 4.66e−10
		{1000, 1288490189, 600},     // 1000·0.6 = 600.0000000931
	}
	for _, c := range mul {
		if got := MulQ31Round(c.a, c.b); got != c.want {
			t.Errorf("MulQ31Round(%d, %d) = %d, want %d", c.a, c.b, got, c.want)
		}
	}
	// ShiftRightRound: round half away from zero (the rule of the same
	// gemmlowp file's rounding right shift, which its test
	// test/test_fixedpoint.cc checks against std::round(x / 2^s)). ShiftRightRound(−12, 3): −12 >> 3 = −2,
	// remainder −12 & 7 = 4, threshold 3 + 1 = 4, 4 > 4 false → −2
	// (Jacob et al. 2018 App. B: −12/2^3 "should be −2").
	shr := []struct {
		x    int32
		e    int
		want int32
	}{
		{-12, 3, -2}, {12, 3, 2}, {-11, 3, -1}, {-13, 3, -2},
		{5, 1, 3}, {-5, 1, -3}, {601, 1, 301}, {-601, 1, -301},
		{12345, 0, 12345}, {math.MinInt32, 31, -1}, {math.MaxInt32, 31, 1}, {math.MaxInt32, 1, 1073741824},
	}
	for _, c := range shr {
		if got := ShiftRightRound(c.x, c.e); got != c.want {
			t.Errorf("ShiftRightRound(%d, %d) = %d, want %d", c.x, c.e, got, c.want)
		}
	}
}

func TestEncodeRescaleWorkedExamples(t *testing.T) {
	// Mantissa and shift of Jacob et al. 2018 eq. 6 (M = 2^−n·M0,
	// M0 ∈ [0.5, 1), m0 = round(2^31·M0)), worked by hand in float64 for
	// each M below; they agree with the double-precision version of the
	// multiplier helper in google/gemmlowp doc/quantization_example.cc.
	// With eq. 5: M = 0.02·0.05/0.1 = 0.01 = 0.64·2^−6 →
	// (round(0.64·2^31) = 1374389535, 6).
	cases := []struct {
		m     float64
		q     int32
		shift int
	}{
		{0.3, 1288490189, 1}, {0.1, 1717986918, 3}, {1.0 / 3, 1431655765, 1},
		{0.5, 1073741824, 0}, {0.75, 1610612736, 0}, {1.0 / 128, 1073741824, 6},
		{1e-4, 1759218604, 13}, {0.999999, 2147481501, 0}, {0.99999999, 2147483627, 0},
		{0.02 * 0.05 / 0.1, 1374389535, 6},
		// beyond the table: M ≥ 1 gives a left shift
		{3.0, 1610612736, -2},
		// 0.9999999999 rounds to 2^31: halved, shift −1 (gemmlowp's
		// helper asserts s ≥ 0 and rejects it; pipit represents it).
		{0.9999999999, 1 << 30, -1},
	}
	for _, c := range cases {
		q, s, err := EncodeRescale(c.m)
		if err != nil || q != c.q || s != c.shift {
			t.Errorf("EncodeRescale(%g) = (%d, %d, %v), want (%d, %d)", c.m, q, s, err, c.q, c.shift)
		}
	}
	// Worked by hand from eqs. 5–6 of Jacob et al. 2018 and the two
	// definitions above: acc·0.01 requantised with Z_y = −128:
	// 12345 → 7901 → −5; −12345 → −251 (saturates to −128 later);
	// 50 → 32 → −127; −50 → −32 → −129 (half away from zero in the shift).
	q, s, _ := EncodeRescale(0.01)
	for _, c := range []struct{ acc, high, out int32 }{{12345, 7901, -5}, {-12345, -7901, -251}, {50, 32, -127}, {-50, -32, -129}} {
		if got := MulQ31Round(c.acc, q); got != c.high {
			t.Errorf("MulQ31Round(%d, M0) = %d, want %d", c.acc, got, c.high)
		}
		if got := Rescale(c.acc, q, s) - 128; got != c.out {
			t.Errorf("requantise(%d) = %d, want %d", c.acc, got, c.out)
		}
	}
	for _, bad := range []float64{0, -1, math.NaN(), math.Inf(1), 1e-20, 1e9} {
		if _, _, err := EncodeRescale(bad); err == nil {
			t.Errorf("EncodeRescale(%g) gave no error", bad)
		}
	}
}

// TestFixedPointAgainstBigInt checks both helpers on random and edge inputs
// against exact rational arithmetic (math/big): MulQ31Round against
// floor((a·b + 2^30) / 2^31), ShiftRightRound against round-half-away(x / 2^e).
func TestFixedPointAgainstBigInt(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	edges := []int32{0, 1, -1, 2, -2, math.MaxInt32, math.MinInt32, math.MaxInt32 - 1, math.MinInt32 + 1, 1 << 30, -(1 << 30)}
	vals := func() int32 {
		if rng.IntN(4) == 0 {
			return edges[rng.IntN(len(edges))]
		}
		return int32(rng.Uint32())
	}
	two31 := big.NewInt(1 << 31)
	for i := 0; i < 200000; i++ {
		a, b := vals(), vals()
		want := new(big.Int).Mul(big.NewInt(int64(a)), big.NewInt(int64(b)))
		want.Add(want, big.NewInt(1<<30))
		// floor division (big.Int.Div is Euclidean; the divisor is positive so it is floor)
		want.Div(want, two31)
		if a == math.MinInt32 && b == math.MinInt32 {
			want.SetInt64(math.MaxInt32)
		}
		if got := MulQ31Round(a, b); int64(got) != want.Int64() {
			t.Fatalf("MulQ31Round(%d, %d) = %d, exact %s", a, b, got, want)
		}
		x, e := vals(), rng.IntN(32)
		r := new(big.Rat).SetFrac(big.NewInt(int64(x)), new(big.Int).Lsh(big.NewInt(1), uint(e)))
		// round half away from zero: sign(r)·floor(|r| + 1/2)
		abs := new(big.Rat).Abs(r)
		abs.Add(abs, big.NewRat(1, 2))
		fl := new(big.Int).Quo(abs.Num(), abs.Denom())
		if r.Sign() < 0 {
			fl.Neg(fl)
		}
		if got := ShiftRightRound(x, e); int64(got) != fl.Int64() {
			t.Fatalf("ShiftRightRound(%d, %d) = %d, exact %s", x, e, got, fl)
		}
	}
}
