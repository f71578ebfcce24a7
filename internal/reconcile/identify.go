package reconcile

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"sync"

	"gonum.org/v1/gonum/stat/distuv"
)

// Identification (DESIGN.md, Identification and adaptation): every
// candidate cause h with signature c_h is tested by
//
//	T_h = (c^T W e)^2 / (c^T W Q_e W c),  x_h = (c^T W e) / (c^T W Q_e W c),
//
// (Teunissen, Testing Theory, 2000, the test of a one-dimensional
// alternative; from memory). Its whitened projected signature
// p_h = (I - Q Q^T) W^1/2 c_h fixes everything about it: Den = |p_h|^2, and
// the correlation of the w statistics w_h = sign(x_h) sqrt(T_h) of two
// candidates without a fault is
//
//	rho_hk = p_h . p_k / (|p_h| |p_k|),
//
// the cosine of the angle between their projected signatures.
//
// Separability. If h is true with non-centrality delta (w_h ~ N(delta, 1)),
// then w_k ~ N(rho delta, 1) and w_h - w_k ~ N(delta (1 - rho),
// 2 (1 - rho)), so the probability of ranking h above k is
// Phi(delta sqrt((1 - rho) / 2)). Requiring this to be at least the power
// beta at the minimal detectable non-centrality delta0 (Baarda 1968) gives
//
//	rho_max = 1 - 2 (z_beta / delta0)^2,  z_beta = Phi^-1(beta),
//
// 0.917 (an angle of 23.5 degrees) for alpha0 = 0.001, beta = 0.80. Two
// candidates whose |rho| exceeds rho_max cannot be ranked against each other
// at the chosen power by these gauges: they are reported as one group,
// never in an order.
//
// Testability. A candidate is untestable, and never offered, when its
// projected signature vanishes (Den <= SeparableTol c^T W c: the unknown
// loads absorb it) or when even its largest plausible size (Candidate.Lower,
// Upper) would shift its w statistic by less than delta0, i.e. its
// projected signature times the plausible size is below delta0 standard
// deviations of the noise: its minimal detectable size is not physically
// possible.

// RhoMax returns the bound on the correlation of two candidates' w
// statistics above which they form one group: 1 - 2 (Phi^-1(beta) /
// delta0)^2, with delta0 = NonCentrality(alpha0, beta) (derivation above).
// For alpha0 = 0.001, beta = 0.80 it is 0.9170.
func RhoMax(alpha0, beta float64) (float64, error) {
	d0, err := NonCentrality(alpha0, beta)
	if err != nil {
		return 0, err
	}
	z := distuv.UnitNormal.Quantile(beta)
	r := 1 - 2*(z/d0)*(z/d0)
	if r <= 0 {
		return 0, fmt.Errorf("reconcile: power %v too low for alpha0 %v: no correlation bound separates candidates", beta, alpha0)
	}
	return r, nil
}

// Plausibility bounds of candidate sizes (SI), the defaults a Candidate
// gets from PlausibleRange. Sizes outside are marked implausible and ranked
// after every plausible group.
const (
	// MaxStiffnessLoss: a member's E A falls by at most 95 % (a loss
	// beyond that is a broken member, whose force the model no longer
	// predicts; the rank-one formula diverges at -100 % for a member whose
	// removal leaves a mechanism).
	MaxStiffnessLoss = 0.95
	// MaxStiffnessGain: a steel member does not become stiffer by more
	// than 20 %; an apparent gain beyond this is a modelling or gauge
	// effect, not a change of the member (common practice).
	MaxStiffnessGain = 0.20
	// MaxSettlement is 100 mm of support movement in one direction: larger
	// movements are visible without gauges (common practice).
	MaxSettlement = 0.100
	// MaxBiasStrain is a 5000 microstrain bias of a gauge (member mean
	// strain): beyond the linear range of foil and vibrating-wire strain
	// gauges, and 2.4 times the yield strain of S355 steel (355 / 210000,
	// EN 1993-1-1 table 3.1 and clause 3.2.6); a reading that far off is a
	// broken gauge, reported by the channel checks.
	MaxBiasStrain = 5000e-6
	// MaxSpringLoss and MaxSpringGain bound a support spring's relative
	// change: an elastomeric bearing's stiffness may fall by 90 % or
	// triple with cold, ageing or a seized guide (common practice).
	MaxSpringLoss = 0.90
	MaxSpringGain = 2.0
)

