package model

import (
	"errors"
	"math"
	"strings"
	"testing"

	"trussmonitor/internal/sparse"
)

func TestMechanisms(t *testing.T) {
	cases := []struct {
		name        string
		build       func() *Structure
		mechanisms  int
		counting    int
		agree       bool
		movingNodes []string // nodes that must appear in the first motion
	}{
		{
			// Square frame without a diagonal on a pin and a roller: m = 4,
			// r = 3, j = 4, count -1; one sway mechanism (common practice).
			name: "square without diagonal",
			build: func() *Structure {
				tr := newTruss("square", 2)
				a, b, c, d := tr.node("A", 0, 0), tr.node("B", 3, 0), tr.node("C", 3, 3), tr.node("D", 0, 3)
				tr.member("AB", a, b, enE, 1e-3, 0)
				tr.member("BC", b, c, enE, 1e-3, 0)
				tr.member("CD", c, d, enE, 1e-3, 0)
				tr.member("DA", d, a, enE, 1e-3, 0)
				tr.fix(a, 0, 1)
				tr.fix(b, 1)
				return tr.s
			},
			mechanisms: 1, counting: -1, agree: true, movingNodes: []string{"C", "D"},
		},
		{
			// Triangle on a pin at A and a roller at B whose reaction line
			// passes through A: count 0 but the truss rotates about A.
			name: "concurrent reactions",
			build: func() *Structure {
				tr := newTruss("concurrent", 2)
				a, b, c := tr.node("A", 0, 0), tr.node("B", 4, 0), tr.node("C", 2, 2)
				tr.member("AB", a, b, enE, 1e-3, 0)
				tr.member("BC", b, c, enE, 1e-3, 0)
				tr.member("CA", c, a, enE, 1e-3, 0)
				tr.fix(a, 0, 1)
				tr.fix(b, 0)
				return tr.s
			},
			mechanisms: 1, counting: 0, agree: false, movingNodes: []string{"B", "C"},
		},
		{
			// Two collinear bars along x between pins: the middle node has
			// no stiffness across (exactly zero).
			name: "collinear bars, axis-aligned",
			build: func() *Structure {
				tr := newTruss("collinear", 2)
				a, m, b := tr.node("A", 0, 0), tr.node("M", 2, 0), tr.node("B", 4, 0)
				tr.member("AM", a, m, enE, 1e-3, 0)
				tr.member("MB", m, b, enE, 1e-3, 0)
				tr.fix(a, 0, 1)
				tr.fix(b, 0, 1)
				return tr.s
			},
			mechanisms: 1, counting: 0, agree: false, movingNodes: []string{"M"},
		},
		{
			// The same along a skew line: the transverse stiffness is zero
			// only up to rounding, so the pivot test or the probe solve must
			// catch it (near-singular).
			name: "collinear bars, skew",
			build: func() *Structure {
				tr := newTruss("collinear-skew", 2)
				a, m, b := tr.node("A", 0, 0), tr.node("M", 1.7, 2.9), tr.node("B", 3.4, 5.8)
				tr.member("AM", a, m, enE, 1e-3, 0)
				tr.member("MB", m, b, enE, 1e-3, 0)
				tr.fix(a, 0, 1)
				tr.fix(b, 0, 1)
				return tr.s
			},
			mechanisms: 1, counting: 0, agree: false, movingNodes: []string{"M"},
		},
		{
			name: "node without members or support",
			build: func() *Structure {
				tr := hibbeler61()
				tr.node("loose", 5, 5)
				return tr.s
			},
			mechanisms: 2, counting: -2, agree: true, movingNodes: []string{"loose"},
		},
		{
			name: "no supports (rigid-body motions, 3D)",
			build: func() *Structure {
				tr := newTruss("floating", 3)
				n := []int{tr.node("A", 0, 0, 0), tr.node("B", 1, 0, 0), tr.node("C", 0, 1, 0), tr.node("D", 0, 0, 1)}
				for i := 0; i < 4; i++ {
					for j := i + 1; j < 4; j++ {
						tr.member("M", n[i], n[j], enE, 1e-3, 0)
					}
				}
				return tr.s
			},
			mechanisms: 6, counting: -6, agree: true,
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			m, err := Analyze(c.build())
			var me *MechanismError
			if !errors.As(err, &me) {
				t.Fatalf("Analyze: model %v, error %v; want a *MechanismError", m != nil, err)
			}
			if len(me.Motions) != c.mechanisms {
				t.Errorf("%d motions, want %d: %v", len(me.Motions), c.mechanisms, err)
			}
			d := me.Determinacy
			if d.ByCounting != c.counting || d.Mechanisms != c.mechanisms || d.Stable || d.Agree != c.agree || d.ByRank != c.counting+c.mechanisms {
				t.Errorf("determinacy %+v", d)
			}
			for _, id := range c.movingNodes {
				found := false
				for _, fm := range me.Motions {
					for _, nm := range fm.Nodes {
						found = found || nm.ID == id
					}
				}
				if !found {
					t.Errorf("node %s not reported as moving: %v", id, err)
				}
			}
			for _, fm := range me.Motions {
				for _, nm := range fm.Nodes {
					if !finite(nm.Dir[:]...) {
						t.Errorf("non-finite motion %v", nm)
					}
				}
			}
			if !strings.Contains(err.Error(), "mechanism") {
				t.Errorf("message %q", err)
			}
			// The sparse path (restraining failed pivots) finds as many
			// motions, moving the same nodes.
			s := c.build()
			pm := &Model{s: s, lo: newLayout(s)}
			pm.k = pm.lo.assemble()
			pivot := -1
			ch, ferr := sparse.Factorize(pm.k, sparse.Options{})
			var npd *sparse.NotPositiveDefiniteError
			if errors.As(ferr, &npd) {
				pivot = npd.Index
			} else {
				pm.chol = ch
			}
			motions, partial := pm.pivotMotions(pivot)
			if len(motions) != c.mechanisms || partial {
				t.Errorf("sparse path: %d motions (partial %v), want %d", len(motions), partial, c.mechanisms)
			}
			moving := func(ms []FreeMotion) map[string]bool {
				out := map[string]bool{}
				for _, fm := range ms {
					for _, nm := range fm.Nodes {
						out[nm.ID] = true
					}
				}
				return out
			}
			dn, sn := moving(me.Motions), moving(motions)
			for id := range dn {
				if !sn[id] {
					t.Errorf("sparse path: node %s does not move (dense path: it does)", id)
				}
			}
		})
	}
}

