package sparse

// ND returns a nested-dissection ordering of the graph of a, as a
// permutation: perm[k] is the row placed at position k.
//
// Method: nested dissection (George, "Nested dissection of a regular
// finite element mesh", SIAM J. Numer. Anal. 10(2), 1973): a vertex
// separator S splits the graph into two parts A and B with no edge between
// them; A and B are ordered first, recursively, and S last, so that the
// elimination of A never fills B and the fill is confined to the blocks of
// the separators. On a k×k grid this gives O(k² log k) factor entries,
// against O(k³) for a band ordering.
//
// The separators are found by the graph-partitioning heuristic named
// "automatic nested dissection" by George and Liu ("Computer Solution of
// Large Sparse Positive Definite Systems", 1981, chapter 8): a rooted level
// structure from a pseudo-peripheral vertex (breadth-first level sets) and
// its middle level, by weight, as the separator. That separator is then
// improved by a vertex-separator form of the Fiduccia-Mattheyses heuristic
// (Fiduccia and Mattheyses, "A linear-time heuristic for improving network
// partitions", 19th Design Automation Conference, 1982; vertex-separator
// form as in Ashcraft and Liu, "A partition improvement algorithm for
// generalized nested dissection", 1994): a separator vertex moves to one
// side and pulls its neighbours on the other side into the separator when
// that lowers the separator's weight, passes of moves with the best state
// kept, within a balance bound. Parts below ndLeafDOF unknowns are
// ordered by minimum degree (AMD, on the part's own graph).
//
// The work is done on the node graph: rows with the same pattern that are
// consecutive (the degrees of freedom of one truss joint) form one vertex
// weighted by their count, so the graph is dim times smaller and the
// weights keep the balance and separator sizes in unknowns.
//
// Provenance: original code for this project, written from the
// descriptions in the publications named above.
func ND(a *Sym) []int {
	n := a.n
	if n == 0 {
		return []int{}
	}
	g := newNodeGraph(a)
	d := newDissector(g)
	order := d.order()
	perm := make([]int, 0, n)
	for _, v := range order {
		for r := g.first[v]; r < g.first[v+1]; r++ {
			perm = append(perm, r)
		}
	}
	return perm
}

// expand turns an order of the vertices into an order of the rows, the
// rows of each vertex in their original order.
func (g *nodeGraph) expand(order []int) []int {
	perm := make([]int, 0, g.first[len(g.first)-1])
	for _, v := range order {
		for r := g.first[v]; r < g.first[v+1]; r++ {
			perm = append(perm, r)
		}
	}
	return perm
}

// ndLeafDOF is the size, in unknowns, under which a part is ordered by
// minimum degree instead of being dissected further. Measured on the
// double-layer roof grids (exact nnz(L) at 10k / 60k / 300k DOF): 360
// gave 0.903 / 8.04 / 50.5 M, 60 gave 0.880 / 7.64 / 48.7 M, 30 gave
// 0.855 / 7.53 / 47.8 M, 15 gave 0.844 / 7.47 / 47.5 M with the same
// stored (amalgamated) factor as 30: dissecting down to a few joints pays
// on these meshes.
const ndLeafDOF = 30

// ndBalance bounds the imbalance the separator refinement may create: each
// side holds at most this share of the weight of both sides.
const ndBalance = 0.6

// nodeGraph is the compressed graph of a matrix: vertex v stands for rows
// first[v] .. first[v+1]-1, which have the same pattern.
type nodeGraph struct {
	first []int   // len nv+1
	wgt   []int32 // rows of each vertex
	xadj  []int   // adjacency of v: adj[xadj[v]:xadj[v+1]], no self loop
	adj   []int32
}

// sameRow reports whether rows r and s of a have the same column pattern.
func sameRow(a *Sym, r, s int) bool {
	x, y := a.i[a.p[r]:a.p[r+1]], a.i[a.p[s]:a.p[s+1]]
	if len(x) != len(y) {
		return false
	}
	for k := range x {
		if x[k] != y[k] {
			return false
		}
	}
	return true
}

