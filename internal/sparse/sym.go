package sparse

import (
	"fmt"
	"sort"
)

// Builder accumulates the entries of an n×n symmetric matrix, summing
// duplicates as the direct stiffness method assembles element matrices.
// The zero value is not usable; call NewBuilder.
type Builder struct {
	n    int
	rows []int32 // row index, always >= col
	cols []int32
	vals []float64
	err  error
}

// NewBuilder returns a Builder for an n×n symmetric matrix.
func NewBuilder(n int) *Builder {
	b := &Builder{n: n}
	if n < 0 {
		b.err = fmt.Errorf("sparse: matrix order %d is negative; pass the number of unknowns", n)
		b.n = 0
	}
	return b
}

// Add adds v at (i,j) and, when i != j, also at (j,i). Call it once per
// unordered pair: Add(i,j,v) and Add(j,i,v) together add 2v to both
// entries. An index outside [0,n) is not stored; it is remembered and
// reported by Err and by Factorize.
func (b *Builder) Add(i, j int, v float64) {
	if i < 0 || j < 0 || i >= b.n || j >= b.n {
		if b.err == nil {
			b.err = fmt.Errorf("sparse: entry (%d,%d) is outside the %d×%d matrix; check the degree-of-freedom numbering", i, j, b.n, b.n)
		}
		return
	}
	if i < j {
		i, j = j, i
	}
	b.rows = append(b.rows, int32(i))
	b.cols = append(b.cols, int32(j))
	b.vals = append(b.vals, v)
}

// Err returns the first invalid Add, if any.
func (b *Builder) Err() error { return b.err }

// Matrix compresses the accumulated entries into a Sym. The Builder may be
// reused afterwards; further Adds do not change the returned matrix.
func (b *Builder) Matrix() *Sym {
	n := b.n
	// Count entries per lower-triangle column after summing duplicates:
	// sort the triplets by (col,row) with a counting sort on columns, then
	// by row inside each column.
	cnt := make([]int, n+1)
	for _, c := range b.cols {
		cnt[c+1]++
	}
	for k := 0; k < n; k++ {
		cnt[k+1] += cnt[k]
	}
	next := append([]int(nil), cnt[:n]...)
	ri := make([]int32, len(b.rows))
	rv := make([]float64, len(b.rows))
	for t, c := range b.cols {
		p := next[c]
		next[c]++
		ri[p] = b.rows[t]
		rv[p] = b.vals[t]
	}
	// Sort rows within each column and sum duplicates in place.
	lp := make([]int, n+1)
	m := 0
	for c := 0; c < n; c++ {
		seg := colSorter{ri[cnt[c]:cnt[c+1]], rv[cnt[c]:cnt[c+1]]}
		if !sort.IsSorted(seg) {
			sort.Sort(seg)
		}
		start := m
		for p := cnt[c]; p < cnt[c+1]; p++ {
			if m > start && ri[m-1] == ri[p] {
				rv[m-1] += rv[p]
				continue
			}
			ri[m] = ri[p]
			rv[m] = rv[p]
			m++
		}
		lp[c+1] = m
	}
	// Expand the lower triangle to both triangles (full CSR = CSC, since
	// the matrix is symmetric), columns sorted within each row.
	deg := make([]int, n+1)
	for c := 0; c < n; c++ {
		for p := lp[c]; p < lp[c+1]; p++ {
			r := int(ri[p])
			deg[r+1]++
			if r != c {
				deg[c+1]++
			}
		}
	}
	for k := 0; k < n; k++ {
		deg[k+1] += deg[k]
	}
	a := &Sym{n: n, p: deg, i: make([]int32, deg[n]), v: make([]float64, deg[n]), err: b.err}
	pos := append([]int(nil), deg[:n]...)
	// Visiting columns in increasing order fills every row in increasing
	// column order: entry (r,c) with c<r goes into row r when column c is
	// visited, and into row c (as column r) also at step c, after all
	// columns < c have been placed in row c.
	for c := 0; c < n; c++ {
		for p := lp[c]; p < lp[c+1]; p++ {
			r := int(ri[p])
			q := pos[r]
			pos[r]++
			a.i[q] = int32(c)
			a.v[q] = rv[p]
		}
		for p := lp[c]; p < lp[c+1]; p++ {
			r := int(ri[p])
			if r == c {
				continue
			}
			q := pos[c]
			pos[c]++
			a.i[q] = int32(r)
			a.v[q] = rv[p]
		}
	}
	return a
}