// PlausibleRange returns the default plausible range of a candidate's size
// for kinds whose bound does not depend on the structure: stiffness
// [-MaxStiffnessLoss, +MaxStiffnessGain], settlement +-MaxSettlement, and
// spring [-MaxSpringLoss, +MaxSpringGain], channel bias +-MaxBiasStrain,
// for a member's gauge-group bias +-MaxBiasStrain times ea (the member's E A in newtons,
// the gauge's force per unit strain). Nodal loads get their bound from the
// structure's loads (ok false here).
func PlausibleRange(k Kind, ea float64) (lo, hi float64, ok bool) {
	switch k {
	case StiffnessChange:
		return -MaxStiffnessLoss, MaxStiffnessGain, true
	case SupportSettlement:
		return -MaxSettlement, MaxSettlement, true
	case SpringChange:
		return -MaxSpringLoss, MaxSpringGain, true
	case ChannelBias:
		return -MaxBiasStrain, MaxBiasStrain, true
	case GaugeFault, GaugeDrift:
		// A drift: the same bound reached within a day (per day).
		if ea > 0 {
			return -MaxBiasStrain * ea, MaxBiasStrain * ea, true
		}
	}
	return 0, 0, false
}

// exactSize maps the linear size x (the fitted multiple of the first-order
// signature) to the size of the hypothesis. For a stiffness change the
// Sherman-Morrison formula gives a change of every gauge-inferred force of
// S d / (1 + kappa d), so x = d / (1 + kappa d) and d = x / (1 - kappa x);
// every other kind is linear (d = x).
func exactSize(kind Kind, kappa, x float64) float64 {
	if kind.rankOne() && kappa != 0 {
		return x / (1 - kappa*x)
	}
	return x
}

// linearOf is the inverse of exactSize: x = d / (1 + kappa d).
func linearOf(kind Kind, kappa, d float64) float64 {
	if kind.rankOne() && kappa != 0 {
		return d / (1 + kappa*d)
	}
	return d
}

// exactStd propagates the standard deviation sx of x to the size:
// dd/dx = 1 / (1 - kappa x)^2 for a stiffness change.
func exactStd(kind Kind, kappa, x, sx float64) float64 {
	if kind.rankOne() && kappa != 0 {
		q := 1 - kappa*x
		return sx / (q * q)
	}
	return sx
}

// minimalDetectableSize is the size whose non-centrality is delta0:
// |x| = delta0 / sqrt(Den); for a stiffness change the loss direction
// (x < 0), d = x / (1 - kappa x).
func minimalDetectableSize(kind Kind, kappa, den, delta0 float64) float64 {
	if !(den > 0) {
		return math.Inf(1)
	}
	x := delta0 / math.Sqrt(den)
	if kind.rankOne() {
		return math.Abs(exactSize(kind, kappa, -x))
	}
	return x
}

// Group is a set of candidates the gauges cannot rank against each other
// (pairwise w correlation above RhoMax with the group's leader). Members are
// listed by kind and label, not by their statistics.
type Group struct {
	Causes []Cause
	// T is the largest test statistic in the group.
	T float64
	// Implausible is true when the group's leader (its largest T among
	// plausible members, or any member when none is plausible) has an
	// implausible size; such groups come after all plausible ones.
	Implausible bool
}

// Labels returns the group's candidate labels joined by " or ".
func (g Group) Labels() string {
	l := make([]string, len(g.Causes))
	for i, c := range g.Causes {
		l[i] = c.Label
	}
	return strings.Join(l, " or ")
}

// Identification is the test of a set of candidates in one epoch, keeping
// their projected signatures so that causes (of this epoch or of a window)
// can be grouped by separability.
type Identification struct {
	// Causes are the candidates' tests in input order.
	Causes []Cause
	cands  []Candidate
	proj   [][]float64 // whitened projected signatures, one per candidate
	norm   []float64   // |proj|
	index  map[string]int
	rhoMax float64
}