// TestMechanismLarge: beyond the dense limit the free motions come from
// restraining the DOFs where the sparse pivot failed: a dangling bar hinged
// to a long bridge can swing about its hinge in two directions, and only
// its free end moves.
func TestMechanismLarge(t *testing.T) {
	s := LongBridge(40)
	if n := 12 * 41; n <= denseNullLimit {
		t.Fatalf("bridge too small (%d DOF) for the sparse path", n)
	}
	s.Nodes = append(s.Nodes, Node{ID: "dangling", X: [3]float64{50, -3, 0}})
	s.Members = append(s.Members, Member{ID: "arm", I: 4 * 10, J: len(s.Nodes) - 1, E: enE, A: 1e-3})
	_, err := Analyze(s)
	var me *MechanismError
	if !errors.As(err, &me) {
		t.Fatalf("want a mechanism, got %v", err)
	}
	if len(me.Motions) != 2 || me.Motions[0].Nodes[0].ID != "dangling" || me.Motions[0].Moving != 1 || me.Determinacy.Mechanisms != 2 || me.Partial {
		t.Errorf("motions %v (want the 2 swings of the dangling node)", err)
	}
}

func TestValidation(t *testing.T) {
	cases := []struct {
		name  string
		edit  func(s *Structure)
		wants string
	}{
		{"zero-length member", func(s *Structure) { s.Nodes[2].X = s.Nodes[0].X }, "zero length"},
		{"member end out of range", func(s *Structure) { s.Members[1].J = 9 }, "out of range"},
		{"same node twice", func(s *Structure) { s.Members[1].J = s.Members[1].I }, "same node"},
		{"non-positive E", func(s *Structure) { s.Members[0].E = 0 }, "modulus must be a positive"},
		{"negative A", func(s *Structure) { s.Members[2].A = -1 }, "area must be a positive"},
		{"NaN coordinate", func(s *Structure) { s.Nodes[1].X[0] = math.NaN() }, "not finite"},
		{"NaN force", func(s *Structure) { s.Patterns[0].Forces[0].F[1] = math.NaN() }, "not finite"},
		{"bad dimension", func(s *Structure) { s.Dim = 4 }, "must be 2"},
		{"z in a plane truss", func(s *Structure) { s.Nodes[1].X[2] = 1 }, "plane truss"},
		{"settlement on a free direction", func(s *Structure) {
			s.Patterns = append(s.Patterns, Pattern{Name: "S", Settlements: []Settlement{{Node: 2, D: [3]float64{0.01, 0, 0}}}})
		}, "not fixed in x"},
		{"zero roller normal", func(s *Structure) { s.Supports[1] = Support{Node: 2, Normal: &[3]float64{}} }, "non-zero vector"},
		{"case with unknown pattern", func(s *Structure) { s.Cases = []Case{{Name: "c", Factors: []Factor{{"nope", 1}}}} }, "unknown load pattern"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := hibbeler61().s
			c.edit(s)
			_, err := Analyze(s)
			var ve *ValidationError
			if !errors.As(err, &ve) {
				t.Fatalf("want *ValidationError, got %v", err)
			}
			if !strings.Contains(err.Error(), c.wants) {
				t.Errorf("error %q does not mention %q", err, c.wants)
			}
		})
	}
	// Several problems are all listed.
	s := hibbeler61().s
	s.Members[0].E = -1
	s.Members[1].A = 0
	err := Validate(s)
	var ve *ValidationError
	if !errors.As(err, &ve) || len(ve.Problems) != 2 {
		t.Errorf("want both problems, got %v", err)
	}
}

