package kernels

// gemmBlocked computes s = Σ_{p<k} a[i·ars+p·aps]·b[p·ldb+j] for i < m,
// j < n and adds it to c[i·ldc+j] (add) or stores it there (!add), with
// the AVX2 micro-kernels: the output is tiled into blocks of up to 6 rows
// by 16 (then 8) columns whose sums stay in registers for the whole k
// loop (each B row segment is loaded once per block and each A value
// broadcast once), and columns past the last multiple of 8 are summed in
// Go. Every output is Σ over p in increasing order (one fused
// multiply-add per term in the kernels), added to c once, so the result
// does not depend on how the caller splits rows. The strides let one
// routine serve A·B (ars = k, aps = 1), Aᵀ·B (ars = 1, aps = m) and
// sub-blocks.
func gemmBlocked(m, n, k int, a []float32, ars, aps int, b []float32, ldb int, c []float32, ldc int, add bool) {
	if m == 0 || n == 0 {
		return
	}
	if k == 0 {
		if !add {
			for i := 0; i < m; i++ {
				clear(c[i*ldc : i*ldc+n])
			}
		}
		return
	}
	flag := 0
	if add {
		flag = 1
	}
	j := 0
	for ; j+16 <= n; j += 16 {
		gemmPanel(true, m, k, a, ars, aps, b[j:], ldb, c[j:], ldc, flag)
	}
	if j+8 <= n {
		gemmPanel(false, m, k, a, ars, aps, b[j:], ldb, c[j:], ldc, flag)
		j += 8
	}
	for ; j < n; j++ {
		for i := 0; i < m; i++ {
			var s float32
			ai := a[i*ars:]
			for p := 0; p < k; p++ {
				s += ai[p*aps] * b[p*ldb+j]
			}
			if add {
				s += c[i*ldc+j]
			}
			c[i*ldc+j] = s
		}
	}
}

// rowBlock returns the rows of the block starting at row i of m: 6, except
// that a remainder of one or two rows is shared with the block before it
// (8 rows as 4 + 4, 7 as 4 + 3), since the kernels of one or two rows keep
// too few sums in flight to hide the multiply-add latency.
func rowBlock(i, m int) int {
	r := m - i
	switch {
	case r <= 6:
		return r
	case r < 9:
		return r / 2
	}
	return 6
}

// gemmPanel runs one column panel (8 or 16 wide) over all m rows in blocks
// of rowBlock rows. (A switch rather than a table of functions keeps
// escape analysis able to see that no pointer outlives the call.)
func gemmPanel(wide bool, m, k int, a []float32, ars, aps int, b []float32, ldb int, c []float32, ldc int, add int) {
	for i := 0; i < m; {
		r := rowBlock(i, m)
		ap, bp, cp := &a[i*ars], &b[0], &c[i*ldc]
		i += r
		if wide {
			switch r {
			case 6:
				gemm6x16(k, ap, ars, aps, bp, ldb, cp, ldc, add)
			case 5:
				gemm5x16(k, ap, ars, aps, bp, ldb, cp, ldc, add)
			case 4:
				gemm4x16(k, ap, ars, aps, bp, ldb, cp, ldc, add)
			case 3:
				gemm3x16(k, ap, ars, aps, bp, ldb, cp, ldc, add)
			case 2:
				gemm2x16(k, ap, ars, aps, bp, ldb, cp, ldc, add)
			default:
				gemm1x16(k, ap, ars, aps, bp, ldb, cp, ldc, add)
			}
			continue
		}
		switch r {
		case 6:
			gemm6x8(k, ap, ars, aps, bp, ldb, cp, ldc, add)
		case 5:
			gemm5x8(k, ap, ars, aps, bp, ldb, cp, ldc, add)
		case 4:
			gemm4x8(k, ap, ars, aps, bp, ldb, cp, ldc, add)
		case 3:
			gemm3x8(k, ap, ars, aps, bp, ldb, cp, ldc, add)
		case 2:
			gemm2x8(k, ap, ars, aps, bp, ldb, cp, ldc, add)
		default:
			gemm1x8(k, ap, ars, aps, bp, ldb, cp, ldc, add)
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
