package livestate

import (
	"trussmonitor/internal/capacity"
	"trussmonitor/internal/dashboard"
	"trussmonitor/internal/model"
	"trussmonitor/internal/reconcile"
)

// presentation returns what the state needs of the structure to present
// the member totals and the unknown loads: its patterns by name and its
// design basis (nil when it declares none).
func presentation(s *model.Structure) (map[string]model.Pattern, *dashboard.Design) {
	pats := make(map[string]model.Pattern, len(s.Patterns))
	for _, p := range s.Patterns {
		pats[p.Name] = p
	}
	var d *dashboard.Design
	if s.Design != nil {
		d = &dashboard.Design{Standard: s.Design.Standard.String(), Caution: capacity.Caution}
	}
	return pats, d
}

// loadEstimate presents an estimated pattern factor in the pattern's
// engineering unit (its reference load), with the factor beside.
func loadEstimate(pats map[string]model.Pattern, ld reconcile.LoadEstimate) dashboard.LoadEstimate {
	out := dashboard.LoadEstimate{Pattern: ld.Pattern, Value: ld.Value, StdDev: ld.Std, Unit: "pattern factor", Factor: ld.Value, FactorStdDev: ld.Std}
	if p, ok := pats[ld.Pattern]; ok {
		if v, unit, ok := p.InReferenceUnit(ld.Value); ok {
			sd, _, _ := p.InReferenceUnit(ld.Std)
			out.Value, out.StdDev, out.Unit = v, sd, unit
		}
	}
	return out
}

// memberTotals copies the epoch's member state for the dashboard.
func memberTotals(state []reconcile.MemberState) []dashboard.MemberTotal {
	out := make([]dashboard.MemberTotal, 0, len(state))
	for _, s := range state {
		out = append(out, dashboard.MemberTotal{
			ID: s.Member, Gauged: s.Gauged, Measured: s.Measured, ZeroState: s.ZeroStateN,
			MeasuredChange: s.MeasuredChangeN, PredictedChange: s.PredictedChangeN,
			MeasuredTotal: s.MeasuredTotalN, PredictedTotal: s.PredictedTotalN, Total: s.TotalN,
			Stress: s.StressPa, Ratio: s.Ratio, Resistance: s.ResistanceN,
			Utilisation: s.Utilisation, PredictedUtilisation: s.PredictedUtilisation,
		})
	}
	return out
}
