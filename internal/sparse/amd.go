package sparse

import "math"

// AMD returns an approximate minimum degree ordering of the graph of a, as
// a permutation: perm[k] is the row placed at position k.
//
// Method: the approximate minimum degree algorithm of Amestoy, Davis and
// Duff, "An approximate minimum degree ordering algorithm", SIAM J. Matrix
// Anal. Appl. 17(4), 1996, on the quotient graph, with element absorption,
// mass elimination, supervariable detection by hashing, aggressive
// absorption and a dense-row threshold of max(16, 10·√n), following the
// presentation in T. A. Davis, "Direct Methods for Sparse Linear Systems",
// SIAM 2006, section 7.1. The elimination is postordered.
//
// Provenance: this is a Go translation of the cs_amd routine printed in that
// book (CSparse, GNU LGPL 2.1 or later), keeping its structure and variable
// names; treeDFS likewise follows cs_tdfs.
func AMD(a *Sym) []int {
	n := a.n
	if n == 0 {
		return []int{}
	}
	// C: pattern of A without the diagonal, with elbow room.
	cnz := a.p[n] - (n - a.zeroDiagonals())
	nzmax := cnz + cnz/5 + 2*n
	cp := make([]int, n+1)
	ci := make([]int, nzmax)
	q := 0
	for r := 0; r < n; r++ {
		cp[r] = q
		for _, c := range a.i[a.p[r]:a.p[r+1]] {
			if int(c) != r {
				ci[q] = int(c)
				q++
			}
		}
	}
	cp[n] = q
	cnz = q
	return amdOrder(n, cp, ci, cnz)
}

// flip marks a node index as negative (an absorbed or dead reference):
// flip(flip(i)) = i and flip(-1) = -1.
func flip(i int) int { return -i - 2 }

