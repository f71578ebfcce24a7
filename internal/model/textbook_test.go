package model

import (
	"math"
	"testing"
)

// Steel constants: EN 1993-1-1 clause 3.2.6 (E = 210000 N/mm2,
// alpha = 12e-6 /K); AISC 360 (E = 29000 ksi).
const (
	enE     = 210000e6 // Pa
	enAlpha = 12e-6    // 1/K
	aiscE   = 29000 * 6.894757293168e6
	psi     = 6.894757293168e3 // Pa, NIST SP 811
	inch    = 0.0254           // m
	lbf     = 4.4482216152605  // N
)

// hibbeler61 is Hibbeler, Engineering Mechanics: Statics, 14th ed.,
// Example 6.1 (geometry and answers from memory): joints A (0,0) pinned,
// B (0,2 m) above A, C (2 m,0) on a roller; members AB, BC, CA; 500 N
// horizontal to the right at B. Answers: F_BC = 707.1 N (C), F_BA = 500 N
// (T), F_CA = 500 N (T); reactions C_y = 500 N up, A_x = 500 N left,
// A_y = 500 N down.
func hibbeler61() *truss {
	t := newTruss("hibbeler-6-1", 2)
	a := t.node("A", 0, 0)
	b := t.node("B", 0, 2)
	c := t.node("C", 2, 0)
	t.member("AB", a, b, aiscE, 1e-3, 0)
	t.member("BC", b, c, aiscE, 1e-3, 0)
	t.member("CA", c, a, aiscE, 1e-3, 0)
	t.fix(a, 0, 1)
	t.fix(c, 1)
	t.load("P", b, 500, 0)
	return t
}

// hibbeler63 is Hibbeler, Engineering Mechanics: Statics, 14th ed.,
// Example 6.3 (geometry and answers from memory, checked by hand for
// equilibrium at every joint): A (0,0) on a roller (vertical reaction),
// B (3,4) m, C (6,4) m pinned, D (6,0) m; members AB, AD, BD, BC, CD;
// 400 N down at B and 600 N to the right at D. Answers: reactions
// C_x = 600 N (left), C_y = 200 N (down), A_y = 600 N (up); F_AB = 750 N (C),
// F_AD = 450 N (T), F_DB = 250 N (T), F_DC = 200 N (C), F_CB = 600 N (C).
func hibbeler63() *truss {
	t := newTruss("hibbeler-6-3", 2)
	a := t.node("A", 0, 0)
	b := t.node("B", 3, 4)
	c := t.node("C", 6, 4)
	d := t.node("D", 6, 0)
	t.member("AB", a, b, aiscE, 1e-3, 0)
	t.member("AD", a, d, aiscE, 1e-3, 0)
	t.member("BD", b, d, aiscE, 1e-3, 0)
	t.member("BC", b, c, aiscE, 1e-3, 0)
	t.member("CD", c, d, aiscE, 1e-3, 0)
	t.fix(a, 1)
	t.fix(c, 0, 1)
	t.load("P", b, 0, -400)
	t.load("P", d, 600, 0)
	return t
}

