package reconcile

import (
	"math"

	"trussmonitor/internal/capacity"
	"trussmonitor/internal/sensors"
)

// MemberState is the total axial state of one member of the structure in
// one epoch (DESIGN.md, "Member state, capacity and fatigue"). Gauges
// measure the change since their zero reading; the total force is the
// model's force in the zero state plus that change. All forces in newtons,
// tension positive; values that do not apply are NaN.
type MemberState struct {
	Member string
	// Gauged is true for a member with gauges; Measured when all of them
	// reported this epoch.
	Gauged, Measured bool
	// ZeroStateN is the model's force in the state the gauges were zeroed
	// under (for an ungauged member, the sensor map's single zero state;
	// NaN when it declares several).
	ZeroStateN float64
	// MeasuredChangeN is the gauges' change since zeroing (E A times the
	// mean compensated strain); PredictedChangeN the reconciled
	// prediction of the same change (known loads, temperatures and the
	// estimated unknown loads).
	MeasuredChangeN, PredictedChangeN float64
	// MeasuredTotalN = ZeroStateN + MeasuredChangeN; PredictedTotalN is
	// the reconciled prediction of the total force.
	MeasuredTotalN, PredictedTotalN float64
	// TotalN is the best total force: measured when Measured, else the
	// reconciled prediction. StressPa = TotalN / A.
	TotalN, StressPa float64
	// Ratio is MeasuredTotalN / PredictedTotalN.
	Ratio float64
	// ResistanceN is the design resistance governing the sign of TotalN
	// (tension, or flexural buckling as a positive number); Utilisation
	// = |TotalN| / ResistanceN and PredictedUtilisation the same for
	// PredictedTotalN (a ratio). NaN when the structure declares no design
	// basis. A monitoring estimate: see capacity.Caution.
	ResistanceN, Utilisation, PredictedUtilisation float64
}

// stateModel is what the member state needs beyond the linear model: the
// member areas, the resistances and the common zero-state forces.
type stateModel struct {
	area   []float64
	resist []capacity.Resistance // nil without a design basis
	// commonZero is the force of every member in the sensor map's only
	// zero state (nil when there are several or none).
	commonZero []float64
	ids        []string
}

// newStateModel prepares the member-state computation of a processor.
func newStateModel(lm *linearModel, sm *sensors.Map) (*stateModel, error) {
	s := lm.m.Structure()
	st := &stateModel{area: make([]float64, len(s.Members)), ids: make([]string, len(s.Members))}
	for k, mb := range s.Members {
		st.area[k], st.ids[k] = mb.A, mb.ID
	}
	var err error
	if st.resist, err = s.Resistances(); err != nil {
		return nil, err
	}
	if zs := sm.ZeroStates(); len(zs) == 1 {
		for _, z := range zs {
			st.commonZero = lm.zeroStateForces(z.Loads, z.Temperatures)
		}
	}
	return st, nil
}

// zeroStateForces returns the model's force in every member under a zero
// state's load factors and group temperatures (relative to the reference
// temperature of the force state, as in stateForces).
func (lm *linearModel) zeroStateForces(loads, temps map[string]float64) []float64 {
	n := len(lm.allMembers)
	out := make([]float64, n)
	for p, name := range lm.known {
		if f := loads[name]; f != 0 {
			for k := 0; k < n; k++ {
				out[k] += lm.allQ.At(k, p) * f
			}
		}
	}
	for t, name := range lm.groups {
		if d := temps[name] - lm.referenceTemperature[name]; d != 0 {
			for k := 0; k < n; k++ {
				out[k] += lm.allT.At(k, t) * d
			}
		}
	}
	return out
}

// zeroStateForce is zeroStateForces for one member k.
func (lm *linearModel) zeroStateForce(k int, loads, temps map[string]float64) float64 {
	var y float64
	for p, name := range lm.known {
		y += lm.allQ.At(k, p) * loads[name]
	}
	for t, name := range lm.groups {
		y += lm.allT.At(k, t) * (temps[name] - lm.referenceTemperature[name])
	}
	return y
}

// memberStates computes the total state of every member from a fitted
// epoch: state holds the force state of stateForces (known loads,
// temperatures, estimated unknown loads), to which the estimated input
// errors of the fit are added so that, for a gauged member,
// PredictedTotalN = ZeroStateN + the fitted change.
func (p *Processor) memberStates(res *EpochResult, state []float64, r *Result, missing []string, snap *sensors.Snapshot) []MemberState {
	lm, st := p.lm, p.state
	n := len(state)
	pred := append([]float64(nil), state...)
	off := len(lm.unknown) + len(missing)
	for j, in := range lm.inputs {
		if off+j >= len(r.Theta) {
			break
		}
		d := r.Theta[off+j]
		for k := 0; k < n; k++ {
			pred[k] += in.All[k] * d
		}
	}
	byMember := make(map[string]*sensors.MemberMeasurement, len(snap.Members))
	for i := range snap.Members {
		byMember[snap.Members[i].Member] = &snap.Members[i]
	}
	nan := math.NaN()
	out := make([]MemberState, n)
	for k := range out {
		ms := &out[k]
		ms.Member = st.ids[k]
		ms.PredictedTotalN = pred[k]
		ms.ZeroStateN, ms.MeasuredChangeN, ms.MeasuredTotalN, ms.Ratio = nan, nan, nan, nan
		ms.ResistanceN, ms.Utilisation, ms.PredictedUtilisation = nan, nan, nan
		if st.commonZero != nil {
			ms.ZeroStateN = st.commonZero[k]
		}
	}
	for g, k := range lm.gauged {
		ms := &out[k]
		ms.Gauged = true
		if mm := byMember[ms.Member]; mm != nil {
			ms.ZeroStateN = lm.zeroStateForce(k, mm.ZeroLoads, mm.ZeroTemperatures)
		}
		mr := res.Members[g]
		if mr.Available {
			ms.Measured = true
			ms.MeasuredChangeN = mr.MeasuredN
			ms.MeasuredTotalN = ms.ZeroStateN + mr.MeasuredN
			if ms.PredictedTotalN != 0 {
				ms.Ratio = ms.MeasuredTotalN / ms.PredictedTotalN
			}
		}
	}
	for k := range out {
		ms := &out[k]
		ms.PredictedChangeN = ms.PredictedTotalN - ms.ZeroStateN
		ms.TotalN = ms.PredictedTotalN
		if ms.Measured {
			ms.TotalN = ms.MeasuredTotalN
		}
		ms.StressPa = ms.TotalN / st.area[k]
		if st.resist != nil {
			ms.ResistanceN = st.resist[k].Governing(ms.TotalN)
			ms.Utilisation = capacity.Utilisation(ms.TotalN, st.resist[k])
			ms.PredictedUtilisation = capacity.Utilisation(ms.PredictedTotalN, st.resist[k])
		}
	}
	return out
}

// Members returns the ids of all members of the structure in structure
// order (the order of EpochResult.State).
func (p *Processor) Members() []string { return append([]string(nil), p.state.ids...) }

// Resistances returns the members' design resistances in structure order
// (nil when the structure declares no design basis).
func (p *Processor) Resistances() []capacity.Resistance {
	return append([]capacity.Resistance(nil), p.state.resist...)
}
