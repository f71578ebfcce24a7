package reconcile

import (
	"fmt"
	"math"
	"slices"
)

// Kind is the kind of a candidate cause; it fixes the unit of its size.
type Kind int

// Kinds of candidate cause.
const (
	// GaugeFault is a bias of one gauge; signature: the unit vector of that
	// gauged member; size in newtons.
	GaugeFault Kind = iota + 1
	// StiffnessChange is a relative change of one member's axial stiffness
	// E A; signature: d(measured forces)/d(E A / E A0) at the current state,
	// newtons per unit fraction; size as a fraction, shown in percent.
	StiffnessChange
	// SupportSettlement is a displacement of a support; signature in
	// newtons per metre; size in metres, shown in millimetres.
	SupportSettlement
	// NodalLoad is an unmodelled force at one node in one direction;
	// signature in newtons per newton; size in newtons.
	NodalLoad
	// SpringChange is a relative change of one support spring's stiffness
	// in one direction; signature in newtons per unit fraction; size as a
	// fraction, shown in percent (exact by Sherman-Morrison, as a member's).
	SpringChange
	// ChannelBias is a bias of one gauge channel of a member; signature in
	// newtons per unit strain of that channel (E A / number of gauges of
	// the member); size as a strain, shown in microstrain.
	ChannelBias
	// GaugeDrift is a bias of one member's gauge group growing linearly in
	// time from an onset, tested over an active alarm's epochs (drift.go);
	// signature: the gauge bias's times the time since the onset; size in
	// newtons per day, shown in kN/d (and as microstrain per day).
	GaugeDrift
)

// rankOne reports whether the kind changes the stiffness matrix by a
// rank-one term (member or spring), so that its size is exact by
// Sherman-Morrison rather than linear.
func (k Kind) rankOne() bool { return k == StiffnessChange || k == SpringChange }

// String returns the kind's plain name.
func (k Kind) String() string {
	switch k {
	case GaugeFault:
		return "gauge_fault"
	case StiffnessChange:
		return "stiffness_change"
	case SupportSettlement:
		return "support_settlement"
	case NodalLoad:
		return "nodal_load"
	case SpringChange:
		return "spring_change"
	case ChannelBias:
		return "channel_bias"
	case GaugeDrift:
		return "gauge_drift"
	}
	return fmt.Sprintf("kind(%d)", int(k))
}

// Display returns the factor from the SI size to the displayed size and
// the displayed unit: newtons for gauge faults and loads, percent for
// stiffness changes of members and springs, millimetres for settlements,
// microstrain for a channel bias.
func (k Kind) Display() (scale float64, unit string) {
	switch k {
	case StiffnessChange, SpringChange:
		return 100, "%"
	case ChannelBias:
		return 1e6, "µε"
	case GaugeDrift:
		return 1e-3, "kN/d"
	case SupportSettlement:
		return 1000, "mm"
	default:
		return 1, "N"
	}
}

// Candidate is a hypothesis for what went wrong: a signature over the G
// gauged members (the change of the measured forces per unit size of the
// cause). Entries of unavailable members are ignored.
type Candidate struct {
	Kind      Kind
	Label     string // e.g. "gauge B4", "E A of D2", "settlement L8 y"
	Signature []float64
	// Kappa is, for a stiffness change, the member's self-flexibility
	// (model.SelfFlexibility): the size follows exactly from the fitted
	// multiple x of the first-order signature as d = x / (1 - Kappa x)
	// (Sherman-Morrison). 0 for the other kinds (linear in the size).
	Kappa float64
	// Lower and Upper bound the plausible size (SI); equal means no bound.
	// See PlausibleRange.
	Lower, Upper float64
	// EA is, for a gauge fault, the member's E A (N per unit strain), so
	// that the bias is also given as a strain; 0 otherwise.
	EA float64
}

// Cause is the test of one candidate in one epoch (or over a window):
//
//	T_c  = (c^T W e)^2 / (c^T W Q_e W c)     ~ chi-square(1) without the cause
//	size = (c^T W e) / (c^T W Q_e W c)
//
// Num and Den are the numerator c^T W e and the denominator c^T W Q_e W c.
type Cause struct {
	Kind        Kind
	Label       string
	T           float64 // test statistic (0 when not separable)
	PValue      float64 // P(chi-square(1) > T)
	Size        float64 // estimated size in SI (N, fraction, m)
	DisplaySize float64 // Size in the displayed unit
	DisplayUnit string  // "N", "%" or "mm"
	// Separable is false when the signature lies (numerically) in the span
	// of the unknown loads, or does not touch any available gauge: the data
	// cannot tell this cause from a change of the estimated loads.
	Separable bool
	Num, Den  float64
	sig2      float64 // c^T W c over the available gauges
	Epochs    int     // epochs accumulated (1 for a single epoch)
	// Std is the standard deviation of Size (SI); for a stiffness change
	// propagated through the exact (Sherman-Morrison) size.
	Std float64
	// MDS is the minimal detectable size (SI, magnitude): the size whose
	// test has non-centrality delta0 (for a stiffness change, a loss).
	MDS float64
	// Testable is false when the candidate cannot be tested (null
	// projected signature, or minimal detectable size beyond the plausible
	// range); such candidates are never offered as causes.
	Testable bool
	// Implausible is true when Size lies outside the candidate's plausible
	// range (Candidate.Lower, Upper).
	Implausible bool
	// Strain and StrainStd give a gauge fault's size as a mean strain of
	// the member's gauges (Size / E A); 0 for other kinds.
	Strain, StrainStd float64
	info              candInfo
	drift             *driftLink // a drift's gauge and ramp correlation (nil for the other kinds)
}

