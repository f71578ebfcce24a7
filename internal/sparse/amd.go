package sparse

import "math"

// AMD returns a fill-reducing minimum degree ordering of the graph of a, as
// a permutation: perm[k] is the row placed at position k.
//
// Method: minimum degree on the quotient graph with approximate external
// degrees, as described by Amestoy, Davis and Duff, "An approximate minimum
// degree ordering algorithm", SIAM J. Matrix Anal. Appl. 17(4), 1996, and
// by George and Liu, "The evolution of the minimum degree ordering
// algorithm", SIAM Review 31(1), 1989:
//
//   - Eliminated nodes become elements of the quotient graph; the elements
//     adjacent to a pivot are absorbed into the new element (element
//     absorption), and so is any older element whose variables all lie in
//     the new one (aggressive absorption).
//   - Indistinguishable nodes are kept as one supervariable: up front for
//     the original graph (equal closed neighbourhoods, as the several
//     degrees of freedom of one truss joint), and after every pivot among
//     the variables of the new element, found by hashing their element and
//     variable lists and comparing the lists that collide. A variable left
//     with no neighbour outside the new element is eliminated together
//     with the pivot (mass elimination).
//   - The degree of a supervariable is the approximate external degree of
//     Amestoy, Davis and Duff (their equation for d̄ᵢ): the least of the
//     variables left, the previous degree plus the new element, and the sum
//     of the sizes of its element lists outside the new element.
//   - Supervariables wait in bucket lists indexed by degree; a pivot of
//     least degree is taken from the lowest non-empty bucket.
//   - A dense row, one with more than max(64, 10·√n) off-diagonal entries
//     (far more than any joint of a truss mesh), is left out of the graph
//     and ordered last, as is common practice: kept in, it would be in
//     nearly every new element and make the elimination quadratic.
//
// Multiple elimination (Liu, ACM TOMS 11, 1985) is not used: one pivot is
// taken at a time, which the approximate degrees make cheap. The order
// within ties is last-in first-out. Factorize composes the result with a
// postorder of the elimination tree.
//
// Provenance: original code for this project, written from the
// descriptions in the papers named above, not from any library's source.
func AMD(a *Sym) []int {
	n := a.n
	if n == 0 {
		return []int{}
	}
	g := newQuotientGraph(a)
	return g.order()
}

// Node states of the quotient graph.
const (
	stVar      uint8 = iota // principal variable, not yet eliminated
	stMerged                // variable merged into a supervariable or eliminated with a pivot
	stElem                  // live element: an eliminated supervariable
	stAbsorbed              // element absorbed into a later element
	stDense                 // dense row, ordered last
)

// quotientGraph is the state of the minimum degree elimination.
//
// Every node x owns the list iw[pe[x] : pe[x]+ln[x]]. For a variable the
// first ne[x] entries are its adjacent elements and the rest its adjacent
// variables; for an element the list holds its variables. Lists may hold
// stale entries (merged variables, absorbed elements), which are skipped
// when read and dropped when the list is rewritten.
type quotientGraph struct {
	n     int
	iw    []int32
	pe    []int
	ln    []int32
	ne    []int32
	state []uint8
	nv    []int // weight of a principal variable (original variables it stands for)
	deg   []int // approximate external degree of a principal variable
	esize []int // weight of the variables of a live element

	// Degree buckets: doubly linked lists headed by bhead[d].
	bhead        []int
	bnext, bprev []int
	minDeg       int

	// Members of a supervariable or pivot, in a singly linked list.
	memNext, memTail []int

	// Per-pivot work.
	stamp  int
	lpMark []int // lpMark[v] == stamp: v is in the new element
	wMark  []int // wMark[e] == stamp: w[e] holds |Le \ Lp|
	w      []int
	ext    []int  // external degree outside the new element
	hash   []uint // hash of the rewritten list
	lp     []int  // variables of the new element
	degLp  int    // weight of lp

	// Set comparison for supervariable detection.
	cmpStamp int
	cmpMark  []int
	hhead    []int
	hnext    []int
	touched  []int

	scratchE, scratchA []int32
	dense              []int // dense rows, ordered last
}

