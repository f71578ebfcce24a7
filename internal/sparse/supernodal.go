package sparse

import (
	"time"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
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
	st.NNZLExact = sy.nnzLExact
	st.Supernodes = len(sy.super) - 1
	st.Flops = sy.flops
	return numericSupernodal(a, sy, tol)
}

func numericSupernodal(a *Sym, sy *symbolic, tol float64) (factor, error) {
	n := sy.n
	ns := len(sy.super) - 1
	if e := sy.lPtr[ns]; e > maxFactorEntries {
		return nil, tooLarge(Supernodal, AutoOrdering, n, float64(e))
	}
	lVal := make([]float64, sy.lPtr[ns])
	diag := permutedDiagonal(a, sy.perm)
	pos := make([]int, n)
	var stack, work []float64
	var rel []int
	// Update matrices on the stack, most recent last: (supernode, size).
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
		u := m - nc
		for t, r := range rows {
			pos[r] = t
		}
		// The front is split in two: its first nc columns are assembled
		// and factored in place in L's storage (P, m×nc, zero from make),
		// its trailing u×u block (U) on top of the update stack, above the
		// children's update matrices.
		P := lVal[sy.lPtr[s]:sy.lPtr[s+1]]
		base := len(stack)
		stack = growFloats(stack, u*u)
		U := stack[base:]
		clear(U)
		for j := f; j < l; j++ {
			o := sy.perm[j]
			cj := j - f
			for q := a.p[o]; q < a.p[o+1]; q++ {
				if i := sy.iperm[a.i[q]]; i >= j {
					P[pos[i]*nc+cj] += a.v[q]
				}
			}
		}
		// Extend-add the children's update matrices, which lie below U in
		// reverse order of the children.
		top := base
		for c := 0; c < nchild[s]; c++ {
			uc := upd[len(upd)-1]
			child := upd[len(upd)-2]
			upd = upd[:len(upd)-2]
			crows := sy.rowIdx[sy.rowPtr[child]:sy.rowPtr[child+1]]
			crows = crows[len(crows)-uc:]
			Uc := stack[top-uc*uc : top]
			top -= uc * uc
			// Relative indices of the child's rows in this front; they
			// increase, so the first ysplit of them fall in P's columns.
			rel = rel[:0]
			ysplit := 0
			for _, r := range crows {
				p := pos[r]
				rel = append(rel, p)
				if p < nc {
					ysplit++
				}
			}
			for x, px := range rel {
				ux := Uc[x*uc : x*uc+x+1]
				if px < nc {
					row := P[px*nc:]
					for y, v := range ux {
						row[rel[y]] += v
					}
					continue
				}
				prow := P[px*nc:]
				for y, v := range ux[:ysplit] {
					prow[rel[y]] += v
				}
				urow := U[(px-nc)*u:]
				relU := rel[ysplit : x+1]
				for y, v := range ux[ysplit:] {
					urow[relU[y]-nc] += v
				}
			}
		}
		if k, d := factorFront(P, U, m, nc, diag[f:l], tol, &work); k >= 0 {
			return nil, pivotError(f+k, d, sy.perm, a, tol)
		}
		// Move U down over the consumed children and keep it for the
		// parent.
		if u > 0 && sy.sparen[s] >= 0 {
			copy(stack[top:top+u*u], U)
			stack = stack[:top+u*u]
			upd = append(upd, s, u)
		} else {
			stack = stack[:top]
		}
	}
	return &superFactor{sy: sy, lVal: lVal}, nil
}

// growFloats extends s by k elements.
func growFloats(s []float64, k int) []float64 {
	if cap(s)-len(s) < k {
		ns := make([]float64, len(s), 2*(len(s)+k))
		copy(ns, s)
		s = ns
	}
	return s[:len(s)+k]
}

