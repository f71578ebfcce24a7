package model

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// randomTruss builds a seeded random truss: a simple truss grown node by
// node (each new node joined to dim existing nodes, so it is fixed relative
// to the rigid part: statically determinate with a 3 (2D) or 3-2-1 (3D)
// support), optionally made indeterminate by extra members. Patterns:
// "F" random nodal forces, "T" +1 K on every member (uniform), "S" a
// settlement of the first support node; group "all".
func randomTruss(seed uint64, dim, nodes, extra int) *Structure {
	rng := rand.New(rand.NewPCG(seed, 7))
	t := newTruss(fmt.Sprintf("random-%dd-%d", dim, seed), dim)
	pt := func() []float64 {
		return []float64{rng.Float64()*6 - 3, rng.Float64()*6 - 3, rng.Float64()*6 - 3}[:dim]
	}
	ea := func() (float64, float64) { return enE * (0.5 + rng.Float64()), 1e-3 * (0.5 + rng.Float64()) }
	addMember := func(i, j int) {
		e, a := ea()
		t.member(fmt.Sprintf("M%d", len(t.s.Members)), i, j, e, a, enAlpha)
	}
	unit := func(i int, p []float64) [3]float64 {
		var d [3]float64
		for k := 0; k < dim; k++ {
			d[k] = p[k] - t.s.Nodes[i].X[k]
		}
		l := norm3(d)
		return [3]float64{d[0] / l, d[1] / l, d[2] / l}
	}
	// Base: a segment (2D) or a triangle (3D) with the supports.
	t.node("N0", make([]float64, dim)...)
	t.node("N1", 2+3*rng.Float64())
	addMember(0, 1)
	if dim == 3 {
		t.node("N2", rng.Float64()*2, 2+rng.Float64()*2)
		addMember(0, 2)
		addMember(1, 2)
	}
	for len(t.s.Nodes) < nodes {
		p := pt()
		// Pick dim distinct existing nodes with well-conditioned directions.
		perm := rng.Perm(len(t.s.Nodes))[:dim]
		var u [3][3]float64
		for k, i := range perm {
			u[k] = unit(i, p)
		}
		var det float64
		if dim == 2 {
			det = u[0][0]*u[1][1] - u[0][1]*u[1][0]
		} else {
			det = dot3(u[0], cross(u[1], u[2]))
		}
		if math.Abs(det) < 0.3 {
			continue
		}
		n := t.node(fmt.Sprintf("N%d", len(t.s.Nodes)), p...)
		for _, i := range perm {
			addMember(i, n)
		}
	}
	for added := 0; added < extra; {
		i, j := rng.IntN(nodes), rng.IntN(nodes)
		if i == j {
			continue
		}
		addMember(i, j)
		added++
	}
	// Supports: a pin and a roller (2D) or 3-2-1 (3D); with extra members
	// node 1 is pinned too, one more reaction.
	if dim == 2 {
		t.fix(0, 0, 1)
		t.fix(1, 1)
	} else {
		t.fix(0, 0, 1, 2)
		t.fix(1, 1, 2)
		t.fix(2, 2)
	}
	if extra > 0 {
		t.s.Supports[1].Fixed[0] = true
	}
	f := Pattern{Name: "F"}
	for n := dim; n < nodes; n++ {
		var v [3]float64
		for k := 0; k < dim; k++ {
			v[k] = (rng.Float64()*2 - 1) * 1e4
		}
		f.Forces = append(f.Forces, NodalForce{Node: n, F: v})
	}
	temp := Pattern{Name: "T"}
	for e := range t.s.Members {
		temp.Temperatures = append(temp.Temperatures, MemberTemperature{Member: e, DeltaK: 1})
		t.s.Groups["all"] = append(t.s.Groups["all"], e)
	}
	var sd [3]float64
	sd[0] = -0.01
	t.s.Patterns = append(t.s.Patterns, f, temp, Pattern{Name: "S", Settlements: []Settlement{{Node: 0, D: sd}}})
	return t.s
}

type randomCase struct {
	dim, nodes, extra int
}

// indeterminacy is the degree of static indeterminacy of the case.
func (rc randomCase) indeterminacy() int {
	if rc.extra == 0 {
		return 0
	}
	return rc.extra + 1
}

func randomCases() []randomCase {
	return []randomCase{{2, 8, 0}, {2, 15, 0}, {2, 12, 5}, {3, 8, 0}, {3, 14, 0}, {3, 12, 6}}
}

func forEachRandom(t *testing.T, f func(t *testing.T, s *Structure, rc randomCase)) {
	for _, rc := range randomCases() {
		for seed := uint64(1); seed <= 5; seed++ {
			s := randomTruss(seed, rc.dim, rc.nodes, rc.extra)
			t.Run(fmt.Sprintf("%s-n%d-x%d", s.Name, rc.nodes, rc.extra), func(t *testing.T) { f(t, s, rc) })
		}
	}
}