// Identify tests every candidate against this epoch's adjusted residuals
// with the correlation bound rhoMax (0 means RhoMax at the solver's test
// size and power).
func (r *Result) Identify(cands []Candidate, rhoMax float64) (*Identification, error) {
	if r.plan == nil {
		return nil, errors.New("reconcile: Identify on a Result that did not come from Solver.Epoch")
	}
	if rhoMax == 0 {
		rhoMax = r.rhoMax
	}
	if !(rhoMax > 0 && rhoMax < 1) {
		return nil, fmt.Errorf("reconcile: correlation bound %v; want 0 < rho_max < 1", rhoMax)
	}
	pl := r.plan
	g := len(pl.mask)
	pe := len(pl.est)
	m := len(pl.idx)
	id := &Identification{Causes: make([]Cause, len(cands)), cands: cands, proj: make([][]float64, len(cands)),
		norm: make([]float64, len(cands)), index: make(map[string]int, len(cands)), rhoMax: rhoMax}
	qtc := make([]float64, pe)
	pl.projs.mu.Lock()
	defer pl.projs.mu.Unlock()
	// Room for the projections not kept from earlier epochs.
	fresh := 0
	for _, c := range cands {
		if e := pl.projs.m[c.Label]; e == nil || !sameBits(e.sig, c.Signature) {
			fresh++
		}
	}
	buf := make([]float64, m*fresh)
	for n, c := range cands {
		if len(c.Signature) != g {
			return nil, fmt.Errorf("reconcile: candidate %q has a signature of %d entries; want %d (one per gauged member)", c.Label, len(c.Signature), g)
		}
		if e := pl.projs.m[c.Label]; e != nil && sameBits(e.sig, c.Signature) {
			// The projection of this signature under this plan was made
			// before (and its entries checked finite); only the numerator
			// depends on the epoch. Same operations in the same order as
			// below.
			num := 0.0
			for _, i := range pl.idx {
				num += c.Signature[i] / pl.sigma[i] * r.ew[i]
			}
			id.proj[n] = e.pv
			id.norm[n] = math.Sqrt(e.den)
			id.index[c.Label] = n
			id.Causes[n] = finishCandidate(c, num, e.den, e.sig2, 1, r.delta0)
			continue
		}
		if len(buf) < m {
			// A label listed twice with two signatures: the count
			// above could not know.
			buf = make([]float64, m)
		}
		pv := buf[:m:m]
		buf = buf[m:]
		num, sig2 := 0.0, 0.0
		for k, i := range pl.idx {
			v := c.Signature[i]
			if !isFinite(v) {
				return nil, fmt.Errorf("reconcile: candidate %q: signature entry %d is %v; want finite", c.Label, i, v)
			}
			pv[k] = v / pl.sigma[i]
			sig2 += pv[k] * pv[k]
			num += pv[k] * r.ew[i]
		}
		for b := range qtc {
			qtc[b] = 0
		}
		for k := range pl.idx {
			row := pl.q[k*pe : k*pe+pe]
			for b, v := range row {
				qtc[b] += v * pv[k]
			}
		}
		den := 0.0
		for k := range pl.idx {
			row := pl.q[k*pe : k*pe+pe]
			for b, v := range row {
				pv[k] -= v * qtc[b]
			}
			den += pv[k] * pv[k]
		}
		id.proj[n] = pv
		id.norm[n] = math.Sqrt(den)
		id.index[c.Label] = n
		id.Causes[n] = finishCandidate(c, num, den, sig2, 1, r.delta0)
		pl.projs.keep(c.Label, c.Signature, pv, sig2, den)
	}
	return id, nil
}

// projections keeps, per candidate label, the whitened projected signature
// of a plan (an availability mask) for the candidates whose signatures stay
// the same from epoch to epoch (gauge faults, settlements, nodal loads):
// projecting costs two products with Q (m x pe) per candidate, the
// numerator of an epoch one pass. A label whose signature changed twice
// (a stiffness change, whose signature follows the force state) is no
// longer kept. Guarded by mu (a Solver is safe for concurrent use).
type projections struct {
	mu sync.Mutex
	m  map[string]*projection
}

type projection struct {
	sig       []float64 // the signature projected (a copy)
	pv        []float64 // its whitened projection (shared, never changed)
	sig2, den float64
	changed   int // times the label came with another signature
}

