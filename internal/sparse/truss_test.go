package sparse

import (
	"math"
	"math/rand/v2"
)

// testTruss is a pin-jointed truss for building stiffness-pattern test
// matrices: node coordinates (dim per node), members, and fixed
// translations.
type testTruss struct {
	dim     int
	xyz     []float64
	members [][2]int
	ea      []float64
	fixed   map[int]bool // fixed global DOF (node*dim+d)
}

func (t *testTruss) node(c ...float64) int {
	t.xyz = append(t.xyz, c...)
	return len(t.xyz)/t.dim - 1
}

func (t *testTruss) member(i, j int, ea float64) {
	t.members = append(t.members, [2]int{i, j})
	t.ea = append(t.ea, ea)
}

func (t *testTruss) fix(node int, dirs ...int) {
	if t.fixed == nil {
		t.fixed = map[int]bool{}
	}
	for _, d := range dirs {
		t.fixed[node*t.dim+d] = true
	}
}

// stiffness assembles the reduced stiffness matrix of the free DOF by the
// direct stiffness method, k_e = (EA/L)[c cᵀ, -c cᵀ; -c cᵀ, c cᵀ] (e.g.
// Kassimali, "Matrix Analysis of Structures", 2nd ed., eq. 8.5 for space
// trusses). It returns the matrix and the map from global DOF to equation
// number (-1 for fixed).
func (t *testTruss) stiffness() (*Sym, []int) {
	nn := len(t.xyz) / t.dim
	eq := make([]int, nn*t.dim)
	n := 0
	for g := range eq {
		if t.fixed[g] {
			eq[g] = -1
		} else {
			eq[g] = n
			n++
		}
	}
	b := NewBuilder(n)
	c := make([]float64, t.dim)
	for m, ij := range t.members {
		i, j := ij[0], ij[1]
		l := 0.0
		for d := 0; d < t.dim; d++ {
			c[d] = t.xyz[j*t.dim+d] - t.xyz[i*t.dim+d]
			l += c[d] * c[d]
		}
		l = math.Sqrt(l)
		for d := range c {
			c[d] /= l
		}
		k := t.ea[m] / l
		for p := 0; p < 2*t.dim; p++ {
			gp := ij[p/t.dim]*t.dim + p%t.dim
			ep := eq[gp]
			if ep < 0 {
				continue
			}
			for q := 0; q <= p; q++ {
				gq := ij[q/t.dim]*t.dim + q%t.dim
				eqq := eq[gq]
				if eqq < 0 {
					continue
				}
				v := k * c[p%t.dim] * c[q%t.dim]
				if (p < t.dim) != (q < t.dim) {
					v = -v
				}
				if ep == eqq && p != q {
					v *= 2 // both off-diagonal halves land on one diagonal entry
				}
				b.Add(ep, eqq, v)
			}
		}
	}
	return b.Matrix(), eq
}

// steelEA returns E·A for a steel member, E = 210 GPa (EN 1993-1-1 §3.2.6),
// with a cross-section area drawn from 0.5e-3..5e-3 m² so the member
// stiffnesses vary by an order of magnitude.
func steelEA(rng *rand.Rand) float64 {
	return 210e9 * (0.5e-3 + 4.5e-3*rng.Float64())
}

// doubleLayerGrid builds a square-on-square offset double-layer space grid
// of nx×nx panels: top nodes on an (nx+1)² grid at height h, bottom nodes
// at the panel centres, top and bottom chords, four web members from every
// bottom node to the corners of its panel, and the top perimeter nodes
// pinned. It has about 6nx² free DOF.
func doubleLayerGrid(nx int, seed uint64) *testTruss { return doubleLayerRect(nx, nx, seed) }

