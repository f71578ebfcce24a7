package sparse

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// bandFactor is a lower band factor in LAPACK's row-major band storage:
// row i holds L[i, i-k..i] at l[i*(k+1) : (i+1)*(k+1)], the diagonal last.
type bandFactor struct {
	n, k int
	l    []float64
}

// factorBand factors P A Pᵀ as a band matrix with LAPACK's blocked Pbtrf
// (gonum), never gonum's mat.BandCholesky, whose condition estimate is
// quadratic in n.
func factorBand(a *Sym, perm []int, tol float64, st *Stats) (factor, error) {
	n := a.n
	var ip []int
	if perm != nil {
		ip = inversePerm(perm)
	}
	k := halfBandwidthIP(a, ip)
	ld := k + 1
	if e := float64(n) * float64(ld); e > maxFactorEntries {
		return nil, tooLarge(Band, st.Ordering, n, e)
	}
	data := make([]float64, n*ld)
	fillBand(a, ip, k, data)
	diag := make([]float64, n)
	for j := range diag {
		diag[j] = data[j*ld+k]
	}
	st.NNZL = n * ld
	st.HalfBandwidth = k
	st.Flops = float64(n) * float64(k) * float64(k+3)
	if n == 0 {
		return &bandFactor{n: 0, k: 0}, nil
	}
	_, ok := lapack64.Pbtrf(blas64.SymmetricBand{Uplo: blas.Lower, N: n, K: k, Data: data, Stride: ld})
	if ok {
		for j := 0; j < n; j++ {
			l := data[j*ld+k]
			d := l * l
			if !pivotOK(d, diag[j], tol) {
				return nil, pivotError(j, d, perm, a, tol)
			}
		}
		return &bandFactor{n: n, k: k, l: data}, nil
	}
	clear(data)
	fillBand(a, ip, k, data)
	j, d := bandCholUnblocked(data, n, k, diag, tol)
	if j < 0 {
		j, d = n-1, math.NaN()
	}
	return nil, pivotError(j, d, perm, a, tol)
}

// fillBand writes the lower band of P A Pᵀ into zeroed row-major band
// storage; ip is the inverse permutation (nil for the natural order).
func fillBand(a *Sym, ip []int, k int, data []float64) {
	ld := k + 1
	for r := 0; r < a.n; r++ {
		pr := r
		if ip != nil {
			pr = ip[r]
		}
		for q := a.p[r]; q < a.p[r+1]; q++ {
			pc := int(a.i[q])
			if ip != nil {
				pc = ip[pc]
			}
			if pc <= pr {
				data[pr*ld+pc-pr+k] = a.v[q]
			}
		}
	}
}

// bandCholUnblocked is the band form of cholUnblocked (Golub and Van Loan,
// 4th ed., algorithm 4.3.5): it returns the first failing position or -1.
func bandCholUnblocked(l []float64, n, k int, diag []float64, tol float64) (int, float64) {
	ld := k + 1
	for i := 0; i < n; i++ {
		ri := l[i*ld : (i+1)*ld] // ri[t] = L[i, i-k+t]
		j0 := max(0, i-k)
		for j := j0; j < i; j++ {
			rj := l[j*ld : (j+1)*ld]
			// L[i,j] = (A[i,j] - Σ_{m=max(i,j)-k..j-1} L[i,m] L[j,m]) / L[j,j]
			m0 := max(j0, j-k)
			s := ri[j-i+k] - dot(ri[m0-i+k:j-i+k], rj[m0-j+k:k])
			ri[j-i+k] = s / rj[k]
		}
		d := ri[k] - dot(ri[j0-i+k:k], ri[j0-i+k:k])
		if !pivotOK(d, diag[i], tol) {
			return i, d
		}
		ri[k] = math.Sqrt(d)
	}
	return -1, 0
}

// solve: forward substitution L y = x by rows (dot products along the
// stored rows), then back substitution Lᵀ x = y by columns (axpys along the
// same rows).
func (f *bandFactor) solve(x []float64) {
	n, k, ld := f.n, f.k, f.k+1
	for i := 0; i < n; i++ {
		j0 := max(0, i-k)
		r := f.l[i*ld : (i+1)*ld]
		x[i] = (x[i] - dot(r[j0-i+k:k], x[j0:i])) / r[k]
	}
	for i := n - 1; i >= 0; i-- {
		j0 := max(0, i-k)
		r := f.l[i*ld : (i+1)*ld]
		x[i] /= r[k]
		axpy(-x[i], r[j0-i+k:k], x[j0:i])
	}
}

// bandRHSBlock is the number of right-hand sides solved together: the
// block of rows of X touched by one band row (k+1 rows × 32 columns) stays
// in cache.
const bandRHSBlock = 32

// solveMany solves the row-major n×nrhs block x column-block by
// column-block, each step updating whole rows of X (blocked multi-RHS band
// substitution).
func (f *bandFactor) solveMany(x []float64, nrhs int) {
	n, k, ld := f.n, f.k, f.k+1
	for c0 := 0; c0 < nrhs; c0 += bandRHSBlock {
		c1 := min(nrhs, c0+bandRHSBlock)
		w := c1 - c0
		for i := 0; i < n; i++ {
			j0 := max(0, i-k)
			r := f.l[i*ld : (i+1)*ld]
			xi := x[i*nrhs+c0 : i*nrhs+c0+w]
			for j := j0; j < i; j++ {
				axpyFast(-r[j-i+k], x[j*nrhs+c0:j*nrhs+c0+w], xi)
			}
			inv := 1 / r[k]
			for c := range xi {
				xi[c] *= inv
			}
		}
		for i := n - 1; i >= 0; i-- {
			j0 := max(0, i-k)
			r := f.l[i*ld : (i+1)*ld]
			xi := x[i*nrhs+c0 : i*nrhs+c0+w]
			inv := 1 / r[k]
			for c := range xi {
				xi[c] *= inv
			}
			for j := j0; j < i; j++ {
				axpyFast(-r[j-i+k], xi, x[j*nrhs+c0:j*nrhs+c0+w])
			}
		}
	}
}
