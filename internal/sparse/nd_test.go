package sparse

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// ninePointMesh returns the matrix of a k×k mesh of square bilinear finite
// elements (every node coupled to its eight neighbours: the regular finite
// element mesh of George 1973), one unknown per node, made positive
// definite by diagonal dominance (Gershgorin).
func ninePointMesh(k int) *Sym {
	b := NewBuilder(k * k)
	id := func(i, j int) int { return i*k + j }
	for i := 0; i < k; i++ {
		for j := 0; j < k; j++ {
			b.Add(id(i, j), id(i, j), 9)
			for _, d := range [][2]int{{0, 1}, {1, -1}, {1, 0}, {1, 1}} {
				if i2, j2 := i+d[0], j+d[1]; i2 < k && j2 >= 0 && j2 < k {
					b.Add(id(i, j), id(i2, j2), -1)
				}
			}
		}
	}
	return b.Matrix()
}

// TestNDFillGrowsLikeNLogN checks the fill of the nested-dissection
// ordering on the regular k×k finite element mesh against George 1973
// ("Nested dissection of a regular finite element mesh", SIAM J. Numer.
// Anal. 10(2)), whose ordering gives nnz(L) = (31/4)·k²·log₂k + O(k²)
// (constant from memory). Between k = 127 and k = 255 the ratio of the
// factor sizes must be that of k² log₂ k (4.61) within a slack of 20 %
// (the O(k²) term still pulls the ratio up at these sizes: measured 5.09,
// 1.10 times the theory); a band ordering would give (255/127)³ = 8.1.
// nnz(L) must also stay under the leading term (31/4)·k²·log₂k times 1.25
// (measured 0.76 and 0.84 of it).
func TestNDFillGrowsLikeNLogN(t *testing.T) {
	ks := []int{127, 255}
	var nnz, lead []float64
	for _, k := range ks {
		a := ninePointMesh(k)
		perm := ND(a)
		if err := isPermutation(perm, a.N()); err != nil {
			t.Fatal(err)
		}
		sy := analyze(a, perm)
		l := 31.0 / 4 * float64(k*k) * math.Log2(float64(k))
		nnz = append(nnz, float64(sy.nnzLExact))
		lead = append(lead, l)
		if r := float64(sy.nnzLExact) / l; r > 1.25 {
			t.Errorf("k=%d: nnz(L) = %d is %.2f times George's leading term (31/4) k² log₂ k = %.0f, want at most 1.25", k, sy.nnzLExact, r, l)
		}
	}
	got := nnz[1] / nnz[0]
	want := lead[1] / lead[0]
	if got > 1.2*want || got < want/1.2 {
		t.Errorf("fill ratio from k=%d to k=%d: %.2f, want %.2f (k² log₂ k) within 20 %%; a band ordering gives %.1f",
			ks[0], ks[1], got, want, math.Pow(float64(ks[1])/float64(ks[0]), 3))
	}
	t.Logf("nnz(L) %.0f, %.0f: ratio %.2f against k² log₂ k ratio %.2f", nnz[0], nnz[1], got, want)
}

// randomTrusses are double-layer roof strips of random size, random
// member areas and box bridges of random length (seeded).
func randomTrusses(rng *rand.Rand, count int) []testMatrix {
	var ms []testMatrix
	for c := 0; c < count; c++ {
		seed := rng.Uint64()
		if c%3 == 2 {
			np := 2 + rng.IntN(150)
			a, _ := boxBridge(np, seed).stiffness()
			ms = append(ms, testMatrix{fmt.Sprintf("bridge-%d-seed%d", np, seed%1000), a})
			continue
		}
		nx, ny := 2+rng.IntN(25), 2+rng.IntN(40)
		a, _ := doubleLayerRect(nx, ny, seed).stiffness()
		ms = append(ms, testMatrix{fmt.Sprintf("roof-%dx%d-seed%d", nx, ny, seed%1000), a})
	}
	return ms
}