// doubleLayerRect is doubleLayerGrid over nx×ny panels (a roof strip when
// ny is much larger than nx); for ny = nx it is the same truss.
func doubleLayerRect(nx, ny int, seed uint64) *testTruss {
	rng := rand.New(rand.NewPCG(seed, 7))
	t := &testTruss{dim: 3}
	const s, h = 3.0, 2.1
	top := func(i, j int) int { return i*(ny+1) + j }
	for i := 0; i <= nx; i++ {
		for j := 0; j <= ny; j++ {
			n := t.node(float64(i)*s, float64(j)*s, h)
			if i == 0 || j == 0 || i == nx || j == ny {
				t.fix(n, 0, 1, 2)
			}
		}
	}
	bot0 := (nx + 1) * (ny + 1)
	bot := func(i, j int) int { return bot0 + i*ny + j }
	for i := 0; i < nx; i++ {
		for j := 0; j < ny; j++ {
			t.node((float64(i)+0.5)*s, (float64(j)+0.5)*s, 0)
		}
	}
	for i := 0; i <= nx; i++ {
		for j := 0; j <= ny; j++ {
			if i < nx {
				t.member(top(i, j), top(i+1, j), steelEA(rng))
			}
			if j < ny {
				t.member(top(i, j), top(i, j+1), steelEA(rng))
			}
		}
	}
	for i := 0; i < nx; i++ {
		for j := 0; j < ny; j++ {
			if i+1 < nx {
				t.member(bot(i, j), bot(i+1, j), steelEA(rng))
			}
			if j+1 < ny {
				t.member(bot(i, j), bot(i, j+1), steelEA(rng))
			}
			b := bot(i, j)
			t.member(b, top(i, j), steelEA(rng))
			t.member(b, top(i+1, j), steelEA(rng))
			t.member(b, top(i, j+1), steelEA(rng))
			t.member(b, top(i+1, j+1), steelEA(rng))
		}
	}
	return t
}

// boxBridge builds a long box truss bridge of np panels: four chords, in
// every panel frame top and bottom cross beams, two posts and a
// cross-frame diagonal, and in every bay side diagonals and top and bottom
// plan bracing. Bottom end nodes are pinned (one end) and on rollers
// restrained vertically and transversely (the other end). 12 DOF per panel.
func boxBridge(np int, seed uint64) *testTruss {
	rng := rand.New(rand.NewPCG(seed, 11))
	t := &testTruss{dim: 3}
	const s, w, h = 4.0, 3.0, 3.5
	id := func(p, k int) int { return 4*p + k } // k: 0 bottom-left, 1 bottom-right, 2 top-left, 3 top-right
	for p := 0; p <= np; p++ {
		x := float64(p) * s
		t.node(x, 0, 0)
		t.node(x, w, 0)
		t.node(x, 0, h)
		t.node(x, w, h)
	}
	for p := 0; p <= np; p++ {
		t.member(id(p, 0), id(p, 1), steelEA(rng))
		t.member(id(p, 2), id(p, 3), steelEA(rng))
		t.member(id(p, 0), id(p, 2), steelEA(rng))
		t.member(id(p, 1), id(p, 3), steelEA(rng))
		t.member(id(p, 0), id(p, 3), steelEA(rng))
		if p < np {
			for k := 0; k < 4; k++ {
				t.member(id(p, k), id(p+1, k), steelEA(rng))
			}
			t.member(id(p, 0), id(p+1, 2), steelEA(rng)) // side diagonals
			t.member(id(p, 1), id(p+1, 3), steelEA(rng))
			t.member(id(p, 0), id(p+1, 1), steelEA(rng)) // plan bracing
			t.member(id(p, 2), id(p+1, 3), steelEA(rng))
		}
	}
	t.fix(id(0, 0), 0, 1, 2)
	t.fix(id(0, 1), 0, 2)
	t.fix(id(np, 0), 1, 2)
	t.fix(id(np, 1), 2)
	return t
}

// gridForDOF returns the panel count of a double-layer grid with about
// dof free degrees of freedom.
func gridForDOF(dof int) int { return int(math.Round(math.Sqrt(float64(dof) / 6))) }
