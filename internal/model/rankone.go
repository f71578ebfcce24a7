package model

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