// newNodeGraph groups consecutive rows of equal pattern that hold each
// other (the full block of one joint) into vertices.
func newNodeGraph(a *Sym) *nodeGraph {
	n := a.n
	g := &nodeGraph{}
	node := make([]int32, n)
	for r := 0; r < n; {
		s := r + 1
		for s < n && a.hasEntry(s, r) && sameRow(a, r, s) {
			s++
		}
		v := int32(len(g.first))
		g.first = append(g.first, r)
		g.wgt = append(g.wgt, int32(s-r))
		for t := r; t < s; t++ {
			node[t] = v
		}
		r = s
	}
	nv := len(g.first)
	g.first = append(g.first, n)
	g.xadj = make([]int, nv+1)
	mark := make([]int32, nv)
	for v := range mark {
		mark[v] = -1
	}
	for v := 0; v < nv; v++ {
		r := g.first[v]
		mark[v] = int32(v)
		for _, c := range a.i[a.p[r]:a.p[r+1]] {
			if w := node[c]; mark[w] != int32(v) {
				mark[w] = int32(v)
				g.adj = append(g.adj, w)
			}
		}
		g.xadj[v+1] = len(g.adj)
	}
	return g
}

// Part labels of the separator refinement.
const (
	sideA   int8 = 0
	sideB   int8 = 1
	sideSep int8 = 2
)

// dissector holds the state of the recursive dissection. A part is the
// set of vertices whose label equals the part's id; a vertex already
// ordered has label -1.
type dissector struct {
	g     *nodeGraph
	label []int32
	next  int32 // next free label
	perm  []int32
	hi    int // positions [0, hi) of perm are still free

	level []int32 // scratch: BFS level, -1 unvisited
	queue []int32
	side  []int8

	// refinement scratch
	gain    [2][]int
	heapPos [2][]int32
	heap    [2][]int32
	locked  []bool
}

func newDissector(g *nodeGraph) *dissector {
	nv := len(g.wgt)
	d := &dissector{
		g:      g,
		label:  make([]int32, nv),
		perm:   make([]int32, nv),
		hi:     nv,
		level:  make([]int32, nv),
		side:   make([]int8, nv),
		locked: make([]bool, nv),
	}
	for k := 0; k < 2; k++ {
		d.gain[k] = make([]int, nv)
		d.heapPos[k] = make([]int32, nv)
		for v := range d.heapPos[k] {
			d.heapPos[k][v] = -1
		}
	}
	for v := range d.level {
		d.level[v] = -1
	}
	return d
}

// order dissects the whole graph and returns the vertex order.
func (d *dissector) order() []int32 {
	nv := len(d.g.wgt)
	all := make([]int32, nv)
	for v := range all {
		all[v] = int32(v)
	}
	d.next = 1
	d.dissect(all, 0)
	return d.perm
}

// place puts vs at the last free positions of perm and marks them ordered.
func (d *dissector) place(vs []int32) {
	d.hi -= len(vs)
	copy(d.perm[d.hi:], vs)
	for _, v := range vs {
		d.label[v] = -1
	}
}

// weight returns the number of unknowns of vs.
func (d *dissector) weight(vs []int32) int {
	w := 0
	for _, v := range vs {
		w += int(d.g.wgt[v])
	}
	return w
}

// dissect orders the part vs (all labelled id) into the free positions
// ending at d.hi: its separator last, the two sides before it,
// recursively. Parts are handled from the last position backwards, so the
// side ordered last (B) is dissected first.
func (d *dissector) dissect(vs []int32, id int32) {
	if len(vs) == 0 {
		return
	}
	if d.weight(vs) <= ndLeafDOF {
		d.leaf(vs, id)
		return
	}
	// Connected components are independent: order each on its own. They
	// are all found in one sweep (a fresh label marks a component as
	// found), so a graph of many small components costs linear time and
	// no deep recursion.
	comp := d.bfs(vs[0], id)
	if len(comp) < len(vs) {
		comps := [][]int32{comp}
		labels := []int32{d.newLabel(comp)}
		for _, v := range vs {
			if d.label[v] == id {
				c := d.bfs(v, id)
				comps = append(comps, c)
				labels = append(labels, d.newLabel(c))
			}
		}
		for k := len(comps) - 1; k >= 0; k-- {
			d.dissect(comps[k], labels[k])
		}
		return
	}
	sep, pa, pb := d.separate(vs, id)
	if len(sep) == 0 || len(pa) == 0 || len(pb) == 0 {
		d.leaf(vs, id)
		return
	}
	d.place(sep)
	la := d.newLabel(pa)
	lb := d.newLabel(pb)
	d.dissect(pb, lb)
	d.dissect(pa, la)
}

