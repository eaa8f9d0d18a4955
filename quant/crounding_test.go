package quant

import (
	"bytes"
	"encoding/binary"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"github.com/pipit-audio/pipit/quant/cref"
)

// roundingDriver reads records {int32 op, a, b, c} from stdin and writes
// one int32 per record: op 1 pipit_mul_q31(a, b), 2 pipit_shr_round(a, b),
// 3 pipit_requant(a, b, c), 4 pipit_requant_fast(a, b, c) (the fast
// kernels' requantisation, pipit_rt_fast.c).
const roundingDriver = `#include <stdio.h>
#include "pipit_rt_fast.h"
int main(void) {
  int32_t r[4], y;
  while (fread(r, sizeof r, 1, stdin) == 1) {
    switch (r[0]) {
    case 1: y = pipit_mul_q31(r[1], r[2]); break;
    case 2: y = pipit_shr_round(r[1], (int)r[2]); break;
    case 3: y = pipit_requant(r[1], r[2], r[3]); break;
    case 4: y = pipit_requant_fast(r[1], r[2], r[3]); break;
    default: return 2;
    }
    fwrite(&y, sizeof y, 1, stdout);
  }
  return 0;
}
`

type roundingCase struct{ op, a, b, c int32 }

// runCRounding compiles the C runtime's helpers with a driver (UBSan on,
// so a signed overflow in them fails the run) and evaluates cases.
func runCRounding(t *testing.T, cases []roundingCase) []int32 {
	t.Helper()
	cc, err := exec.LookPath("gcc")
	if err != nil {
		t.Skip("no gcc on PATH; .ci/run installs it")
	}
	dir := t.TempDir()
	for name, data := range map[string][]byte{"pipit_rt.h": cref.RuntimeHeader, "pipit_rt.c": cref.RuntimeSource,
		"pipit_rt_fast.h": cref.FastRuntimeHeader, "pipit_rt_fast.c": cref.FastRuntimeSource, "drv.c": []byte(roundingDriver)} {
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	exe := filepath.Join(dir, "drv")
	build := exec.Command(cc, "-std=c99", "-O2", "-Wall", "-Werror", "-fsanitize=undefined", "-fno-sanitize-recover=all", "-o", exe, "drv.c", "pipit_rt.c", "pipit_rt_fast.c")
	build.Dir = dir
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	var in bytes.Buffer
	for _, c := range cases {
		binary.Write(&in, binary.NativeEndian, [4]int32{c.op, c.a, c.b, c.c})
	}
	cmd := exec.Command(exe)
	cmd.Stdin = &in
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("C helpers: %v", err)
	}
	if len(out) != 4*len(cases) {
		t.Fatalf("C helpers wrote %d bytes for %d cases", len(out), len(cases))
	}
	res := make([]int32, len(cases))
	for i := range res {
		res[i] = int32(binary.NativeEndian.Uint32(out[4*i:]))
	}
	return res
}