// keep records the projection pv of signature sig (copied) under label.
func (ps *projections) keep(label string, sig, pv []float64, sig2, den float64) {
	if ps.m == nil {
		ps.m = map[string]*projection{}
	}
	e := ps.m[label]
	if e == nil {
		e = &projection{}
		ps.m[label] = e
	} else if e.changed++; e.changed >= 2 {
		e.sig, e.pv = nil, nil // never equal to a signature of g > 0 entries
		return
	}
	e.sig = append([]float64(nil), sig...)
	e.pv = append([]float64(nil), pv...)
	e.sig2, e.den = sig2, den
}

// sameBits reports whether a and b hold the same numbers bit for bit.
func sameBits(a, b []float64) bool {
	if len(a) != len(b) || len(a) == 0 {
		return false
	}
	for i, v := range a {
		if math.Float64bits(v) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// Rho returns the correlation of the w statistics of the candidates
// labelled a and b in this epoch (0 when either is unknown or untestable).
func (id *Identification) Rho(a, b string) float64 {
	i, ok1 := id.index[a]
	j, ok2 := id.index[b]
	if !ok1 || !ok2 || id.norm[i] == 0 || id.norm[j] == 0 {
		return 0
	}
	return dot(id.proj[i], id.proj[j]) / (id.norm[i] * id.norm[j])
}

// Groups groups causes (this epoch's Causes, or a window's ranking of the
// same candidates) by separability: untestable causes are left out; the
// remaining are taken in order of plausibility, then T; each leader
// collects every remaining cause whose |rho| with it is at least rho_max
// (correlations from this epoch's projected signatures). Groups come in
// leader order; inside a group causes are sorted by kind and label.
func (id *Identification) Groups(cs []Cause) []Group {
	order := make([]int, 0, len(cs))
	for i, c := range cs {
		if c.Testable {
			order = append(order, i)
		}
	}
	slices.SortStableFunc(order, func(a, b int) int {
		ca, cb := &cs[a], &cs[b]
		if ca.Implausible != cb.Implausible {
			return boolOrder(!ca.Implausible, !cb.Implausible)
		}
		return boolOrder(ca.T > cb.T, cb.T > ca.T)
	})
	// Each cause's candidate in this epoch (-1: unknown here, or a null
	// projected signature, so Rho is 0 with any other), looked up once; a
	// drift's is its gauge's, with the ramp's correlation with a constant
	// as a factor (drift.go; two drifts correlate as their gauges).
	cand := make([]int, len(cs))
	fac := make([]float64, len(cs))
	for _, i := range order {
		cand[i], fac[i] = -1, 1
		label := cs[i].Label
		if d := cs[i].drift; d != nil {
			label, fac[i] = d.gauge, d.rhoTime
		}
		if n, ok := id.index[label]; ok && id.norm[n] != 0 {
			cand[i] = n
		}
	}
	used := make([]bool, len(cs))
	restBuf := make([]int, 0, len(order))
	var out []Group
	for _, li := range order {
		if used[li] {
			continue
		}
		used[li] = true
		lead := cs[li]
		grp := Group{Causes: []Cause{lead}, T: lead.T, Implausible: lead.Implausible}
		// The remaining causes with |Rho(lead, cause)| >= rho_max, Rho
		// computed as Rho does, four products at a time.
		i := cand[li]
		if i < 0 {
			out = append(out, grp)
			continue
		}
		rest := restBuf[:0]
		for _, k := range order {
			if !used[k] && cand[k] >= 0 {
				rest = append(rest, k)
			}
		}
		restBuf = rest
		for len(rest) > 0 {
			var p [4]float64
			n := min(len(rest), 4)
			switch n {
			case 4:
				p[0], p[1], p[2], p[3] = dot4(id.proj[i], id.proj[cand[rest[0]]], id.proj[cand[rest[1]]], id.proj[cand[rest[2]]], id.proj[cand[rest[3]]])
			default:
				for b := range n {
					p[b] = dot(id.proj[i], id.proj[cand[rest[b]]])
				}
			}
			for b, k := range rest[:n] {
				f := fac[li] * fac[k]
				if cs[li].drift != nil && cs[k].drift != nil {
					f = 1 // two drifts: their ramps taken alike
				}
				if math.Abs(f*p[b]/(id.norm[i]*id.norm[cand[k]])) >= id.rhoMax {
					used[k] = true
					grp.Causes = append(grp.Causes, cs[k])
					grp.T = math.Max(grp.T, cs[k].T)
				}
			}
			rest = rest[n:]
		}
		slices.SortStableFunc(grp.Causes, byKindAndLabel)
		out = append(out, grp)
	}
	return out
}

// dot4 returns the dot products of a with b0..b3 (each of a's length),
// each summed in index order as dot sums (the four sums are independent,
// so the processor overlaps them).
func dot4(a, b0, b1, b2, b3 []float64) (s0, s1, s2, s3 float64) {
	b0, b1, b2, b3 = b0[:len(a)], b1[:len(a)], b2[:len(a)], b3[:len(a)]
	for i, v := range a {
		s0 += v * b0[i]
		s1 += v * b1[i]
		s2 += v * b2[i]
		s3 += v * b3[i]
	}
	return
}

// boolOrder turns a "less" pair (a before b, b before a) into a comparison
// for the slices package's sorts.
func boolOrder(aFirst, bFirst bool) int {
	switch {
	case aFirst:
		return -1
	case bFirst:
		return 1
	}
	return 0
}

// byKindAndLabel orders causes by kind, then label.
func byKindAndLabel(a, b Cause) int {
	if a.Kind != b.Kind {
		return boolOrder(a.Kind < b.Kind, b.Kind < a.Kind)
	}
	return strings.Compare(a.Label, b.Label)
}

// Untestable returns the labels of the candidates that cannot be tested in
// this epoch (null projected signature, or minimal detectable size beyond
// the plausible range), in input order.
func (id *Identification) Untestable() []string {
	var out []string
	for _, c := range id.Causes {
		if !c.Testable {
			out = append(out, c.Label)
		}
	}
	return out
}

// finishCandidate turns accumulated sums into a Cause with its exact size,
// standard deviation, minimal detectable size, testability and
// plausibility.
func finishCandidate(c Candidate, num, den, sig2 float64, epochs int, delta0 float64) Cause {
	out := finishCause(c.Kind, c.Label, num, den, sig2, epochs)
	out.info = candInfo{kappa: c.Kappa, lower: c.Lower, upper: c.Upper, ea: c.EA, delta0: delta0}
	out.finishSizes()
	return out
}

// finishSizes fills the exact size, its standard deviation, the minimal
// detectable size, Testable and Implausible from Num, Den and the
// candidate's constants.
func (c *Cause) finishSizes() {
	in := c.info
	scale, _ := c.Kind.Display()
	c.Std, c.MDS = math.Inf(1), math.Inf(1)
	if !c.Separable {
		return
	}
	x := c.Num / c.Den
	sx := 1 / math.Sqrt(c.Den)
	c.Size = exactSize(c.Kind, in.kappa, x)
	c.DisplaySize = c.Size * scale
	c.Std = exactStd(c.Kind, in.kappa, x, sx)
	if in.delta0 > 0 {
		c.MDS = minimalDetectableSize(c.Kind, in.kappa, c.Den, in.delta0)
	}
	c.Testable = true
	if in.lower < in.upper {
		// Largest plausible shift of the w statistic, in units of its
		// standard deviation: sqrt(Den) times the largest plausible |x|.
		xl := math.Max(math.Abs(linearOf(c.Kind, in.kappa, in.lower)), math.Abs(linearOf(c.Kind, in.kappa, in.upper)))
		if in.delta0 > 0 && math.Sqrt(c.Den)*xl < in.delta0 {
			c.Testable = false
		}
		c.Implausible = c.Size < in.lower || c.Size > in.upper || math.IsNaN(c.Size)
		if c.Kind.rankOne() && in.kappa*x >= 1 {
			// x beyond 1/kappa has no stiffness factor at all
			// (the rank-one model would need 1 + d <= 0).
			c.Implausible = true
		}
	}
	if (c.Kind == GaugeFault || c.Kind == GaugeDrift) && in.ea > 0 {
		c.Strain, c.StrainStd = c.Size/in.ea, c.Std/in.ea
	}
}
