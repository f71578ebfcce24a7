package pipeline

import (
	"fmt"
	"sort"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
)

// linearModel is the part of the reconciliation model that does not change
// between epochs: the influence of every measured input on the gauged
// members and on all members (for the current force state), and the cause
// signatures that do not depend on the state.
//
// Prediction of the gauge-inferred force change of gauged member g since its
// zero reading (DESIGN.md, Reconciliation):
//
//	y_hat_g = sum_p Hq[g,p] (q_p - q0_gp) + sum_t Ht[g,t] (T_t - T0_gt)
//
// with q the current factors of the known load patterns, T the current
// member-group temperatures, and q0, T0 the state the gauges of g were
// zeroed under.
type linearModel struct {
	m       *model.Model
	gauged  []int    // member indices of the gauged members, in sensor-map order
	names   []string // their ids
	known   []string // known (measured or permanent) load patterns
	groups  []string // member groups with a temperature input
	unknown []string // unknown load patterns (estimated)

	hq, ht, hu           *mat.Dense // G x len(known), G x len(groups), G x len(unknown)
	allQ, allT, allU     *mat.Dense // M x ... for the force state of all members
	sig                  *model.Signatures
	settleLabels         []string
	settle               *mat.Dense // G x S per metre
	loadLabels           []string
	nodal                *mat.Dense // G x D per newton
	allMembers           []int
	permanent            map[string]float64
	referenceTemperature map[string]float64 // group -> degC taken as stress-free for the force state
}

// newLinearModel builds the influence matrices of a structure for its sensor
// map.
func newLinearModel(m *model.Model, sm *sensors.Map) (*linearModel, error) {
	s := m.Structure()
	lm := &linearModel{m: m, permanent: sm.PermanentLoads(), referenceTemperature: map[string]float64{}}
	for _, id := range sm.GaugedMembers() {
		i, ok := s.MemberIndex(id)
		if !ok {
			return nil, fmt.Errorf("sensor map %s: gauged member %q is not in structure %q", sm.File(), id, s.Name)
		}
		lm.gauged = append(lm.gauged, i)
		lm.names = append(lm.names, id)
	}
	if len(lm.gauged) == 0 {
		return nil, fmt.Errorf("sensor map %s: no gauged members; reconciliation needs at least one gauge channel", sm.File())
	}
	unknown := map[string]bool{}
	for _, p := range s.UnknownPatterns() {
		unknown[p] = true
		lm.unknown = append(lm.unknown, p)
	}
	knownSet := map[string]bool{}
	groupSet := map[string]bool{}
	for p := range lm.permanent {
		knownSet[p] = true
	}
	for _, ch := range sm.Channels() {
		switch ch.Kind {
		case sensors.KindLoad:
			knownSet[ch.Pattern] = true
		case sensors.KindTemperature:
			for _, g := range ch.Groups {
				groupSet[g] = true
			}
		}
	}
	for _, z := range sm.ZeroStates() {
		for p := range z.Loads {
			knownSet[p] = true
		}
		for g, t := range z.Temperatures {
			groupSet[g] = true
			lm.referenceTemperature[g] = t
		}
	}
	for p := range knownSet {
		if unknown[p] {
			return nil, fmt.Errorf("sensor map %s: pattern %q is measured or permanent but the structure marks it unknown; remove one of the two", sm.File(), p)
		}
		lm.known = append(lm.known, p)
	}
	for g := range groupSet {
		lm.groups = append(lm.groups, g)
	}
	sort.Strings(lm.known)
	sort.Strings(lm.groups)

	lm.allMembers = make([]int, len(s.Members))
	for i := range lm.allMembers {
		lm.allMembers[i] = i
	}
	var err error
	if lm.hq, lm.allQ, err = lm.influence(model.PatternInput, lm.known); err != nil {
		return nil, err
	}
	if lm.ht, lm.allT, err = lm.influence(model.TemperatureInput, lm.groups); err != nil {
		return nil, err
	}
	if lm.hu, lm.allU, err = lm.influence(model.PatternInput, lm.unknown); err != nil {
		return nil, err
	}
	if lm.sig, err = m.Signatures(lm.gauged); err != nil {
		return nil, err
	}
	lm.settleLabels, lm.settle = lm.sig.Settlement()
	lm.loadLabels, lm.nodal = lm.sig.NodalLoad()
	return lm, nil
}

// influence returns the gauged-member and all-member influence matrices for
// the named inputs (nil matrices for no inputs).
func (lm *linearModel) influence(kind model.InputKind, names []string) (gauged, all *mat.Dense, err error) {
	if len(names) == 0 {
		return nil, nil, nil
	}
	in := make([]model.Input, len(names))
	for i, n := range names {
		in[i] = model.Input{Kind: kind, Name: n}
	}
	if all, err = lm.m.Influence(lm.allMembers, in); err != nil {
		return nil, nil, err
	}
	gauged = mat.NewDense(len(lm.gauged), len(names), nil)
	for r, mi := range lm.gauged {
		gauged.SetRow(r, all.RawRowView(mi))
	}
	return gauged, all, nil
}

// predict returns y_hat_g for gauged member row g (see linearModel).
func (lm *linearModel) predict(g int, loads, temps, zeroLoads, zeroTemps map[string]float64) float64 {
	var y float64
	for p, name := range lm.known {
		y += lm.hq.At(g, p) * (loads[name] - zeroLoads[name])
	}
	for t, name := range lm.groups {
		y += lm.ht.At(g, t) * (temps[name] - zeroTemps[name])
	}
	return y
}

// stateForces returns the force in every member at the current state: known
// loads, group temperatures relative to the reference temperature, and the
// estimated unknown loads theta. It is the state at which the stiffness
// signatures are evaluated.
func (lm *linearModel) stateForces(loads, temps map[string]float64, theta []float64) []float64 {
	n := len(lm.allMembers)
	out := make([]float64, n)
	for p, name := range lm.known {
		f := loads[name]
		if f == 0 {
			continue
		}
		for k := 0; k < n; k++ {
			out[k] += lm.allQ.At(k, p) * f
		}
	}
	for t, name := range lm.groups {
		d := temps[name] - lm.referenceTemperature[name]
		if d == 0 {
			continue
		}
		for k := 0; k < n; k++ {
			out[k] += lm.allT.At(k, t) * d
		}
	}
	for u := range lm.unknown {
		if u >= len(theta) || theta[u] == 0 {
			continue
		}
		for k := 0; k < n; k++ {
			out[k] += lm.allU.At(k, u) * theta[u]
		}
	}
	return out
}