func newQuotientGraph(a *Sym) *quotientGraph {
	n := a.n
	g := &quotientGraph{
		n:       n,
		pe:      make([]int, n),
		ln:      make([]int32, n),
		ne:      make([]int32, n),
		state:   make([]uint8, n),
		nv:      make([]int, n),
		deg:     make([]int, n),
		esize:   make([]int, n),
		bhead:   make([]int, n+1),
		bnext:   make([]int, n),
		bprev:   make([]int, n),
		memNext: make([]int, n),
		memTail: make([]int, n),
		lpMark:  make([]int, n),
		wMark:   make([]int, n),
		w:       make([]int, n),
		ext:     make([]int, n),
		hash:    make([]uint, n),
		cmpMark: make([]int, n),
		hhead:   make([]int, n),
		hnext:   make([]int, n),
	}
	for i := 0; i < n; i++ {
		g.nv[i] = 1
		g.memNext[i] = -1
		g.memTail[i] = i
		g.hhead[i] = -1
	}
	for d := range g.bhead {
		g.bhead[d] = -1
	}
	g.deferDense(a)
	g.compressOriginal(a)
	// Variable lists of the principal variables: their principal
	// neighbours. A neighbour merged into r leaves r in the list, since
	// merged nodes have equal closed neighbourhoods.
	g.iw = make([]int32, 0, 2*a.p[n]+n)
	for i := 0; i < n; i++ {
		if g.state[i] != stVar {
			continue
		}
		g.pe[i] = len(g.iw)
		d := 0
		for _, c := range a.i[a.p[i]:a.p[i+1]] {
			j := int(c)
			if j != i && g.state[j] == stVar {
				g.iw = append(g.iw, c)
				d += g.nv[j]
			}
		}
		g.ln[i] = int32(len(g.iw) - g.pe[i])
		g.deg[i] = d
		g.bucketInsert(i)
	}
	return g
}

// denseDegree returns the number of off-diagonal entries above which a row
// of an n×n matrix is ordered last.
func denseDegree(n int) int {
	return max(64, int(10*math.Sqrt(float64(n))))
}

// deferDense marks the dense rows; they take no part in the elimination.
func (g *quotientGraph) deferDense(a *Sym) {
	limit := denseDegree(g.n)
	for i := 0; i < g.n; i++ {
		d := a.p[i+1] - a.p[i]
		if a.hasEntry(i, i) {
			d--
		}
		if d > limit {
			g.state[i] = stDense
			g.dense = append(g.dense, i)
		}
	}
}

// compressOriginal merges nodes of the original graph that have the same
// closed neighbourhood (indistinguishable nodes, George and Liu 1989):
// candidates share a hash of the neighbourhood and are compared as sets.
func (g *quotientGraph) compressOriginal(a *Sym) {
	n := g.n
	row := func(i int) []int32 { return a.i[a.p[i]:a.p[i+1]] }
	offDiag := make([]int, n)
	for i := 0; i < n; i++ {
		h := uint(i)
		k := 0
		for _, c := range row(i) {
			if int(c) != i {
				h += uint(c)
				k++
			}
		}
		offDiag[i] = k
		g.hash[i] = h % uint(n)
	}
	for i := n - 1; i >= 0; i-- {
		b := g.hash[i]
		g.hnext[i] = g.hhead[b]
		g.hhead[b] = i
	}
	for b := 0; b < n; b++ {
		for i := g.hhead[b]; i != -1; i = g.hnext[i] {
			if g.state[i] != stVar || offDiag[i] == 0 {
				continue
			}
			g.cmpStamp++
			g.cmpMark[i] = g.cmpStamp
			for _, c := range row(i) {
				g.cmpMark[c] = g.cmpStamp
			}
			for j := g.hnext[i]; j != -1; j = g.hnext[j] {
				if g.state[j] != stVar || offDiag[j] != offDiag[i] || g.cmpMark[j] != g.cmpStamp {
					continue
				}
				same := true
				for _, c := range row(j) {
					if g.cmpMark[c] != g.cmpStamp {
						same = false
						break
					}
				}
				if same {
					g.mergeInto(i, j)
				}
			}
		}
		g.hhead[b] = -1
	}
}

// mergeInto makes j a member of supervariable (or pivot) i.
func (g *quotientGraph) mergeInto(i, j int) {
	g.nv[i] += g.nv[j]
	g.nv[j] = 0
	g.state[j] = stMerged
	g.ln[j] = 0
	g.ne[j] = 0
	g.memNext[g.memTail[i]] = j
	g.memTail[i] = g.memTail[j]
}

func (g *quotientGraph) bucketInsert(i int) {
	d := g.deg[i]
	g.bprev[i] = -1
	g.bnext[i] = g.bhead[d]
	if h := g.bhead[d]; h != -1 {
		g.bprev[h] = i
	}
	g.bhead[d] = i
	if d < g.minDeg {
		g.minDeg = d
	}
}

