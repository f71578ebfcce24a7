package sparse

import "slices"

// symbolic is the structure of the supernodal factor of P A Pᵀ: the
// elimination tree, the supernodes (runs of consecutive columns of L
// sharing one row pattern) and the row pattern of each.
type symbolic struct {
	n         int
	perm      []int // perm[k] = original row at position k (postordered)
	iperm     []int
	super     []int // supernode s holds columns super[s] .. super[s+1]-1
	sparen    []int // parent supernode, -1 for a root
	rowPtr    []int // rows of supernode s: rowIdx[rowPtr[s]:rowPtr[s+1]], its own columns first, ascending
	rowIdx    []int
	lPtr      []int // numeric block of s: lVal[lPtr[s]:lPtr[s+1]], row-major m×nc
	nnzL      int   // entries of the lower trapezoids (explicit zeros of amalgamation included)
	nnzLExact int   // entries of L without the explicit zeros: Σ column counts
	flops     float64
}

// etree returns the elimination tree of the permuted matrix: parent[k] is
// the row of the first off-diagonal nonzero in column k of the Cholesky
// factor L, -1 for a root. Method: Liu, "The role of elimination trees in
// sparse factorization", SIAM J. Matrix Anal. Appl. 11(1), 1990, the
// row-by-row algorithm with path compression (virtual ancestors), as also
// given by T. A. Davis, "Direct Methods for Sparse Linear Systems", SIAM
// 2006, chapter 4 (section 4.1); both from memory. Row k of the strict
// lower triangle of P A Pᵀ is lri[lrp[k]:lrp[k+1]].
func etree(n int, lrp []int, lri []int32) []int {
	parent := make([]int, n)
	ancestor := make([]int, n) // virtual ancestor: the root of i's subtree found so far (path compression)
	for k := 0; k < n; k++ {
		parent[k] = -1
		ancestor[k] = -1
		for _, j := range lri[lrp[k]:lrp[k+1]] {
			// Climb from j to the root of its subtree, pointing every
			// node passed at k.
			for i := int(j); i != -1 && i < k; {
				next := ancestor[i]
				ancestor[i] = k
				if next == -1 {
					parent[i] = k
				}
				i = next
			}
		}
	}
	return parent
}

// lowerRows returns the strict lower triangle of P A Pᵀ by rows.
func lowerRows(a *Sym, perm, ip []int) ([]int, []int32) {
	n := a.n
	lrp := make([]int, n+1)
	lri := make([]int32, 0, max(0, a.p[n]-n)/2+1)
	for k := 0; k < n; k++ {
		o := perm[k]
		for _, c := range a.i[a.p[o]:a.p[o+1]] {
			if j := ip[c]; j < k {
				lri = append(lri, int32(j))
			}
		}
		lrp[k+1] = len(lri)
	}
	return lrp, lri
}

// postorder returns a depth-first postorder of the forest parent: every
// node comes after all of its descendants, children in increasing order.
// Method: the non-recursive postorder of the elimination tree of T. A.
// Davis, "Direct Methods for Sparse Linear Systems", SIAM 2006, chapter 4
// (section 4.3; from memory); Liu 1990 (above) shows that any postorder of
// the elimination tree is an equivalent ordering, with the same fill.
func postorder(parent []int) []int {
	n := len(parent)
	firstChild := make([]int, n)  // first child not yet visited
	nextSibling := make([]int, n) // next sibling
	for j := range firstChild {
		firstChild[j] = -1
	}
	for j := n - 1; j >= 0; j-- {
		if p := parent[j]; p != -1 {
			nextSibling[j] = firstChild[p]
			firstChild[p] = j
		}
	}
	post := make([]int, 0, n)
	stack := make([]int, 0, 64)
	for r := 0; r < n; r++ {
		if parent[r] != -1 {
			continue
		}
		stack = append(stack, r)
		for len(stack) > 0 {
			v := stack[len(stack)-1]
			if c := firstChild[v]; c != -1 {
				firstChild[v] = nextSibling[c]
				stack = append(stack, c)
				continue
			}
			stack = stack[:len(stack)-1]
			post = append(post, v)
		}
	}
	return post
}