// candInfo carries the candidate's constants into window sums.
type candInfo struct {
	kappa, lower, upper, ea, delta0 float64
}

// SeparableTol is the fraction of a signature's weighted norm that must
// remain after projecting out the unknown loads, (c^T W Q_e W c) /
// (c^T W c), for the candidate to be separable.
const SeparableTol = 1e-6

// chi1Survival is P(chi-square(1) > t) = erfc(sqrt(t/2)), the closed form
// for one degree of freedom (checked against distuv.ChiSquared in tests).
func chi1Survival(t float64) float64 { return math.Erfc(math.Sqrt(t / 2)) }

// Causes tests every candidate against this epoch's adjusted residuals and
// returns them ranked (largest T_c first; non-separable ones last, in
// input order). Sizes are exact (see Identify).
func (r *Result) Causes(cands []Candidate) ([]Cause, error) {
	id, err := r.Identify(cands, 0)
	if err != nil {
		return nil, err
	}
	out := id.Causes
	rankCauses(out)
	return out, nil
}

// finishCause turns the accumulated numerator and denominator into the
// test statistic and size.
func finishCause(kind Kind, label string, num, den, sig2 float64, epochs int) Cause {
	c := Cause{Kind: kind, Label: label, Num: num, Den: den, sig2: sig2, Epochs: epochs, PValue: 1}
	scale, unit := kind.Display()
	c.DisplayUnit = unit
	if sig2 > 0 && den > SeparableTol*sig2 {
		c.Separable = true
		c.T = num * num / den
		c.Size = num / den
		c.DisplaySize = c.Size * scale
		c.PValue = chi1Survival(c.T)
	}
	return c
}

// rankCauses sorts by T_c descending, separable first; stable so ties and
// non-separable candidates keep their input order.
func rankCauses(cs []Cause) {
	slices.SortStableFunc(cs, func(a, b Cause) int {
		if a.Separable != b.Separable {
			return boolOrder(a.Separable, b.Separable)
		}
		return boolOrder(a.T > b.T, b.T > a.T)
	})
}

// GaugeFaults returns the gauge-fault candidates of the G gauged members
// (unit signatures), labelled "gauge <name>".
func GaugeFaults(names []string) []Candidate {
	out := make([]Candidate, len(names))
	for i, n := range names {
		sig := make([]float64, len(names))
		sig[i] = 1
		out[i] = Candidate{Kind: GaugeFault, Label: "gauge " + n, Signature: sig}
	}
	return out
}

// WindowRanker accumulates cause statistics over the last N epochs so that
// a persistent cause rises above the noise. For each candidate (by label)
// it sums the per-epoch numerators n_k = c_k^T W e_k and denominators d_k =
// c_k^T W Q_e,k W c_k and reports
//
//	T_window = (sum n_k)^2 / (sum d_k),   size = (sum n_k) / (sum d_k).
//
// Epochs are independent, so without the cause sum n_k has mean 0 and
// variance sum d_k: T_window is again chi-square(1), and size is the
// weighted least-squares estimate of a cause of constant size over the
// window (the signature itself may change between epochs, as a stiffness
// sensitivity does with the load state). For a cause of size b its mean
// grows as b^2 sum d_k, i.e. linearly with the number of epochs.
// WindowRanker is not safe for concurrent use.
type WindowRanker struct {
	n    int
	ring [][]Cause
	pos  int
	full bool
}

// NewWindowRanker returns a ranker over the last n epochs (n >= 1).
func NewWindowRanker(n int) (*WindowRanker, error) {
	if n < 1 {
		return nil, fmt.Errorf("reconcile: cause window of %d epochs; want at least 1", n)
	}
	return &WindowRanker{n: n, ring: make([][]Cause, n)}, nil
}

// Add records one epoch's causes (as returned by Result.Causes); the
// slice is copied.
func (w *WindowRanker) Add(causes []Cause) {
	w.ring[w.pos] = append(w.ring[w.pos][:0], causes...)
	w.pos++
	if w.pos == w.n {
		w.pos = 0
		w.full = true
	}
}

// Reset forgets all epochs (for example after a model change).
func (w *WindowRanker) Reset() {
	for i := range w.ring {
		w.ring[i] = w.ring[i][:0]
	}
	w.pos, w.full = 0, false
}

// Ranked returns the window statistics of every candidate seen in the
// window, ranked as Result.Causes ranks (largest T first, non-separable
// last, then by label).
func (w *WindowRanker) Ranked() []Cause { return w.RankedLast(w.n) }

// RankedLast is Ranked over the last n epochs only (all held epochs when
// fewer are held).
func (w *WindowRanker) RankedLast(last int) []Cause {
	type acc struct {
		kind           Kind
		num, den, sig2 float64
		epochs         int
		first          int
		info           candInfo
	}
	sums := map[string]*acc{}
	var labels []string
	n := w.pos
	if w.full {
		n = w.n
	}
	skip := 0
	if last < n {
		skip = n - last
	}
	for k := skip; k < n; k++ {
		idx := k
		if w.full {
			idx = (w.pos + k) % w.n // oldest first
		}
		for _, c := range w.ring[idx] {
			a, ok := sums[c.Label]
			if !ok {
				a = &acc{kind: c.Kind, first: len(labels), info: c.info}
				sums[c.Label] = a
				labels = append(labels, c.Label)
			}
			a.num += c.Num
			a.den += c.Den
			a.sig2 += c.sig2
			a.epochs += c.Epochs
		}
	}
	out := make([]Cause, 0, len(labels))
	for _, l := range labels {
		a := sums[l]
		c := finishCause(a.kind, l, a.num, a.den, a.sig2, a.epochs)
		c.info = a.info
		c.finishSizes()
		out = append(out, c)
	}
	rankCauses(out)
	return out
}
