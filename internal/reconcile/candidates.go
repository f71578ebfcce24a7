package reconcile

import (
	"math"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
)

// candidates holds what the cause candidates of a structure need besides
// the state-independent signatures of linearModel: the constants of the
// exact sizes and the plausibility bounds (DESIGN.md, Identification and
// adaptation).
type candidates struct {
	kappa    []float64 // self-flexibility of every member (Sherman-Morrison)
	springs  []model.SpringDirection
	springQ  *mat.Dense // spring displacement per unit known pattern
	springT  *mat.Dense // per kelvin of each group
	springU  *mat.Dense // per unit unknown pattern
	springNL []int      // column of linearModel.nodal of each spring direction
	maxLoad  float64    // plausible nodal load (N), see nodalLoadBound
}

// nodalLoadBound is the plausibility bound of an unmodelled nodal load:
// twice the largest resultant force at one node in any load case of the
// structure file (or any pattern at factor 1 when there are no cases). An
// unmodelled load larger than twice the design loads at a node is not a
// load but a modelling error (common practice).
func nodalLoadBound(st *model.Structure) float64 {
	largest := 0.0
	add := func(fs map[int][3]float64) {
		for _, f := range fs {
			largest = math.Max(largest, math.Sqrt(f[0]*f[0]+f[1]*f[1]+f[2]*f[2]))
		}
	}
	combine := func(factors []model.Factor) map[int][3]float64 {
		fs := map[int][3]float64{}
		for _, fa := range factors {
			pi, ok := st.PatternIndex(fa.Pattern)
			if !ok {
				continue
			}
			for _, nf := range st.Patterns[pi].Forces {
				v := fs[nf.Node]
				for k := range v {
					v[k] += fa.Factor * nf.F[k]
				}
				fs[nf.Node] = v
			}
		}
		return fs
	}
	for _, c := range st.Cases {
		add(combine(c.Factors))
	}
	if len(st.Cases) == 0 {
		for _, p := range st.Patterns {
			add(combine([]model.Factor{{Pattern: p.Name, Factor: 1}}))
		}
	}
	if largest == 0 {
		return math.Inf(1)
	}
	return 2 * largest
}

// newCandidates computes the constants of the candidates of lm.
func newCandidates(lm *linearModel) (*candidates, error) {
	c := &candidates{maxLoad: nodalLoadBound(lm.m.Structure())}
	var err error
	if c.kappa, err = lm.m.SelfFlexibility(lm.allMembers); err != nil {
		return nil, err
	}
	c.springs = lm.m.Springs()
	for _, s := range c.springs {
		c.springNL = append(c.springNL, indexOf(lm.loadLabels, s.Label))
	}
	inputs := func(kind model.InputKind, names []string) []model.Input {
		in := make([]model.Input, len(names))
		for i, n := range names {
			in[i] = model.Input{Kind: kind, Name: n}
		}
		return in
	}
	if c.springQ, err = lm.m.SpringInfluence(c.springs, inputs(model.PatternInput, lm.known)); err != nil {
		return nil, err
	}
	if c.springT, err = lm.m.SpringInfluence(c.springs, inputs(model.TemperatureInput, lm.groups)); err != nil {
		return nil, err
	}
	if c.springU, err = lm.m.SpringInfluence(c.springs, inputs(model.PatternInput, lm.unknown)); err != nil {
		return nil, err
	}
	return c, nil
}

// bounded sets a candidate's plausible range (PlausibleRange, or
// the nodal-load bound).
func (c *candidates) bounded(cand Candidate) Candidate {
	if lo, hi, ok := PlausibleRange(cand.Kind, cand.EA); ok {
		cand.Lower, cand.Upper = lo, hi
	} else if cand.Kind == NodalLoad && !math.IsInf(c.maxLoad, 0) {
		cand.Lower, cand.Upper = -c.maxLoad, c.maxLoad
	}
	return cand
}

