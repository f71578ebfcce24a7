package model

import (
	"testing"
)

// stiffSoftTruss is a plane Pratt-like truss of six panels (3 m by 3 m)
// pinned at the left and on a roller at the right, loaded at every bottom
// node. The members of the odd panels have area stiffRatio times the others,
// and the diagonal of the first panel, which the truss needs for stability
// (statically determinate), has essential times the area of the others.
func stiffSoftTruss(stiffRatio, essential float64) *Structure {
	t := newTruss("stiff-soft", 2)
	const panels = 6
	const e, a = 200e9, 1e-3
	for i := 0; i <= panels; i++ {
		t.node("L"+string(rune('0'+i)), 3*float64(i), 0)
	}
	for i := 0; i <= panels; i++ {
		t.node("U"+string(rune('0'+i)), 3*float64(i), 3)
	}
	area := func(panel int) float64 {
		if panel%2 == 1 {
			return a * stiffRatio
		}
		return a
	}
	for p := 0; p < panels; p++ {
		id := string(rune('0' + p))
		t.member("B"+id, p, p+1, e, area(p), 0)
		t.member("T"+id, panels+1+p, panels+2+p, e, area(p), 0)
		da := area(p)
		if p == 0 {
			da = a * essential
		}
		t.member("D"+id, p, panels+2+p, e, da, 0)
	}
	for i := 0; i <= panels; i++ {
		t.member("V"+string(rune('0'+i)), i, panels+1+i, e, area(min(i, panels-1)), 0)
	}
	t.fix(0, 0, 1)
	t.fix(panels, 1)
	for i := 1; i < panels; i++ {
		t.load("P", i, 0, -100e3)
	}
	return t.s
}

// crossTwoBar is node D held by a vertical bar AD (3 m) and a horizontal
// bar BD (4 m) of essential times its area, both needed for stability
// (statically determinate), loaded by 10 kN along x and 100 kN down.
func crossTwoBar(essential float64) *Structure {
	t := newTruss("cross-two-bar", 2)
	a := t.node("A", 0, 3)
	b := t.node("B", -4, 0)
	d := t.node("D", 0, 0)
	t.member("AD", a, d, 200e9, 1e-3, 0)
	t.member("BD", b, d, 200e9, 1e-3*essential, 0)
	t.fix(a, 0, 1)
	t.fix(b, 0, 1)
	t.load("P", d, 10e3, -100e3)
	return t.s
}

// TestEquilibriumStiffSoft checks that the equilibrium check passes on
// stiff-soft trusses solved as accurately as the arithmetic allows (the
// relative imbalance alone grows with the condition number and said FAILED
// at about 1e-7 for these before the backward error was used) and fails on
// a deliberately wrong solution of the same trusses.
func TestEquilibriumStiffSoft(t *testing.T) {
	for _, c := range []struct {
		name string
		s    *Structure
		// member and its force by statics, N.
		member int
		force  float64
		// wrong is the relative error put on the displacements for the
		// deliberately wrong solution.
		wrong float64
	}{
		// Bottom chord of panel 3 (x = 9..12 m, diagonal rising to U4):
		// moments about U4 give N = M/h, M = 2.5 P 12 - P (9 + 6 + 3) =
		// 12 P m with P = 100 kN, h = 3 m (worked by hand).
		{"EA ratio 1e8", stiffSoftTruss(1e8, 1), 9, 12 * 100e3 / 3, 1e-6},
		{"essential diagonal at 1e-9", stiffSoftTruss(1, 1e-9), 9, 12 * 100e3 / 3, 1e-6},
		// Joint D: BD takes the 10 kN along x in tension (worked by hand).
		// The normwise check sees an error here only in proportion to the
		// stiff bar's share: the wrong solution is off by 50 %.
		{"essential member at 3e-11", crossTwoBar(3e-11), 1, 10e3, 0.5},
	} {
		t.Run(c.name, func(t *testing.T) {
			s := c.s
			m, err := Analyze(s)
			if err != nil {
				t.Fatalf("%s: %v", c.name, err)
			}
			if d := m.Determinacy(); d.ByRank != 0 {
				t.Fatalf("degree of indeterminacy %d, want 0 (the test needs a determinate truss)", d.ByRank)
			}
			r, err := m.SolveFactors([]Factor{{Pattern: "P", Factor: 1}})
			if err != nil {
				t.Fatal(err)
			}
			eq := r.Equilibrium
			t.Logf("relative imbalance %.2e, backward error %.2e, limit %.2e", eq.Relative, eq.BackwardError, eq.Limit)
			if !eq.OK() {
				t.Errorf("correct solution FAILED: backward error %.2e > limit %.2e", eq.BackwardError, eq.Limit)
			}
			// The truss is determinate: the member forces follow from
			// statics alone and do not depend on the areas.
			checkNear(t, "N("+s.Members[c.member].ID+")", r.Forces[c.member], c.force, 1e-6, 1)

			// A deliberately wrong solution: every displacement off by
			// c.wrong of itself, alternately up and down (a plain scaling
			// would solve the scaled load exactly), and the member forces
			// recomputed from them.
			ls := m.newLoadSet()
			m.addPattern(ls, &s.Patterns[0], 1)
			w, _ := m.solveLoads(ls)
			for i := range w {
				w[i] *= 1 + c.wrong*float64(1-2*(i%2))
			}
			n := make([]float64, len(s.Members))
			for e := range n {
				n[e] = m.memberForce(e, w, 0)
			}
			bad := m.result(ls, w, n).Equilibrium
			t.Logf("wrong solution: backward error %.2e", bad.BackwardError)
			if bad.OK() {
				t.Errorf("wrong solution passed: backward error %.2e <= limit %.2e", bad.BackwardError, bad.Limit)
			}
		})
	}
}