// newLabel gives vs a fresh label and returns it.
func (d *dissector) newLabel(vs []int32) int32 {
	id := d.next
	d.next++
	for _, v := range vs {
		d.label[v] = id
	}
	return id
}

// bfs returns the vertices of root's component within part id in
// breadth-first order, with d.level set to their levels (reset by the
// caller through resetLevels).
func (d *dissector) bfs(root int32, id int32) []int32 {
	q := d.levels(root, id)
	out := append([]int32(nil), q...)
	for _, v := range q {
		d.level[v] = -1
	}
	return out
}

// levels runs a BFS from root in part id and returns the visit order; the
// levels stay in d.level until resetLevels.
func (d *dissector) levels(root, id int32) []int32 {
	g := d.g
	q := d.queue[:0]
	q = append(q, root)
	d.level[root] = 0
	for h := 0; h < len(q); h++ {
		v := q[h]
		for _, w := range g.adj[g.xadj[v]:g.xadj[v+1]] {
			if d.label[w] == id && d.level[w] < 0 {
				d.level[w] = d.level[v] + 1
				q = append(q, w)
			}
		}
	}
	d.queue = q
	return q
}

func (d *dissector) resetLevels(q []int32) {
	for _, v := range q {
		d.level[v] = -1
	}
}

// degreeIn returns the number of neighbours of v in part id.
func (d *dissector) degreeIn(v, id int32) int {
	k := 0
	for _, w := range d.g.adj[d.g.xadj[v]:d.g.xadj[v+1]] {
		if d.label[w] == id {
			k++
		}
	}
	return k
}

// pseudoPeripheral returns a vertex of nearly maximal eccentricity in the
// connected part id (George and Liu 1981, section 4.3.2: move to a vertex
// of least degree in the last level while the depth grows).
func (d *dissector) pseudoPeripheral(start, id int32) int32 {
	root := start
	q := d.levels(root, id)
	depth := d.level[q[len(q)-1]]
	for iter := 0; iter < 8; iter++ {
		cand, cd := int32(-1), 0
		for k := len(q) - 1; k >= 0 && d.level[q[k]] == depth; k-- {
			if dg := d.degreeIn(q[k], id); cand < 0 || dg < cd {
				cand, cd = q[k], dg
			}
		}
		d.resetLevels(q)
		q = d.levels(cand, id)
		d2 := d.level[q[len(q)-1]]
		if d2 <= depth {
			break
		}
		root, depth = cand, d2
	}
	d.resetLevels(q)
	return root
}

// separate splits the connected part vs into a separator and two sides:
// the middle level (by weight) of a level structure rooted at a
// pseudo-peripheral vertex, improved by refine.
func (d *dissector) separate(vs []int32, id int32) (sep, pa, pb []int32) {
	root := d.pseudoPeripheral(vs[0], id)
	q := d.levels(root, id)
	depth := int(d.level[q[len(q)-1]])
	if depth < 2 {
		d.resetLevels(q)
		return nil, nil, nil
	}
	lw := make([]int, depth+1)
	total := 0
	for _, v := range q {
		lw[d.level[v]] += int(d.g.wgt[v])
		total += int(d.g.wgt[v])
	}
	// Middle level by weight: the level holding the half-weight point,
	// kept inside 1..depth-1 so both sides are non-empty.
	mid, acc := 1, 0
	for l := 0; l <= depth; l++ {
		if acc+lw[l] > total/2 {
			mid = l
			break
		}
		acc += lw[l]
	}
	mid = min(max(mid, 1), depth-1)
	for _, v := range q {
		switch l := int(d.level[v]); {
		case l < mid:
			d.side[v] = sideA
		case l > mid:
			d.side[v] = sideB
		default:
			d.side[v] = sideSep
		}
	}
	// A level vertex with no neighbour in the next level joins A.
	for _, v := range q {
		if d.side[v] != sideSep {
			continue
		}
		touchB := false
		for _, w := range d.g.adj[d.g.xadj[v]:d.g.xadj[v+1]] {
			if d.label[w] == id && d.side[w] == sideB {
				touchB = true
				break
			}
		}
		if !touchB {
			d.side[v] = sideA
		}
	}
	d.resetLevels(q)
	d.refine(vs, id)
	for _, v := range vs {
		switch d.side[v] {
		case sideA:
			pa = append(pa, v)
		case sideB:
			pb = append(pb, v)
		default:
			sep = append(sep, v)
		}
	}
	return sep, pa, pb
}

