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
	stateVariable uint8 = iota // principal variable, not yet eliminated
	stateMerged                // variable merged into a supervariable or eliminated with a pivot
	stateElement               // live element: an eliminated supervariable
	stateAbsorbed              // element absorbed into a later element
	stateDense                 // dense row, ordered last
)

// quotientGraph is the state of the minimum degree elimination on the
// quotient graph (George and Liu 1989; Amestoy, Davis and Duff 1996): its
// nodes are variables (not yet eliminated), supervariables (indistinguishable
// variables held as one) and elements (eliminated supervariables).
//
// Every node x owns the list lists[listStart[x] : listStart[x]+listLen[x]].
// For a variable the first elemCount[x] entries are its adjacent elements
// and the rest its adjacent variables; for an element the list holds its
// variables. Lists may hold stale entries (merged variables, absorbed
// elements), which are skipped when read and dropped when the list is
// rewritten.
type quotientGraph struct {
	n          int
	lists      []int32 // the adjacency lists of every node, back to back
	listStart  []int   // start of node x's list in lists
	listLen    []int32 // length of node x's list
	elemCount  []int32 // adjacent elements at the head of a variable's list
	state      []uint8 // stateVariable, stateMerged, ...
	weight     []int   // weight of a principal variable (original variables it stands for)
	degree     []int   // approximate external degree of a principal variable
	elemWeight []int   // weight of the variables of a live element

	// Degree buckets: doubly linked lists headed by bucketHead[d].
	bucketHead             []int
	bucketNext, bucketPrev []int
	minDegree              int

	// Members of a supervariable or pivot, in a singly linked list.
	memberNext, memberTail []int

	// Per-pivot work. The new element is Lp, the paper's name for the
	// variables of the element formed by pivot p.
	stamp         int
	inNewElem     []int  // inNewElem[v] == stamp: v is in Lp
	outsideStamp  []int  // outsideStamp[e] == stamp: outside[e] holds |Le \ Lp|
	outside       []int  // weight of element e's variables outside Lp
	external      []int  // external degree of a variable outside Lp
	listHash      []uint // hash of a variable's rewritten list
	newElem       []int  // Lp: the variables of the new element
	newElemWeight int    // weight of Lp

	// Set comparison for supervariable detection.
	compareStamp int
	compareMark  []int
	hashHead     []int
	hashNext     []int
	touched      []int

	keptElems, keptVars []int32 // a rewritten list's elements and variables
	dense               []int   // dense rows, ordered last
}

func newQuotientGraph(a *Sym) *quotientGraph {
	n := a.n
	g := &quotientGraph{
		n:            n,
		listStart:    make([]int, n),
		listLen:      make([]int32, n),
		elemCount:    make([]int32, n),
		state:        make([]uint8, n),
		weight:       make([]int, n),
		degree:       make([]int, n),
		elemWeight:   make([]int, n),
		bucketHead:   make([]int, n+1),
		bucketNext:   make([]int, n),
		bucketPrev:   make([]int, n),
		memberNext:   make([]int, n),
		memberTail:   make([]int, n),
		inNewElem:    make([]int, n),
		outsideStamp: make([]int, n),
		outside:      make([]int, n),
		external:     make([]int, n),
		listHash:     make([]uint, n),
		compareMark:  make([]int, n),
		hashHead:     make([]int, n),
		hashNext:     make([]int, n),
	}
	for i := 0; i < n; i++ {
		g.weight[i] = 1
		g.memberNext[i] = -1
		g.memberTail[i] = i
		g.hashHead[i] = -1
	}
	for d := range g.bucketHead {
		g.bucketHead[d] = -1
	}
	g.deferDense(a)
	g.compressOriginal(a)
	// Variable lists of the principal variables: their principal
	// neighbours. A neighbour merged into r leaves r in the list, since
	// merged nodes have equal closed neighbourhoods.
	g.lists = make([]int32, 0, 2*a.p[n]+n)
	for i := 0; i < n; i++ {
		if g.state[i] != stateVariable {
			continue
		}
		g.listStart[i] = len(g.lists)
		d := 0
		for _, c := range a.i[a.p[i]:a.p[i+1]] {
			j := int(c)
			if j != i && g.state[j] == stateVariable {
				g.lists = append(g.lists, c)
				d += g.weight[j]
			}
		}
		g.listLen[i] = int32(len(g.lists) - g.listStart[i])
		g.degree[i] = d
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
			g.state[i] = stateDense
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
		g.listHash[i] = h % uint(n)
	}
	for i := n - 1; i >= 0; i-- {
		b := g.listHash[i]
		g.hashNext[i] = g.hashHead[b]
		g.hashHead[b] = i
	}
	for b := 0; b < n; b++ {
		for i := g.hashHead[b]; i != -1; i = g.hashNext[i] {
			if g.state[i] != stateVariable || offDiag[i] == 0 {
				continue
			}
			g.compareStamp++
			g.compareMark[i] = g.compareStamp
			for _, c := range row(i) {
				g.compareMark[c] = g.compareStamp
			}
			for j := g.hashNext[i]; j != -1; j = g.hashNext[j] {
				if g.state[j] != stateVariable || offDiag[j] != offDiag[i] || g.compareMark[j] != g.compareStamp {
					continue
				}
				same := true
				for _, c := range row(j) {
					if g.compareMark[c] != g.compareStamp {
						same = false
						break
					}
				}
				if same {
					g.mergeInto(i, j)
				}
			}
		}
		g.hashHead[b] = -1
	}
}

