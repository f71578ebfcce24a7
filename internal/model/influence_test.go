package model

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestInfluenceDirectAdjoint: the influence matrix computed by one solve per
// input and by one adjoint solve per member agree, and both agree with full
// solves of each input.
func TestInfluenceDirectAdjoint(t *testing.T) {
	forEachRandom(t, func(t *testing.T, s *Structure, rc randomCase) {
		m := analyze(t, s)
		members := []int{0, 2, len(s.Members) - 1, len(s.Members) / 2}
		inputs := []Input{{PatternInput, "F"}, {PatternInput, "T"}, {PatternInput, "S"}, {TemperatureInput, "all"}}
		hd, err := m.influenceDirect(members, inputs)
		if err != nil {
			t.Fatal(err)
		}
		ha, err := m.influenceAdjoint(members, inputs)
		if err != nil {
			t.Fatal(err)
		}
		for c, in := range inputs {
			var r *Result
			if in.Kind == PatternInput {
				r = solve(t, m, Factor{in.Name, 1})
			} else {
				r = solve(t, m, Factor{"T", 1}) // pattern T is +1 K on all members
			}
			scale := math.Max(maxAbs(r.Forces), 1e3)
			for i, e := range members {
				if !near(hd.At(i, c), r.Forces[e], 1e-9, scale) || !near(ha.At(i, c), r.Forces[e], 1e-9, scale) {
					t.Errorf("H[%d][%s]: direct %.10g, adjoint %.10g, full solve %.10g", i, in.Name, hd.At(i, c), ha.At(i, c), r.Forces[e])
				}
			}
		}
		if h, err := m.Influence(members, inputs); err != nil || !mat.EqualApprox(h, hd, 1e-6*mat.Norm(hd, math.Inf(1))) {
			t.Errorf("Influence: %v", err)
		}
	})
}

// fdGaugeForces returns the gauge-inferred forces y_g = (E A)_nominal *
// N_g / (E A)_actual with member k's E scaled by (1 + s).
func fdGaugeForces(t *testing.T, s *Structure, k int, sc float64, gauged []int, f []Factor) []float64 {
	c := *s
	c.Members = append([]Member(nil), s.Members...)
	c.Members[k].E *= 1 + sc
	r := solve(t, analyze(t, &c), f...)
	y := make([]float64, len(gauged))
	for i, g := range gauged {
		y[i] = s.Members[g].E * s.Members[g].A * r.Forces[g] / (c.Members[g].E * c.Members[g].A)
	}
	return y
}

// TestSignatures checks the cause signatures against finite differences of
// full solves (stiffness, for every member including the gauged ones) and
// against direct solves (settlement, nodal load: linear, so exact).
func TestSignatures(t *testing.T) {
	forEachRandom(t, func(t *testing.T, s *Structure, rc randomCase) {
		m := analyze(t, s)
		gauged := []int{0, 1, len(s.Members) - 1}
		sg, err := m.Signatures(gauged)
		if err != nil {
			t.Fatal(err)
		}
		f := []Factor{{"F", 1}, {"T", 20}, {"S", 0.5}}
		base := solve(t, m, f...)
		st := sg.Stiffness(base.Forces)
		scale := maxAbs(base.Forces)
		const h = 1e-4
		for k := range s.Members {
			yp := fdGaugeForces(t, s, k, h, gauged, f)
			ym := fdGaugeForces(t, s, k, -h, gauged, f)
			for g := range gauged {
				fd := (yp[g] - ym[g]) / (2 * h)
				if !near(st.At(g, k), fd, 1e-6, 0.1*scale) {
					t.Errorf("dy_%s/ds_%s = %.8g, finite difference %.8g", s.Members[gauged[g]].ID, s.Members[k].ID, st.At(g, k), fd)
				}
			}
		}
		labels, se := sg.Settlement()
		for r, dof := range m.lo.rest {
			n := dof / m.lo.dim
			var d [3]float64
			d[dof%m.lo.dim] = 1
			c := *s
			c.Patterns = append(append([]Pattern(nil), s.Patterns...), Pattern{Name: "unit", Settlements: []Settlement{{Node: n, D: d}}})
			ru := solve(t, analyze(t, &c), Factor{"unit", 1})
			for g, e := range gauged {
				if !near(se.At(g, r), ru.Forces[e], 1e-9, enE*1e-3) {
					t.Errorf("settlement %s: signature %.10g, solve %.10g", labels[r], se.At(g, r), ru.Forces[e])
				}
			}
		}
		nl, sn := sg.NodalLoad()
		for i, dof := range m.lo.free {
			if i%3 != 0 {
				continue // a sample keeps the test quick
			}
			n := dof / m.lo.dim
			var fv [3]float64
			fv[dof%m.lo.dim] = 1
			c := *s
			c.Patterns = append(append([]Pattern(nil), s.Patterns...), Pattern{Name: "unit", Forces: []NodalForce{{Node: n, F: fv}}})
			ru := solve(t, analyze(t, &c), Factor{"unit", 1})
			for g, e := range gauged {
				if !near(sn.At(g, i), ru.Forces[e], 1e-9, maxAbs(ru.Forces)) {
					t.Errorf("nodal load %s: signature %.10g, solve %.10g", nl[i], sn.At(g, i), ru.Forces[e])
				}
			}
		}
	})
}

// TestSignatureLabels checks the label forms.
func TestSignatureLabels(t *testing.T) {
	tr := hibbeler63()
	m := analyze(t, tr.s)
	sg, err := m.Signatures([]int{0})
	if err != nil {
		t.Fatal(err)
	}
	sl, _ := sg.Settlement()
	nl, _ := sg.NodalLoad()
	wantS := []string{"A y", "C x", "C y"}
	wantN := []string{"A x", "B x", "B y", "D x", "D y"}
	if len(sl) != len(wantS) || len(nl) != len(wantN) {
		t.Fatalf("labels %v / %v", sl, nl)
	}
	for i := range wantS {
		if sl[i] != wantS[i] {
			t.Errorf("settlement label %q, want %q", sl[i], wantS[i])
		}
	}
	for i := range wantN {
		if nl[i] != wantN[i] {
			t.Errorf("nodal label %q, want %q", nl[i], wantN[i])
		}
	}
}
