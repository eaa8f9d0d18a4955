package kernels

import (
	"os"

	"golang.org/x/sys/cpu"
)

// useSIMD selects the AVX2/FMA fast paths, chosen at run time from the
// CPU's features; PIPIT_NOASM=1 in the environment forces the portable
// path (for comparisons and for machines that misreport).
var useSIMD = cpu.X86.HasAVX2 && cpu.X86.HasFMA && os.Getenv("PIPIT_NOASM") != "1"

// dotAVX2 returns Σ x[i]·y[i] for i < n (simd_amd64.s).
//
//go:noescape
func dotAVX2(x, y *float32, n int) float32

// fmaAVX2 computes dst[i] += x[i]·y[i] for i < n (simd_amd64.s).
//
//go:noescape
func fmaAVX2(dst, x, y *float32, n int)

// The element-wise kernels of vec.go (vec_amd64.s).

//go:noescape
func clampAVX2(dst, src *float32, n int, lo, hi float32)

//go:noescape
func maskSetAVX2(dst, gr, x *float32, n int, lo, hi float32)

//go:noescape
func chanAffineAVX2(dst, src, scale, shift *float32, rows, c int, lo, hi float32)

//go:noescape
func chanDotAVX2(a, b, mu *float32, rows, c int, sa, sab *float64)

//go:noescape
func chanLinearAVX2(dst, gr, x, a, mu, b, k *float32, rows, c int)

// Register-blocked micro-kernels (gemm_amd64.s, written by gen/gemm_asm.py):
// gemmRxN adds an R×N block of Σ_p a[r·ars+p·aps]·b[p·ldb+j] to c[r·ldc+j]
// (add != 0) or stores it there (add == 0).

//go:noescape
func gemm1x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm2x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm3x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm4x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm5x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm6x16(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm1x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm2x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm3x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm4x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm5x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

//go:noescape
func gemm6x8(k int, a *float32, ars, aps int, b *float32, ldb int, c *float32, ldc int, add int)

// Depthwise row kernels (dw_amd64.s).

//go:noescape
func dwFwdRowAVX2(out, x, w *float32, n, c, xstep int, xoffs, woffs *int, ntaps int)

//go:noescape
func dwBackRowAVX2(d, x, w, dx, dw *float32, n, c, xstep int, xoffs, woffs *int, ntaps int)

// fmaPeakAVX2 runs n rounds of 10 independent 8-lane FMAs (simd_amd64.s).
//
//go:noescape
func fmaPeakAVX2(n int)

// axpyAVX2 computes y[i] += a·x[i] for i < n (simd_amd64.s).
//
//go:noescape
func axpyAVX2(a float32, x, y *float32, n int)