// TestCRoundingHelpers tests the C runtime's fixed-point helpers on their
// own: against worked examples from their definition and against the Go
// helpers on about 3.4 million random and tie-constructed inputs.
//
// Definitions: gemmlowp fixedpoint/fixedpoint.h, MulQ31Round
// (ties toward +∞, (−2^31)² saturated) and ShiftRightRound (ties away
// from zero; its unit test test/test_fixedpoint.cc compares with
// std::round(x / 2^s), tolerance 0). The negative-tie rule is pinned by
// ShiftRightRound(−12, 3) = −2, the example of Jacob et al. 2018 (arXiv:1712.05877)
// Appendix B, and by the tie-constructed cases below: with round half up
// instead, −2.5 would give −2 and every negative tie would differ.
func TestCRoundingHelpers(t *testing.T) {
	type ex struct {
		c    roundingCase
		want int32
	}
	examples := []ex{
		// MulQ31Round: ⌊(a·b + 2^30)/2^31⌋ worked by hand
		{roundingCase{1, math.MinInt32, math.MinInt32, 0}, math.MaxInt32}, // saturated
		{roundingCase{1, math.MinInt32, math.MaxInt32, 0}, -2147483647},   // (−2^62 + 2^31 + 2^30)/2^31 → −2^31 + 1
		{roundingCase{1, 1 << 30, 1 << 30, 0}, 1 << 29},                   // 0.5·0.5 = 0.25
		{roundingCase{1, 32768, 32768, 0}, 1},                             // 2^30/2^31 = +0.5 → 1
		{roundingCase{1, -32768, 32768, 0}, 0},                            // −0.5 → 0 (toward +∞)
		{roundingCase{1, -98304, 32768, 0}, -1},                           // −1.5 → −1
		{roundingCase{1, 1000, 1288490189, 0}, 600},                       // 1000·0.6000000000931
		// ShiftRightRound: half away from zero
		{roundingCase{2, -12, 3, 0}, -2}, // Jacob et al. 2018 App. B: −1.5 → −2
		{roundingCase{2, 12, 3, 0}, 2},
		{roundingCase{2, -5, 1, 0}, -3}, // −2.5 → −3 (round half up would give −2)
		{roundingCase{2, 5, 1, 0}, 3},
		{roundingCase{2, -601, 1, 0}, -301},
		{roundingCase{2, -11, 3, 0}, -1}, // −1.375
		{roundingCase{2, -13, 3, 0}, -2}, // −1.625
		{roundingCase{2, math.MinInt32, 31, 0}, -1},
		{roundingCase{2, math.MaxInt32, 31, 0}, 1},
		{roundingCase{2, 77, 0, 0}, 77},
		// requant: 1000·(2^30/2^31)·2^−1 = 250; −1000 → −250; −1500·0.5·0.5 = −375;
		// −1001·0.25 = −250.25 → −250; −1002·0.25 = −250.5 → −251 (away from zero)
		{roundingCase{3, 1000, 1 << 30, 1}, 250},
		{roundingCase{3, -1000, 1 << 30, 1}, -250},
		{roundingCase{3, -1002, 1 << 30, 1}, -251},
		{roundingCase{3, -1001, 1 << 30, 1}, -250},
		// shift −2: 1000·4·0.5 = 2000; saturating left shift of 2^30 by 2
		{roundingCase{3, 1000, 1 << 30, -2}, 2000},
		{roundingCase{3, 1 << 30, 1 << 30, -2}, 1 << 30}, // 2^32 saturates to 2^31−1; ((2^31−1)·2^30 + 2^30)/2^31 = 2^30
	}
	var cases []roundingCase
	for _, e := range examples {
		cases = append(cases, e.c)
	}
	rng := rand.New(rand.NewPCG(13, 17))
	edges := []int32{math.MinInt32, math.MinInt32 + 1, -1 << 30, -65536, -32768, -3, -2, -1, 0, 1, 2, 3, 32768, 1 << 30, math.MaxInt32 - 1, math.MaxInt32}
	for _, a := range edges {
		for _, b := range edges {
			cases = append(cases, roundingCase{1, a, b, 0})
		}
	}
	const n = 600000
	for i := 0; i < n; i++ {
		a, b := int32(rng.Uint32()), int32(rng.Uint32())
		cases = append(cases, roundingCase{1, a, b, 0})
		// ties of MulQ31Round: a·b ≡ 2^30 (mod 2^31) when a = odd·2^k, b = odd·2^(30−k)
		k := rng.IntN(31)
		ta := int32(2*rng.IntN(1<<(30-k)/2+1)+1) << k
		tb := int32(2*rng.IntN(1<<k/2+1)+1) << (30 - k)
		if rng.IntN(2) == 0 {
			ta = -ta
		}
		cases = append(cases, roundingCase{1, ta, tb, 0})
		// ShiftRightRound: random, and exact halves q·2^e ± 2^(e−1) of both signs
		e := int32(rng.IntN(32))
		cases = append(cases, roundingCase{2, int32(rng.Uint32()), e, 0})
		if e > 0 {
			span := int32(1) << (31 - e)
			q := int64(rng.Int32N(span)) - int64(span)/2 // both signs
			x := q<<e + 1<<(e-1)
			if x >= math.MinInt32 && x <= math.MaxInt32 {
				cases = append(cases, roundingCase{2, int32(x), e, 0})
			}
		}
		// requant as the layers use it
		m0 := int32(1<<30 + rng.Int32N(1<<30))
		sh := int32(rng.IntN(40)) - 8
		cases = append(cases, roundingCase{3, int32(rng.Uint32()) >> rng.IntN(20), m0, sh})
		// the fast kernels' requantisation: any accumulator, multipliers in
		// [2^30, 2^31), shifts −31..31, and accumulators that put the
		// rounding shift on an exact tie (m0 = 2^30 halves exactly, so
		// acc = 2·(2j+1)·2^(s−1) gives a tie of sign j's)
		s := int32(rng.IntN(63)) - 31
		cases = append(cases, roundingCase{4, int32(rng.Uint32()), int32(1<<30 + rng.Int32N(1<<30)), s})
		if s > 0 && s < 30 {
			j := int64(rng.Int32N(1<<(30-s))) - 1<<(29-s)
			cases = append(cases, roundingCase{4, int32(2 * (2*j + 1) << (s - 1)), 1 << 30, s})
		}
	}
	got := runCRounding(t, cases)
	for i, e := range examples {
		if got[i] != e.want {
			t.Errorf("C op %d(%d, %d, %d) = %d, want %d", e.c.op, e.c.a, e.c.b, e.c.c, got[i], e.want)
		}
	}
	bad, ties := 0, 0
	for i, c := range cases {
		var want int32
		switch c.op {
		case 1:
			want = MulQ31Round(c.a, c.b)
		case 2:
			want = ShiftRightRound(c.a, int(c.b))
			if c.b > 0 && c.a < 0 && c.a&(1<<c.b-1) == 1<<(c.b-1) {
				ties++
			}
		case 3, 4:
			want = Rescale(c.a, c.b, int(c.c))
		}
		if got[i] != want {
			if bad < 5 {
				t.Errorf("C op %d(%d, %d, %d) = %d, Go %d", c.op, c.a, c.b, c.c, got[i], want)
			}
			bad++
		}
	}
	t.Logf("%d cases (%d negative ties of the rounding shift): %d differ between C and Go", len(cases), ties, bad)
	if ties < n/4 {
		t.Errorf("only %d negative ties constructed", ties)
	}
}