// fixedCandidates returns the state-independent candidates: member gauge
// groups (bias in newtons, also as mean strain), single gauge channels (bias
// in strain), support settlements and unmodelled nodal loads; with their
// subjects.
func (c *candidates) fixedCandidates(lm *linearModel, sm *sensors.Map, rows int) ([]Candidate, map[string]string) {
	st := lm.m.Structure()
	subjects := map[string]string{}
	var out []Candidate
	for i, cand := range GaugeFaults(lm.names) {
		cand.Signature = pad(cand.Signature, rows)
		mb := st.Members[lm.gauged[i]]
		cand.EA = mb.E * mb.A
		out = append(out, c.bounded(cand))
		subjects[cand.Label] = lm.names[i]
		subjects[DriftLabel(cand.Label)] = lm.names[i]
	}
	count := map[string]int{}
	for _, ch := range sm.Channels() {
		if ch.Kind.IsGauge() {
			count[ch.Member]++
		}
	}
	for _, ch := range sm.Channels() {
		g := indexOf(lm.names, ch.Member)
		if !ch.Kind.IsGauge() || g < 0 || count[ch.Member] < 2 {
			// A member with one channel: its channel bias is the member's
			// gauge-group bias.
			continue
		}
		mb := st.Members[lm.gauged[g]]
		sig := make([]float64, rows)
		sig[g] = mb.E * mb.A / float64(count[ch.Member]) // N per unit strain of this channel
		cand := Candidate{Kind: ChannelBias, Label: "channel " + ch.ID, Signature: sig}
		out = append(out, c.bounded(cand))
		subjects[cand.Label] = ch.ID
	}
	for j, l := range lm.settleLabels {
		cand := Candidate{Kind: SupportSettlement, Label: "settlement " + l, Signature: pad(column(lm.settle, j), rows)}
		out = append(out, c.bounded(cand))
		subjects[cand.Label] = l
	}
	for j, l := range lm.loadLabels {
		cand := Candidate{Kind: NodalLoad, Label: "load at " + l, Signature: pad(column(lm.nodal, j), rows)}
		out = append(out, c.bounded(cand))
		subjects[cand.Label] = l
	}
	for _, mb := range st.Members {
		subjects["E A of "+mb.ID] = mb.ID
	}
	for _, s := range c.springs {
		subjects["spring "+s.Label] = s.Label
	}
	return out, subjects
}

// stateCandidates returns the candidates whose signatures depend on the
// state: a stiffness change of every member carrying force, and a
// stiffness change of every support spring that is displaced, with member
// forces `state` and the given loads, temperatures and unknown factors.
func (c *candidates) stateCandidates(lm *linearModel, state []float64, loads, temps map[string]float64, theta []float64, sigma []float64, rows int) []Candidate {
	var out []Candidate
	stiff := lm.sig.Stiffness(state)
	members := lm.m.Structure().Members
	for k := range members {
		sig := column(stiff, k)
		if !detectable(sig, sigma) {
			continue
		}
		out = append(out, c.bounded(Candidate{Kind: StiffnessChange, Label: "E A of " + members[k].ID,
			Signature: pad(sig, rows), Kappa: c.kappa[k]}))
	}
	for r, s := range c.springs {
		j := c.springNL[r]
		if j < 0 {
			continue
		}
		u := 0.0
		for p, name := range lm.known {
			u += c.springQ.At(r, p) * loads[name]
		}
		for t, name := range lm.groups {
			u += c.springT.At(r, t) * (temps[name] - lm.referenceTemperature[name])
		}
		for q := range lm.unknown {
			if q < len(theta) {
				u += c.springU.At(r, q) * theta[q]
			}
		}
		// First-order signature -k u z_g (see model.SpringInfluence).
		sig := make([]float64, len(lm.gauged))
		for g := range sig {
			sig[g] = -s.Stiffness * u * lm.nodal.At(g, j)
		}
		if !detectable(sig, sigma) {
			continue
		}
		out = append(out, c.bounded(Candidate{Kind: SpringChange, Label: "spring " + s.Label,
			Signature: pad(sig, rows), Kappa: s.Kappa}))
	}
	return out
}

// convertGroups turns separability groups into EpochResult causes: group
// numbers from 1, causes inside a group in kind and label order (no rank
// inside a group), sizes, standard deviations and minimal detectable sizes
// in the displayed unit. At most maxGroups groups are kept.
func convertGroups(groups []Group, subjects map[string]string, maxGroups int) []RankedCause {
	if len(groups) > maxGroups {
		groups = groups[:maxGroups]
	}
	var out []RankedCause
	for gi, g := range groups {
		for _, c := range g.Causes {
			scale, unit := c.Kind.Display()
			out = append(out, RankedCause{
				Kind: c.Kind, Subject: subjects[c.Label], Label: c.Label,
				T: c.T, PValue: c.PValue, Size: c.DisplaySize, Unit: unit,
				Std: c.Std * scale, MDS: c.MDS * scale, Implausible: c.Implausible,
				Strain: c.Strain * 1e6, StrainStd: c.StrainStd * 1e6,
				Separable: c.Separable, Epochs: c.Epochs, Group: gi + 1, GroupSize: len(g.Causes),
			})
		}
	}
	return out
}