// leaf orders the part vs by minimum degree on its own graph.
func (d *dissector) leaf(vs []int32, id int32) {
	if len(vs) <= 2 {
		d.place(vs)
		return
	}
	g := d.g
	local := d.level // reuse as local index map (all -1 outside BFS)
	for k, v := range vs {
		local[v] = int32(k)
	}
	sub := &Sym{n: len(vs), p: make([]int, len(vs)+1)}
	for k, v := range vs {
		row := make([]int32, 0, 16)
		row = append(row, int32(k))
		for _, w := range g.adj[g.xadj[v]:g.xadj[v+1]] {
			if d.label[w] == id {
				row = append(row, local[w])
			}
		}
		sortInt32(row)
		sub.i = append(sub.i, row...)
		sub.p[k+1] = len(sub.i)
	}
	for _, v := range vs {
		local[v] = -1
	}
	order := AMD(sub)
	out := make([]int32, len(vs))
	for k, o := range order {
		out[k] = vs[o]
	}
	d.place(out)
}

func sortInt32(s []int32) {
	for i := 1; i < len(s); i++ {
		v := s[i]
		j := i
		for j > 0 && s[j-1] > v {
			s[j] = s[j-1]
			j--
		}
		s[j] = v
	}
}

// refine improves the separator of the connected part vs (sides in
// d.side) by passes of the vertex-separator Fiduccia-Mattheyses heuristic:
// the separator vertex whose move to side X lowers the separator weight
// most (gain_X(v) = w(v) − w(N(v) ∩ other side), the neighbours on the
// other side joining the separator) moves, within the balance bound
// max(w(A), w(B)) <= ndBalance·(w(A)+w(B)); every vertex moves at most once
// a pass; after a run of moves without a new best the pass stops and the
// moves after the best state are undone. Passes repeat while they improve.
func (d *dissector) refine(vs []int32, id int32) {
	g := d.g
	var w [3]int
	for _, v := range vs {
		w[d.side[v]] += int(g.wgt[v])
	}
	// A pass stops after this many moves without a new best state.
	limit := min(max(len(vs)/50, 40), 400)
	type change struct {
		v   int32
		old int8
	}
	var log []change
	var touched []int32
	for pass := 0; pass < 8; pass++ {
		startSep := w[sideSep]
		bestSep, bestImb, bestLen := w[sideSep], abs(w[sideA]-w[sideB]), 0
		log = log[:0]
		touched = touched[:0]
		for _, v := range vs {
			if d.side[v] == sideSep {
				d.updateGains(v, id)
				touched = append(touched, v)
			}
		}
		sinceBest := 0
		for sinceBest < limit {
			// Best feasible move among the tops of the two heaps.
			var cand [2]int32
			for x := int8(0); x < 2; x++ {
				cand[x] = -1
				for len(d.heap[x]) > 0 {
					v := d.heap[x][0]
					gain := d.gain[x][v]
					pulled := int(g.wgt[v]) - gain
					nx, no := w[x]+int(g.wgt[v]), w[1-x]-pulled
					if float64(nx) <= ndBalance*float64(nx+no) {
						cand[x] = v
						break
					}
					d.heapRemove(x, v)
				}
			}
			x := int8(-1)
			switch {
			case cand[0] >= 0 && cand[1] >= 0:
				g0, g1 := d.gain[0][cand[0]], d.gain[1][cand[1]]
				if g0 > g1 || g0 == g1 && w[sideA] <= w[sideB] {
					x = 0
				} else {
					x = 1
				}
			case cand[0] >= 0:
				x = 0
			case cand[1] >= 0:
				x = 1
			}
			if x < 0 {
				break
			}
			v := cand[x]
			other := 1 - x
			d.heapRemove(0, v)
			d.heapRemove(1, v)
			d.locked[v] = true
			touched = append(touched, v)
			log = append(log, change{v, sideSep})
			d.side[v] = x
			w[sideSep] -= int(g.wgt[v])
			w[x] += int(g.wgt[v])
			for _, u := range g.adj[g.xadj[v]:g.xadj[v+1]] {
				if d.label[u] == id && d.side[u] == other {
					log = append(log, change{u, other})
					d.side[u] = sideSep
					w[other] -= int(g.wgt[u])
					w[sideSep] += int(g.wgt[u])
					touched = append(touched, u)
				}
			}
			// Gains change for separator vertices next to v or to a
			// vertex pulled in.
			for _, u := range g.adj[g.xadj[v]:g.xadj[v+1]] {
				if d.label[u] != id || d.side[u] != sideSep || d.locked[u] {
					continue
				}
				d.updateGains(u, id)
				for _, t := range g.adj[g.xadj[u]:g.xadj[u+1]] {
					if d.label[t] == id && d.side[t] == sideSep && !d.locked[t] {
						d.updateGains(t, id)
					}
				}
			}
			imb := abs(w[sideA] - w[sideB])
			if w[sideSep] < bestSep || w[sideSep] == bestSep && imb < bestImb {
				bestSep, bestImb, bestLen = w[sideSep], imb, len(log)
				sinceBest = 0
			} else {
				sinceBest++
			}
		}
		for k := len(log) - 1; k >= bestLen; k-- {
			c := log[k]
			wv := int(g.wgt[c.v])
			w[d.side[c.v]] -= wv
			w[c.old] += wv
			d.side[c.v] = c.old
		}
		for _, v := range touched {
			d.heapRemove(0, v)
			d.heapRemove(1, v)
			d.locked[v] = false
		}
		if w[sideSep] >= startSep {
			break
		}
	}
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// updateGains recomputes both gains of the separator vertex v and puts it
// in (or moves it within) both heaps.
func (d *dissector) updateGains(v, id int32) {
	g := d.g
	var nb [2]int
	for _, u := range g.adj[g.xadj[v]:g.xadj[v+1]] {
		if d.label[u] == id {
			if s := d.side[u]; s != sideSep {
				nb[s] += int(g.wgt[u])
			}
		}
	}
	for x := 0; x < 2; x++ {
		d.gain[x][v] = int(g.wgt[v]) - nb[1-x]
		if d.heapPos[x][v] < 0 {
			d.heapPush(int8(x), v)
		} else {
			d.heapFix(int8(x), d.heapPos[x][v])
		}
	}
}

// Indexed binary max-heaps of separator vertices by gain, one per
// destination side.

func (d *dissector) heapLess(x int8, i, j int32) bool {
	h := d.heap[x]
	gi, gj := d.gain[x][h[i]], d.gain[x][h[j]]
	return gi > gj || gi == gj && h[i] < h[j]
}

func (d *dissector) heapSwap(x int8, i, j int32) {
	h := d.heap[x]
	h[i], h[j] = h[j], h[i]
	d.heapPos[x][h[i]] = i
	d.heapPos[x][h[j]] = j
}

func (d *dissector) heapUp(x int8, i int32) {
	for i > 0 {
		p := (i - 1) / 2
		if !d.heapLess(x, i, p) {
			break
		}
		d.heapSwap(x, i, p)
		i = p
	}
}

func (d *dissector) heapDown(x int8, i int32) {
	n := int32(len(d.heap[x]))
	for {
		l := 2*i + 1
		if l >= n {
			return
		}
		c := l
		if r := l + 1; r < n && d.heapLess(x, r, l) {
			c = r
		}
		if !d.heapLess(x, c, i) {
			return
		}
		d.heapSwap(x, i, c)
		i = c
	}
}

func (d *dissector) heapFix(x int8, i int32) {
	v := d.heap[x][i]
	d.heapUp(x, i)
	d.heapDown(x, d.heapPos[x][v])
}

func (d *dissector) heapPush(x int8, v int32) {
	d.heap[x] = append(d.heap[x], v)
	i := int32(len(d.heap[x]) - 1)
	d.heapPos[x][v] = i
	d.heapUp(x, i)
}

func (d *dissector) heapRemove(x int8, v int32) {
	i := d.heapPos[x][v]
	if i < 0 {
		return
	}
	last := int32(len(d.heap[x]) - 1)
	if i != last {
		d.heapSwap(x, i, last)
	}
	d.heap[x] = d.heap[x][:last]
	d.heapPos[x][v] = -1
	if i != last {
		d.heapFix(x, i)
	}
}
