package reconcile

import (
	"math"
)

// Adaptation (DESIGN.md, Identification and adaptation; Teunissen's
// detection-identification-adaptation, from memory): once an alarm has
// identified a hypothesis, the fit carries it as an extra parameter (one
// more column of the design, its signature at the current state) for as
// long as the alarm is active. The other members' w, the unknown loads and
// the second search for causes come from the adapted fit, so one fault
// raises one alarm and a further alarm needs a second significant
// hypothesis. The global test reported in EpochResult (and used by FitRejected)
// stays that of the nominal model: the data do not fit the nominal model
// while the fault persists; the adapted fit's own test is in
// EpochResult.Adapted.

// MaxAdapted is the largest number of hypotheses carried at once (the
// causes of one group count one each: they are carried together, since
// the gauges cannot tell which of them it is).
const MaxAdapted = 16

// adaptedHypothesis is one carried hypothesis.
type adaptedHypothesis struct {
	label string // candidate label, e.g. "E A of D2"
	keep  int    // gauged member row whose w stays nominal (-1: none)
}

// AdaptedFit is the fit with the carried hypotheses.
type AdaptedFit struct {
	// Hypotheses are the carried hypotheses with their sizes in the
	// adapted fit.
	Hypotheses []RankedCause
	ChiSquare  float64
	DOF        int
	PValue     float64
	Rejected   bool
	// Kept are the gauged members whose w stays that of the nominal fit
	// (the alarm's own member, the subjects of gauge hypotheses).
	Kept []string
}

// Estimable returns the carried hypotheses the adapted fit can estimate
// (Separable). A hypothesis whose signature the others already span (a
// second member of an inseparable group carried together, such as a
// member's gauge fault and its stiffness change in a statically
// determinate panel) adds nothing to the fit and has no size of its own:
// it is left out rather than shown as 0 with a standard deviation of 0.
func (f *AdaptedFit) Estimable() []RankedCause {
	var out []RankedCause
	for _, h := range f.Hypotheses {
		if h.Separable {
			out = append(out, h)
		}
	}
	return out
}

// LoadShift flags an unknown-load estimate that left its recent
// distribution when an alarm rose: it may be absorbing the fault.
//
// Its JSON form is that of a stored alarm event's evidence.
type LoadShift struct {
	Pattern string `json:"pattern"`
	// Value is the estimate (pattern factor) when the alarm rose, Mean and
	// Std those of the recent epochs before it; Z = (Value - Mean) /
	// sqrt(Std^2 + the estimate's own variance).
	Value float64 `json:"value"`
	Mean  float64 `json:"mean"`
	Std   float64 `json:"std"`
	Z     float64 `json:"z"`
}

// loadHistory keeps the recent unknown-load estimates of accepted epochs.
type loadHistory struct {
	n    int
	ring [][]float64
	pos  int
	full bool
}

func (h *loadHistory) add(theta []float64) {
	if h.n == 0 {
		return
	}
	if h.ring == nil {
		h.ring = make([][]float64, h.n)
	}
	h.ring[h.pos] = append(h.ring[h.pos][:0], theta...)
	h.pos = (h.pos + 1) % h.n
	if h.pos == 0 {
		h.full = true
	}
}

// shifts compares theta (with standard deviations std) against the
// recent estimates: flagged where |Z| exceeds k.
func (h *loadHistory) shifts(names []string, theta, std []float64, k float64) []LoadShift {
	cnt := h.pos
	if h.full {
		cnt = h.n
	}
	if cnt < 2 {
		return nil
	}
	var out []LoadShift
	for j, name := range names {
		if j >= len(theta) {
			break
		}
		mean, m2 := 0.0, 0.0
		for i := 0; i < cnt; i++ {
			mean += h.ring[i][j]
		}
		mean /= float64(cnt)
		for i := 0; i < cnt; i++ {
			d := h.ring[i][j] - mean
			m2 += d * d
		}
		sd := math.Sqrt(m2 / float64(cnt-1))
		s := math.Sqrt(sd*sd + std[j]*std[j])
		if s == 0 {
			continue
		}
		z := (theta[j] - mean) / s
		if math.Abs(z) > k {
			out = append(out, LoadShift{Pattern: name, Value: theta[j], Mean: mean, Std: sd, Z: z})
		}
	}
	return out
}