func (g *quotientGraph) bucketRemove(i int) {
	if p := g.bprev[i]; p != -1 {
		g.bnext[p] = g.bnext[i]
	} else {
		g.bhead[g.deg[i]] = g.bnext[i]
	}
	if nx := g.bnext[i]; nx != -1 {
		g.bprev[nx] = g.bprev[i]
	}
}

// popMin removes and returns a supervariable of least degree.
func (g *quotientGraph) popMin() int {
	for g.bhead[g.minDeg] == -1 {
		g.minDeg++
	}
	p := g.bhead[g.minDeg]
	g.bucketRemove(p)
	return p
}

// order runs the elimination and returns the permutation.
func (g *quotientGraph) order() []int {
	n := g.n
	perm := make([]int, 0, n)
	eliminated := len(g.dense)
	for eliminated < n {
		p := g.popMin()
		g.stamp++
		g.buildElement(p)
		g.countOutside()
		g.rewriteLists(p)
		g.detectSupervariables()
		eliminated += g.nv[p]
		for v := p; v != -1; v = g.memNext[v] {
			perm = append(perm, v)
		}
		g.finishDegrees(n - eliminated)
		g.storeElement(p)
	}
	return append(perm, g.dense...)
}

// buildElement turns pivot p into an element: Lp is the union of p's
// variables and the variables of its elements, which are absorbed.
func (g *quotientGraph) buildElement(p int) {
	g.lp = g.lp[:0]
	g.degLp = 0
	g.lpMark[p] = g.stamp
	add := func(v int) {
		if g.state[v] == stVar && g.lpMark[v] != g.stamp {
			g.lpMark[v] = g.stamp
			g.lp = append(g.lp, v)
			g.degLp += g.nv[v]
		}
	}
	base, ne, ln := g.pe[p], int(g.ne[p]), int(g.ln[p])
	for t := 0; t < ne; t++ {
		e := int(g.iw[base+t])
		if g.state[e] != stElem {
			continue
		}
		for _, v := range g.iw[g.pe[e] : g.pe[e]+int(g.ln[e])] {
			add(int(v))
		}
		g.state[e] = stAbsorbed
		g.ln[e] = 0
	}
	for t := ne; t < ln; t++ {
		add(int(g.iw[base+t]))
	}
	for _, v := range g.lp {
		g.bucketRemove(v)
	}
	g.state[p] = stElem
	g.ln[p] = 0
	g.ne[p] = 0
}

// countOutside sets w[e] = |Le \ Lp| (weighted) for every live element e
// adjacent to a variable of Lp (Amestoy, Davis and Duff 1996, the first
// scan of the degree update).
func (g *quotientGraph) countOutside() {
	for _, i := range g.lp {
		base := g.pe[i]
		for _, c := range g.iw[base : base+int(g.ne[i])] {
			e := int(c)
			if g.state[e] != stElem {
				continue
			}
			if g.wMark[e] != g.stamp {
				g.wMark[e] = g.stamp
				g.w[e] = g.esize[e]
			}
			g.w[e] -= g.nv[i]
		}
	}
}

// rewriteLists prunes the list of every variable of Lp: absorbed elements
// and elements inside Lp go (aggressive absorption), p comes in, variables
// of Lp and merged variables go. It sums the external degree outside Lp
// and a hash of the new list, and eliminates with p every variable left
// without neighbours outside Lp (mass elimination).
func (g *quotientGraph) rewriteLists(p int) {
	kept := g.lp[:0]
	for _, i := range g.lp {
		sE, sA := g.scratchE[:0], g.scratchA[:0]
		ext := 0
		h := uint(p)
		base, ne, ln := g.pe[i], int(g.ne[i]), int(g.ln[i])
		for t := 0; t < ne; t++ {
			e := int(g.iw[base+t])
			if g.state[e] != stElem {
				continue
			}
			if g.w[e] == 0 {
				g.state[e] = stAbsorbed // Le ⊆ Lp
				g.ln[e] = 0
				continue
			}
			ext += g.w[e]
			sE = append(sE, int32(e))
			h += uint(e)
		}
		for t := ne; t < ln; t++ {
			j := int(g.iw[base+t])
			if g.state[j] != stVar || g.lpMark[j] == g.stamp {
				continue
			}
			ext += g.nv[j]
			sA = append(sA, int32(j))
			h += uint(j)
		}
		g.scratchE, g.scratchA = sE, sA
		if len(sE) == 0 && len(sA) == 0 {
			g.degLp -= g.nv[i]
			g.mergeInto(p, i)
			continue
		}
		need := 1 + len(sE) + len(sA)
		if need > ln {
			// Cannot happen for a consistent quotient graph (p replaces
			// an absorbed element or p itself in the list), but stay safe.
			g.ln[i] = 0
			g.ensure(need)
			base = len(g.iw)
			g.pe[i] = base
			g.iw = g.iw[:base+need]
		}
		g.iw[base] = int32(p)
		copy(g.iw[base+1:], sE)
		copy(g.iw[base+1+len(sE):], sA)
		g.ne[i] = int32(1 + len(sE))
		g.ln[i] = int32(need)
		g.ext[i] = ext
		g.hash[i] = h
		kept = append(kept, i)
	}
	g.lp = kept
}

