package reconcile

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
	// inputs are the noisy measured inputs (temperature and load channels)
	// whose errors propagate into the prediction; see inputNoise.
	inputs []inputNoise
}

// inputNoise is one measured input of the prediction with its noise: a
// temperature channel (per kelvin of error, the change of the gauged
// forces through the groups it feeds) or a load channel (per unit of pattern
// factor). Its error enters the fit as an extra unknown delta with a
// pseudo-observation delta = 0 of standard deviation Sigma, which is the
// weighted least-squares form of the full covariance
//
//	Sigma_y = Sigma_gauges + C Sigma_inputs C^T
//
// (Teunissen, Adjustment Theory, 2000, on observation equations with
// stochastic parameters; from memory): the global test, its degrees of
// freedom and the estimates are those of the full-covariance model, and the
// w-test of a gauge row tests that gauge against everything else.
type inputNoise struct {
	Label  string
	Column []float64 // G entries, newtons per unit error
	All    []float64 // the same for every member of the structure
	Sigma  float64
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
	lm.inputs = lm.inputNoises(sm)
	return lm, nil
}

// inputNoises lists the temperature and load channels with a positive
// noise figure and the effect of their errors on the gauged members.
func (lm *linearModel) inputNoises(sm *sensors.Map) []inputNoise {
	feeds := map[string]int{} // group -> temperature channels feeding it
	chans := sm.Channels()
	for _, ch := range chans {
		if ch.Kind == sensors.KindTemperature {
			for _, g := range ch.Groups {
				feeds[g]++
			}
		}
	}
	g := len(lm.gauged)
	var out []inputNoise
	for _, ch := range chans {
		if !(ch.Noise > 0) {
			continue
		}
		nm := len(lm.allMembers)
		all := make([]float64, nm)
		switch ch.Kind {
		case sensors.KindTemperature:
			// A group's temperature is the mean of its channels.
			for _, grp := range ch.Groups {
				t := indexOf(lm.groups, grp)
				if t < 0 || feeds[grp] == 0 {
					continue
				}
				for k := 0; k < nm; k++ {
					all[k] += lm.allT.At(k, t) / float64(feeds[grp])
				}
			}
		case sensors.KindLoad:
			q := indexOf(lm.known, ch.Pattern)
			if q < 0 {
				continue
			}
			for k := 0; k < nm; k++ {
				all[k] = lm.allQ.At(k, q)
			}
		default:
			continue
		}
		col := make([]float64, g)
		for i, k := range lm.gauged {
			col[i] = all[k]
		}
		out = append(out, inputNoise{Label: "input " + ch.ID, Column: col, All: all, Sigma: ch.Noise})
	}
	return out
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

// design returns the reconciliation design matrix and the names of its
// columns: rows are the G gauged members followed by one pseudo-observation
// per noisy input; columns are the unknown load patterns, the measured
// patterns whose channel is missing this epoch (missing), and one error
// per noisy input (see inputNoise):
//
//	[ H_u  H_missing  C ]   gauged members
//	[ 0    0          I ]   inputs (delta = 0 +- sigma)
func (lm *linearModel) design(missing []string) (*mat.Dense, []string, error) {
	g := len(lm.gauged)
	nin := len(lm.inputs)
	nu := len(lm.unknown)
	cols := nu + len(missing) + nin
	names := append(append([]string(nil), lm.unknown...), missing...)
	for _, in := range lm.inputs {
		names = append(names, in.Label)
	}
	if cols == 0 {
		// No unknowns at all: a zero column, dropped as not estimable.
		return mat.NewDense(g, 1, nil), []string{"(none)"}, nil
	}
	a := mat.NewDense(g+nin, cols, nil)
	for i := 0; i < g; i++ {
		for j := 0; j < nu; j++ {
			a.Set(i, j, lm.hu.At(i, j))
		}
		for j, name := range missing {
			k := indexOf(lm.known, name)
			if k < 0 {
				return nil, nil, fmt.Errorf("pattern %q is not a measured pattern", name)
			}
			a.Set(i, nu+j, lm.hq.At(i, k))
		}
		for j, in := range lm.inputs {
			a.Set(i, nu+len(missing)+j, in.Column[i])
		}
	}
	for j := range lm.inputs {
		a.Set(g+j, nu+len(missing)+j, 1)
	}
	return a, names, nil
}