func TestSolveErrors(t *testing.T) {
	m := analyze(t, hibbeler61().s)
	if _, err := m.SolveCase("missing"); err == nil || !strings.Contains(err.Error(), "unknown load case") {
		t.Errorf("SolveCase(missing): %v", err)
	}
	if _, err := m.SolveFactors([]Factor{{"nope", 1}}); err == nil {
		t.Error("unknown pattern accepted")
	}
	if _, err := m.Influence([]int{0}, []Input{{TemperatureInput, "nope"}}); err == nil {
		t.Error("unknown group accepted")
	}
	if _, err := m.Influence([]int{7}, []Input{{PatternInput, "P"}}); err == nil {
		t.Error("member out of range accepted")
	}
	// The method of joints on an indeterminate truss gets stuck.
	tr := newTruss("indeterminate", 2)
	a, b, c, d := tr.node("A", 0, 0), tr.node("B", 3, 0), tr.node("C", 3, 3), tr.node("D", 0, 3)
	for _, p := range [][2]int{{a, b}, {b, c}, {c, d}, {d, a}, {a, c}, {b, d}} {
		tr.member("M", p[0], p[1], enE, 1e-3, 0)
	}
	tr.fix(a, 0, 1)
	tr.fix(b, 1)
	tr.load("P", c, 1e3, 0)
	_, err := SolveByJoints(tr.s, []Factor{{"P", 1}})
	var se *StuckError
	if !errors.As(err, &se) {
		t.Errorf("want *StuckError, got %v", err)
	}
}
