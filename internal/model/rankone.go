package model

import "gonum.org/v1/gonum/mat"

// SelfFlexibility returns, for each listed member, kappa_e = (E A / L)_e
// b_e^T K^-1 b_e: the share of a unit elongation imposed on member e that
// the rest of the structure lets happen, in [0, 1]. kappa_e = 1 for a member
// whose removal leaves a mechanism (statically determinate for it) and
// kappa_e < 1 for a redundant member.
//
// It is the denominator of the Sherman-Morrison formula for a change of one
// member's axial stiffness (E A)_e -> (1 + d) (E A)_e, a rank-one update
// K' = K + d (E A / L)_e b_e b_e^T (Sherman and Morrison 1950; Golub and
// Van Loan, Matrix Computations, 4th ed., section 2.1.4, from memory):
//
//	K'^-1 = K^-1 - d k_e K^-1 b_e b_e^T K^-1 / (1 + d kappa_e),
//
// from which every member force changes by its first-order sensitivity
// times d / (1 + d kappa_e), with the member's thermal load scaled by
// (1 + d) as well (see Signatures.Stiffness). One solve per member.
func (m *Model) SelfFlexibility(members []int) ([]float64, error) {
	if err := m.checkMembers(members); err != nil {
		return nil, err
	}
	out := make([]float64, len(members))
	if len(members) == 0 || len(m.lo.free) == 0 {
		return out, nil
	}
	z := m.adjoint(members) // z_e = K^-1 g_e, g_e = k_e b_e (free part)
	for c, e := range members {
		g := m.memberGradient(e)
		k := m.lo.mem[e].k
		var s float64
		for i, v := range g {
			if v != 0 {
				s += v * z.At(i, c)
			}
		}
		// g.z = k^2 b^T K^-1 b, so kappa = g.z / k.
		out[c] = s / k
	}
	return out, nil
}

// SpringDirection is one direction of an elastic support spring along a
// global axis at a node that is free in that direction.
type SpringDirection struct {
	// Label is the node direction, as in Signatures.NodalLoad ("L8 x").
	Label string
	// Node and Axis locate it; Stiffness is the spring constant (N/m).
	Node, Axis int
	Stiffness  float64
	// Kappa is k e^T K^-1 e, the Sherman-Morrison denominator of a change
	// k -> (1 + d) k (see SelfFlexibility).
	Kappa float64
}

// Springs lists the spring directions of the model (springs at nodes
// without an inclined roller; an inclined roller's coupled spring is not
// listed).
func (m *Model) Springs() []SpringDirection {
	var out []SpringDirection
	d := m.lo.dim
	for n, sw := range m.lo.spring {
		if sw == nil || m.lo.rot[n] != nil {
			continue
		}
		for a := 0; a < d; a++ {
			w := n*d + a
			if sw[a][a] == 0 || m.lo.kind[w] != dofFree {
				continue
			}
			e := make([]float64, len(m.lo.free))
			e[m.lo.index[w]] = 1
			x := make([]float64, len(e))
			m.chol.Solve(x, e)
			out = append(out, SpringDirection{Label: m.lo.dofLabel(m.s, w), Node: n, Axis: a,
				Stiffness: sw[a][a], Kappa: sw[a][a] * x[m.lo.index[w]]})
		}
	}
	return out
}

// SpringInfluence returns the displacement (m) of each spring direction
// (rows, in Springs order) per unit of each input (columns). The force the
// spring exerts on the structure is -Stiffness times the displacement; a
// change k -> (1 + d) k then changes every member force by
// -k u z_g d / (1 + Kappa d), z_g the member's nodal-load signature at that
// direction (Sherman-Morrison, as for a member).
func (m *Model) SpringInfluence(springs []SpringDirection, inputs []Input) (*mat.Dense, error) {
	if len(springs) == 0 || len(inputs) == 0 {
		return nil, nil
	}
	out := mat.NewDense(len(springs), len(inputs), nil)
	for c, in := range inputs {
		ls, err := m.loadSetOf(in)
		if err != nil {
			return nil, err
		}
		w, _ := m.solveLoads(ls)
		for r, s := range springs {
			out.Set(r, c, w[s.Node*m.lo.dim+s.Axis])
		}
	}
	return out, nil
}
