package sparse

import (
	"errors"
	"fmt"
	"math"
	"time"

	"gonum.org/v1/gonum/mat"
)

// Method is a Cholesky factorisation method.
type Method int

// The factorisation methods. Auto (the zero value) chooses one from the
// matrix; see Factorize.
const (
	Auto Method = iota
	Dense
	Band
	Supernodal
)

func (m Method) String() string {
	switch m {
	case Auto:
		return "auto"
	case Dense:
		return "dense"
	case Band:
		return "band"
	case Supernodal:
		return "supernodal"
	}
	return fmt.Sprintf("Method(%d)", int(m))
}

// Ordering is a symmetric permutation applied before factorising.
type Ordering int

// The orderings. AutoOrdering (the zero value) takes the natural order for
// Dense, RCM for Band and MinimumDegree for Supernodal when the method is
// given; with Method Auto it takes the ordering autoRule names (for wide
// grids NestedDissection, see ND).
const (
	AutoOrdering Ordering = iota
	Natural
	RCMOrdering
	MinimumDegree
	NestedDissection
)

func (o Ordering) String() string {
	switch o {
	case AutoOrdering:
		return "auto"
	case Natural:
		return "natural"
	case RCMOrdering:
		return "rcm"
	case MinimumDegree:
		return "amd"
	case NestedDissection:
		return "nd"
	}
	return fmt.Sprintf("Ordering(%d)", int(o))
}

// DefaultPivotTol is the relative pivot tolerance used when
// Options.PivotTol is zero.
//
// A pivot d_j (the diagonal entry of row j after eliminating the rows
// before it, L_jj²) is rejected when d_j <= PivotTol · A_jj, with A_jj the
// original diagonal entry of that row. Since A_jj = d_j + Σ_k L_jk², every
// term is bounded by A_jj for a positive definite matrix, so the rounding
// error of d_j is of order n_j·ε·A_jj (ε = 2.2e-16, n_j the terms summed;
// Higham, "Accuracy and Stability of Numerical Algorithms", 2nd ed., §10.1).
// For a truss mechanism d_j is zero in exact arithmetic and comes out at
// that rounding level, about 1e-14..1e-13 · A_jj for thousands of terms.
// 1e-10 leaves three orders of magnitude above it, and still accepts a row
// that keeps a ten-billionth of its own stiffness after elimination, far
// softer than any real member or spring support relative to its
// neighbours. Scaling by the row's own diagonal ("diagonal decay", common
// practice in finite-element codes) rather than by the largest diagonal of
// the whole matrix keeps a legitimately soft spring support in a stiff
// structure from being mistaken for a mechanism.
const DefaultPivotTol = 1e-10

// Options selects the factorisation. The zero value chooses automatically.
type Options struct {
	Method   Method
	Ordering Ordering
	// PivotTol is the relative pivot tolerance; zero means DefaultPivotTol.
	PivotTol float64
}

// NotPositiveDefiniteError reports a pivot that is not clearly positive:
// the matrix is singular, nearly singular or indefinite (for a stiffness
// matrix: a mechanism, or a missing support).
type NotPositiveDefiniteError struct {
	Index    int     // row in the caller's (original) numbering where the pivot failed
	Pivot    float64 // the pivot d_j found there (may be negative or NaN)
	Diagonal float64 // the original diagonal entry A_jj of that row
	Tol      float64 // the relative pivot tolerance that was applied
}

func (e *NotPositiveDefiniteError) Error() string {
	return fmt.Sprintf("sparse: matrix is not positive definite: pivot %.3g at row %d is not above %.0e times its diagonal %.3g; "+
		"the system is singular there (for a stiffness matrix: a mechanism or a missing support at that degree of freedom)",
		e.Pivot, e.Index, e.Tol, e.Diagonal)
}