// amdOrder is the core of AMD on the pattern (cp, ci) of a symmetric matrix
// without its diagonal; ci has elbow room beyond cnz.
func amdOrder(n int, cp, ci []int, cnz int) []int {
	dense := int(math.Max(16, 10*math.Sqrt(float64(n))))
	dense = min(n-2, dense)
	nzmax := len(ci)
	P := make([]int, n+1)
	W := make([]int, 8*(n+1))
	ln := W[0 : n+1]
	nv := W[(n + 1) : 2*(n+1)]
	next := W[2*(n+1) : 3*(n+1)]
	head := W[3*(n+1) : 4*(n+1)]
	elen := W[4*(n+1) : 5*(n+1)]
	degree := W[5*(n+1) : 6*(n+1)]
	w := W[6*(n+1) : 7*(n+1)]
	hhead := W[7*(n+1) : 8*(n+1)]
	last := P
	for k := 0; k < n; k++ {
		ln[k] = cp[k+1] - cp[k]
	}
	ln[n] = 0
	for i := 0; i <= n; i++ {
		head[i] = -1
		last[i] = -1
		next[i] = -1
		hhead[i] = -1
		nv[i] = 1
		w[i] = 1
		elen[i] = 0
		degree[i] = ln[i]
	}
	mark := wclear(0, 0, w, n)
	elen[n] = -2
	cp[n] = -1
	w[n] = 0
	nel := 0
	for i := 0; i < n; i++ {
		d := degree[i]
		if d == 0 {
			elen[i] = -2
			nel++
			cp[i] = -1
			w[i] = 0
		} else if d > dense {
			nv[i] = 0
			elen[i] = -1
			nel++
			cp[i] = flip(n)
			nv[n]++
		} else {
			if head[d] != -1 {
				last[head[d]] = i
			}
			next[i] = head[d]
			head[d] = i
		}
	}
	mindeg, lemax := 0, 0
	for nel < n {
		// Select a node of minimum approximate degree.
		k := -1
		for ; mindeg < n; mindeg++ {
			if k = head[mindeg]; k != -1 {
				break
			}
		}
		if next[k] != -1 {
			last[next[k]] = -1
		}
		head[mindeg] = next[k]
		elenk := elen[k]
		nvk := nv[k]
		nel += nvk
		// Garbage collection.
		if elenk > 0 && cnz+mindeg >= nzmax {
			for j := 0; j < n; j++ {
				if p := cp[j]; p >= 0 {
					cp[j] = ci[p]
					ci[p] = flip(j)
				}
			}
			qq, p := 0, 0
			for p < cnz {
				j := flip(ci[p])
				p++
				if j >= 0 {
					ci[qq] = cp[j]
					cp[j] = qq
					qq++
					for k3 := 0; k3 < ln[j]-1; k3++ {
						ci[qq] = ci[p]
						qq++
						p++
					}
				}
			}
			cnz = qq
		}
		// Construct the new element Lk.
		dk := 0
		nv[k] = -nvk
		p := cp[k]
		pk1 := cnz
		if elenk == 0 {
			pk1 = p
		}
		pk2 := pk1
		for k1 := 1; k1 <= elenk+1; k1++ {
			var e, pj, lnk int
			if k1 > elenk {
				e = k
				pj = p
				lnk = ln[k] - elenk
			} else {
				e = ci[p]
				p++
				pj = cp[e]
				lnk = ln[e]
			}
			for k2 := 1; k2 <= lnk; k2++ {
				i := ci[pj]
				pj++
				nvi := nv[i]
				if nvi <= 0 {
					continue
				}
				dk += nvi
				nv[i] = -nvi
				ci[pk2] = i
				pk2++
				if next[i] != -1 {
					last[next[i]] = last[i]
				}
				if last[i] != -1 {
					next[last[i]] = next[i]
				} else {
					head[degree[i]] = next[i]
				}
			}
			if e != k {
				cp[e] = flip(k)
				w[e] = 0
			}
		}
		if elenk != 0 {
			cnz = pk2
		}
		degree[k] = dk
		cp[k] = pk1
		ln[k] = pk2 - pk1
		elen[k] = -2
		// Set differences |Le \ Lk| for every element e.
		mark = wclear(mark, lemax, w, n)
		for pk := pk1; pk < pk2; pk++ {
			i := ci[pk]
			eln := elen[i]
			if eln <= 0 {
				continue
			}
			nvi := -nv[i]
			wnvi := mark - nvi
			for p := cp[i]; p <= cp[i]+eln-1; p++ {
				e := ci[p]
				if w[e] >= mark {
					w[e] -= nvi
				} else if w[e] != 0 {
					w[e] = degree[e] + wnvi
				}
			}
		}
		// Degree update.
		for pk := pk1; pk < pk2; pk++ {
			i := ci[pk]
			p1 := cp[i]
			p2 := p1 + elen[i] - 1
			pn := p1
			h, d := 0, 0
			for p := p1; p <= p2; p++ {
				e := ci[p]
				if w[e] != 0 {
					dext := w[e] - mark
					if dext > 0 {
						d += dext
						ci[pn] = e
						pn++
						h += e
					} else {
						cp[e] = flip(k) // aggressive absorption
						w[e] = 0
					}
				}
			}
			elen[i] = pn - p1 + 1
			p3 := pn
			p4 := p1 + ln[i]
			for p := p2 + 1; p < p4; p++ {
				j := ci[p]
				nvj := nv[j]
				if nvj <= 0 {
					continue
				}
				d += nvj
				ci[pn] = j
				pn++
				h += j
			}
			if d == 0 { // mass elimination
				cp[i] = flip(k)
				nvi := -nv[i]
				dk -= nvi
				nvk += nvi
				nel += nvi
				nv[i] = 0
				elen[i] = -1
			} else {
				degree[i] = min(degree[i], d)
				ci[pn] = ci[p3]
				ci[p3] = ci[p1]
				ci[p1] = k
				ln[i] = pn - p1 + 1
				if h < 0 {
					h = -h
				}
				h %= n
				next[i] = hhead[h]
				hhead[h] = i
				last[i] = h
			}
		}
		degree[k] = dk
		lemax = max(lemax, dk)
		mark = wclear(mark+lemax, lemax, w, n)
		// Supernode detection.
		for pk := pk1; pk < pk2; pk++ {
			i := ci[pk]
			if nv[i] >= 0 {
				continue
			}
			h := last[i]
			i = hhead[h]
			hhead[h] = -1
			for ; i != -1 && next[i] != -1; i, mark = next[i], mark+1 {
				lni := ln[i]
				eln := elen[i]
				for p := cp[i] + 1; p <= cp[i]+lni-1; p++ {
					w[ci[p]] = mark
				}
				jlast := i
				for j := next[i]; j != -1; {
					ok := ln[j] == lni && elen[j] == eln
					for p := cp[j] + 1; ok && p <= cp[j]+lni-1; p++ {
						if w[ci[p]] != mark {
							ok = false
						}
					}
					if ok {
						cp[j] = flip(i)
						nv[i] += nv[j]
						nv[j] = 0
						elen[j] = -1
						j = next[j]
						next[jlast] = j
					} else {
						jlast = j
						j = next[j]
					}
				}
			}
		}
		// Finalize the new element.
		p = pk1
		for pk := pk1; pk < pk2; pk++ {
			i := ci[pk]
			nvi := -nv[i]
			if nvi <= 0 {
				continue
			}
			nv[i] = nvi
			d := degree[i] + dk - nvi
			d = min(d, n-nel-nvi)
			if head[d] != -1 {
				last[head[d]] = i
			}
			next[i] = head[d]
			last[i] = -1
			head[d] = i
			mindeg = min(mindeg, d)
			degree[i] = d
			ci[p] = i
			p++
		}
		nv[k] = nvk
		if ln[k] = p - pk1; ln[k] == 0 {
			cp[k] = -1
			w[k] = 0
		}
		if elenk != 0 {
			cnz = p
		}
	}
	// Postorder the assembly tree.
	for i := 0; i < n; i++ {
		cp[i] = flip(cp[i])
	}
	for j := 0; j <= n; j++ {
		head[j] = -1
	}
	for j := n; j >= 0; j-- {
		if nv[j] > 0 {
			continue
		}
		next[j] = head[cp[j]]
		head[cp[j]] = j
	}
	for e := n; e >= 0; e-- {
		if nv[e] <= 0 {
			continue
		}
		if cp[e] != -1 {
			next[e] = head[cp[e]]
			head[cp[e]] = e
		}
	}
	k := 0
	for i := 0; i <= n; i++ {
		if cp[i] == -1 {
			k = treeDFS(i, k, head, next, P, w)
		}
	}
	return P[:n]
}

// wclear resets the marks in w when mark would overflow or is too small.
func wclear(mark, lemax int, w []int, n int) int {
	if mark < 2 || mark+lemax < 0 {
		for k := 0; k < n; k++ {
			if w[k] != 0 {
				w[k] = 1
			}
		}
		mark = 2
	}
	return mark
}

// treeDFS postorders the subtree rooted at j of the tree given by child
// lists (head, next), writing post[k...] and returning the next k.
func treeDFS(j, k int, head, next, post, stack []int) int {
	top := 0
	stack[0] = j
	for top >= 0 {
		p := stack[top]
		i := head[p]
		if i == -1 {
			top--
			post[k] = p
			k++
		} else {
			head[p] = next[i]
			top++
			stack[top] = i
		}
	}
	return k
}
