package alerts

import (
	"fmt"

	"trussmonitor/internal/reconcile"
)

// FromResult fills the fit, members and causes of an observation from a
// reconcile result: members are the available gauged members (names in
// the solver's order), their estimated bias is the gauge-fault estimate
// e_i / r_i (0 where r_i ~ 0), and causes are the first n ranked causes.
func FromResult(o *Observation, names []string, r *reconcile.Result, causes []reconcile.Cause, n int) error {
	if len(names) != len(r.Available) {
		return fmt.Errorf("alerts: %d member names for a result of %d gauged members", len(names), len(r.Available))
	}
	o.Fit = &Fit{ChiSquare: r.T, DOF: r.DOF, PValue: r.PValue}
	o.Members = o.Members[:0]
	for i, ok := range r.Available {
		if !ok {
			continue
		}
		bias := 0.0
		if r.Redundancy[i] > 1e-12 {
			bias = r.Adjusted[i] / r.Redundancy[i]
		}
		o.Members = append(o.Members, Member{Member: names[i], W: r.W[i], Checkable: r.Checkable[i], EstimatedBias: bias})
	}
	o.Causes = CausesFrom(causes, n)
	return nil
}

// CausesFrom converts the first n separable ranked causes to evidence, in
// their displayed units (N, %, mm).
func CausesFrom(causes []reconcile.Cause, n int) []Cause {
	var out []Cause
	for _, c := range causes {
		if len(out) == n {
			break
		}
		if !c.Separable {
			continue
		}
		out = append(out, Cause{Label: c.Label, Kind: c.Kind.String(), T: c.T, Size: c.DisplaySize, Unit: c.DisplayUnit})
	}
	return out
}