// triInverse writes the inverse of the w×w lower triangle l (stride ld)
// into dst (row-major w×w, zeros above the diagonal) by column-oriented
// forward substitution (Higham, 2nd ed., §14.2, method 1) and returns it.
func triInverse(l []float64, w, ld int, dst []float64) []float64 {
	clear(dst)
	for j := 0; j < w; j++ {
		dst[j*w+j] = 1 / l[j*ld+j]
		for i := j + 1; i < w; i++ {
			s := 0.0
			for t := j; t < i; t++ {
				s += l[i*ld+t] * dst[t*w+j]
			}
			dst[i*w+j] = -s / l[i*ld+i]
		}
	}
	return dst
}

// frontBlock is the column block width of factorFront.
const frontBlock = 48

// factorFront factors the leading nc columns of an m×m frontal matrix held
// as the panel P (rows 0..m, columns 0..nc, row-major with stride nc) and
// the trailing block U (u×u, u = m-nc, stride u), lower triangles only:
// P11 = L11 L11ᵀ, L21 = P21 L11⁻ᵀ, U = U - L21 L21ᵀ (the Schur complement).
// It is a left-looking blocked Cholesky (Golub and Van Loan, 4th ed.,
// §4.2.9) whose updates all go through subABt. work is reusable scratch.
// It returns the first failing pivot position, or -1.
func factorFront(P, U []float64, m, nc int, diag []float64, tol float64, work *[]float64) (int, float64) {
	var inv [frontBlock * frontBlock]float64
	if need := max(0, m-min(nc, frontBlock)) * frontBlock; cap(*work) < need {
		*work = make([]float64, need)
	}
	for j0 := 0; j0 < nc; j0 += frontBlock {
		j1 := min(nc, j0+frontBlock)
		w := j1 - j0
		// Columns j0..j1 of rows j0..m less the earlier columns' share.
		subABt(m-j0, w, j0, P[j0*nc:], nc, P[j0*nc:], nc, P[j0*nc+j0:], nc, true)
		if k, d := cholUnblocked(P[j0*nc+j0:], w, nc, diag[j0:j1], tol); k >= 0 {
			return j0 + k, d
		}
		// Rows below the block: X = P[j1:m, J] L_JJ⁻ᵀ, as a product with
		// the explicit inverse of the small triangle so that it runs
		// through subABt as well.
		if r := m - j1; r > 0 {
			linv := triInverse(P[j0*nc+j0:], w, nc, inv[:w*w])
			T := (*work)[:r*w]
			for i := 0; i < r; i++ {
				row := P[(j1+i)*nc+j0 : (j1+i)*nc+j1]
				copy(T[i*w:(i+1)*w], row)
				clear(row)
			}
			subABt(r, w, w, T, w, linv, w, P[j1*nc+j0:], nc, false)
			for i := 0; i < r; i++ {
				row := P[(j1+i)*nc+j0 : (j1+i)*nc+j1]
				for j := range row {
					row[j] = -row[j]
				}
			}
		}
	}
	if u := m - nc; u > 0 {
		subABt(u, u, nc, P[nc*nc:], nc, P[nc*nc:], nc, U, u, true)
	}
	return -1, 0
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

// Auto selection thresholds. The rule for Method Auto decides from the
// order n and the half-bandwidth k after RCM alone (both cheap: RCM is a
// few breadth-first searches on the node graph), and computes only the
// ordering of the method it picks:
//
//  1. n <= DenseMaxN: Dense, natural order.
//  2. k <= bandMaxHalfBandwidth, or band work n·k² <= bandCheapWork: Band
//     after RCM (narrow structures: long bridges, whose k is set by the
//     cross-section and does not grow with the length).
//  3. k < ndMinHalfBandwidth: Supernodal after minimum degree.
//  4. Otherwise: Supernodal after nested dissection (wide structures: roof
//     grids, whose k grows as √n).
//
// The switch points come from the double-layer roof strips nx×ny of about
// 40k DOF (truss_test.go), where the work of the band factor n·k² and of
// the supernodal factor Σ c_j² (c_j the length of column j of L) were
// computed for every ordering: for strips of fixed width both grow
// linearly in the length, so their ratio depends on the width (that is, on
// k) alone. n·k² / Σc_j²(minimum degree) was 0.32 at k = 29, 0.94 at
// k = 53, 1.10 at k = 77, 1.37 at k = 101; the two kernels run at about
// the same rate per unit of these measures (grid-10k: band 6.0e8 units in
// 155 ms, supernodal 1.6e8 in 35 ms plus 16 ms of ordering), so the band
// wins up to k of about 64. Σc_j² after nested dissection against minimum
// degree: 1.24 at k = 149, 0.98 at k = 197, 0.92 at k = 293, 0.78 at
// k = 389 (strips); on square grids 1.11 at k = 182 (5k DOF), 1.06 at
// k = 242, 0.87 at k = 248 (10k), 0.91 at k = 362 (21k), 0.77 at k = 602
// (60k): dissection wins from k of about 240. The long
// box bridges have k = 20 at every length; the square roof grids have
// k = 248 at 10k DOF, 602 at 60k and 1346 at 300k.
const (
	// DenseMaxN is the largest order for which Auto takes the dense
	// method: below it the ordering and symbolic work of the sparse
	// methods costs more than the few flops they save (measured
	// crossover: between 30 and 50 unknowns for small trusses).
	DenseMaxN = 40
	// bandCheapWork is the band work n·k² under which Auto takes the band
	// method whatever k (about 10 ms of factorisation).
	bandCheapWork = 4e7
	// bandMaxHalfBandwidth is the largest RCM half-bandwidth for which
	// Auto takes the band method at any size.
	bandMaxHalfBandwidth = 64
	// ndMinHalfBandwidth is the smallest RCM half-bandwidth for which
	// Auto orders the supernodal factor by nested dissection rather than
	// minimum degree.
	ndMinHalfBandwidth = 240
)

// autoRule is the choice of Method Auto from the order n and the RCM
// half-bandwidth k (see the thresholds above). The ordering returned is
// the one Auto computes for the method.
func autoRule(n, k int) (Method, Ordering) {
	switch {
	case n <= DenseMaxN:
		return Dense, Natural
	case k <= bandMaxHalfBandwidth || float64(n)*float64(k)*float64(k) <= bandCheapWork:
		return Band, RCMOrdering
	case k < ndMinHalfBandwidth:
		return Supernodal, MinimumDegree
	}
	return Supernodal, NestedDissection
}

// orderers are the ordering functions Factorize calls; a test of the
// package passes counting wrappers to check which ones the Auto rule runs.
type orderers struct {
	rcm, amd, nd func(*Sym) []int
}

// productOrderers returns the orderings of the package.
func productOrderers() orderers {
	return orderers{rcm: rcmNodes, amd: AMD, nd: ND}
}

// compute returns the permutation for ord (nil for Natural).
func (o orderers) compute(a *Sym, ord Ordering) []int {
	switch ord {
	case RCMOrdering:
		return o.rcm(a)
	case MinimumDegree:
		return o.amd(a)
	case NestedDissection:
		return o.nd(a)
	}
	return nil
}

// factorizeAuto chooses the method by autoRule and, for AutoOrdering, the
// ordering with it, computing only the RCM ordering (for k) and the
// ordering of the chosen method. An explicit ordering is computed once and
// used both for k and for the method chosen.
func factorizeAuto(a *Sym, ord Ordering, tol float64, o orderers) (*Cholesky, error) {
	n := a.n
	t0 := time.Now()
	if n <= DenseMaxN {
		if ord == AutoOrdering {
			ord = Natural
		}
		perm := o.compute(a, ord)
		return factorizeWith(a, Dense, ord, perm, time.Since(t0), tol)
	}
	kOrd := ord
	if kOrd == AutoOrdering {
		kOrd = RCMOrdering
	}
	kPerm := o.compute(a, kOrd)
	kd := halfBandwidth(a, kPerm)
	m, autoOrd := autoRule(n, kd)
	perm := kPerm
	if ord == AutoOrdering && autoOrd != RCMOrdering {
		ord = autoOrd
		perm = o.compute(a, ord)
	} else {
		ord = kOrd
	}
	c, err := factorizeWith(a, m, ord, perm, time.Since(t0), tol)
	if err != nil {
		return nil, err
	}
	if m == Supernodal {
		c.stats.HalfBandwidth = kd
	}
	return c, nil
}