// Stats describes a factorisation.
type Stats struct {
	Method        Method
	Ordering      Ordering
	N             int           // order of the matrix
	NNZA          int           // entries of the lower triangle of A, diagonal included
	NNZL          int           // entries of the factor L stored (band: n·(k+1); supernodal: including explicit zeros of amalgamated supernodes)
	NNZLExact     int           // entries of L implied by the ordering, without explicit zeros (supernodal; zero for the others)
	HalfBandwidth int           // half-bandwidth of the permuted matrix (band and dense methods; RCM bandwidth for the others when computed)
	Supernodes    int           // number of supernodes (supernodal method)
	Flops         float64       // floating-point operations of the numeric factorisation (estimate)
	OrderTime     time.Duration // ordering and symbolic analysis
	FactorTime    time.Duration // numeric factorisation
}

// maxFactorEntries bounds the storage of one factor (2^29 float64, 4 GiB):
// beyond it Factorize returns an error instead of exhausting memory, e.g.
// for the dense method on a large model or the band method after a
// fill-reducing ordering.
const maxFactorEntries = 1 << 29

// tooLarge is the error for a factor that would exceed maxFactorEntries.
func tooLarge(m Method, ord Ordering, n int, entries float64) error {
	return fmt.Errorf("sparse: the %v factor of the %d×%d matrix after %v ordering would hold %.3g entries (%.1f GiB), over the limit of %d; use Method Auto, or Band with RCM or Supernodal with minimum degree",
		m, n, n, ord, entries, entries*8/(1<<30), maxFactorEntries)
}

// factor is the numeric factor of the permuted matrix P A Pᵀ = L Lᵀ.
type factor interface {
	// solve overwrites x with (L Lᵀ)⁻¹ x, in permuted numbering.
	solve(x []float64)
	// solveMany overwrites the row-major n×k block x with (L Lᵀ)⁻¹ x.
	solveMany(x []float64, k int)
}

// Cholesky is the factor of a symmetric positive definite matrix,
// P A Pᵀ = L Lᵀ, computed once and reused for any number of right-hand
// sides. It is safe for concurrent Solve calls.
type Cholesky struct {
	n     int
	perm  []int // perm[k] = original row at position k
	f     factor
	stats Stats
}

// pivotError builds the error for a failed pivot at permuted position k.
func pivotError(k int, pivot float64, perm []int, a *Sym, tol float64) error {
	orig := k
	if perm != nil {
		orig = perm[k]
	}
	return &NotPositiveDefiniteError{Index: orig, Pivot: pivot, Diagonal: a.At(orig, orig), Tol: tol}
}

// pivotOK reports whether pivot d is acceptable for a row whose original
// diagonal entry is diag.
func pivotOK(d, diag, tol float64) bool {
	return d > tol*diag && d > 0 && !math.IsInf(d, 0)
}

// Factorize computes the Cholesky factor P A Pᵀ = L Lᵀ of a. With Method
// Auto the method is chosen from n and the RCM half-bandwidth k alone (see
// DenseMaxN and autoRule): Dense for n <= DenseMaxN; Band after RCM for
// k <= 64 or n·k² <= 4e7; otherwise Supernodal, after minimum degree for
// k < 240 and after nested dissection from k = 240. Only the ordering of
// the chosen method is computed. With an explicit Method and Ordering
// AutoOrdering each method takes its own ordering (Dense: natural, Band:
// RCM, Supernodal: minimum degree).
//
// A pivot d_j <= PivotTol·A_jj (see DefaultPivotTol) stops the
// factorisation with a *NotPositiveDefiniteError naming the row in a's
// numbering.
func Factorize(a *Sym, opt Options) (*Cholesky, error) {
	if a == nil {
		return nil, errors.New("sparse: Factorize of a nil matrix")
	}
	if a.err != nil {
		return nil, fmt.Errorf("sparse: matrix was built with an invalid entry: %w", a.err)
	}
	tol := opt.PivotTol
	if tol == 0 {
		tol = DefaultPivotTol
	}
	if tol < 0 || math.IsNaN(tol) {
		return nil, fmt.Errorf("sparse: pivot tolerance %g is not a non-negative number", opt.PivotTol)
	}
	for p, v := range a.v {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			r := 0
			for a.p[r+1] <= p {
				r++
			}
			return nil, fmt.Errorf("sparse: entry (%d,%d) is %g; the matrix must be finite", r, a.i[p], v)
		}
	}
	switch opt.Method {
	case Auto:
		return factorizeAuto(a, opt.Ordering, tol, productOrderers())
	case Dense, Band, Supernodal:
	default:
		return nil, fmt.Errorf("sparse: unknown factorisation method %d", int(opt.Method))
	}
	switch opt.Ordering {
	case AutoOrdering, Natural, RCMOrdering, MinimumDegree, NestedDissection:
	default:
		return nil, fmt.Errorf("sparse: unknown ordering %d", int(opt.Ordering))
	}
	ord := opt.Ordering
	if ord == AutoOrdering {
		switch opt.Method {
		case Dense:
			ord = Natural
		case Band:
			ord = RCMOrdering
		case Supernodal:
			ord = MinimumDegree
		}
	}
	t0 := time.Now()
	perm := productOrderers().compute(a, ord)
	orderTime := time.Since(t0)
	return factorizeWith(a, opt.Method, ord, perm, orderTime, tol)
}