// TestRandomEquilibriumAndEnergy: joint equilibrium (checked in solve) and
// energy balance, external work 1/2 f.u = strain energy sum N^2 L / (2 E A)
// (Clapeyron's theorem), for force loads.
func TestRandomEquilibriumAndEnergy(t *testing.T) {
	forEachRandom(t, func(t *testing.T, s *Structure, rc randomCase) {
		m := analyze(t, s)
		if d := m.Determinacy(); !d.Stable || d.ByCounting != rc.indeterminacy() || !d.Agree {
			t.Fatalf("determinacy %+v, want stable, %d", d, rc.indeterminacy())
		}
		r := solve(t, m, Factor{"F", 1})
		var work, energy float64
		for _, fo := range s.Patterns[0].Forces {
			work += 0.5 * dot3(fo.F, r.Displacements[fo.Node])
		}
		for e, mb := range s.Members {
			energy += r.Forces[e] * r.Forces[e] * memberLength(s, mb) / (2 * mb.E * mb.A)
		}
		checkNear(t, "external work vs strain energy", work, energy, 1e-9, 0)
		// Reactions balance the loads (global check, independently summed).
		var sum [3]float64
		for _, fo := range s.Patterns[0].Forces {
			for k := range sum {
				sum[k] += fo.F[k]
			}
		}
		for _, re := range r.Reactions {
			for k := range sum {
				sum[k] += re.Force[k]
			}
		}
		if norm3(sum) > 1e-8*maxAbs(r.Forces) {
			t.Errorf("reactions do not balance the loads: %v", sum)
		}
	})
}

// TestRandomMaxwellBetti: the flexibility is symmetric (Maxwell-Betti
// reciprocal theorem): the displacement at DOF a from a unit force at b
// equals the displacement at b from a unit force at a.
func TestRandomMaxwellBetti(t *testing.T) {
	forEachRandom(t, func(t *testing.T, s *Structure, rc randomCase) {
		rng := rand.New(rand.NewPCG(uint64(len(s.Members)), 3))
		na, nb := rc.dim+rng.IntN(rc.nodes-rc.dim), rc.dim+rng.IntN(rc.nodes-rc.dim)
		ka, kb := rng.IntN(rc.dim), rng.IntN(rc.dim)
		var fa, fb [3]float64
		fa[ka], fb[kb] = 1e3, 1e3
		s.Patterns = append(s.Patterns, Pattern{Name: "a", Forces: []NodalForce{{Node: na, F: fa}}},
			Pattern{Name: "b", Forces: []NodalForce{{Node: nb, F: fb}}})
		m := analyze(t, s)
		ra, rb := solve(t, m, Factor{"a", 1}), solve(t, m, Factor{"b", 1})
		uab, uba := rb.Displacements[na][ka], ra.Displacements[nb][kb]
		if !near(uab, uba, 1e-9, math.Abs(ra.Displacements[na][ka])) {
			t.Errorf("reciprocity: u_a(b) = %.12g, u_b(a) = %.12g", uab, uba)
		}
	})
}

// TestRandomDeterminate: on statically determinate trusses the method of
// joints gives the stiffness method's forces; a uniform temperature change
// or a settlement of determinate supports causes no member force.
func TestRandomDeterminate(t *testing.T) {
	forEachRandom(t, func(t *testing.T, s *Structure, rc randomCase) {
		m := analyze(t, s)
		ea := enE * 1e-3 * enAlpha // thermal force scale for 1 K
		if rc.extra != 0 {
			// Indeterminate: the uniform temperature change and the
			// settlement do cause forces (so the zero check below can fail).
			for _, p := range []string{"T", "S"} {
				if mx := maxAbs(solve(t, m, Factor{p, 1}).Forces); mx < 1e-3*ea {
					t.Errorf("pattern %s on an indeterminate truss: max |N| = %g N, want clearly non-zero", p, mx)
				}
			}
			return
		}
		// Determinate: a uniform temperature change only scales the figure
		// and a settlement only moves it rigidly: no member force.
		for _, p := range []string{"T", "S"} {
			rp := solve(t, m, Factor{p, 1})
			if mx := maxAbs(rp.Forces); mx > 1e-8*ea {
				t.Errorf("pattern %s on a determinate truss: max |N| = %g N, want 0", p, mx)
			}
		}
		r := solve(t, m, Factor{"F", 1})
		scale := maxAbs(r.Forces)
		if rc.dim == 2 {
			j, err := SolveByJoints(s, []Factor{{"F", 1}})
			if err != nil {
				t.Fatalf("method of joints: %v", err)
			}
			for e := range r.Forces {
				if !near(j.Forces[e], r.Forces[e], 1e-8, scale) {
					t.Errorf("member %s: joints %.10g, stiffness %.10g", s.Members[e].ID, j.Forces[e], r.Forces[e])
				}
			}
		}
	})
}

