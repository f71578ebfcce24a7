package sparse

// RCM returns the reverse Cuthill-McKee ordering of the graph adj (adj[v]
// lists the neighbours of vertex v; self-loops and duplicates are ignored).
// The result is a permutation: perm[k] is the vertex placed at position k.
//
// Method: Cuthill and McKee (1969) breadth-first numbering visiting the
// neighbours of each vertex by increasing degree, started in every connected
// component from a pseudo-peripheral vertex found as in George and Liu,
// "Computer Solution of Large Sparse Positive Definite Systems" (1981),
// section 4.3; the numbering is reversed (George 1971), which never widens
// the envelope.
func RCM(adj [][]int) []int {
	n := len(adj)
	deg := make([]int, n)
	for v, nb := range adj {
		for _, w := range nb {
			if w != v && w >= 0 && w < n {
				deg[v]++
			}
		}
	}
	perm := make([]int, 0, n)
	visited := make([]bool, n)
	level := make([]int, n)
	for v := range level {
		level[v] = -1
	}
	queue := make([]int, 0, n)
	var nbuf []int
	// Components are started in order of their lowest-degree vertex so
	// that the result is deterministic.
	order := byDegree(deg)
	for _, seed := range order {
		if visited[seed] {
			continue
		}
		start := pseudoPeripheral(adj, seed, deg, level, &queue)
		// Cuthill-McKee breadth-first numbering from start.
		first := len(perm)
		perm = append(perm, start)
		visited[start] = true
		for h := first; h < len(perm); h++ {
			v := perm[h]
			nbuf = nbuf[:0]
			for _, w := range adj[v] {
				if w >= 0 && w < n && !visited[w] {
					visited[w] = true
					nbuf = append(nbuf, w)
				}
			}
			sortByDegree(nbuf, deg)
			perm = append(perm, nbuf...)
		}
	}
	for a, b := 0, len(perm)-1; a < b; a, b = a+1, b-1 {
		perm[a], perm[b] = perm[b], perm[a]
	}
	return perm
}

// pseudoPeripheral finds a vertex of (nearly) maximal eccentricity in the
// component of seed: repeated breadth-first level structures, moving to a
// minimum-degree vertex of the last level while the depth grows (George and
// Liu 1981, algorithm of section 4.3.2).
func pseudoPeripheral(adj [][]int, seed int, deg, level []int, queue *[]int) int {
	root := seed
	depth, last := bfsLevels(adj, root, level, queue)
	for iter := 0; iter < 20; iter++ {
		// Minimum-degree vertex of the last level.
		cand := -1
		for _, v := range last {
			if cand < 0 || deg[v] < deg[cand] {
				cand = v
			}
		}
		d2, last2 := bfsLevels(adj, cand, level, queue)
		if d2 <= depth {
			break
		}
		root, depth, last = cand, d2, last2
	}
	return root
}

// bfsLevels runs a breadth-first search from root and returns the depth of
// its level structure and the vertices of the last level. level is scratch
// of length n whose entries are left at -1 for unreached vertices.
func bfsLevels(adj [][]int, root int, level []int, queue *[]int) (int, []int) {
	n := len(adj)
	q := (*queue)[:0]
	q = append(q, root)
	level[root] = 0
	for h := 0; h < len(q); h++ {
		v := q[h]
		for _, w := range adj[v] {
			if w >= 0 && w < n && w != root && level[w] < 0 {
				level[w] = level[v] + 1
				q = append(q, w)
			}
		}
	}
	// q[0] = root has level 0 but may have been set by a previous call
	// only through q, which is reset below.
	depth := level[q[len(q)-1]]
	k := len(q) - 1
	for k > 0 && level[q[k-1]] == depth {
		k--
	}
	last := append([]int(nil), q[k:]...)
	for _, v := range q {
		level[v] = -1
	}
	*queue = q
	return depth, last
}

// byDegree returns the vertices sorted by increasing degree, ties by index
// (a stable counting sort).
func byDegree(deg []int) []int {
	maxd := 0
	for _, d := range deg {
		maxd = max(maxd, d)
	}
	start := make([]int, maxd+2)
	for _, d := range deg {
		start[d+1]++
	}
	for d := 0; d <= maxd; d++ {
		start[d+1] += start[d]
	}
	order := make([]int, len(deg))
	for v, d := range deg {
		order[start[d]] = v
		start[d]++
	}
	return order
}

// sortByDegree sorts the few neighbours of one vertex by (degree, index),
// by insertion.
func sortByDegree(vs []int, deg []int) {
	for i := 1; i < len(vs); i++ {
		v := vs[i]
		j := i
		for j > 0 && (deg[vs[j-1]] > deg[v] || deg[vs[j-1]] == deg[v] && vs[j-1] > v) {
			vs[j] = vs[j-1]
			j--
		}
		vs[j] = v
	}
}

// rcmNodes returns the RCM ordering of a computed on its node graph (rows
// of one truss joint taken together, see newNodeGraph) and expanded to
// rows: the same level structures on a graph dim times smaller, with the
// rows of a joint kept adjacent, which is what a band ordering wants.
func rcmNodes(a *Sym) []int {
	g := newNodeGraph(a)
	nv := len(g.wgt)
	flat := make([]int, len(g.adj))
	for k, w := range g.adj {
		flat[k] = int(w)
	}
	adj := make([][]int, nv)
	for v := range adj {
		adj[v] = flat[g.xadj[v]:g.xadj[v+1]:g.xadj[v+1]]
	}
	return g.expand(RCM(adj))
}
