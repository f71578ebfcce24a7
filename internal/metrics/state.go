package metrics

import (
	"fmt"
	"math"

	"github.com/prometheus/client_golang/prometheus"

	"trussmonitor/internal/capacity"
)

// Member state metric names (DESIGN.md, "Member state, capacity and
// fatigue"). Forces are totals (the model's force in the gauges' zero state
// plus the change since zeroing); shm_member_force_measured_newtons and
// shm_member_force_predicted_newtons are the change since zeroing.
const (
	MemberTotal              = "shm_member_force_total_newtons"
	MemberTotalPredicted     = "shm_member_force_total_predicted_newtons"
	MemberZeroState          = "shm_member_force_zero_state_newtons"
	MemberStress             = "shm_member_stress_pascals"
	MemberUtilisation        = "shm_member_utilisation_ratio"
	MemberUtilisationPredict = "shm_member_utilisation_predicted_ratio"
)

// stateVecs are the member-state gauges (every member of the structure).
type stateVecs struct {
	total, totalPred, zero, stress, util, utilPred *prometheus.GaugeVec
}

func newStateVecs() *stateVecs {
	sm := []string{"structure", "member"}
	g := func(name, help string) *prometheus.GaugeVec {
		return prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: name, Help: help}, sm)
	}
	return &stateVecs{
		total:     g(MemberTotal, "Total axial force of the member in the last fitted epoch (tension positive), newtons: the model's force in the gauges' zero state plus the measured change since zeroing; for an ungauged or unreported member the reconciled prediction."),
		totalPred: g(MemberTotalPredicted, "Reconciled prediction of the member's total axial force (recorded and estimated loads), newtons."),
		zero:      g(MemberZeroState, "Model force of the member in the state its gauges were zeroed under, newtons."),
		stress:    g(MemberStress, "Axial stress of the total force over the gross area, pascals."),
		util:      g(MemberUtilisation, "Utilisation |total force| / design resistance (EN 1993-1-1 or AISC 360-16, tension or flexural buckling), ratio. "+capacity.Caution),
		utilPred:  g(MemberUtilisationPredict, "Utilisation of the reconciled prediction of the total force, ratio. "+capacity.Caution),
	}
}

func (v *stateVecs) collectors() []prometheus.Collector {
	return []prometheus.Collector{v.total, v.totalPred, v.zero, v.stress, v.util, v.utilPred}
}

// MemberStateMetrics are the member-state gauges of one structure. A
// series is created at its first value, so a value that never applies (a
// utilisation without a design basis) has no series rather than a 0.
type MemberStateMetrics struct {
	name    string
	members []string
	vecs    [6]*prometheus.GaugeVec
	rows    [][6]prometheus.Gauge
}

// MemberState returns the member-state gauges of structure name for its
// members (all of them, in structure order).
func (m *Metrics) MemberState(name string, members []string) *MemberStateMetrics {
	v := m.state
	return &MemberStateMetrics{name: name, members: append([]string(nil), members...),
		vecs: [6]*prometheus.GaugeVec{v.total, v.totalPred, v.zero, v.stress, v.util, v.utilPred},
		rows: make([][6]prometheus.Gauge, len(members))}
}

// StateValues are one member's state in one epoch (SI; NaN for a value
// that does not apply, which leaves the series as it was).
type StateValues struct {
	TotalN, PredictedTotalN, ZeroStateN, StressPa float64
	Utilisation, PredictedUtilisation             float64
}

// Set sets member i's state.
func (s *MemberStateMetrics) Set(i int, v StateValues) error {
	if i < 0 || i >= len(s.rows) {
		return fmt.Errorf("metrics: member index %d out of range (%d members)", i, len(s.rows))
	}
	row := &s.rows[i]
	for k, x := range [6]float64{v.TotalN, v.PredictedTotalN, v.ZeroStateN, v.StressPa, v.Utilisation, v.PredictedUtilisation} {
		if math.IsNaN(x) {
			continue
		}
		if row[k] == nil {
			row[k] = s.vecs[k].WithLabelValues(s.name, s.members[i])
		}
		row[k].Set(x)
	}
	return nil
}

// Unknown loads in their pattern's engineering quantity, in base units
// (shm_unknown_load_factor stays the bare factor).
const (
	UnknownLoadNewtons         = "shm_unknown_load_newtons"
	UnknownLoadPascals         = "shm_unknown_load_pascals"
	UnknownLoadNewtonsPerMetre = "shm_unknown_load_newtons_per_metre"
)

// LoadQuantity is the quantity a pattern's reference load measures.
type LoadQuantity int

// Load quantities of a pattern's reference load.
const (
	LoadForce     LoadQuantity = iota + 1 // newtons
	LoadPressure                          // pascals
	LoadLineForce                         // newtons per metre
)

type loadVecs struct {
	byQuantity map[LoadQuantity]*prometheus.GaugeVec
}

func newLoadVecs() *loadVecs {
	l := []string{"structure", "pattern"}
	g := func(name, what string) *prometheus.GaugeVec {
		return prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: name,
			Help: "Estimated unknown load in the pattern's engineering quantity (pattern factor times the pattern's reference load), " + what + "."}, l)
	}
	return &loadVecs{byQuantity: map[LoadQuantity]*prometheus.GaugeVec{
		LoadForce:     g(UnknownLoadNewtons, "newtons"),
		LoadPressure:  g(UnknownLoadPascals, "pascals"),
		LoadLineForce: g(UnknownLoadNewtonsPerMetre, "newtons per metre"),
	}}
}

func (v *loadVecs) collectors() []prometheus.Collector {
	return []prometheus.Collector{v.byQuantity[LoadForce], v.byQuantity[LoadPressure], v.byQuantity[LoadLineForce]}
}

// LoadReference is one unknown pattern's reference load: Quantity and
// PerFactor (base units per unit of pattern factor); Quantity 0 for a
// pattern without one.
type LoadReference struct {
	Quantity  LoadQuantity
	PerFactor float64
}

// UnknownLoadMetrics are the engineering-unit gauges of one structure's
// unknown loads, in the order given to Metrics.UnknownLoads.
type UnknownLoadMetrics struct {
	refs   []LoadReference
	gauges []prometheus.Gauge // nil for a pattern without a reference load
}

// UnknownLoads returns the engineering-unit gauges of structure name's
// unknown patterns (same order as Metrics.Structure's patterns).
func (m *Metrics) UnknownLoads(name string, patterns []string, refs []LoadReference) (*UnknownLoadMetrics, error) {
	if len(refs) != len(patterns) {
		return nil, fmt.Errorf("metrics: %d load references for %d patterns", len(refs), len(patterns))
	}
	u := &UnknownLoadMetrics{refs: append([]LoadReference(nil), refs...), gauges: make([]prometheus.Gauge, len(patterns))}
	for j, p := range patterns {
		if v, ok := m.loads.byQuantity[refs[j].Quantity]; ok {
			u.gauges[j] = v.WithLabelValues(name, p)
		}
	}
	return u, nil
}

// Set sets pattern j's load from its estimated factor.
func (u *UnknownLoadMetrics) Set(j int, factor float64) {
	if u == nil || j < 0 || j >= len(u.gauges) || u.gauges[j] == nil {
		return
	}
	u.gauges[j].Set(factor * u.refs[j].PerFactor)
}