// TestRandomRenumberAndRotate: member forces do not depend on the node and
// member numbering, nor on a rigid rotation of the whole structure (fully
// pinned supports, and single-axis rollers which become inclined rollers).
func TestRandomRenumberAndRotate(t *testing.T) {
	forEachRandom(t, func(t *testing.T, s *Structure, rc randomCase) {
		if rc.dim == 3 {
			// 3D rollers fixed in two axes have no inclined form: pin them.
			for i := range s.Supports {
				s.Supports[i].Fixed = [3]bool{true, true, true}
			}
		}
		base := solve(t, analyze(t, s), Factor{"F", 1}, Factor{"T", 2}, Factor{"S", 1})
		scale := maxAbs(base.Forces)

		rng := rand.New(rand.NewPCG(99, uint64(len(s.Nodes))))
		np, mp := rng.Perm(len(s.Nodes)), rng.Perm(len(s.Members))
		rs := renumber(s, np, mp)
		r := solve(t, analyze(t, rs), Factor{"F", 1}, Factor{"T", 2}, Factor{"S", 1})
		for e := range s.Members {
			if !near(r.Forces[mp[e]], base.Forces[e], 1e-8, scale) {
				t.Errorf("renumbered: member %s force %.10g, want %.10g", s.Members[e].ID, r.Forces[mp[e]], base.Forces[e])
			}
		}

		rot := rotate(s, 0.7, 0.3)
		r = solve(t, analyze(t, rot), Factor{"F", 1}, Factor{"T", 2}, Factor{"S", 1})
		for e := range s.Members {
			if !near(r.Forces[e], base.Forces[e], 1e-8, scale) {
				t.Errorf("rotated: member %s force %.10g, want %.10g", s.Members[e].ID, r.Forces[e], base.Forces[e])
			}
		}
	})
}

// renumber returns a copy with node i at position np[i] and member e at mp[e].
func renumber(s *Structure, np, mp []int) *Structure {
	c := *s
	c.Nodes = make([]Node, len(s.Nodes))
	for i, n := range s.Nodes {
		c.Nodes[np[i]] = n
	}
	c.Members = make([]Member, len(s.Members))
	for e, mb := range s.Members {
		mb.I, mb.J = np[mb.I], np[mb.J]
		c.Members[mp[e]] = mb
	}
	c.Supports = nil
	for _, sp := range s.Supports {
		sp.Node = np[sp.Node]
		c.Supports = append(c.Supports, sp)
	}
	c.Groups = map[string][]int{}
	for g, ms := range s.Groups {
		for _, e := range ms {
			c.Groups[g] = append(c.Groups[g], mp[e])
		}
	}
	c.Patterns = nil
	for _, p := range s.Patterns {
		q := Pattern{Name: p.Name, SelfWeight: p.SelfWeight}
		for _, f := range p.Forces {
			f.Node = np[f.Node]
			q.Forces = append(q.Forces, f)
		}
		for _, tm := range p.Temperatures {
			tm.Member = mp[tm.Member]
			q.Temperatures = append(q.Temperatures, tm)
		}
		for _, st := range p.Settlements {
			st.Node = np[st.Node]
			q.Settlements = append(q.Settlements, st)
		}
		c.Patterns = append(c.Patterns, q)
	}
	return &c
}

// rotate returns a copy rotated rigidly by angle a about z then b about x
// (2D: a only). Supports fixed in one axis become inclined rollers with the
// rotated normal; settlements along that axis become settlements along the
// normal.
func rotate(s *Structure, a, b float64) *Structure {
	rz := [3][3]float64{{math.Cos(a), -math.Sin(a), 0}, {math.Sin(a), math.Cos(a), 0}, {0, 0, 1}}
	rx := [3][3]float64{{1, 0, 0}, {0, math.Cos(b), -math.Sin(b)}, {0, math.Sin(b), math.Cos(b)}}
	if s.Dim == 2 {
		rx = [3][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}}
	}
	app := func(v [3]float64) [3]float64 {
		var w, u [3]float64
		for r := 0; r < 3; r++ {
			for k := 0; k < 3; k++ {
				w[r] += rz[r][k] * v[k]
			}
		}
		for r := 0; r < 3; r++ {
			for k := 0; k < 3; k++ {
				u[r] += rx[r][k] * w[k]
			}
		}
		return u
	}
	c := *s
	c.Nodes = append([]Node(nil), s.Nodes...)
	for i := range c.Nodes {
		c.Nodes[i].X = app(c.Nodes[i].X)
	}
	axisOf := map[int]int{}
	c.Supports = nil
	for _, sp := range s.Supports {
		nf := 0
		ax := -1
		for k := 0; k < s.Dim; k++ {
			if sp.Fixed[k] {
				nf++
				ax = k
			}
		}
		if nf == 1 {
			n := app(unitAxis(ax))
			sp = Support{Node: sp.Node, Normal: &n}
			axisOf[sp.Node] = ax
		}
		c.Supports = append(c.Supports, sp)
	}
	c.Patterns = nil
	for _, p := range s.Patterns {
		q := p
		q.Forces = nil
		for _, f := range p.Forces {
			f.F = app(f.F)
			q.Forces = append(q.Forces, f)
		}
		q.Settlements = nil
		for _, st := range p.Settlements {
			if ax, ok := axisOf[st.Node]; ok {
				st.D = [3]float64{st.D[ax], 0, 0}
			} else {
				st.D = app(st.D)
			}
			q.Settlements = append(q.Settlements, st)
		}
		c.Patterns = append(c.Patterns, q)
	}
	return &c
}
