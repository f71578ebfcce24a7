package sparse

import (
	"math"
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// superFactor is the supernodal factor: for supernode s with nc columns and
// m rows, the row-major m×nc block L[rows(s), cols(s)] (upper triangle of
// its leading nc×nc block unused).
type superFactor struct {
	sy   *symbolic
	lVal []float64
}

// factorSupernodal factors P A Pᵀ by the multifrontal method (Duff and
// Reid, ACM TOMS 9(3), 1983; Liu, SIAM Review 34(1), 1992): for every
// supernode in postorder its frontal matrix is assembled from the entries
// of A and the update matrices of its children (extend-add), its leading
// columns are factored with dense blocked kernels (Potrf, Trsm) and the
// Schur complement is passed on to its parent.
func factorSupernodal(a *Sym, perm []int, tol float64, st *Stats) (factor, error) {
	t0 := time.Now()
	sy := analyze(a, perm)
	st.OrderTime += time.Since(t0)
	st.NNZL = sy.nnzL
	st.Supernodes = len(sy.super) - 1
	st.Flops = sy.flops
	return numericSupernodal(a, sy, tol)
}

func numericSupernodal(a *Sym, sy *symbolic, tol float64) (factor, error) {
	n := sy.n
	ns := len(sy.super) - 1
	lVal := make([]float64, sy.lPtr[ns])
	diag := permutedDiagonal(a, sy.perm)
	pos := make([]int, n)
	var front, stack, save []float64
	// Update matrices on the stack, most recent last: their sizes.
	var upd []int
	nchild := make([]int, ns)
	for _, p := range sy.sparen {
		if p >= 0 {
			nchild[p]++
		}
	}
	for s := 0; s < ns; s++ {
		f, l := sy.super[s], sy.super[s+1]
		rows := sy.rowIdx[sy.rowPtr[s]:sy.rowPtr[s+1]]
		nc, m := l-f, len(rows)
		for t, r := range rows {
			pos[r] = t
		}
		if cap(front) < m*m {
			front = make([]float64, m*m)
		}
		F := front[:m*m]
		clear(F)
		// Entries of A in the supernode's columns (lower triangle).
		for j := f; j < l; j++ {
			o := sy.perm[j]
			cj := j - f
			for q := a.p[o]; q < a.p[o+1]; q++ {
				if i := sy.iperm[a.i[q]]; i >= j {
					F[pos[i]*m+cj] += a.v[q]
				}
			}
		}
		// Extend-add the children's update matrices, on top of the stack
		// in reverse order of the children.
		for c := 0; c < nchild[s]; c++ {
			u := upd[len(upd)-1]
			child := upd[len(upd)-2]
			upd = upd[:len(upd)-2]
			crows := sy.rowIdx[sy.rowPtr[child]:sy.rowPtr[child+1]]
			crows = crows[len(crows)-u:]
			U := stack[len(stack)-u*u:]
			for x, rx := range crows {
				px := pos[rx] * m
				ux := U[x*u : x*u+x+1]
				for y, v := range ux {
					F[px+pos[crows[y]]] += v
				}
			}
			stack = stack[:len(stack)-u*u]
		}
		// Dense partial factorisation of the front.
		if cap(save) < nc*nc {
			save = make([]float64, nc*nc)
		}
		sv := save[:nc*nc]
		for r := 0; r < nc; r++ {
			copy(sv[r*nc:r*nc+r+1], F[r*m:r*m+r+1])
		}
		_, ok := lapack64.Potrf(blas64.Symmetric{Uplo: blas.Lower, N: nc, Data: F, Stride: m})
		if ok {
			for j := 0; j < nc; j++ {
				d := F[j*m+j] * F[j*m+j]
				if !pivotOK(d, diag[f+j], tol) {
					return nil, pivotError(f+j, d, sy.perm, a, tol)
				}
			}
		} else {
			k, d := cholUnblocked(sv, nc, nc, diag[f:l], tol)
			if k < 0 {
				k, d = nc-1, math.NaN()
			}
			return nil, pivotError(f+k, d, sy.perm, a, tol)
		}
		u := m - nc
		if u > 0 {
			L11 := blas64.Triangular{Uplo: blas.Lower, Diag: blas.NonUnit, N: nc, Data: F, Stride: m}
			L21 := blas64.General{Rows: u, Cols: nc, Data: F[nc*m:], Stride: m}
			blas64.Trsm(blas.Right, blas.Trans, 1, L11, L21)
			syrkLower(u, nc, F[nc*m:], m, F[nc*m+nc:], m)
		}
		// Keep L's columns, push the update matrix.
		L := lVal[sy.lPtr[s]:sy.lPtr[s+1]]
		for r := 0; r < m; r++ {
			copy(L[r*nc:(r+1)*nc], F[r*m:r*m+nc])
		}
		if u > 0 && sy.sparen[s] >= 0 {
			base := len(stack)
			stack = slices_grow(stack, u*u)
			U := stack[base:]
			for r := 0; r < u; r++ {
				copy(U[r*u:r*u+r+1], F[(nc+r)*m+nc:(nc+r)*m+nc+r+1])
			}
			upd = append(upd, s, u)
		}
	}
	return &superFactor{sy: sy, lVal: lVal}, nil
}

// slices_grow extends s by k elements.
func slices_grow(s []float64, k int) []float64 {
	if cap(s)-len(s) < k {
		ns := make([]float64, len(s), 2*(len(s)+k))
		copy(ns, s)
		s = ns
	}
	return s[:len(s)+k]
}

// syrkLower sets the lower triangle of the u×u block C (stride ldc) to
// C - A Aᵀ, A being u×k (stride lda).
func syrkLower(u, k int, A []float64, lda int, C []float64, ldc int) {
	blas64.Syrk(blas.NoTrans, -1,
		blas64.General{Rows: u, Cols: k, Data: A, Stride: lda}, 1,
		blas64.Symmetric{Uplo: blas.Lower, N: u, Data: C, Stride: ldc})
}

func (sf *superFactor) solve(x []float64) {
	sy := sf.sy
	ns := len(sy.super) - 1
	for s := 0; s < ns; s++ {
		f, l := sy.super[s], sy.super[s+1]
		rows := sy.rowIdx[sy.rowPtr[s]:sy.rowPtr[s+1]]
		nc, m := l-f, len(rows)
		L := sf.lVal[sy.lPtr[s]:sy.lPtr[s+1]]
		xs := x[f:l]
		for j := 0; j < nc; j++ {
			xs[j] = (xs[j] - dot(L[j*nc:j*nc+j], xs[:j])) / L[j*nc+j]
		}
		for r := nc; r < m; r++ {
			x[rows[r]] -= dot(L[r*nc:(r+1)*nc], xs)
		}
	}
	for s := ns - 1; s >= 0; s-- {
		f, l := sy.super[s], sy.super[s+1]
		rows := sy.rowIdx[sy.rowPtr[s]:sy.rowPtr[s+1]]
		nc, m := l-f, len(rows)
		L := sf.lVal[sy.lPtr[s]:sy.lPtr[s+1]]
		xs := x[f:l]
		for r := nc; r < m; r++ {
			axpy(-x[rows[r]], L[r*nc:(r+1)*nc], xs)
		}
		for j := nc - 1; j >= 0; j-- {
			xs[j] /= L[j*nc+j]
			axpy(-xs[j], L[j*nc:j*nc+j], xs[:j])
		}
	}
}

func (sf *superFactor) solveMany(x []float64, k int) {
	sy := sf.sy
	ns := len(sy.super) - 1
	var tmp []float64
	for s := 0; s < ns; s++ {
		f, l := sy.super[s], sy.super[s+1]
		rows := sy.rowIdx[sy.rowPtr[s]:sy.rowPtr[s+1]]
		nc, m := l-f, len(rows)
		L := sf.lVal[sy.lPtr[s]:sy.lPtr[s+1]]
		Xs := blas64.General{Rows: nc, Cols: k, Data: x[f*k : l*k], Stride: k}
		blas64.Trsm(blas.Left, blas.NoTrans, 1, blas64.Triangular{Uplo: blas.Lower, Diag: blas.NonUnit, N: nc, Data: L, Stride: nc}, Xs)
		u := m - nc
		if u == 0 {
			continue
		}
		if cap(tmp) < u*k {
			tmp = make([]float64, u*k)
		}
		T := blas64.General{Rows: u, Cols: k, Data: tmp[:u*k], Stride: k}
		blas64.Gemm(blas.NoTrans, blas.NoTrans, 1, blas64.General{Rows: u, Cols: nc, Data: L[nc*nc:], Stride: nc}, Xs, 0, T)
		for r, row := range rows[nc:] {
			axpy(-1, T.Data[r*k:(r+1)*k], x[row*k:(row+1)*k])
		}
	}
	for s := ns - 1; s >= 0; s-- {
		f, l := sy.super[s], sy.super[s+1]
		rows := sy.rowIdx[sy.rowPtr[s]:sy.rowPtr[s+1]]
		nc, m := l-f, len(rows)
		L := sf.lVal[sy.lPtr[s]:sy.lPtr[s+1]]
		Xs := blas64.General{Rows: nc, Cols: k, Data: x[f*k : l*k], Stride: k}
		u := m - nc
		if u > 0 {
			if cap(tmp) < u*k {
				tmp = make([]float64, u*k)
			}
			G := blas64.General{Rows: u, Cols: k, Data: tmp[:u*k], Stride: k}
			for r, row := range rows[nc:] {
				copy(G.Data[r*k:(r+1)*k], x[row*k:(row+1)*k])
			}
			blas64.Gemm(blas.Trans, blas.NoTrans, -1, blas64.General{Rows: u, Cols: nc, Data: L[nc*nc:], Stride: nc}, G, 1, Xs)
		}
		blas64.Trsm(blas.Left, blas.Trans, 1, blas64.Triangular{Uplo: blas.Lower, Diag: blas.NonUnit, N: nc, Data: L, Stride: nc}, Xs)
	}
}

func factorizeAuto(a *Sym, ord Ordering, tol float64) (*Cholesky, error) {
	m := Band
	if a.n <= 200 {
		m = Dense
	}
	return Factorize(a, Options{Method: m, Ordering: ord, PivotTol: tol})
}