// Adapt makes the fit carry the hypothesis labelled label (a candidate
// label of the causes, e.g. "gauge D2" or "E A of D2") from the next epoch
// on; keepMember is a gauged member whose w stays that of the nominal fit
// (the subject of the alarm that identified it; "" for none). A hypothesis
// already carried, or beyond MaxAdapted, is ignored; it reports whether
// the hypothesis was added.
func (p *Processor) Adapt(label, keepMember string) bool {
	if len(p.adapted) >= MaxAdapted {
		return false
	}
	for _, a := range p.adapted {
		if a.label == label {
			return false
		}
	}
	p.adapted = append(p.adapted, adaptedHypothesis{label: label, keep: indexOf(p.lm.names, keepMember)})
	return true
}

// RecentCauses returns the causes summed over the epochs of the last
// CauseSpan, grouped by the latest epoch's separability (nil before the
// first fitted epoch).
func (p *Processor) RecentCauses() []RankedCause {
	if p.lastID == nil {
		return nil
	}
	return convertGroups(p.lastID.Groups(p.recent.Causes()), p.subjects, p.opt.MaxCauses)
}

// Unadapt drops every carried hypothesis (when no alarm is active).
func (p *Processor) Unadapt() {
	p.adapted = p.adapted[:0]
	p.adaptedN = 0
}

// reidentify revises the carried hypotheses as the fault's epochs
// accumulate: after 2, 4, 8, ... epochs of adaptation (up to the cause
// window) the nominal causes summed over those epochs are grouped again,
// and when their first group holds none of the carried hypotheses, that
// group replaces them. An identification from the few epochs of a
// for-duration at a slow sampling rate is thus corrected once more epochs
// speak (the alarm's own member stays kept).
func (p *Processor) reidentify() {
	p.adaptedN++
	n := p.adaptedN
	if n < 2 || n&(n-1) != 0 || n > p.opt.CauseWindow || p.lastID == nil {
		return
	}
	groups := p.lastID.Groups(p.window.RankedLast(n))
	if len(groups) == 0 {
		return
	}
	carried := map[string]bool{}
	keep := ""
	for _, a := range p.adapted {
		carried[a.label] = true
		if a.keep >= 0 {
			keep = p.lm.names[a.keep]
		}
	}
	for _, c := range groups[0].Causes {
		if carried[c.Label] {
			return
		}
	}
	p.adapted = p.adapted[:0]
	for _, c := range groups[0].Causes {
		if c.Kind != ChannelBias {
			p.Adapt(c.Label, keep)
		}
	}
}

// Adapted returns the labels of the carried hypotheses.
func (p *Processor) Adapted() []string {
	out := make([]string, len(p.adapted))
	for i, a := range p.adapted {
		out[i] = a.label
	}
	return out
}

// adaptedFit refits the epoch with the carried hypotheses as extra
// columns (signatures from cands, at this epoch's state) and rewrites the
// members' w (except the kept rows and the subjects of gauge hypotheses),
// the unknown loads and the causes of res from it. It returns false (and
// leaves res alone) when no carried hypothesis has a signature this epoch.
func (p *Processor) adaptedFit(res *EpochResult, s *Solver, cands []Candidate, missing []string) bool {
	return p.adaptedFitWith(res, s, cands, missing, p.adapted, true)
}

