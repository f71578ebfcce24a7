package sparse

import "golang.org/x/sys/cpu"

// haveAVX2FMA selects the assembly kernel; it is fixed at start-up by the
// processor's features and never changes.
var haveAVX2FMA = cpu.X86.HasAVX2 && cpu.X86.HasFMA

//go:noescape
func dot2x4avx(k int, a *float64, lda int, b *float64, ldb int, out *[8]float64)

// dot2x4 sets out[4i+j] = Σ_{t<k} a[i*lda+t]·b[j*ldb+t] for i < 2, j < 4.
func dot2x4(k int, a []float64, lda int, b []float64, ldb int, out *[8]float64) {
	if !haveAVX2FMA || k < 8 {
		dot2x4Go(k, a, lda, b, ldb, out)
		return
	}
	_ = a[lda+k-1]
	_ = b[3*ldb+k-1]
	k4 := k &^ 3
	dot2x4avx(k4, &a[0], lda, &b[0], ldb, out)
	for t := k4; t < k; t++ {
		a0, a1 := a[t], a[lda+t]
		for j := 0; j < 4; j++ {
			bj := b[j*ldb+t]
			out[j] += a0 * bj
			out[4+j] += a1 * bj
		}
	}
}

//go:noescape
func axpyavx(n int, alpha float64, x *float64, y *float64)

// axpyFast sets y += alpha·x (len(y) >= len(x)).
func axpyFast(alpha float64, x, y []float64) {
	n := len(x)
	if !haveAVX2FMA || n < 8 {
		axpy(alpha, x, y)
		return
	}
	y = y[:n]
	n4 := n &^ 3
	axpyavx(n4, alpha, &x[0], &y[0])
	for i := n4; i < n; i++ {
		y[i] += alpha * x[i]
	}
}