// detectSupervariables merges variables of Lp whose rewritten lists are
// equal: they are indistinguishable from now on (Amestoy, Davis and Duff
// 1996, hashing of the element and variable lists).
func (g *quotientGraph) detectSupervariables() {
	n := uint(g.n)
	g.touched = g.touched[:0]
	for _, i := range g.lp {
		b := int(g.hash[i] % n)
		if g.hhead[b] == -1 {
			g.touched = append(g.touched, b)
		}
		g.hnext[i] = g.hhead[b]
		g.hhead[b] = i
	}
	for _, b := range g.touched {
		for i := g.hhead[b]; i != -1; i = g.hnext[i] {
			if g.state[i] != stVar || g.hnext[i] == -1 {
				continue
			}
			g.cmpStamp++
			li := g.iw[g.pe[i] : g.pe[i]+int(g.ln[i])]
			for _, c := range li {
				g.cmpMark[c] = g.cmpStamp
			}
			for j := g.hnext[i]; j != -1; j = g.hnext[j] {
				if g.state[j] != stVar || g.ln[j] != g.ln[i] || g.ne[j] != g.ne[i] || g.hash[j] != g.hash[i] {
					continue
				}
				same := true
				for _, c := range g.iw[g.pe[j] : g.pe[j]+int(g.ln[j])] {
					if g.cmpMark[c] != g.cmpStamp {
						same = false
						break
					}
				}
				if same {
					g.mergeInto(i, j)
				}
			}
		}
		g.hhead[b] = -1
	}
	kept := g.lp[:0]
	for _, i := range g.lp {
		if g.state[i] == stVar {
			kept = append(kept, i)
		}
	}
	g.lp = kept
}

// finishDegrees sets the approximate external degree of every variable of
// Lp and puts it back in its bucket:
// d̄ᵢ = min(nleft − |i|, d̄ᵢ(old) + |Lp \ i|, |Ai \ i| + |Lp \ i| + Σ_e |Le \ Lp|).
func (g *quotientGraph) finishDegrees(nleft int) {
	for _, i := range g.lp {
		lpOut := g.degLp - g.nv[i]
		d := nleft - g.nv[i]
		if v := g.deg[i] + lpOut; v < d {
			d = v
		}
		if v := g.ext[i] + lpOut; v < d {
			d = v
		}
		if d < 0 {
			d = 0
		}
		g.deg[i] = d
		g.bucketInsert(i)
	}
}

// storeElement writes the variables of the new element p to the end of the
// list storage.
func (g *quotientGraph) storeElement(p int) {
	if len(g.lp) == 0 {
		g.state[p] = stAbsorbed // no variables left to reach it
		return
	}
	g.ensure(len(g.lp))
	g.pe[p] = len(g.iw)
	for _, v := range g.lp {
		g.iw = append(g.iw, int32(v))
	}
	g.ln[p] = int32(len(g.lp))
	g.esize[p] = g.degLp
}

// ensure makes room for need more entries at the end of iw, compacting the
// live lists into fresh storage when it is full.
func (g *quotientGraph) ensure(need int) {
	if len(g.iw)+need <= cap(g.iw) {
		return
	}
	live := 0
	for x := 0; x < g.n; x++ {
		if g.state[x] == stVar || g.state[x] == stElem {
			live += int(g.ln[x])
		}
	}
	size := cap(g.iw)
	if 2*(live+need) > size {
		size = 2 * (live + need)
	}
	iw := make([]int32, 0, size)
	for x := 0; x < g.n; x++ {
		if g.state[x] != stVar && g.state[x] != stElem {
			continue
		}
		start := len(iw)
		iw = append(iw, g.iw[g.pe[x]:g.pe[x]+int(g.ln[x])]...)
		g.pe[x] = start
	}
	g.iw = iw
}
