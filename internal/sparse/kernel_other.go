//go:build !amd64

package sparse

// dot2x4 sets out[4i+j] = Σ_{t<k} a[i*lda+t]·b[j*ldb+t] for i < 2, j < 4.
func dot2x4(k int, a []float64, lda int, b []float64, ldb int, out *[8]float64) {
	dot2x4Go(k, a, lda, b, ldb, out)
}

// axpyFast sets y += alpha·x (len(y) >= len(x)).
func axpyFast(alpha float64, x, y []float64) { axpy(alpha, x, y) }
