package reconcile

import (
	"fmt"
	"strings"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
)

// CauseGroup is a set of candidate causes the gauge layout cannot tell
// apart (their w statistics correlate above rho_max), with the additional
// gauge that would separate them best.
type CauseGroup struct {
	Labels []string
	// Gauge is the ungauged member whose gauge pair lowers the largest
	// correlation inside the group most ("" when none was found); MaxRho is
	// that correlation with it, Separates whether it falls below rho_max.
	Gauge     string
	MaxRho    float64
	Separates bool
}

// Separability is the identification side of the design: which causes
// the gauges can never tell apart and which they cannot test at all.
type Separability struct {
	// State names the force state the stiffness and spring signatures are
	// evaluated at (a load case of the structure, or the permanent loads).
	State      string
	RhoMax     float64
	Groups     []CauseGroup
	Untestable []string
}

// designState returns the state at which the design's stiffness
// signatures are evaluated: the structure's first load case, or the
// sensor map's permanent loads when there is none.
func designState(m *model.Model, sm *sensors.Map) (string, *model.Result, error) {
	st := m.Structure()
	if len(st.Cases) > 0 {
		r, err := m.SolveFactors(st.Cases[0].Factors)
		return "load case " + st.Cases[0].Name, r, err
	}
	var f []model.Factor
	var names []string
	for p, v := range sm.PermanentLoads() {
		f = append(f, model.Factor{Pattern: p, Factor: v})
		names = append(names, p)
	}
	r, err := m.SolveFactors(f)
	return "permanent loads " + strings.Join(names, ", "), r, err
}

// separability computes the design's groups and untestable candidates
// for the layout of lm with design a (rows: gauges, then input pseudo-
// observations) and row standard deviations rowSigma; options are the
// extra gauges of Detectability (one per ungauged member, by id).
func separability(m *model.Model, sm *sensors.Map, lm *linearModel, a *mat.Dense, rowSigma []float64, options []GaugeOption, opt Options) (*Separability, error) {
	c, err := newCandidates(lm)
	if err != nil {
		return nil, err
	}
	name, state, err := designState(m, sm)
	if err != nil {
		return nil, err
	}
	st := m.Structure()
	rows := len(rowSigma)
	g := len(lm.gauged)
	all, err := m.Signatures(lm.allMembers)
	if err != nil {
		return nil, err
	}
	// Signatures on every member: the gauged rows make the candidate, the
	// others are its entries on a possible extra gauge.
	entries := map[string][]float64{}
	fixed, _ := c.fixedCandidates(lm, sm, rows)
	settleLabels, settle := all.Settlement()
	loadLabels, nodal := all.NodalLoad()
	for j, l := range settleLabels {
		entries["settlement "+l] = column(settle, j)
	}
	for j, l := range loadLabels {
		entries["load at "+l] = column(nodal, j)
	}
	cands := append([]Candidate(nil), fixed...)
	gather := func(v []float64) []float64 {
		out := make([]float64, rows)
		for r, k := range lm.gauged {
			out[r] = v[k]
		}
		return out
	}
	stiff := all.Stiffness(state.Forces)
	sigma := rowSigma[:g]
	for k, mb := range st.Members {
		v := column(stiff, k)
		sig := gather(v)
		if !detectable(sig[:g], sigma) {
			continue
		}
		label := "E A of " + mb.ID
		entries[label] = v
		cands = append(cands, c.bounded(Candidate{Kind: StiffnessChange, Label: label, Signature: sig, Kappa: c.kappa[k]}))
	}
	for _, s := range c.springs {
		j := indexOf(loadLabels, s.Label)
		if j < 0 {
			continue
		}
		u := state.Displacements[s.Node][s.Axis]
		v := make([]float64, len(st.Members))
		for k := range v {
			v[k] = -s.Stiffness * u * nodal.At(k, j)
		}
		sig := gather(v)
		if !detectable(sig[:g], sigma) {
			continue
		}
		label := "spring " + s.Label
		entries[label] = v
		cands = append(cands, c.bounded(Candidate{Kind: SpringChange, Label: label, Signature: sig, Kappa: s.Kappa}))
	}
	solver, err := NewSolver(a, rowSigma, withDrop(opt))
	if err != nil {
		return nil, err
	}
	zero := make([]float64, rows)
	res, err := solver.Epoch(zero, zero, nil)
	if err != nil {
		return nil, err
	}
	id, err := res.Identify(cands, 0)
	if err != nil {
		return nil, err
	}
	groups, untestable := id.DesignGroups()
	out := &Separability{State: name, RhoMax: solver.RhoMax(), Untestable: untestable}
	byLabel := map[string]Candidate{}
	for _, cd := range cands {
		byLabel[cd.Label] = cd
	}
	extras := make([]ExtraGauge, 0, len(options))
	for _, o := range options {
		k, ok := st.MemberIndex(o.Label)
		if !ok {
			continue
		}
		e := map[string]float64{}
		for l, v := range entries {
			e[l] = v[k]
		}
		extras = append(extras, ExtraGauge{Label: o.Label, Row: o.Row, Sigma: o.Sigma, Entries: e})
	}
	for _, grp := range groups {
		cg := CauseGroup{}
		var gc []Candidate
		for _, cs := range grp {
			cg.Labels = append(cg.Labels, cs.Label)
			// A channel's bias moves only its member's force, exactly as
			// the member's gauge-group bias does: no gauge on another member
			// separates the two, so channels are left out of the search.
			if cs.Kind != ChannelBias {
				gc = append(gc, byLabel[cs.Label])
			}
		}
		best, ok, err := SeparatingGauge(a, rowSigma, gc, extras, withDrop(opt))
		if err != nil {
			return nil, fmt.Errorf("separating %s: %w", strings.Join(cg.Labels, ", "), err)
		}
		if ok && len(gc) > 1 {
			cg.Gauge, cg.MaxRho, cg.Separates = best.Gauge, best.MaxRho, best.Separates
		}
		out.Groups = append(out.Groups, cg)
	}
	return out, nil
}

func withDrop(o Options) Options {
	o.DropUnidentifiable = true
	return o
}