func factorizeWith(a *Sym, m Method, ord Ordering, perm []int, orderTime time.Duration, tol float64) (*Cholesky, error) {
	c := &Cholesky{n: a.n, perm: perm}
	c.stats = Stats{Method: m, Ordering: ord, N: a.n, NNZA: a.NNZLower(), OrderTime: orderTime}
	var err error
	t0 := time.Now()
	switch m {
	case Dense:
		c.f, err = factorDense(a, perm, tol, &c.stats)
	case Band:
		c.f, err = factorBand(a, perm, tol, &c.stats)
	case Supernodal:
		c.f, err = factorSupernodal(a, perm, tol, &c.stats)
	}
	c.stats.FactorTime = time.Since(t0) - c.stats.OrderTime + orderTime
	if err != nil {
		return nil, err
	}
	if sf, ok := c.f.(*superFactor); ok {
		c.perm = sf.sy.perm // composed with the elimination-tree postorder
	}
	return c, nil
}

// N returns the order of the factored matrix.
func (f *Cholesky) N() int { return f.n }

// Stats returns the method, ordering, sizes and times of the factorisation.
func (f *Cholesky) Stats() Stats { return f.stats }

// Solve sets dst = A⁻¹ b. dst may alias b. It panics if the lengths are not
// N (a programming error, not an input error).
func (f *Cholesky) Solve(dst, b []float64) {
	if len(dst) != f.n || len(b) != f.n {
		panic(fmt.Sprintf("sparse: Solve lengths dst %d, b %d for order %d", len(dst), len(b), f.n))
	}
	w := make([]float64, f.n)
	if f.perm == nil {
		copy(w, b)
	} else {
		for k, o := range f.perm {
			w[k] = b[o]
		}
	}
	f.f.solve(w)
	if f.perm == nil {
		copy(dst, w)
	} else {
		for k, o := range f.perm {
			dst[o] = w[k]
		}
	}
}

// SolveMany sets dst = A⁻¹ b for every column of b at once, with blocked
// triangular solves. dst and b must be N×k; dst may be b.
func (f *Cholesky) SolveMany(dst, b *mat.Dense) {
	r, k := b.Dims()
	dr, dk := dst.Dims()
	if r != f.n || dr != f.n || dk != k {
		panic(fmt.Sprintf("sparse: SolveMany dims dst %d×%d, b %d×%d for order %d", dr, dk, r, k, f.n))
	}
	if k == 0 || f.n == 0 {
		return
	}
	w := make([]float64, f.n*k)
	for p := 0; p < f.n; p++ {
		o := p
		if f.perm != nil {
			o = f.perm[p]
		}
		mat.Row(w[p*k:(p+1)*k], o, b)
	}
	f.f.solveMany(w, k)
	for p := 0; p < f.n; p++ {
		o := p
		if f.perm != nil {
			o = f.perm[p]
		}
		dst.SetRow(o, w[p*k:(p+1)*k])
	}
}

// inversePerm returns iperm with iperm[perm[k]] = k.
func inversePerm(perm []int) []int {
	ip := make([]int, len(perm))
	for k, o := range perm {
		ip[o] = k
	}
	return ip
}