// identifiedGroup returns the first group of res.Causes as hypotheses to
// carry in this epoch when its largest test statistic is significant at
// the local test size (T > k^2, chi-square(1)): detection by the global
// test, identification of this group, adaptation of this epoch's fit, so
// that the other members' w do not carry the fault before any alarm rose
// (Teunissen's DIA, from memory).
func (p *Processor) identifiedGroup(res *EpochResult, k float64) []adaptedHypothesis {
	var out []adaptedHypothesis
	best := 0.0
	for _, c := range res.Causes {
		if c.Group != 1 {
			break
		}
		best = math.Max(best, c.T)
		if c.Kind != ChannelBias && len(out) < MaxAdapted {
			out = append(out, adaptedHypothesis{label: c.Label, keep: -1})
		}
	}
	if best <= k*k {
		return nil
	}
	// The member data snooping suspects first (the largest nominal |w|)
	// keeps its own test: the identified group need not be its gauge.
	big, bw := -1, 0.0
	for g, m := range res.Members {
		if m.Checkable && math.Abs(m.W) > bw {
			big, bw = g, math.Abs(m.W)
		}
	}
	if big >= 0 && len(out) > 0 {
		out[0].keep = big
	}
	return out
}

// adaptedFitWith is adaptedFit for the given hypotheses; further tells
// whether the causes of res are replaced by those of the adapted fit (the
// search for a further hypothesis) or kept (the identification of this
// epoch).
func (p *Processor) adaptedFitWith(res *EpochResult, s *Solver, cands []Candidate, missing []string, hyps []adaptedHypothesis, further bool) bool {
	byLabel := make(map[string]int, len(cands))
	for i, c := range cands {
		byLabel[c.Label] = i
	}
	cols := s.Unknowns()
	var extra []Candidate
	keep := map[int]bool{}
	for _, h := range hyps {
		i, ok := byLabel[h.label]
		if !ok {
			continue
		}
		extra = append(extra, cands[i])
		if h.keep >= 0 {
			keep[h.keep] = true
		}
		if k := cands[i].Kind; k == GaugeFault || k == ChannelBias {
			if g := indexOf(p.lm.names, p.subjectMember(cands[i])); g >= 0 {
				keep[g] = true
			}
		}
	}
	if len(extra) == 0 {
		return false
	}
	sigs := make([][]float64, len(extra))
	for j, c := range extra {
		sigs[j] = c.Signature
	}
	as, err := s.Extend(sigs)
	if err != nil {
		return false
	}
	r, err := as.Epoch(p.y, p.yhat, p.avail)
	if err != nil {
		return false
	}
	fit := &AdaptedFit{ChiSquare: r.T, DOF: r.DOF, PValue: r.PValue, Rejected: r.Rejected}
	for j, c := range extra {
		x := r.Theta[cols+j]
		sd := r.ThetaStd[cols+j]
		scale, unit := c.Kind.Display()
		size, std := x, sd
		if c.Kappa != 0 {
			size = x / (1 - c.Kappa*x)
			std = sd / ((1 - c.Kappa*x) * (1 - c.Kappa*x))
		}
		fit.Hypotheses = append(fit.Hypotheses, RankedCause{Kind: c.Kind, Subject: p.subjects[c.Label], Label: c.Label,
			Size: size * scale, Std: std * scale, Unit: unit, Separable: r.Estimable[cols+j]})
	}
	res.Adapted = fit
	for g := range res.Members {
		mr := &res.Members[g]
		mr.WNominal = mr.W
		if keep[g] {
			fit.Kept = append(fit.Kept, mr.Member)
			continue
		}
		p.fitMember(mr, r, g)
	}
	res.Loads = p.loadEstimates(res.Loads[:0], r, missing)
	// A further cause: the causes of the adapted fit, when it rejects.
	if !further {
		return true
	}
	res.Causes = nil
	if r.Rejected {
		if id, err := r.Identify(cands, 0); err == nil {
			res.Causes = convertGroups(id.Groups(id.Causes), p.subjects, p.opt.MaxCauses)
		}
	}
	return true
}

// subjectMember is the gauged member of a gauge or channel hypothesis.
func (p *Processor) subjectMember(c Candidate) string {
	for g, v := range c.Signature {
		if g < len(p.lm.names) && v != 0 {
			return p.lm.names[g]
		}
	}
	return ""
}
