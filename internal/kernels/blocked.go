package kernels

// gemmBlocked computes c[i·ldc+j] += Σ_{p<k} a[i·ars+p·aps]·b[p·ldb+j] for
// i < m, j < n with the AVX2 micro-kernels: the output is tiled into
// blocks of 6 rows by 16 (then 8) columns whose sums stay in registers
// for the whole k loop (each B row segment is loaded once per block and
// each A value broadcast once), and columns past the last multiple of 8
// are summed in Go. Every output is Σ over p in increasing order (one
// fused multiply-add per term in the kernels), added to c once, so the result does not
// depend on how the caller splits rows. The strides let one routine serve
// A·B (ars = k, aps = 1), Aᵀ·B (ars = 1, aps = m) and sub-blocks.
func gemmBlocked(m, n, k int, a []float32, ars, aps int, b []float32, ldb int, c []float32, ldc int) {
	if m == 0 || n == 0 || k == 0 {
		return
	}
	j := 0
	for ; j+16 <= n; j += 16 {
		gemmPanel(true, m, k, a, ars, aps, b[j:], ldb, c[j:], ldc)
	}
	if j+8 <= n {
		gemmPanel(false, m, k, a, ars, aps, b[j:], ldb, c[j:], ldc)
		j += 8
	}
	for ; j < n; j++ {
		for i := 0; i < m; i++ {
			var s float32
			ai := a[i*ars:]
			for p := 0; p < k; p++ {
				s += ai[p*aps] * b[p*ldb+j]
			}
			c[i*ldc+j] += s
		}
	}
}

// gemmPanel runs one column panel (8 or 16 wide) over all m rows, six at
// a time, with one smaller kernel for the remaining rows. (A switch rather
// than a table of functions keeps escape analysis able to see that no
// pointer outlives the call.)
func gemmPanel(wide bool, m, k int, a []float32, ars, aps int, b []float32, ldb int, c []float32, ldc int) {
	for i := 0; i < m; i += 6 {
		r := min(6, m-i)
		ap, bp, cp := &a[i*ars], &b[0], &c[i*ldc]
		if wide {
			switch r {
			case 6:
				gemm6x16(k, ap, ars, aps, bp, ldb, cp, ldc)
			case 5:
				gemm5x16(k, ap, ars, aps, bp, ldb, cp, ldc)
			case 4:
				gemm4x16(k, ap, ars, aps, bp, ldb, cp, ldc)
			case 3:
				gemm3x16(k, ap, ars, aps, bp, ldb, cp, ldc)
			case 2:
				gemm2x16(k, ap, ars, aps, bp, ldb, cp, ldc)
			default:
				gemm1x16(k, ap, ars, aps, bp, ldb, cp, ldc)
			}
			continue
		}
		switch r {
		case 6:
			gemm6x8(k, ap, ars, aps, bp, ldb, cp, ldc)
		case 5:
			gemm5x8(k, ap, ars, aps, bp, ldb, cp, ldc)
		case 4:
			gemm4x8(k, ap, ars, aps, bp, ldb, cp, ldc)
		case 3:
			gemm3x8(k, ap, ars, aps, bp, ldb, cp, ldc)
		case 2:
			gemm2x8(k, ap, ars, aps, bp, ldb, cp, ldc)
		default:
			gemm1x8(k, ap, ars, aps, bp, ldb, cp, ldc)
		}
	}
}

// Transpose writes the transpose of src (rows, cols) into dst (cols,
// rows). It panics on short slices.
func Transpose(dst, src []float32, rows, cols int) {
	checkLen("Transpose src", len(src), rows*cols)
	checkLen("Transpose dst", len(dst), rows*cols)
	for r := 0; r < rows; r++ {
		s := src[r*cols : (r+1)*cols]
		for q, v := range s {
			dst[q*rows+r] = v
		}
	}
}
