package model

import (
	"math"
	"testing"
)

// truss is a small builder for structures in tests.
type truss struct{ s *Structure }

func newTruss(name string, dim int) *truss {
	return &truss{s: &Structure{Name: name, Dim: dim, Groups: map[string][]int{}}}
}

func (t *truss) node(id string, x ...float64) int {
	var p [3]float64
	copy(p[:], x)
	t.s.Nodes = append(t.s.Nodes, Node{ID: id, X: p})
	return len(t.s.Nodes) - 1
}

func (t *truss) member(id string, i, j int, e, a, alpha float64) int {
	t.s.Members = append(t.s.Members, Member{ID: id, I: i, J: j, E: e, A: a, Alpha: alpha})
	return len(t.s.Members) - 1
}

func (t *truss) fix(n int, axes ...int) *Support {
	sp := Support{Node: n}
	for _, a := range axes {
		sp.Fixed[a] = true
	}
	t.s.Supports = append(t.s.Supports, sp)
	return &t.s.Supports[len(t.s.Supports)-1]
}

func (t *truss) pattern(p Pattern) {
	t.s.Patterns = append(t.s.Patterns, p)
}

func (t *truss) load(name string, n int, f ...float64) {
	var v [3]float64
	copy(v[:], f)
	pi, ok := t.s.PatternIndex(name)
	if !ok {
		t.s.Patterns = append(t.s.Patterns, Pattern{Name: name})
		pi = len(t.s.Patterns) - 1
	}
	t.s.Patterns[pi].Forces = append(t.s.Patterns[pi].Forces, NodalForce{Node: n, F: v})
}

func analyze(t *testing.T, s *Structure) *Model {
	t.Helper()
	m, err := Analyze(s)
	if err != nil {
		t.Fatalf("Analyze(%s): %v", s.Name, err)
	}
	return m
}

func solve(t *testing.T, m *Model, f ...Factor) *Result {
	t.Helper()
	r, err := m.SolveFactors(f)
	if err != nil {
		t.Fatalf("solve: %v", err)
	}
	if r.Equilibrium.Relative > 1e-9 {
		t.Errorf("%s: equilibrium relative imbalance %.3g at %s", m.s.Name, r.Equilibrium.Relative, r.Equilibrium.Joint)
	}
	return r
}

// near reports |got - want| <= tol * max(|want|, floor).
func near(got, want, rel, floor float64) bool {
	return math.Abs(got-want) <= rel*math.Max(math.Abs(want), floor)
}

func checkNear(t *testing.T, what string, got, want, rel, floor float64) {
	t.Helper()
	if !near(got, want, rel, floor) {
		t.Errorf("%s = %.6g, want %.6g (rel tol %g)", what, got, want, rel)
	}
}
