package reconcile

// GaugeOrStiffness returns the gauged members whose gauge fault and change
// of axial stiffness cannot be told apart by the gauges: the stiffness
// signature of member k (model.Signatures.Stiffness) moves only k's own
// gauge, so it is parallel to the gauge-fault signature e_k. This is the
// case of a member in a statically determinate part of the truss, whose
// force follows from statics alone: a change of its E A changes the strain
// its gauge reads and nothing else. The test is the weighted share of the
// signature on the other gauges, sum_{g != k} (S_gk / sigma_g)^2, against
// SeparableTol times its whole weighted norm, the tolerance the
// cause ranking uses for "cannot be separated". The direction of a
// stiffness signature does not depend on the member's force, so the answer
// holds at every load state (a member carrying no force at all has no
// stiffness signature at that state).
func (p *Processor) GaugeOrStiffness() []string {
	lm := p.lm
	members := lm.m.Structure().Members
	unit := make([]float64, len(members))
	for i := range unit {
		unit[i] = 1
	}
	s := lm.sig.Stiffness(unit)
	var out []string
	for r, k := range lm.gauged {
		var own, others float64
		for g := range lm.gauged {
			v := s.At(g, k) / p.sigma[g]
			if g == r {
				own = v * v
			} else {
				others += v * v
			}
		}
		if own > 0 && others <= SeparableTol*(own+others) {
			out = append(out, members[k].ID)
		}
	}
	return out
}