type colSorter struct {
	r []int32
	v []float64
}

func (s colSorter) Len() int           { return len(s.r) }
func (s colSorter) Less(a, b int) bool { return s.r[a] < s.r[b] }
func (s colSorter) Swap(a, b int) {
	s.r[a], s.r[b] = s.r[b], s.r[a]
	s.v[a], s.v[b] = s.v[b], s.v[a]
}

// Sym is a compressed symmetric sparse matrix. Both triangles are stored,
// row by row with sorted column indices (compressed sparse rows, which for a
// symmetric matrix is also compressed sparse columns).
type Sym struct {
	n   int
	p   []int     // row pointers, len n+1
	i   []int32   // column indices
	v   []float64 // values
	err error     // first invalid Add of the Builder, reported by Factorize
}

// N returns the order of the matrix.
func (a *Sym) N() int { return a.n }

// NNZ returns the number of stored entries of both triangles.
func (a *Sym) NNZ() int { return a.p[a.n] }

// NNZLower returns the number of entries of the lower triangle, diagonal
// included.
func (a *Sym) NNZLower() int { return (a.p[a.n] + a.n - a.zeroDiagonals()) / 2 }

func (a *Sym) zeroDiagonals() int {
	z := 0
	for r := 0; r < a.n; r++ {
		if !a.hasEntry(r, r) {
			z++
		}
	}
	return z
}

func (a *Sym) hasEntry(r, c int) bool {
	_, ok := a.find(r, c)
	return ok
}

func (a *Sym) find(r, c int) (int, bool) {
	lo, hi := a.p[r], a.p[r+1]
	for lo < hi {
		mid := int(uint(lo+hi) >> 1)
		if int(a.i[mid]) < c {
			lo = mid + 1
		} else {
			hi = mid
		}
	}
	if lo < a.p[r+1] && int(a.i[lo]) == c {
		return lo, true
	}
	return lo, false
}

// At returns the entry (i,j); zero where nothing is stored or outside the
// matrix.
func (a *Sym) At(i, j int) float64 {
	if i < 0 || j < 0 || i >= a.n || j >= a.n {
		return 0
	}
	if q, ok := a.find(i, j); ok {
		return a.v[q]
	}
	return 0
}

// MulVec sets dst = A x. dst and x must have length N and must not alias.
func (a *Sym) MulVec(dst, x []float64) {
	if len(dst) != a.n || len(x) != a.n {
		panic(fmt.Sprintf("sparse: MulVec lengths dst %d, x %d for order %d", len(dst), len(x), a.n))
	}
	for r := 0; r < a.n; r++ {
		s := 0.0
		cols := a.i[a.p[r]:a.p[r+1]]
		vals := a.v[a.p[r]:a.p[r+1]]
		for k, c := range cols {
			s += vals[k] * x[c]
		}
		dst[r] = s
	}
}

// Adjacency returns, for every row, the columns of its off-diagonal
// entries: the graph of the matrix, as RCM and MinimumDegree take it.
func (a *Sym) Adjacency() [][]int {
	adj := make([][]int, a.n)
	flat := make([]int, 0, a.p[a.n])
	for r := 0; r < a.n; r++ {
		start := len(flat)
		for _, c := range a.i[a.p[r]:a.p[r+1]] {
			if int(c) != r {
				flat = append(flat, int(c))
			}
		}
		adj[r] = flat[start:len(flat):len(flat)]
	}
	return adj
}

// Diagonal returns a copy of the diagonal.
func (a *Sym) Diagonal() []float64 {
	d := make([]float64, a.n)
	for r := range d {
		d[r] = a.At(r, r)
	}
	return d
}
