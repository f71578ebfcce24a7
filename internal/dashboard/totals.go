package dashboard

// MemberTotal is the total axial state of one member of the structure in
// the latest epoch (every member, gauged or not). Gauges measure the
// change since their zero reading; the total is the model's force in the
// zero state plus that change, or the reconciled prediction for a member
// without a reporting gauge. Forces in N (tension positive), stress in Pa;
// NaN (null in JSON) where a value does not apply.
type MemberTotal struct {
	ID string
	// Gauged: the member carries gauges; Measured: they all reported.
	Gauged, Measured bool
	// ZeroState is the model's force in the state the gauges were zeroed
	// under.
	ZeroState float64
	// MeasuredChange and PredictedChange are changes since zeroing.
	MeasuredChange, PredictedChange float64
	// MeasuredTotal = ZeroState + MeasuredChange; PredictedTotal is the
	// reconciled prediction of the total; Total is the measured total when
	// Measured, else the predicted one.
	MeasuredTotal, PredictedTotal, Total float64
	// Stress is Total over the gross area.
	Stress float64
	// Ratio is MeasuredTotal / PredictedTotal.
	Ratio float64
	// Resistance is the design resistance governing the sign of Total
	// (N, positive); Utilisation = |Total| / Resistance and
	// PredictedUtilisation the same for PredictedTotal.
	Resistance, Utilisation, PredictedUtilisation float64
}

// Design is the structure's design basis shown beside the utilisation.
type Design struct {
	// Standard is "EN 1993-1-1" or "AISC 360-16".
	Standard string
	// Caution says what a utilisation is and is not.
	Caution string
}

type memberTotalJSON struct {
	ID                   string `json:"id"`
	Gauged               bool   `json:"gauged"`
	Measured             bool   `json:"measured"`
	ZeroState            num    `json:"zero_state_n"`
	MeasuredChange       num    `json:"change_measured_n"`
	PredictedChange      num    `json:"change_predicted_n"`
	MeasuredTotal        num    `json:"total_measured_n"`
	PredictedTotal       num    `json:"total_predicted_n"`
	Total                num    `json:"total_n"`
	Stress               num    `json:"stress_pa"`
	Ratio                num    `json:"measured_to_predicted"`
	Resistance           num    `json:"resistance_n"`
	Utilisation          num    `json:"utilisation"`
	PredictedUtilisation num    `json:"utilisation_predicted"`
}

type designJSON struct {
	Standard string `json:"standard"`
	Caution  string `json:"caution"`
}

func toMemberTotalsJSON(ms []MemberTotal) []memberTotalJSON {
	out := make([]memberTotalJSON, 0, len(ms))
	for _, m := range ms {
		out = append(out, memberTotalJSON{
			ID: m.ID, Gauged: m.Gauged, Measured: m.Measured, ZeroState: n(m.ZeroState),
			MeasuredChange: n(m.MeasuredChange), PredictedChange: n(m.PredictedChange),
			MeasuredTotal: n(m.MeasuredTotal), PredictedTotal: n(m.PredictedTotal), Total: n(m.Total),
			Stress: n(m.Stress), Ratio: n(m.Ratio), Resistance: n(m.Resistance),
			Utilisation: n(m.Utilisation), PredictedUtilisation: n(m.PredictedUtilisation),
		})
	}
	return out
}

func toDesignJSON(d *Design) *designJSON {
	if d == nil {
		return nil
	}
	return &designJSON{Standard: d.Standard, Caution: d.Caution}
}