// Relaxed supernode amalgamation limits, in the spirit of CHOLMOD's
// defaults (Chen, Davis, Hager and Rajamanickam, ACM TOMS 35(3), 2008):
// always merge up to relaxSmall columns; merge up to relaxMid columns while
// at most 80% of the merged block are explicit zeros, up to relaxLarge
// while at most 10%, and any size while at most 5%.
const (
	relaxSmall = 8
	relaxMid   = 32
	relaxLarge = 64
)

// analyze computes the symbolic factorisation of P A Pᵀ for the ordering
// perm (nil = natural). The ordering is composed with a postorder of the
// elimination tree so that every supernode is a run of columns.
func analyze(a *Sym, perm []int) *symbolic {
	n := a.n
	if perm == nil {
		perm = make([]int, n)
		for k := range perm {
			perm[k] = k
		}
	}
	ip := inversePerm(perm)
	lrp, lri := lowerRows(a, perm, ip)
	parent := etree(n, lrp, lri)
	post := postorder(parent)
	p2 := make([]int, n)
	for k, j := range post {
		p2[k] = perm[j]
	}
	perm = p2
	ip = inversePerm(perm)
	lrp, lri = lowerRows(a, perm, ip)
	parent = etree(n, lrp, lri)

	// Column counts of L by row subtrees (Davis 2006, section 4.3): row k
	// of L is the set of nodes on the tree paths from every j in row k of
	// A up to k. Consecutive rows b..b+g-1 whose rows of A are the same
	// apart from each other (the DOF of one truss node) have the row
	// structures struct(b) ∪ {b..k}, so the paths are walked once for the
	// group: every node met gains g, and b+t gains g-t.
	cc := make([]int, n)
	mark := make([]int, n)
	for k := range mark {
		mark[k] = -1
	}
	for b := 0; b < n; {
		rowB := lri[lrp[b]:lrp[b+1]]
		for _, j := range rowB {
			mark[j] = -2 - b // stamp of row b's pattern
		}
		g := 1
		for k := b + 1; k < n; k++ {
			rowK := lri[lrp[k]:lrp[k+1]]
			if len(rowK) != len(rowB)+(k-b) {
				break
			}
			same := true
			for _, j := range rowK {
				if int(j) < b && mark[j] != -2-b {
					same = false
					break
				}
			}
			if !same {
				break
			}
			g++
		}
		for _, j := range rowB {
			mark[j] = -1
		}
		mark[b] = b
		for _, j := range rowB {
			for i := int(j); mark[i] != b; i = parent[i] {
				mark[i] = b
				cc[i] += g
			}
		}
		for t := 0; t < g; t++ {
			cc[b+t] += g - t
			mark[b+t] = b
		}
		b += g
	}
	sumCC := 0
	for _, c := range cc {
		sumCC += c
	}
	// Fundamental supernodes: j continues the supernode of j-1 when j is
	// the only child of ... more precisely when parent(j-1) = j, j has one
	// child and cc(j) = cc(j-1) - 1.
	nchild := make([]int, n)
	for _, p := range parent {
		if p >= 0 {
			nchild[p]++
		}
	}
	var first []int
	for j := 0; j < n; j++ {
		if j == 0 || parent[j-1] != j || nchild[j] != 1 || cc[j] != cc[j-1]-1 {
			first = append(first, j)
		}
	}
	ns := len(first)
	first = append(first, n)
	colSuper := make([]int, n)
	for s := 0; s < ns; s++ {
		for j := first[s]; j < first[s+1]; j++ {
			colSuper[j] = s
		}
	}
	fpar := make([]int, ns)
	for s := 0; s < ns; s++ {
		fpar[s] = -1
		if p := parent[first[s+1]-1]; p >= 0 {
			fpar[s] = colSuper[p]
		}
	}
	// Relaxed amalgamation: merge a supernode into its parent when the
	// parent starts right after it and the explicit zeros stay few.
	type snode struct {
		first, nc, m int
		zeros        float64
		id           int
	}
	storage := func(nc, m int) float64 { return float64(nc)*float64(m) - float64(nc)*float64(nc-1)/2 }
	rep := make([]int, ns) // union-find: merged supernode id
	for s := range rep {
		rep[s] = s
	}
	find := func(s int) int {
		for rep[s] != s {
			rep[s] = rep[rep[s]]
			s = rep[s]
		}
		return s
	}
	var stack []snode
	for s := 0; s < ns; s++ {
		cur := snode{first: first[s], nc: first[s+1] - first[s], m: cc[first[s]], id: s}
		for len(stack) > 0 {
			c := stack[len(stack)-1]
			if fpar[c.id] < 0 || find(fpar[c.id]) != s {
				break
			}
			nc := c.nc + cur.nc
			m := c.nc + cur.m
			z := c.zeros + cur.zeros + storage(nc, m) - storage(c.nc, c.m) - storage(cur.nc, cur.m)
			frac := z / storage(nc, m)
			if !(nc <= relaxSmall || (nc <= relaxMid && frac < 0.8) || (nc <= relaxLarge && frac < 0.1) || frac < 0.05) {
				break
			}
			stack = stack[:len(stack)-1]
			rep[c.id] = s
			cur = snode{first: c.first, nc: nc, m: m, zeros: z, id: s}
		}
		stack = append(stack, cur)
	}
	sy := &symbolic{n: n, perm: perm, iperm: ip, nnzLExact: sumCC}
	ns = len(stack)
	sy.super = make([]int, ns+1)
	newID := make([]int, len(rep))
	for t, sn := range stack {
		sy.super[t] = sn.first
		newID[sn.id] = t
	}
	sy.super[ns] = n
	sy.sparen = make([]int, ns)
	for t, sn := range stack {
		sy.sparen[t] = -1
		if p := fpar[sn.id]; p >= 0 {
			sy.sparen[t] = newID[find(p)]
		}
	}
	// Row patterns: own columns, entries of A below them, and the
	// patterns of the children below the last column.
	children := make([][]int, ns)
	for t := 0; t < ns; t++ {
		if p := sy.sparen[t]; p >= 0 {
			children[p] = append(children[p], t)
		}
	}
	sy.rowPtr = make([]int, ns+1)
	sy.lPtr = make([]int, ns+1)
	smark := make([]int, n)
	for k := range smark {
		smark[k] = -1
	}
	var buf []int
	for t := 0; t < ns; t++ {
		f, l := sy.super[t], sy.super[t+1]
		buf = buf[:0]
		for j := f; j < l; j++ {
			smark[j] = t
			buf = append(buf, j)
		}
		for j := f; j < l; j++ {
			o := perm[j]
			for _, c := range a.i[a.p[o]:a.p[o+1]] {
				if i := ip[c]; i >= l && smark[i] != t {
					smark[i] = t
					buf = append(buf, i)
				}
			}
		}
		for _, c := range children[t] {
			for _, i := range sy.rowIdx[sy.rowPtr[c]:sy.rowPtr[c+1]] {
				if i >= l && smark[i] != t {
					smark[i] = t
					buf = append(buf, i)
				}
			}
		}
		slices.Sort(buf[l-f:])
		sy.rowIdx = append(sy.rowIdx, buf...)
		sy.rowPtr[t+1] = len(sy.rowIdx)
		nc, m := l-f, len(buf)
		sy.lPtr[t+1] = sy.lPtr[t] + m*nc
		sy.nnzL += int(storage(nc, m))
		for j := 0; j < nc; j++ {
			c := float64(m - j)
			sy.flops += c * c
		}
	}
	return sy
}