// mergeInto makes j a member of supervariable (or pivot) i.
func (g *quotientGraph) mergeInto(i, j int) {
	g.weight[i] += g.weight[j]
	g.weight[j] = 0
	g.state[j] = stateMerged
	g.listLen[j] = 0
	g.elemCount[j] = 0
	g.memberNext[g.memberTail[i]] = j
	g.memberTail[i] = g.memberTail[j]
}

func (g *quotientGraph) bucketInsert(i int) {
	d := g.degree[i]
	g.bucketPrev[i] = -1
	g.bucketNext[i] = g.bucketHead[d]
	if h := g.bucketHead[d]; h != -1 {
		g.bucketPrev[h] = i
	}
	g.bucketHead[d] = i
	if d < g.minDegree {
		g.minDegree = d
	}
}

func (g *quotientGraph) bucketRemove(i int) {
	if p := g.bucketPrev[i]; p != -1 {
		g.bucketNext[p] = g.bucketNext[i]
	} else {
		g.bucketHead[g.degree[i]] = g.bucketNext[i]
	}
	if nx := g.bucketNext[i]; nx != -1 {
		g.bucketPrev[nx] = g.bucketPrev[i]
	}
}

// popMin removes and returns a supervariable of least degree.
func (g *quotientGraph) popMin() int {
	for g.bucketHead[g.minDegree] == -1 {
		g.minDegree++
	}
	p := g.bucketHead[g.minDegree]
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
		eliminated += g.weight[p]
		for v := p; v != -1; v = g.memberNext[v] {
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
	g.newElem = g.newElem[:0]
	g.newElemWeight = 0
	g.inNewElem[p] = g.stamp
	add := func(v int) {
		if g.state[v] == stateVariable && g.inNewElem[v] != g.stamp {
			g.inNewElem[v] = g.stamp
			g.newElem = append(g.newElem, v)
			g.newElemWeight += g.weight[v]
		}
	}
	base, elems, length := g.listStart[p], int(g.elemCount[p]), int(g.listLen[p])
	for t := 0; t < elems; t++ {
		e := int(g.lists[base+t])
		if g.state[e] != stateElement {
			continue
		}
		for _, v := range g.lists[g.listStart[e] : g.listStart[e]+int(g.listLen[e])] {
			add(int(v))
		}
		g.state[e] = stateAbsorbed
		g.listLen[e] = 0
	}
	for t := elems; t < length; t++ {
		add(int(g.lists[base+t]))
	}
	for _, v := range g.newElem {
		g.bucketRemove(v)
	}
	g.state[p] = stateElement
	g.listLen[p] = 0
	g.elemCount[p] = 0
}

// countOutside sets outside[e] = |Le \ Lp| (weighted) for every live element e
// adjacent to a variable of Lp (Amestoy, Davis and Duff 1996, the first
// scan of the degree update).
func (g *quotientGraph) countOutside() {
	for _, i := range g.newElem {
		base := g.listStart[i]
		for _, c := range g.lists[base : base+int(g.elemCount[i])] {
			e := int(c)
			if g.state[e] != stateElement {
				continue
			}
			if g.outsideStamp[e] != g.stamp {
				g.outsideStamp[e] = g.stamp
				g.outside[e] = g.elemWeight[e]
			}
			g.outside[e] -= g.weight[i]
		}
	}
}

// rewriteLists prunes the list of every variable of Lp: absorbed elements
// and elements inside Lp go (aggressive absorption), p comes in, variables
// of Lp and merged variables go. It sums the external degree outside Lp
// and a hash of the new list, and eliminates with p every variable left
// without neighbours outside Lp (mass elimination).
func (g *quotientGraph) rewriteLists(p int) {
	kept := g.newElem[:0]
	for _, i := range g.newElem {
		elems, vars := g.keptElems[:0], g.keptVars[:0]
		external := 0
		h := uint(p)
		base, nElems, length := g.listStart[i], int(g.elemCount[i]), int(g.listLen[i])
		for t := 0; t < nElems; t++ {
			e := int(g.lists[base+t])
			if g.state[e] != stateElement {
				continue
			}
			if g.outside[e] == 0 {
				g.state[e] = stateAbsorbed // Le ⊆ Lp
				g.listLen[e] = 0
				continue
			}
			external += g.outside[e]
			elems = append(elems, int32(e))
			h += uint(e)
		}
		for t := nElems; t < length; t++ {
			j := int(g.lists[base+t])
			if g.state[j] != stateVariable || g.inNewElem[j] == g.stamp {
				continue
			}
			external += g.weight[j]
			vars = append(vars, int32(j))
			h += uint(j)
		}
		g.keptElems, g.keptVars = elems, vars
		if len(elems) == 0 && len(vars) == 0 {
			g.newElemWeight -= g.weight[i]
			g.mergeInto(p, i)
			continue
		}
		need := 1 + len(elems) + len(vars)
		if need > length {
			// Cannot happen for a consistent quotient graph (p replaces
			// an absorbed element or p itself in the list), but stay safe.
			g.listLen[i] = 0
			g.ensure(need)
			base = len(g.lists)
			g.listStart[i] = base
			g.lists = g.lists[:base+need]
		}
		g.lists[base] = int32(p)
		copy(g.lists[base+1:], elems)
		copy(g.lists[base+1+len(elems):], vars)
		g.elemCount[i] = int32(1 + len(elems))
		g.listLen[i] = int32(need)
		g.external[i] = external
		g.listHash[i] = h
		kept = append(kept, i)
	}
	g.newElem = kept
}

// detectSupervariables merges variables of Lp whose rewritten lists are
// equal: they are indistinguishable from now on (Amestoy, Davis and Duff
// 1996, hashing of the element and variable lists).
func (g *quotientGraph) detectSupervariables() {
	n := uint(g.n)
	g.touched = g.touched[:0]
	for _, i := range g.newElem {
		b := int(g.listHash[i] % n)
		if g.hashHead[b] == -1 {
			g.touched = append(g.touched, b)
		}
		g.hashNext[i] = g.hashHead[b]
		g.hashHead[b] = i
	}
	for _, b := range g.touched {
		for i := g.hashHead[b]; i != -1; i = g.hashNext[i] {
			if g.state[i] != stateVariable || g.hashNext[i] == -1 {
				continue
			}
			g.compareStamp++
			li := g.lists[g.listStart[i] : g.listStart[i]+int(g.listLen[i])]
			for _, c := range li {
				g.compareMark[c] = g.compareStamp
			}
			for j := g.hashNext[i]; j != -1; j = g.hashNext[j] {
				if g.state[j] != stateVariable || g.listLen[j] != g.listLen[i] || g.elemCount[j] != g.elemCount[i] || g.listHash[j] != g.listHash[i] {
					continue
				}
				same := true
				for _, c := range g.lists[g.listStart[j] : g.listStart[j]+int(g.listLen[j])] {
					if g.compareMark[c] != g.compareStamp {
						same = false
						break
					}
				}
				if same {
					g.mergeInto(i, j)
				}
			}
		}
		g.hashHead[b] = -1
	}
	kept := g.newElem[:0]
	for _, i := range g.newElem {
		if g.state[i] == stateVariable {
			kept = append(kept, i)
		}
	}
	g.newElem = kept
}

// finishDegrees sets the approximate external degree of every variable of
// Lp and puts it back in its bucket:
// d̄ᵢ = min(nleft − |i|, d̄ᵢ(old) + |Lp \ i|, |Ai \ i| + |Lp \ i| + Σ_e |Le \ Lp|).
func (g *quotientGraph) finishDegrees(nleft int) {
	for _, i := range g.newElem {
		lpOut := g.newElemWeight - g.weight[i]
		d := nleft - g.weight[i]
		if v := g.degree[i] + lpOut; v < d {
			d = v
		}
		if v := g.external[i] + lpOut; v < d {
			d = v
		}
		if d < 0 {
			d = 0
		}
		g.degree[i] = d
		g.bucketInsert(i)
	}
}

// storeElement writes the variables of the new element p to the end of the
// list storage.
func (g *quotientGraph) storeElement(p int) {
	if len(g.newElem) == 0 {
		g.state[p] = stateAbsorbed // no variables left to reach it
		return
	}
	g.ensure(len(g.newElem))
	g.listStart[p] = len(g.lists)
	for _, v := range g.newElem {
		g.lists = append(g.lists, int32(v))
	}
	g.listLen[p] = int32(len(g.newElem))
	g.elemWeight[p] = g.newElemWeight
}

// ensure makes room for need more entries at the end of lists, compacting the
// live lists into fresh storage when it is full.
func (g *quotientGraph) ensure(need int) {
	if len(g.lists)+need <= cap(g.lists) {
		return
	}
	live := 0
	for x := 0; x < g.n; x++ {
		if g.state[x] == stateVariable || g.state[x] == stateElement {
			live += int(g.listLen[x])
		}
	}
	size := cap(g.lists)
	if 2*(live+need) > size {
		size = 2 * (live + need)
	}
	lists := make([]int32, 0, size)
	for x := 0; x < g.n; x++ {
		if g.state[x] != stateVariable && g.state[x] != stateElement {
			continue
		}
		start := len(lists)
		lists = append(lists, g.lists[g.listStart[x]:g.listStart[x]+int(g.listLen[x])]...)
		g.listStart[x] = start
	}
	g.lists = lists
}
