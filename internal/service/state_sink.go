package service

import (
	"trussmonitor/internal/metrics"
	"trussmonitor/internal/pipeline"
)

// setMemberState sets the member-state metrics from an epoch's state
// (structure order, as given to Metrics.MemberState).
func setMemberState(m *metrics.MemberStateMetrics, state []pipeline.MemberState) {
	if m == nil {
		return
	}
	for i, s := range state {
		_ = m.Set(i, metrics.StateValues{TotalN: s.TotalN, PredictedTotalN: s.PredictedTotalN, ZeroStateN: s.ZeroStateN,
			StressPa: s.StressPa, Utilisation: s.Utilisation, PredictedUtilisation: s.PredictedUtilisation})
	}
}
