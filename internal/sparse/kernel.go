package sparse

// dot2x4Go is the portable form of dot2x4: eight dot products of two rows
// of a with four rows of b.
func dot2x4Go(k int, a []float64, lda int, b []float64, ldb int, out *[8]float64) {
	a0, a1 := a[:k], a[lda:lda+k]
	b0, b1, b2, b3 := b[:k], b[ldb:ldb+k], b[2*ldb:2*ldb+k], b[3*ldb:3*ldb+k]
	var s [8]float64
	for t := range a0 {
		x0, x1 := a0[t], a1[t]
		y0, y1, y2, y3 := b0[t], b1[t], b2[t], b3[t]
		s[0] += x0 * y0
		s[1] += x0 * y1
		s[2] += x0 * y2
		s[3] += x0 * y3
		s[4] += x1 * y0
		s[5] += x1 * y1
		s[6] += x1 * y2
		s[7] += x1 * y3
	}
	*out = s
}

// subABt sets C -= A Bᵀ for the m×n block C (stride ldc), A m×k (stride
// lda) and B n×k (stride ldb), all row-major. With lower set only the
// entries j <= i of C are changed (C is then the lower triangle of a
// symmetric block, A and B usually the same rows). This is the one dense
// kernel of the factorisation (the GEMM/SYRK update of Golub and Van Loan,
// 4th ed., §1.3 and §4.2.9), blocked so that a panel of B stays in cache.
func subABt(m, n, k int, a []float64, lda int, b []float64, ldb int, c []float64, ldc int, lower bool) {
	if k == 0 || m == 0 || n == 0 {
		return
	}
	const jb = 64
	var out [8]float64
	for j0 := 0; j0 < n; j0 += jb {
		j1 := min(n, j0+jb)
		i := 0
		if lower {
			i = j0
		}
		for ; i+2 <= m; i += 2 {
			jend := j1
			if lower {
				jend = min(j1, i+2)
			}
			ai := a[i*lda:]
			ci0 := c[i*ldc:]
			ci1 := c[(i+1)*ldc:]
			j := j0
			for ; j+4 <= jend; j += 4 {
				dot2x4(k, ai, lda, b[j*ldb:], ldb, &out)
				if !lower || j+3 <= i {
					ci0[j] -= out[0]
					ci0[j+1] -= out[1]
					ci0[j+2] -= out[2]
					ci0[j+3] -= out[3]
				} else {
					for jj := 0; jj < 4; jj++ {
						if j+jj <= i {
							ci0[j+jj] -= out[jj]
						}
					}
				}
				ci1[j] -= out[4]
				ci1[j+1] -= out[5]
				ci1[j+2] -= out[6]
				if !lower || j+3 <= i+1 {
					ci1[j+3] -= out[7]
				}
			}
			for ; j < jend; j++ {
				bj := b[j*ldb : j*ldb+k]
				if !lower || j <= i {
					ci0[j] -= dot(ai[:k], bj)
				}
				ci1[j] -= dot(ai[lda:lda+k], bj)
			}
		}
		if i < m {
			jend := j1
			if lower {
				jend = min(j1, i+1)
			}
			ai := a[i*lda : i*lda+k]
			for j := j0; j < jend; j++ {
				c[i*ldc+j] -= dot(ai, b[j*ldb:j*ldb+k])
			}
		}
	}
}