func TestHibbelerExamples(t *testing.T) {
	type want struct {
		member string
		force  float64
	}
	type react struct {
		node string
		f    [2]float64
	}
	cases := []struct {
		name   string
		t      *truss
		forces []want
		reacts []react
	}{
		{"Hibbeler Statics 14th ed. Example 6.1 (from memory)", hibbeler61(),
			[]want{{"BC", -707.1068}, {"AB", 500}, {"CA", 500}},
			[]react{{"A", [2]float64{-500, -500}}, {"C", [2]float64{0, 500}}}},
		{"Hibbeler Statics 14th ed. Example 6.3 (from memory)", hibbeler63(),
			[]want{{"AB", -750}, {"AD", 450}, {"BD", 250}, {"CD", -200}, {"BC", -600}},
			[]react{{"A", [2]float64{0, 600}}, {"C", [2]float64{-600, -200}}}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := c.t.s
			m := analyze(t, s)
			if d := m.Determinacy(); d.ByCounting != 0 || d.ByRank != 0 || !d.Stable || !d.Agree {
				t.Errorf("determinacy %+v, want determinate and stable", d)
			}
			r := solve(t, m, Factor{"P", 1})
			j, err := SolveByJoints(s, []Factor{{"P", 1}})
			if err != nil {
				t.Fatalf("method of joints: %v", err)
			}
			for _, w := range c.forces {
				i, _ := s.MemberIndex(w.member)
				checkNear(t, "stiffness N_"+w.member, r.Forces[i], w.force, 1e-5, 1)
				checkNear(t, "joints N_"+w.member, j.Forces[i], w.force, 1e-5, 1)
			}
			for _, w := range c.reacts {
				n, _ := s.NodeIndex(w.node)
				for _, rr := range [][]Reaction{r.Reactions, j.Reactions} {
					found := false
					for _, x := range rr {
						if x.Node == n {
							found = true
							checkNear(t, "R_"+w.node+" x", x.Force[0], w.f[0], 1e-6, 1)
							checkNear(t, "R_"+w.node+" y", x.Force[1], w.f[1], 1e-6, 1)
						}
					}
					if !found {
						t.Errorf("no reaction at %s", w.node)
					}
				}
			}
			if j.MaxResidualN > 1e-9 {
				t.Errorf("method of joints residual %g N", j.MaxResidualN)
			}
		})
	}
}

// TestLogan35 checks Logan, A First Course in the Finite Element Method,
// Example 3.5 (values from memory): node 1 at the origin joined to fixed
// nodes 2 (0, 120 in), 3 (120, 120 in) and 4 (120 in, 0); E = 30e6 psi,
// A = 2 in2; 10000 lb down at node 1. Book: u1 = 0.414e-2 in,
// v1 = -1.59e-2 in, sigma = 3965, 1471, -1035 psi (rounded; 0.5 % allowed).
func TestLogan35(t *testing.T) {
	tr := newTruss("logan-3-5", 2)
	n1 := tr.node("1", 0, 0)
	n2 := tr.node("2", 0, 120*inch)
	n3 := tr.node("3", 120*inch, 120*inch)
	n4 := tr.node("4", 120*inch, 0)
	for i, n := range []int{n2, n3, n4} {
		tr.member(string(rune('1'+i)), n1, n, 30e6*psi, 2*inch*inch, 0)
		tr.fix(n, 0, 1)
	}
	tr.load("P", n1, 0, -10000*lbf)
	m := analyze(t, tr.s)
	if d := m.Determinacy(); d.ByCounting != 1 || d.ByRank != 1 {
		t.Errorf("determinacy %+v, want 1", d)
	}
	r := solve(t, m, Factor{"P", 1})
	checkNear(t, "u1 (in)", r.Displacements[n1][0]/inch, 0.414e-2, 5e-3, 0)
	checkNear(t, "v1 (in)", r.Displacements[n1][1]/inch, -1.59e-2, 5e-3, 0)
	for i, want := range []float64{3965, 1471, -1035} {
		checkNear(t, "sigma (psi) of element "+tr.s.Members[i].ID, r.Stresses[i]/psi, want, 5e-3, 0)
	}
}

