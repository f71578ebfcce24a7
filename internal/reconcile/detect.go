package reconcile

import (
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// Detectability is what the gauge layout can check when every gauge
// reports: the internal reliability of each gauged member.
type Detectability struct {
	Redundancy []float64 // r_i per gauged member
	MDB        []float64 // minimal detectable bias, newtons (0 where r_i ~ 0)
	Checkable  []bool    // r_i >= MinRedundancy
	Unchecked  []int     // indices of members that cannot be checked
	Estimable  []bool    // unknowns the gauges determine
	DOF        int       // G - estimable unknowns
	Weakest    int       // member with the smallest redundancy
	Delta0     float64   // non-centrality used for the MDB
}

// Detect computes the detectability of design A (G x p) with gauge
// standard deviations sigma, all gauges available. Unknowns the gauges
// cannot determine are reported (Estimable) rather than an error.
func Detect(A *mat.Dense, sigma []float64, opt Options) (*Detectability, error) {
	opt.DropUnidentifiable = true
	s, err := NewSolver(A, sigma, opt)
	if err != nil {
		return nil, err
	}
	pl, err := s.planFor(s.allAvail)
	if err != nil {
		return nil, err
	}
	d := &Detectability{
		Redundancy: append([]float64(nil), pl.redund...),
		MDB:        append([]float64(nil), pl.mdb...),
		Checkable:  append([]bool(nil), pl.checkable...),
		Estimable:  append([]bool(nil), pl.estimable...),
		DOF:        pl.dof,
		Delta0:     s.delta0,
	}
	d.Weakest = weakest(d.Redundancy, len(sigma))
	for i, ok := range d.Checkable {
		if !ok {
			d.Unchecked = append(d.Unchecked, i)
		}
	}
	return d, nil
}

func weakest(r []float64, g int) int {
	w := 0
	for i := 1; i < g; i++ {
		if r[i] < r[w] {
			w = i
		}
	}
	return w
}

// GaugeOption is a possible additional gauge: the influence of the unknown
// loads on that (currently ungauged) member's force, and the standard
// deviation the new gauge would have.
type GaugeOption struct {
	Label string
	Row   []float64 // p entries, newtons per unit unknown
	Sigma float64   // newtons
}

// Placement is the effect of adding one GaugeOption to the layout.
type Placement struct {
	Label         string
	WeakestBefore float64 // smallest r_i of the existing gauged members now
	WeakestAfter  float64 // smallest r_i of the existing gauged members with the new gauge
	WeakestMember int     // which existing gauged member is weakest after
	NewRedundancy float64 // r of the new gauge itself
	Estimable     int     // unknowns determined with the new gauge
}

// SuggestGauge evaluates each option as a single additional gauge and
// returns them ordered by how much they raise the weakest existing
// member's redundancy (largest WeakestAfter first; ties by more
// estimable unknowns, then input order). The first gauges rows of A are
// the gauged members; rows after them are pseudo-observations (of noisy
// inputs), whose redundancy is not a member's and does not count as the
// weakest. The layout is refitted for each option, which also handles
// options that make a previously unidentifiable unknown estimable.
func SuggestGauge(A *mat.Dense, sigma []float64, gauges int, options []GaugeOption, opt Options) ([]Placement, error) {
	rows := len(sigma)
	if gauges < 1 || gauges > rows {
		return nil, fmt.Errorf("reconcile: %d gauge rows of %d; want at least one and at most all rows", gauges, rows)
	}
	base, err := Detect(A, sigma, opt)
	if err != nil {
		return nil, err
	}
	p := 0
	if A != nil {
		_, p = A.Dims()
	}
	before := base.Redundancy[weakest(base.Redundancy, gauges)]
	out := make([]Placement, 0, len(options))
	ext := mat.NewDense(rows+1, max(p, 1), nil)
	if p > 0 {
		ext.Slice(0, rows, 0, p).(*mat.Dense).Copy(A)
	}
	sig := append(append([]float64(nil), sigma...), 0)
	for _, o := range options {
		if len(o.Row) != p {
			return nil, fmt.Errorf("reconcile: gauge option %q has %d influences; want %d (one per unknown load)", o.Label, len(o.Row), p)
		}
		if !(o.Sigma > 0) || math.IsInf(o.Sigma, 0) {
			return nil, fmt.Errorf("reconcile: gauge option %q: standard deviation %v; want positive and finite (newtons)", o.Label, o.Sigma)
		}
		for j, v := range o.Row {
			ext.Set(rows, j, v)
		}
		sig[rows] = o.Sigma
		var a *mat.Dense
		if p > 0 {
			a = ext
		}
		d, err := Detect(a, sig, opt)
		if err != nil {
			return nil, fmt.Errorf("reconcile: gauge option %q: %w", o.Label, err)
		}
		w := weakest(d.Redundancy, gauges)
		est := 0
		for _, ok := range d.Estimable {
			if ok {
				est++
			}
		}
		out = append(out, Placement{Label: o.Label, WeakestBefore: before, WeakestAfter: d.Redundancy[w],
			WeakestMember: w, NewRedundancy: d.Redundancy[rows], Estimable: est})
	}
	sort.SliceStable(out, func(i, j int) bool {
		if out[i].WeakestAfter != out[j].WeakestAfter {
			return out[i].WeakestAfter > out[j].WeakestAfter
		}
		return out[i].Estimable > out[j].Estimable
	})
	return out, nil
}
