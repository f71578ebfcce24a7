package model

import (
	"fmt"
	"testing"

	"trussmonitor/internal/sparse"
)

// benchStructures are the generated roof grids and bridges at about 1k, 10k
// and 100k degrees of freedom.
func benchStructures() []struct {
	name string
	make func() *Structure
} {
	return []struct {
		name string
		make func() *Structure
	}{
		{"grid-1k", func() *Structure { return DoubleLayerGrid(12, 12, 3, 2) }},
		{"grid-10k", func() *Structure { return DoubleLayerGrid(40, 40, 3, 2) }},
		{"grid-100k", func() *Structure { return DoubleLayerGrid(129, 129, 3, 2) }},
		{"bridge-1k", func() *Structure { return LongBridge(83) }},
		{"bridge-10k", func() *Structure { return LongBridge(833) }},
		{"bridge-100k", func() *Structure { return LongBridge(8333) }},
	}
}

// BenchmarkAnalyze measures validation, DOF numbering, assembly and the
// Cholesky factorisation (ordering included).
func BenchmarkAnalyze(b *testing.B) {
	for _, bs := range benchStructures() {
		s := bs.make()
		b.Run(bs.name, func(b *testing.B) {
			var m *Model
			for i := 0; i < b.N; i++ {
				var err error
				if m, err = Analyze(s); err != nil {
					b.Fatal(err)
				}
			}
			st := m.Stats()
			b.ReportMetric(float64(m.FreeDOFs()), "dof")
			b.ReportMetric(float64(st.NNZL), "nnzL")
			b.Logf("%s: %d DOF, method %v, ordering %v, nnz(L) %d, factor %v", bs.name, m.FreeDOFs(), st.Method, st.Ordering, st.NNZL, st.FactorTime)
		})
	}
}

// BenchmarkSolve measures one load case on a factored model: right-hand
// side, triangular solves, member forces, reactions and the equilibrium
// check.
func BenchmarkSolve(b *testing.B) {
	for _, bs := range benchStructures() {
		m, err := Analyze(bs.make())
		if err != nil {
			b.Fatal(err)
		}
		b.Run(bs.name, func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				r, err := m.SolveCase("service")
				if err != nil || r.Equilibrium.Relative > 1e-6 {
					b.Fatalf("solve: %v, equilibrium %g", err, r.Equilibrium.Relative)
				}
			}
		})
	}
}

// BenchmarkInfluence100 measures the influence matrix of 100 gauged members
// for the patterns and temperature groups (direct: one solve per input), the
// same by the adjoint (100 solves), and the signatures (100 adjoint solves).
func BenchmarkInfluence100(b *testing.B) {
	for _, bs := range benchStructures()[1:3] {
		s := bs.make()
		m, err := Analyze(s)
		if err != nil {
			b.Fatal(err)
		}
		members := make([]int, 100)
		for i := range members {
			members[i] = i * len(s.Members) / 100
		}
		inputs := []Input{{PatternInput, "dead"}, {PatternInput, "snow"}, {TemperatureInput, "top"}, {TemperatureInput, "bottom"}, {TemperatureInput, "web"}}
		for _, v := range []struct {
			name string
			f    func() error
		}{
			{"auto", func() error { _, err := m.Influence(members, inputs); return err }},
			{"adjoint", func() error { _, err := m.influenceAdjoint(members, inputs); return err }},
			{"signatures", func() error { _, err := m.Signatures(members); return err }},
		} {
			b.Run(fmt.Sprintf("%s/%s", bs.name, v.name), func(b *testing.B) {
				for i := 0; i < b.N; i++ {
					if err := v.f(); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}

// TestGenerators checks that the generated structures are stable and of the
// advertised size.
func TestGenerators(t *testing.T) {
	for _, s := range []*Structure{DoubleLayerGrid(4, 3, 3, 2), LongBridge(45)} {
		m := analyze(t, s)
		d := m.Determinacy()
		if !d.Stable || d.ByRank < 0 {
			t.Errorf("%s: %+v", s.Name, d)
		}
		if _, err := m.SolveCase("service"); err != nil {
			t.Error(err)
		}
	}
}

// BenchmarkFactorMethods factors the assembled grid stiffness matrices with
// each of the sparse package's methods, to compare with Analyze's automatic
// choice.
func BenchmarkFactorMethods(b *testing.B) {
	for _, bs := range benchStructures()[1:3] {
		k := newLayout(bs.make()).assemble()
		for _, meth := range []sparse.Method{sparse.Band, sparse.Supernodal} {
			if meth == sparse.Band && k.N() > 50000 {
				continue // measured by BenchmarkAnalyze
			}
			b.Run(bs.name+"/"+meth.String(), func(b *testing.B) {
				for i := 0; i < b.N; i++ {
					if _, err := sparse.Factorize(k, sparse.Options{Method: meth}); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}
