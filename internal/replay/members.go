package replay

import (
	"math"

	"trussmonitor/internal/capacity"
	"trussmonitor/internal/model"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/report"
)

// memberTotals keeps every member's total state over the period as
// bounded-size aggregates (extremes and the largest utilisation), not per
// epoch, so a structure of hundreds of members costs the same for an hour
// or a month.
type memberTotals struct {
	rows []report.MemberSummary
}

func (a *memberTotals) add(r *pipeline.Result) {
	if len(r.State) == 0 {
		return
	}
	if a.rows == nil {
		nan := math.NaN()
		a.rows = make([]report.MemberSummary, len(r.State))
		for k, s := range r.State {
			a.rows[k] = report.MemberSummary{Member: s.Member, Gauged: s.Gauged, MinTotal: nan, MaxTotal: nan,
				TensionResistance: nan, CompressionResistance: nan, MaxUtilisation: nan, MaxPredictedUtilisation: nan}
		}
	}
	for k, s := range r.State {
		if k >= len(a.rows) {
			break
		}
		m := &a.rows[k]
		m.Epochs++
		if s.Measured {
			m.MeasuredEpochs++
		}
		if !math.IsNaN(s.TotalN) {
			if math.IsNaN(m.MinTotal) || s.TotalN < m.MinTotal {
				m.MinTotal = s.TotalN
			}
			if math.IsNaN(m.MaxTotal) || s.TotalN > m.MaxTotal {
				m.MaxTotal = s.TotalN
			}
		}
		if !math.IsNaN(s.Utilisation) && (math.IsNaN(m.MaxUtilisation) || s.Utilisation > m.MaxUtilisation) {
			m.MaxUtilisation, m.MaxUtilisationTime = s.Utilisation, r.Time
		}
		if !math.IsNaN(s.PredictedUtilisation) && (math.IsNaN(m.MaxPredictedUtilisation) || s.PredictedUtilisation > m.MaxPredictedUtilisation) {
			m.MaxPredictedUtilisation = s.PredictedUtilisation
		}
	}
}

// summaries returns the aggregates with the members' resistances (nil
// resistances: no design basis).
func (a *memberTotals) summaries(res []capacity.Resistance) []report.MemberSummary {
	out := append([]report.MemberSummary(nil), a.rows...)
	for k := range out {
		if k < len(res) {
			out[k].TensionResistance, out[k].CompressionResistance = res[k].TensionN, res[k].CompressionN
		}
	}
	return out
}

// referenceUnits shows the estimated unknown loads in each pattern's
// engineering unit (factor times its reference load) where the structure
// declares one: it sets the patterns' Unit and Reference and returns each
// pattern's scale (the reference load; 1 for the others, which stay
// pattern factors, unit "1").
func referenceUnits(patterns []report.Pattern, st *model.Structure) []float64 {
	scale := make([]float64, len(patterns))
	for j := range patterns {
		scale[j] = 1
		i, ok := st.PatternIndex(patterns[j].Name)
		if !ok {
			continue
		}
		p := st.Patterns[i]
		v, unit, ok := p.InReferenceUnit(1)
		if !ok {
			continue
		}
		patterns[j].Unit, patterns[j].Reference = unit, v
		scale[j] = v
	}
	return scale
}