// TestClosedForms compares with closed-form solutions derived in the
// comments, with EN 1993-1-1 clause 3.2.6 steel constants.
func TestClosedForms(t *testing.T) {
	const ea = enE * 1e-3 // A = 10 cm2

	t.Run("symmetric two-bar truss", func(t *testing.T) {
		// Two bars from (-b, h) and (b, h) to the loaded node at the origin,
		// angle theta to the vertical; P down. Equilibrium: N = P/(2 cos theta);
		// displacement delta = N L / (E A cos theta) = P L / (2 E A cos^2 theta)
		// (standard result, e.g. Gere, Mechanics of Materials, from memory).
		const b, h, p = 3.0, 4.0, 100e3
		tr := newTruss("two-bar", 2)
		o := tr.node("O", 0, 0)
		l := tr.node("L", -b, h)
		rr := tr.node("R", b, h)
		tr.member("OL", o, l, enE, 1e-3, enAlpha)
		tr.member("OR", o, rr, enE, 1e-3, enAlpha)
		tr.fix(l, 0, 1)
		tr.fix(rr, 0, 1)
		tr.load("P", o, 0, -p)
		r := solve(t, analyze(t, tr.s), Factor{"P", 1})
		L := math.Hypot(b, h)
		cos := h / L
		for e := 0; e < 2; e++ {
			checkNear(t, "N", r.Forces[e], p/(2*cos), 1e-12, 0)
		}
		checkNear(t, "delta", -r.Displacements[o][1], p*L/(2*ea*cos*cos), 1e-12, 0)
		checkNear(t, "u_x", r.Displacements[o][0], 0, 1e-12, 1e-9)
	})

	t.Run("bar between two walls heated", func(t *testing.T) {
		// Fully restrained bar: no elongation, so N = -E A alpha dT
		// (Timoshenko, Strength of Materials, Part I, from memory).
		tr := newTruss("fixed-bar", 2)
		a := tr.node("A", 0, 0)
		mid := tr.node("M", 2, 0)
		b := tr.node("B", 5, 0)
		tr.member("AM", a, mid, enE, 1e-3, enAlpha)
		tr.member("MB", mid, b, enE, 1e-3, enAlpha)
		tr.fix(a, 0, 1)
		tr.fix(b, 0, 1)
		tr.fix(mid, 1)
		tr.pattern(Pattern{Name: "T", Temperatures: []MemberTemperature{{0, 30, 0}, {1, 30, 0}}})
		r := solve(t, analyze(t, tr.s), Factor{"T", 1})
		for e := 0; e < 2; e++ {
			checkNear(t, "N", r.Forces[e], -ea*enAlpha*30, 1e-12, 0)
		}
		checkNear(t, "u_M", r.Displacements[mid][0], 0, 1e-9, 1e-12)
	})

	t.Run("tripod", func(t *testing.T) {
		// Three equal legs from the apex (0,0,h) to base points at radius a,
		// 120 degrees apart; P down at the apex. Vertical equilibrium
		// 3 N h / L = -P gives N = -P L / (3 h).
		const a, h, p = 2.0, 3.0, 60e3
		tr := newTruss("tripod", 3)
		top := tr.node("apex", 0, 0, h)
		for k := 0; k < 3; k++ {
			th := 2 * math.Pi * float64(k) / 3
			n := tr.node("base", a*math.Cos(th), a*math.Sin(th), 0)
			tr.member("leg", top, n, enE, 1e-3, enAlpha)
			tr.fix(n, 0, 1, 2)
		}
		tr.load("P", top, 0, 0, -p)
		r := solve(t, analyze(t, tr.s), Factor{"P", 1})
		L := math.Hypot(a, h)
		for e := 0; e < 3; e++ {
			checkNear(t, "N", r.Forces[e], -p*L/(3*h), 1e-12, 0)
		}
	})

	t.Run("three-bar truss: load, heated middle bar, settled middle support", func(t *testing.T) {
		// Bars from A (-b, h), B (0, h), C (b, h) to D at the origin; outer
		// bars at angle a to the vertical, L1 = h (middle), L2 = h / cos a.
		// Let k1 = EA/L1, k2 = EA/L2, and D moves down by d (symmetry: no
		// sideways motion). Compatibility: the outer bars stretch d cos a.
		// Load P down:   k1 d + 2 k2 d cos^2 a = P
		//   N1 = k1 d, N2 = k2 d cos a.
		// Middle bar heated by dT: N1 = k1 (d - alpha dT L1), N2 = k2 d cos a,
		//   vertical equilibrium N1 + 2 N2 cos a = 0 gives
		//   d = k1 alpha dT L1 / (k1 + 2 k2 cos^2 a).
		// Support B settles down by s (B moves by -s in y): the middle bar's
		//   elongation is d - s, so N1 = k1 (d - s), N2 = k2 d cos a and
		//   d = k1 s / (k1 + 2 k2 cos^2 a).
		const b, h, p, dT, s = 3.0, 4.0, 100e3, 25.0, 0.004
		tr := newTruss("three-bar", 2)
		d := tr.node("D", 0, 0)
		na := tr.node("A", -b, h)
		nb := tr.node("B", 0, h)
		nc := tr.node("C", b, h)
		tr.member("AD", na, d, enE, 1e-3, enAlpha)
		tr.member("BD", nb, d, enE, 1e-3, enAlpha)
		tr.member("CD", nc, d, enE, 1e-3, enAlpha)
		for _, n := range []int{na, nb, nc} {
			tr.fix(n, 0, 1)
		}
		tr.load("P", d, 0, -p)
		tr.pattern(Pattern{Name: "T", Temperatures: []MemberTemperature{{Member: 1, DeltaK: dT}}})
		tr.pattern(Pattern{Name: "S", Settlements: []Settlement{{Node: nb, D: [3]float64{0, -s, 0}}}})
		m := analyze(t, tr.s)
		L2 := math.Hypot(b, h)
		cos := h / L2
		k1, k2 := ea/h, ea/L2
		kv := k1 + 2*k2*cos*cos
		check := func(name string, r *Result, dd, n1 float64) {
			checkNear(t, name+" d", -r.Displacements[d][1], dd, 1e-10, 0)
			checkNear(t, name+" N1", r.Forces[1], n1, 1e-10, 0)
			for _, e := range []int{0, 2} {
				checkNear(t, name+" N2", r.Forces[e], k2*dd*cos, 1e-10, 0)
			}
		}
		dp := p / kv
		check("load", solve(t, m, Factor{"P", 1}), dp, k1*dp)
		dt := k1 * enAlpha * dT * h / kv
		check("temperature", solve(t, m, Factor{"T", 1}), dt, k1*(dt-enAlpha*dT*h))
		ds := k1 * s / kv
		rs := solve(t, m, Factor{"S", 1})
		check("settlement", rs, ds, k1*(ds-s))
		checkNear(t, "settled node", rs.Displacements[nb][1], -s, 1e-12, 0)
	})

	t.Run("inclined roller", func(t *testing.T) {
		// Bar AB along x, A pinned at (0,0), B at (4,0) on a roller on a
		// 45-degree plane (normal (1,1)/sqrt2), load P down at B. The roller reaction R acts along n; equilibrium at
		// B: N (-1, 0) + R (1,1)/sqrt2 + (0, -P) = 0 gives R = P sqrt2,
		// N = R / sqrt2 = P (tension). Displacement of B along the bar
		// N L / EA; B moves along the tangent t = (-1, 1)/sqrt2 (n.u = 0),
		// so u = (u_x, -u_x) with u_x = N L / EA.
		const p, L = 50e3, 4.0
		tr := newTruss("inclined-roller", 2)
		a := tr.node("A", 0, 0)
		bn := tr.node("B", L, 0)
		tr.member("AB", a, bn, enE, 1e-3, enAlpha)
		tr.fix(a, 0, 1)
		n := [3]float64{1, 1, 0}
		tr.s.Supports = append(tr.s.Supports, Support{Node: bn, Normal: &n})
		tr.load("P", bn, 0, -p)
		r := solve(t, analyze(t, tr.s), Factor{"P", 1})
		checkNear(t, "N", r.Forces[0], p, 1e-12, 0)
		checkNear(t, "u_x", r.Displacements[bn][0], p*L/ea, 1e-12, 0)
		checkNear(t, "u_y", r.Displacements[bn][1], -p*L/ea, 1e-12, 0)
		rb := r.Reactions[1].Force
		checkNear(t, "R_x", rb[0], p, 1e-12, 0)
		checkNear(t, "R_y", rb[1], p, 1e-12, 0)
		j, err := SolveByJoints(tr.s, []Factor{{"P", 1}})
		if err != nil {
			t.Fatal(err)
		}
		checkNear(t, "joints N", j.Forces[0], p, 1e-12, 0)
	})

	t.Run("inclined roller with a spring", func(t *testing.T) {
		// As above, plus a spring k in global x at B. B moves along the
		// tangent by s, u = s (-1, 1)/sqrt2; the bar stretches by u_x and the
		// spring by u_x. Minimum potential energy,
		// (k_b + k) u_x^2 / 2 - P u_x with u_y = -u_x, gives
		// u_x = P / (k_b + k), N = k_b u_x, spring force -k u_x.
		const p, L, k = 50e3, 4.0, 30e6
		tr := newTruss("inclined-roller-spring", 2)
		a := tr.node("A", 0, 0)
		bn := tr.node("B", L, 0)
		tr.member("AB", a, bn, enE, 1e-3, enAlpha)
		tr.fix(a, 0, 1)
		n := [3]float64{1, 1, 0}
		tr.s.Supports = append(tr.s.Supports, Support{Node: bn, Normal: &n, Spring: [3]float64{k, 0, 0}})
		tr.load("P", bn, 0, -p)
		r := solve(t, analyze(t, tr.s), Factor{"P", 1})
		ux := p / (ea/L + k)
		checkNear(t, "u_x", r.Displacements[bn][0], ux, 1e-12, 0)
		checkNear(t, "u_y", r.Displacements[bn][1], -ux, 1e-12, 0)
		checkNear(t, "N", r.Forces[0], ea/L*ux, 1e-12, 0)
		// Reaction at B = roller reaction R n + spring force (-k u_x, 0);
		// equilibrium of B: N (-1, 0) + R n - (k u_x, 0) + (0, -P) = 0.
		R := p * math.Sqrt2
		checkNear(t, "R_x", r.Reactions[1].Force[0], R/math.Sqrt2-k*ux, 1e-12, 1)
		checkNear(t, "R_y", r.Reactions[1].Force[1], R/math.Sqrt2, 1e-12, 0)
	})

	t.Run("spring support", func(t *testing.T) {
		// Bar AB along x, A pinned, B on a spring k in x (fixed in y); force
		// P along x at B. The bar and the spring act in parallel at B, so
		// u_B = P / (EA/L + k),
		// N = (EA/L) u_B, spring reaction -k u_B.
		const p, L, k = 80e3, 3.0, 20e6
		tr := newTruss("spring", 2)
		a := tr.node("A", 0, 0)
		bn := tr.node("B", L, 0)
		tr.member("AB", a, bn, enE, 1e-3, enAlpha)
		tr.fix(a, 0, 1)
		sp := tr.fix(bn, 1)
		sp.Spring[0] = k
		tr.load("P", bn, p, 0)
		m := analyze(t, tr.s)
		if d := m.Determinacy(); d.Reactions != 4 || d.ByCounting != 1 {
			t.Errorf("determinacy %+v: the spring counts as a reaction", d)
		}
		r := solve(t, m, Factor{"P", 1})
		u := p / (ea/L + k)
		checkNear(t, "u_B", r.Displacements[bn][0], u, 1e-12, 0)
		checkNear(t, "N", r.Forces[0], ea/L*u, 1e-12, 0)
		checkNear(t, "spring reaction", r.Reactions[1].Force[0], -k*u, 1e-12, 0)
	})
}
