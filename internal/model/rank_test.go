package model

import (
	"errors"
	"fmt"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// equilibriumRank builds the equilibrium matrix A (dim*j rows; one column
// per member, per restrained direction and per spring direction) in global
// coordinates and returns its numerical rank by SVD (gonum), independently
// of the stiffness path.
func equilibriumRank(s *Structure) (rank, cols int) {
	d := s.Dim
	var colsData [][]float64
	for _, mb := range s.Members {
		c := make([]float64, d*len(s.Nodes))
		l := memberLength(s, mb)
		for k := 0; k < d; k++ {
			u := (s.Nodes[mb.J].X[k] - s.Nodes[mb.I].X[k]) / l
			c[mb.I*d+k] = u
			c[mb.J*d+k] = -u
		}
		colsData = append(colsData, c)
	}
	for _, sp := range s.Supports {
		add := func(v [3]float64) {
			c := make([]float64, d*len(s.Nodes))
			for k := 0; k < d; k++ {
				c[sp.Node*d+k] = v[k]
			}
			colsData = append(colsData, c)
		}
		if sp.Normal != nil {
			add(*sp.Normal)
		}
		for k := 0; k < d; k++ {
			if sp.Fixed[k] || sp.Spring[k] > 0 {
				add(unitAxis(k))
			}
		}
	}
	a := mat.NewDense(d*len(s.Nodes), len(colsData), nil)
	for j, c := range colsData {
		a.SetCol(j, c)
	}
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDNone) {
		return -1, len(colsData)
	}
	return svd.Rank(1e-10), len(colsData)
}

// TestDeterminacyByRankSVD compares the determinacy by rank with the SVD
// rank of the equilibrium matrix on the random trusses, on copies with a
// member removed (often a mechanism), and on the mechanism table.
func TestDeterminacyByRankSVD(t *testing.T) {
	var structures []*Structure
	for _, rc := range randomCases() {
		for seed := uint64(1); seed <= 3; seed++ {
			s := randomTruss(seed, rc.dim, rc.nodes, rc.extra)
			structures = append(structures, s)
			c := *s
			c.Name += "-less"
			c.Members = append([]Member(nil), s.Members[1:]...)
			c.Patterns = nil
			c.Groups = nil
			structures = append(structures, &c)
		}
	}
	structures = append(structures, hibbeler61().s, hibbeler63().s)
	for _, s := range structures {
		t.Run(fmt.Sprintf("%s-%d", s.Name, len(s.Members)), func(t *testing.T) {
			rank, cols := equilibriumRank(s)
			wantMech := s.Dim*len(s.Nodes) - rank
			wantRank := cols - rank
			m, err := Analyze(s)
			var d Determinacy
			var me *MechanismError
			switch {
			case err == nil:
				d = m.Determinacy()
			case errors.As(err, &me):
				d = me.Determinacy
			default:
				t.Fatal(err)
			}
			if d.Mechanisms != wantMech || d.ByRank != wantRank || d.Reactions+d.Members != cols {
				t.Errorf("determinacy %+v; SVD of the equilibrium matrix: rank %d, %d mechanisms, indeterminacy %d", d, rank, wantMech, wantRank)
			}
		})
	}
}
