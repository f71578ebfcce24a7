package reconcile

import (
	"fmt"
	"math"
	"sort"

	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
)

// MemberDetectability is what the gauge layout can check of one gauged
// member when every gauge reports.
type MemberDetectability struct {
	Member     string
	SigmaN     float64 // measurement standard deviation of the member force
	Redundancy float64 // r_i
	MDBN       float64 // minimal detectable bias (Baarda), newtons
	Checkable  bool
}

// DetectReport is the detectability report of a structure with its sensor
// map (for `monitor check --sensors`).
type DetectReport struct {
	Structure string
	Members   []MemberDetectability
	Unknown   []string
	DOF       int
	Delta0    float64
	// Weakest is the index in Members of the smallest redundancy.
	Weakest int
	// InputRedundancy is the redundancy taken by the pseudo-observations
	// of the noisy inputs (temperatures, loads): the members' numbers sum
	// to DOF minus it.
	InputRedundancy float64
	// Suggestions are the best additional gauge locations (one gauge pair
	// on an ungauged member, by member id), best first.
	Suggestions []Placement
	// Separability lists the causes the layout cannot tell apart and those
	// it cannot test.
	Separability *Separability
}

// LayoutDetectability computes the internal reliability of the gauge layout:
// redundancy numbers r_i and minimal detectable biases MDB_i = sigma_i
// delta0 / sqrt(r_i) of every gauged member (DESIGN.md, Reconciliation),
// the members that cannot be checked, and, for the weakest member, the
// ungauged members where one more gauge pair (with the layout's median
// gauge noise) would raise its redundancy most.
func LayoutDetectability(m *model.Model, sm *sensors.Map, opt Options) (*DetectReport, error) {
	lm, err := newLinearModel(m, sm)
	if err != nil {
		return nil, err
	}
	sigma, err := fullSetSigma(sm, lm.names)
	if err != nil {
		return nil, err
	}
	// The same design as the per-epoch fit: gauge rows, then one
	// pseudo-observation per noisy input (linearModel.design).
	a, _, err := lm.design(nil)
	if err != nil {
		return nil, err
	}
	rowSigma := append([]float64(nil), sigma...)
	for _, in := range lm.inputs {
		rowSigma = append(rowSigma, in.Sigma)
	}
	d, err := Detect(a, rowSigma, opt)
	if err != nil {
		return nil, err
	}
	g := len(lm.names)
	rep := &DetectReport{Structure: m.Structure().Name, Unknown: lm.unknown, DOF: d.DOF, Delta0: d.Delta0}
	for i, n := range lm.names {
		rep.Members = append(rep.Members, MemberDetectability{Member: n, SigmaN: sigma[i], Redundancy: d.Redundancy[i], MDBN: d.MDB[i], Checkable: d.Checkable[i]})
		if d.Redundancy[i] < d.Redundancy[rep.Weakest] {
			rep.Weakest = i
		}
	}
	for j := range lm.inputs {
		rep.InputRedundancy += d.Redundancy[g+j]
	}
	// Candidate gauges: every ungauged member, a pair of gauges with the
	// median strain noise of the layout's gauges.
	noise := medianStrainNoise(sm, m.Structure(), lm.names, sigma)
	gauged := map[int]bool{}
	for _, g := range lm.gauged {
		gauged[g] = true
	}
	var options []GaugeOption
	members := m.Structure().Members
	_, cols := a.Dims()
	p := len(lm.unknown)
	for k, mb := range members {
		if gauged[k] || cols == 0 {
			continue
		}
		row := make([]float64, cols)
		for j := 0; j < p; j++ {
			row[j] = lm.allU.At(k, j)
		}
		for j, in := range lm.inputs {
			row[p+j] = in.All[k]
		}
		options = append(options, GaugeOption{Label: mb.ID, Row: row, Sigma: mb.E * mb.A * noise / math.Sqrt2})
	}
	// Each option as one more row of the design; the weakest redundancy is
	// taken over the existing gauge rows (not the inputs' pseudo-rows).
	if rep.Suggestions, err = SuggestGauge(a, rowSigma, g, options, opt); err != nil {
		return nil, fmt.Errorf("gauge suggestions: %w", err)
	}
	if rep.Separability, err = separability(m, sm, lm, a, rowSigma, options, opt); err != nil {
		return nil, fmt.Errorf("separability: %w", err)
	}
	if len(rep.Suggestions) > 5 {
		rep.Suggestions = rep.Suggestions[:5]
	}
	return rep, nil
}

// medianStrainNoise is the median over gauged members of the single-gauge
// strain noise implied by their force standard deviation.
func medianStrainNoise(sm *sensors.Map, st *model.Structure, names []string, sigma []float64) float64 {
	counts := map[string]int{}
	for _, ch := range sm.Channels() {
		if ch.Kind.IsGauge() {
			counts[ch.Member]++
		}
	}
	var v []float64
	for i, n := range names {
		k, ok := st.MemberIndex(n)
		if !ok {
			continue
		}
		mb := st.Members[k]
		// sigma_N = E A sigma_eps / sqrt(n) for n equal gauges.
		v = append(v, sigma[i]*math.Sqrt(float64(max(counts[n], 1)))/(mb.E*mb.A))
	}
	sort.Float64s(v)
	if len(v) == 0 {
		return 2e-6
	}
	return v[len(v)/2]
}
