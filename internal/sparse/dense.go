package sparse

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
)

// denseFactor is a full lower-triangular factor, row-major n×n.
type denseFactor struct {
	l blas64.Triangular
}

// permutedDiagonal returns the diagonal of P A Pᵀ.
func permutedDiagonal(a *Sym, perm []int) []float64 {
	d := a.Diagonal()
	if perm == nil {
		return d
	}
	pd := make([]float64, len(d))
	for k, o := range perm {
		pd[k] = d[o]
	}
	return pd
}

// factorDense factors P A Pᵀ as a full matrix with the blocked kernel of
// the supernodal fronts (one front holding every column).
func factorDense(a *Sym, perm []int, tol float64, st *Stats) (factor, error) {
	n := a.n
	if e := float64(n) * float64(n); e > maxFactorEntries {
		return nil, tooLarge(Dense, st.Ordering, n, e)
	}
	data := make([]float64, n*n)
	fillDense(a, perm, data)
	diag := permutedDiagonal(a, perm)
	st.NNZL = n * (n + 1) / 2
	st.HalfBandwidth = halfBandwidth(a, perm)
	st.Flops = float64(n) * float64(n) * float64(n) / 3
	var work []float64
	if k, d := factorFront(data, nil, n, n, diag, tol, &work); k >= 0 {
		return nil, pivotError(k, d, perm, a, tol)
	}
	return &denseFactor{l: blas64.Triangular{Uplo: blas.Lower, Diag: blas.NonUnit, N: n, Data: data, Stride: max(1, n)}}, nil
}

// fillDense writes the lower triangle of P A Pᵀ into data (row-major n×n).
func fillDense(a *Sym, perm []int, data []float64) {
	n := a.n
	clear(data)
	var ip []int
	if perm != nil {
		ip = inversePerm(perm)
	}
	for r := 0; r < n; r++ {
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
				data[pr*n+pc] = a.v[q]
			}
		}
	}
}

// cholUnblocked factors the row-major lower triangle of an n×n matrix in
// place (Cholesky-Crout, row by row, Golub and Van Loan, "Matrix
// Computations", 4th ed., algorithm 4.2.1 in its dot-product form) and
// returns the first position whose pivot fails pivotOK, or -1.
func cholUnblocked(a []float64, n, lda int, diag []float64, tol float64) (int, float64) {
	for j := 0; j < n; j++ {
		rj := a[j*lda : j*lda+j+1]
		for i := 0; i < j; i++ {
			ri := a[i*lda : i*lda+i+1]
			s := rj[i] - dot(rj[:i], ri[:i])
			rj[i] = s / ri[i]
		}
		d := rj[j] - dot(rj[:j], rj[:j])
		if !pivotOK(d, diag[j], tol) {
			return j, d
		}
		rj[j] = math.Sqrt(d)
	}
	return -1, 0
}

func dot(x, y []float64) float64 {
	y = y[:len(x)]
	s0, s1, s2, s3 := 0.0, 0.0, 0.0, 0.0
	i := 0
	for ; i+4 <= len(x); i += 4 {
		s0 += x[i] * y[i]
		s1 += x[i+1] * y[i+1]
		s2 += x[i+2] * y[i+2]
		s3 += x[i+3] * y[i+3]
	}
	for ; i < len(x); i++ {
		s0 += x[i] * y[i]
	}
	return (s0 + s1) + (s2 + s3)
}

// axpy sets y += alpha x.
func axpy(alpha float64, x, y []float64) {
	y = y[:len(x)]
	for i, v := range x {
		y[i] += alpha * v
	}
}

func (f *denseFactor) solve(x []float64) {
	v := blas64.Vector{N: len(x), Data: x, Inc: 1}
	blas64.Trsv(blas.NoTrans, f.l, v)
	blas64.Trsv(blas.Trans, f.l, v)
}

func (f *denseFactor) solveMany(x []float64, k int) {
	b := blas64.General{Rows: f.l.N, Cols: k, Data: x, Stride: k}
	blas64.Trsm(blas.Left, blas.NoTrans, 1, f.l, b)
	blas64.Trsm(blas.Left, blas.Trans, 1, f.l, b)
}

// halfBandwidth returns max |i-j| over the entries of P A Pᵀ.
func halfBandwidth(a *Sym, perm []int) int {
	var ip []int
	if perm != nil {
		ip = inversePerm(perm)
	}
	return halfBandwidthIP(a, ip)
}

// halfBandwidthIP is halfBandwidth for the inverse permutation ip.
func halfBandwidthIP(a *Sym, ip []int) int {
	kd := 0
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
			if d := pr - pc; d > kd {
				kd = d
			}
		}
	}
	return kd
}
