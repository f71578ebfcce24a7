package model_test

import (
	"math"
	"path/filepath"
	"testing"

	"trussmonitor/internal/model"
	"trussmonitor/internal/structfile"
)

// TestReferenceFiles solves the reference structure files (read by package
// structfile, units included) and compares with the hand and closed-form
// values written in each file's header, whose sources are named there.
func TestReferenceFiles(t *testing.T) {
	type mf struct {
		member string
		n      float64 // N
	}
	type nd struct {
		node string
		axis int
		u    float64 // m
	}
	const inch = 0.0254
	cases := []struct {
		file, lc string
		rel      float64
		forces   []mf
		disps    []nd
	}{
		// Logan, A First Course in the Finite Element Method, Example 3.5
		// (from memory; book values rounded, 0.5 %): sigma 3965, 1471,
		// -1035 psi on 2 in2; u1 = 0.414e-2 in, v1 = -1.59e-2 in.
		{"logan-3-5.yaml", "book", 5e-3,
			[]mf{{"1", 3965 * 2 * 4.4482216152605}, {"2", 1471 * 2 * 4.4482216152605}, {"3", -1035 * 2 * 4.4482216152605}},
			[]nd{{"1", 0, 0.414e-2 * inch}, {"1", 1, -1.59e-2 * inch}}},
		{"tripod.yaml", "vertical", 1e-9, []mf{{"L1", -5e3}, {"L2", -5e3}, {"L3", -5e3}}, []nd{{"D", 2, -1.5625e-4}}},
		{"tripod.yaml", "sideways", 1e-9, []mf{{"L1", -10e3}, {"L2", 5e3}, {"L3", 5e3}}, []nd{{"D", 0, 7.5e5 / 9 / 2e8}}},
		{"inclined-roller.yaml", "H10", 1e-9, []mf{{"AC", 12.5e3}, {"BC", -7.5e3}, {"AB", 7.5e3}}, nil},
		{"spring-bar.yaml", "P20", 1e-9, []mf{{"AB", 10e3}}, []nd{{"B", 0, 1e-4}}},
		{"fixed-bar.yaml", "push", 1e-9, []mf{{"AC", 20e3}, {"CB", -10e3}}, []nd{{"C", 0, 1e-4}}},
		{"fixed-bar.yaml", "warm", 1e-9, []mf{{"AC", -72e3}, {"CB", -72e3}}, []nd{{"C", 0, 0}}},
		{"fixed-bar.yaml", "move_B", 1e-9, []mf{{"AC", 2e8 * 1e-3 / 3}, {"CB", 2e8 * 1e-3 / 3}}, []nd{{"C", 0, 1e-3 / 3}}},
		{"king-post.yaml", "P60", 1e-9, []mf{{"AC", -50e3}, {"BC", -50e3}, {"AB", 40e3}}, []nd{{"C", 1, -3.15e-3}, {"B", 0, 1.6e-3}}},
		{"pratt-4.yaml", "P60", 1e-9, []mf{{"L0U1", -37.5e3}, {"L1L2", 22.5e3}, {"U1U2", -45e3}, {"U1L2", 37.5e3}, {"L2U2", 0}}, nil},
		{"pratt-4.yaml", "heat", 1e-9, []mf{{"L0L1", 0}, {"U1U2", 0}}, []nd{{"L4", 0, 2.88e-3}}},
		{"three-bar.yaml", "P100", 1e-5, []mf{{"AD", 49407.1}, {"BD", 31620.6}, {"CD", 31620.6}}, []nd{{"D", 1, -9.88142e-4}}},
		{"three-bar.yaml", "heat", 1e-5, []mf{{"AD", -12142.3}, {"BD", 7588.9}, {"CD", 7588.9}}, []nd{{"D", 1, -2.37154e-4}}},
	}
	for _, c := range cases {
		t.Run(c.file+"/"+c.lc, func(t *testing.T) {
			s, err := structfile.LoadFile(filepath.Join("../../testdata/reference", c.file))
			if err != nil {
				t.Fatal(err)
			}
			m, err := model.Analyze(s)
			if err != nil {
				t.Fatal(err)
			}
			r, err := m.SolveCase(c.lc)
			if err != nil {
				t.Fatal(err)
			}
			if r.Equilibrium.Relative > 1e-9 {
				t.Errorf("equilibrium %g", r.Equilibrium.Relative)
			}
			var scale float64 // for zero-force members: 1e-6 of the largest force
			for _, n := range r.Forces {
				scale = math.Max(scale, math.Abs(n))
			}
			for _, w := range c.forces {
				e, ok := s.MemberIndex(w.member)
				if !ok {
					t.Fatalf("no member %s", w.member)
				}
				if got := r.Forces[e]; math.Abs(got-w.n) > c.rel*math.Abs(w.n)+1e-6*math.Max(scale, 1) {
					t.Errorf("N_%s = %.6g N, want %.6g", w.member, got, w.n)
				}
			}
			for _, w := range c.disps {
				n, ok := s.NodeIndex(w.node)
				if !ok {
					t.Fatalf("no node %s", w.node)
				}
				if got := r.Displacements[n][w.axis]; math.Abs(got-w.u) > c.rel*math.Abs(w.u)+1e-12 {
					t.Errorf("u_%s[%d] = %.6g m, want %.6g", w.node, w.axis, got, w.u)
				}
			}
		})
	}
}