// TestNDSolvesTrusses factors roof grids, bridges and random trusses with
// the supernodal method after nested dissection; the normwise backward
// error (Rigal and Gaches; Higham, 2nd ed., theorem 7.1) must be at
// rounding level, as for every other ordering.
func TestNDSolvesTrusses(t *testing.T) {
	rng := rand.New(rand.NewPCG(14, 4))
	ms := randomTrusses(rng, 12)
	for _, nx := range []int{3, 8, 20, 40} {
		a, _ := doubleLayerGrid(nx, uint64(nx)).stiffness()
		ms = append(ms, testMatrix{fmt.Sprintf("grid-%dx%d", nx, nx), a})
	}
	// The layout of the example roof in testdata/roof (8×6 modules of a
	// square-on-square double-layer grid; its supports differ: the
	// generator pins every perimeter top node).
	roof, _ := doubleLayerRect(8, 6, 1).stiffness()
	ms = append(ms, testMatrix{"example-roof-layout-8x6", roof})
	for _, tm := range ms {
		t.Run(tm.name, func(t *testing.T) {
			perm := ND(tm.a)
			if err := isPermutation(perm, tm.a.N()); err != nil {
				t.Fatal(err)
			}
			f, err := Factorize(tm.a, Options{Method: Supernodal, Ordering: NestedDissection})
			if err != nil {
				t.Fatal(err)
			}
			b := make([]float64, tm.a.N())
			for i := range b {
				b[i] = rng.NormFloat64() * 1e3
			}
			x := make([]float64, len(b))
			f.Solve(x, b)
			if eta := backwardError(tm.a, x, b); eta > 1e-15 {
				t.Errorf("backward error %.3g > 1e-15", eta)
			}
			if st := f.Stats(); st.NNZLExact > st.NNZL || st.NNZLExact < tm.a.NNZLower() {
				t.Errorf("exact nnz(L) %d outside [nnz(tril A) %d, stored %d]", st.NNZLExact, tm.a.NNZLower(), st.NNZL)
			}
		})
	}
}

// TestNDBeatsMinimumDegreeOnWideGrid: on a wide roof grid (21k DOF, RCM
// half-bandwidth 362) nested dissection must give a smaller factor and
// fewer flops than minimum degree, the reason Auto uses it there
// (measured: 0.93 times the entries, 0.91 times the flops; at 60k DOF
// 0.85 and 0.77).
func TestNDBeatsMinimumDegreeOnWideGrid(t *testing.T) {
	a, _ := doubleLayerGrid(60, 1).stiffness()
	nd := analyze(a, ND(a))
	md := analyze(a, AMD(a))
	if nd.nnzLExact >= md.nnzLExact || nd.flops >= md.flops {
		t.Errorf("nested dissection nnz(L) %d, flops %.3g; minimum degree %d, %.3g: want dissection smaller",
			nd.nnzLExact, nd.flops, md.nnzLExact, md.flops)
	}
}

// TestNDSmallAndDisconnectedGraphs: empty, diagonal-only (100k isolated
// unknowns: components must be found in one sweep, not one recursion
// each), many two-unknown components, a path, a star, a clique and a graph
// of several components all give permutations, and the factor solves.
func TestNDSmallAndDisconnectedGraphs(t *testing.T) {
	path := NewBuilder(500)
	star := NewBuilder(200)
	clique := NewBuilder(60)
	comps := NewBuilder(900)
	for i := 0; i < 500; i++ {
		path.Add(i, i, 4)
		if i > 0 {
			path.Add(i, i-1, -1)
		}
	}
	for i := 0; i < 200; i++ {
		star.Add(i, i, 300)
		if i > 0 {
			star.Add(i, 0, -1)
		}
	}
	for i := 0; i < 60; i++ {
		clique.Add(i, i, 100)
		for j := 0; j < i; j++ {
			clique.Add(i, j, -1)
		}
	}
	for c := 0; c < 3; c++ { // three 10×10 meshes side by side
		for i := 0; i < 300; i++ {
			comps.Add(c*300+i, c*300+i, 9)
		}
		for i := 0; i < 10; i++ {
			for j := 0; j < 30; j++ {
				if j+1 < 30 {
					comps.Add(c*300+i*30+j, c*300+i*30+j+1, -1)
				}
				if i+1 < 10 {
					comps.Add(c*300+i*30+j, c*300+(i+1)*30+j, -1)
				}
			}
		}
	}
	pairs := NewBuilder(60000) // 30000 components of two unknowns
	for i := 0; i < 60000; i += 2 {
		pairs.Add(i, i, 2)
		pairs.Add(i+1, i+1, 2)
		pairs.Add(i+1, i, -1)
	}
	for _, tm := range []testMatrix{
		{"empty", NewBuilder(0).Matrix()},
		{"diagonal", randomSPD(50, 0, rand.New(rand.NewPCG(1, 1)))},
		{"diagonal-100k", randomSPD(100000, 0, rand.New(rand.NewPCG(1, 1)))},
		{"pairs", pairs.Matrix()},
		{"path", path.Matrix()},
		{"star", star.Matrix()},
		{"clique", clique.Matrix()},
		{"components", comps.Matrix()},
	} {
		n := tm.a.N()
		if err := isPermutation(ND(tm.a), n); err != nil {
			t.Errorf("%s: %v", tm.name, err)
			continue
		}
		f, err := Factorize(tm.a, Options{Method: Supernodal, Ordering: NestedDissection})
		if err != nil {
			t.Errorf("%s: %v", tm.name, err)
			continue
		}
		b := make([]float64, n)
		for i := range b {
			b[i] = float64(i%5) - 2
		}
		x := make([]float64, n)
		f.Solve(x, b)
		if n > 0 {
			if eta := backwardError(tm.a, x, b); eta > 1e-15 {
				t.Errorf("%s: backward error %.3g", tm.name, eta)
			}
		}
	}
}
