package reconcile

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// DesignGroups returns the groups of candidates that the layout can never
// tell apart (DESIGN.md, Identification and adaptation): the connected
// components of the graph joining two testable candidates whose w
// statistics correlate by at least rho_max in absolute value (the bound of
// RhoMax), listed only when they have two or more members, each sorted by
// kind and label; and the labels of the untestable candidates. It needs
// no residuals: correlations and testability depend only on the design.
func (id *Identification) DesignGroups() (groups [][]Cause, untestable []string) {
	n := len(id.Causes)
	parent := make([]int, n)
	for i := range parent {
		parent[i] = i
	}
	find := func(i int) int {
		for parent[i] != i {
			parent[i] = parent[parent[i]]
			i = parent[i]
		}
		return i
	}
	var testable []int
	for i, c := range id.Causes {
		if c.Testable {
			testable = append(testable, i)
		} else {
			untestable = append(untestable, c.Label)
		}
	}
	for a, i := range testable {
		for _, j := range testable[a+1:] {
			if math.Abs(dot(id.proj[i], id.proj[j]))/(id.norm[i]*id.norm[j]) >= id.rhoMax {
				parent[find(i)] = find(j)
			}
		}
	}
	members := map[int][]Cause{}
	var roots []int
	for _, i := range testable {
		r := find(i)
		if _, ok := members[r]; !ok {
			roots = append(roots, r)
		}
		members[r] = append(members[r], id.Causes[i])
	}
	for _, r := range roots {
		g := members[r]
		if len(g) < 2 {
			continue
		}
		sort.SliceStable(g, func(a, b int) bool {
			if g[a].Kind != g[b].Kind {
				return g[a].Kind < g[b].Kind
			}
			return g[a].Label < g[b].Label
		})
		groups = append(groups, g)
	}
	return groups, untestable
}

// ExtraGauge is a possible additional gauge for separating a group: its
// row of the design (influence of each unknown, as in GaugeOption), its
// standard deviation, and the entry of each candidate's signature on it
// (by label; missing labels count 0).
type ExtraGauge struct {
	Label   string
	Row     []float64
	Sigma   float64
	Entries map[string]float64
}

// Separation is the best additional gauge for one group: with it the
// largest |rho| between two members of the group falls to MaxRho;
// Separates says whether that is below rho_max (every pair then
// separable).
type Separation struct {
	Gauge     string
	MaxRho    float64
	Separates bool
}

// SeparatingGauge evaluates each extra gauge as one more row of design A
// (G x p, standard deviations sigma) and returns the one that lowers the
// largest pairwise |rho| among the group's candidates most (ties: input
// order). ok is false when there is no option.
func SeparatingGauge(A *mat.Dense, sigma []float64, group []Candidate, options []ExtraGauge, opt Options) (best Separation, ok bool, err error) {
	g := len(sigma)
	p := 0
	if A != nil {
		_, p = A.Dims()
	}
	ext := mat.NewDense(g+1, max(p, 1), nil)
	if p > 0 {
		ext.Slice(0, g, 0, p).(*mat.Dense).Copy(A)
	}
	sig := append(append([]float64(nil), sigma...), 0)
	cands := make([]Candidate, len(group))
	for i, c := range group {
		if len(c.Signature) != g {
			return best, false, fmt.Errorf("reconcile: candidate %q has a signature of %d entries; want %d", c.Label, len(c.Signature), g)
		}
		cands[i] = c
		cands[i].Signature = append(append([]float64(nil), c.Signature...), 0)
	}
	best.MaxRho = math.Inf(1)
	zero := make([]float64, g+1)
	for _, o := range options {
		if len(o.Row) != p {
			return best, false, fmt.Errorf("reconcile: extra gauge %q has %d influences; want %d", o.Label, len(o.Row), p)
		}
		for j, v := range o.Row {
			ext.Set(g, j, v)
		}
		sig[g] = o.Sigma
		for i := range cands {
			cands[i].Signature[g] = o.Entries[cands[i].Label]
		}
		var a *mat.Dense
		if p > 0 {
			a = ext
		}
		o2 := opt
		o2.DropUnidentifiable = true
		o2.MemberNames, o2.UnknownNames = nil, nil
		s, err := NewSolver(a, sig, o2)
		if err != nil {
			return best, false, fmt.Errorf("reconcile: extra gauge %q: %w", o.Label, err)
		}
		res, err := s.Epoch(zero, zero, nil)
		if err != nil {
			return best, false, fmt.Errorf("reconcile: extra gauge %q: %w", o.Label, err)
		}
		id, err := res.Identify(cands, 0)
		if err != nil {
			return best, false, err
		}
		worst := 0.0
		for i := range cands {
			for j := i + 1; j < len(cands); j++ {
				worst = math.Max(worst, math.Abs(id.Rho(cands[i].Label, cands[j].Label)))
			}
		}
		if worst < best.MaxRho {
			best = Separation{Gauge: o.Label, MaxRho: worst, Separates: worst < s.RhoMax()}
			ok = true
		}
	}
	return best, ok, nil
}
