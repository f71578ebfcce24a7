package service

import (
	"trussmonitor/internal/metrics"
	"trussmonitor/internal/model"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/units"
)

// setMemberState sets the member-state metrics from an epoch's state
// (structure order, as given to Metrics.MemberState).
func setMemberState(m *metrics.MemberStateMetrics, state []reconcile.MemberState) {
	if m == nil {
		return
	}
	for i, s := range state {
		_ = m.Set(i, metrics.StateValues{TotalN: s.TotalN, PredictedTotalN: s.PredictedTotalN, ZeroStateN: s.ZeroStateN,
			StressPa: s.StressPa, Utilisation: s.Utilisation, PredictedUtilisation: s.PredictedUtilisation})
	}
}

// loadReferences gives the metrics each unknown pattern's reference load
// in base units (none for a pattern without a reference load).
func loadReferences(s *model.Structure, patterns []string) []metrics.LoadReference {
	quantity := map[units.Dimension]metrics.LoadQuantity{
		units.Force: metrics.LoadForce, units.Pressure: metrics.LoadPressure, units.Stiffness: metrics.LoadLineForce,
	}
	out := make([]metrics.LoadReference, len(patterns))
	for j, name := range patterns {
		i, ok := s.PatternIndex(name)
		if !ok {
			continue
		}
		if v, dim, ok := s.Patterns[i].ReferenceSI(); ok {
			out[j] = metrics.LoadReference{Quantity: quantity[dim], PerFactor: v}
		}
	}
	return out
}
