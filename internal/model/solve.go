package model

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// Result is the solution of one load case. Member forces are tension
// positive; everything is SI.
type Result struct {
	// Forces are the member axial forces N in newtons, tension positive,
	// in member order.
	Forces []float64
	// Stresses are N / A in pascals, tension positive.
	Stresses []float64
	// Displacements are the node displacements in metres, global axes.
	Displacements [][3]float64
	// Reactions are the support reactions (restraint forces plus spring
	// forces on the structure), one per support, global axes.
	Reactions []Reaction
	// Equilibrium is the check of the solution.
	Equilibrium Equilibrium
}

// Reaction is the force a support exerts on the structure at one node.
type Reaction struct {
	// Node is the node index; ID its id.
	Node int
	ID   string
	// Force is the reaction in newtons, global axes.
	Force [3]float64
}

// Equilibrium is the equilibrium check of a solution: at every joint the
// member forces, applied loads and reactions must sum to zero, and globally
// the reactions must balance the applied loads.
type Equilibrium struct {
	// MaxImbalanceN is the largest force component left over at any joint,
	// or in the global sum, in newtons.
	MaxImbalanceN float64
	// Relative is MaxImbalanceN divided by the largest load: the largest
	// applied nodal force component, or equivalent nodal force of a
	// temperature change (E A alpha dT) or of a settlement (K_full w_r), or,
	// when all these are zero, the largest reaction or member force.
	Relative float64
	// Joint is the id of the joint with the largest imbalance.
	Joint string
	// GlobalN is the sum of all applied loads and reactions (should be 0).
	GlobalN [3]float64
	// BackwardError is the normwise backward error of the solve (Rigal and
	// Gaches 1967; N. J. Higham, Accuracy and Stability of Numerical
	// Algorithms, 2nd ed., SIAM 2002, Theorem 7.1, from memory):
	//
	//   eta = ||f - K u||_inf / (||K||_inf ||u||_inf + ||f||_inf)
	//
	// over the free DOFs (the global sum included), with K the stiffness
	// rows of the free DOFs (members and springs), u all working
	// displacements (prescribed ones included) and f the effective load
	// (nodal forces and the equivalent forces of temperature changes and
	// settlements). It is the smallest relative change of K and f for which
	// the computed u is exact, and a backward stable solver keeps it of
	// order n u whatever the condition of K. Unlike Relative it does not
	// grow with the condition: a stiff-soft truss solved as well as the
	// arithmetic allows has a backward error near the unit roundoff while
	// its relative imbalance may be 1e-6. Being normwise, it sees an error
	// of the soft part of a stiff-soft truss only in proportion to the soft
	// part's share of ||K|| ||u||.
	BackwardError float64
	// Limit is the backward error above which the solution is wrong: see
	// BackwardErrorLimit.
	Limit float64
}

// OK reports whether the solution passes the equilibrium check: its
// backward error is within Limit.
func (e Equilibrium) OK() bool { return e.BackwardError <= e.Limit }

// BackwardErrorLimit is the largest normwise backward error accepted for a
// solve with n free DOFs: 10 n u with u = 2^-53 the unit roundoff, and n
// taken as at least 100. A backward stable Cholesky solve with the member
// forces recomputed from the displacements stays within a small multiple of
// n u (Higham, 2nd ed., section 10.1, Theorem 10.4 with the usual
// observation that the constants are pessimistic, from memory); the factor
// 10 and the floor of 100 are our margin. A result above the limit is not
// the solution of any nearby problem and is reported as FAILED.
func BackwardErrorLimit(n int) float64 {
	const unitRoundoff = 0x1p-53
	return 10 * float64(max(n, 100)) * unitRoundoff
}

// loadSet is one right-hand side: external nodal forces, member temperature
// changes and prescribed displacements.
type loadSet struct {
	f  []float64 // external nodal forces, full working vector, N
	dT []float64 // temperature change per member, K (nil for none)
	wr []float64 // prescribed working displacement per restrained DOF, m (nil for none)
}

func (m *Model) newLoadSet() *loadSet {
	return &loadSet{f: make([]float64, m.lo.dim*m.lo.nn)}
}

// addForce adds a global force at node n.
func (m *Model) addForce(ls *loadSet, n int, f [3]float64, factor float64) {
	w := m.lo.toWorking(n, f)
	d := m.lo.dim
	for k := 0; k < d; k++ {
		ls.f[n*d+k] += factor * w[k]
	}
}

// selfWeight returns the weight of member e, density A L g, in newtons.
func (m *Model) selfWeight(e int) float64 {
	mb := &m.s.Members[e]
	return mb.Density * mb.A * m.lo.mem[e].l * StandardGravity
}

// addPattern adds factor times pattern p.
func (m *Model) addPattern(ls *loadSet, p *Pattern, factor float64) {
	if factor == 0 {
		return
	}
	for _, fo := range p.Forces {
		m.addForce(ls, fo.Node, fo.F, factor)
	}
	if p.SelfWeight != 0 {
		for e := range m.s.Members {
			half := 0.5 * m.selfWeight(e) * p.SelfWeight
			g := [3]float64{half * m.grav[0], half * m.grav[1], half * m.grav[2]}
			m.addForce(ls, m.lo.mem[e].i, g, factor)
			m.addForce(ls, m.lo.mem[e].j, g, factor)
		}
	}
	for _, t := range p.Temperatures {
		if ls.dT == nil {
			ls.dT = make([]float64, len(m.s.Members))
		}
		ls.dT[t.Member] += factor * t.DeltaK
	}
	d := m.lo.dim
	for _, st := range p.Settlements {
		if ls.wr == nil {
			ls.wr = make([]float64, len(m.lo.rest))
		}
		n := st.Node
		for k := 0; k < d; k++ {
			if w := n*d + k; m.lo.kind[w] == dofRestrained && st.D[k] != 0 {
				ls.wr[m.lo.index[w]] += factor * st.D[k]
			}
		}
	}
}

// addGroupTemperature adds factor kelvin to every member of group name.
func (m *Model) addGroupTemperature(ls *loadSet, name string, factor float64) error {
	ms, ok := m.s.Groups[name]
	if !ok {
		return fmt.Errorf("structure %q: unknown member group %q for a temperature input; groups are: %s", m.s.Name, name, m.groupNames())
	}
	if ls.dT == nil {
		ls.dT = make([]float64, len(m.s.Members))
	}
	for _, e := range ms {
		ls.dT[e] += factor
	}
	return nil
}

func (m *Model) groupNames() string {
	var names []string
	for g := range m.s.Groups {
		names = append(names, g)
	}
	if len(names) == 0 {
		return "(none)"
	}
	sort.Strings(names)
	return strings.Join(names, ", ")
}

// fullPrescribed returns the full working vector holding only the prescribed
// displacements (nil if none).
func (m *Model) fullPrescribed(ls *loadSet) []float64 {
	if ls.wr == nil {
		return nil
	}
	w := make([]float64, m.lo.dim*m.lo.nn)
	for r, dof := range m.lo.rest {
		w[dof] = ls.wr[r]
	}
	return w
}

// rhs returns the effective free load: f_f + f_thermal,f - K_fr w_r, with the
// thermal equivalent nodal forces f_thermal = E A alpha dT b_e.
func (m *Model) rhs(ls *loadSet) []float64 {
	full := make([]float64, len(ls.f))
	copy(full, ls.f)
	d := m.lo.dim
	if ls.dT != nil {
		for e, t := range ls.dT {
			if t == 0 {
				continue
			}
			mg := &m.lo.mem[e]
			ft := mg.eaa * t
			for k := 0; k < d; k++ {
				full[mg.i*d+k] -= ft * mg.bi[k]
				full[mg.j*d+k] += ft * mg.bj[k]
			}
		}
	}
	if wp := m.fullPrescribed(ls); wp != nil {
		kw := make([]float64, len(full))
		m.lo.applyK(wp, kw)
		for i := range full {
			full[i] -= kw[i]
		}
	}
	out := make([]float64, len(m.lo.free))
	for i, dof := range m.lo.free {
		out[i] = full[dof]
	}
	return out
}

// memberForce is N = (E A / L) c.(u_j - u_i) - E A alpha dT.
func (m *Model) memberForce(e int, w []float64, dT float64) float64 {
	mg := &m.lo.mem[e]
	return mg.k*m.lo.elongation(e, w) - mg.eaa*dT
}

// solveLoads solves one load set and returns the full working displacement
// vector and the member forces.
func (m *Model) solveLoads(ls *loadSet) (w, n []float64) {
	w = m.fullPrescribed(ls)
	if w == nil {
		w = make([]float64, m.lo.dim*m.lo.nn)
	}
	if len(m.lo.free) > 0 {
		b := m.rhs(ls)
		x := make([]float64, len(b))
		m.chol.Solve(x, b)
		for i, dof := range m.lo.free {
			w[dof] = x[i]
		}
	}
	n = make([]float64, len(m.s.Members))
	for e := range n {
		var t float64
		if ls.dT != nil {
			t = ls.dT[e]
		}
		n[e] = m.memberForce(e, w, t)
	}
	return w, n
}

// SolveCase solves the named load case.
func (m *Model) SolveCase(name string) (*Result, error) {
	ci, ok := m.s.CaseIndex(name)
	if !ok {
		var names []string
		for _, c := range m.s.Cases {
			names = append(names, c.Name)
		}
		list := strings.Join(names, ", ")
		if list == "" {
			list = "(none)"
		}
		return nil, fmt.Errorf("structure %q: unknown load case %q; the cases are: %s", m.s.Name, name, list)
	}
	r, err := m.SolveFactors(m.s.Cases[ci].Factors)
	if err != nil {
		return nil, fmt.Errorf("load case %q: %w", name, err)
	}
	return r, nil
}

// SolveFactors solves the combination sum factor_i * pattern_i.
func (m *Model) SolveFactors(f []Factor) (*Result, error) {
	ls := m.newLoadSet()
	for _, fa := range f {
		pi, ok := m.s.PatternIndex(fa.Pattern)
		if !ok {
			return nil, fmt.Errorf("structure %q: unknown load pattern %q", m.s.Name, fa.Pattern)
		}
		if !finite(fa.Factor) {
			return nil, fmt.Errorf("structure %q: factor of pattern %q is not finite (%g)", m.s.Name, fa.Pattern, fa.Factor)
		}
		m.addPattern(ls, &m.s.Patterns[pi], fa.Factor)
	}
	w, n := m.solveLoads(ls)
	return m.result(ls, w, n), nil
}

// result assembles displacements, stresses, reactions and the equilibrium
// check. Reactions come from the member forces: at a restrained DOF
// r = sum_e N_e b_e - f - p_s (that is K_full u - f), with p_s = -S w the
// spring force; the equilibrium figure is the residual at the free DOFs and
// the global sum.
func (m *Model) result(ls *loadSet, w, n []float64) *Result {
	d := m.lo.dim
	nn := m.lo.nn
	res := &Result{Forces: n, Stresses: make([]float64, len(n)), Displacements: make([][3]float64, nn)}
	for e := range n {
		res.Stresses[e] = n[e] / m.s.Members[e].A
	}
	for i := 0; i < nn; i++ {
		var wn [3]float64
		copy(wn[:d], w[i*d:i*d+d])
		res.Displacements[i] = m.lo.toGlobal(i, wn)
	}
	// q = internal (resisting) forces of the members on the nodes.
	q := make([]float64, d*nn)
	for e := range n {
		mg := &m.lo.mem[e]
		for k := 0; k < d; k++ {
			q[mg.i*d+k] -= n[e] * mg.bi[k]
			q[mg.j*d+k] += n[e] * mg.bj[k]
		}
	}
	ps := make([]float64, d*nn)
	for i, sw := range m.lo.spring {
		if sw == nil {
			continue
		}
		for a := 0; a < d; a++ {
			for b := 0; b < d; b++ {
				ps[i*d+a] -= sw[a][b] * w[i*d+b]
			}
		}
	}
	r := make([]float64, d*nn)
	for _, dof := range m.lo.rest {
		r[dof] = q[dof] - ls.f[dof] - ps[dof]
	}
	var eq Equilibrium
	var scale, other float64
	for i := 0; i < nn; i++ {
		var wf, wr, wi [3]float64
		for k := 0; k < d; k++ {
			wf[k] = ls.f[i*d+k]
			wr[k] = r[i*d+k] + ps[i*d+k]
			wi[k] = wf[k] + wr[k] - q[i*d+k]
		}
		gf, gr, gi := m.lo.toGlobal(i, wf), m.lo.toGlobal(i, wr), m.lo.toGlobal(i, wi)
		for k := 0; k < 3; k++ {
			eq.GlobalN[k] += gf[k] + gr[k]
			scale = math.Max(scale, math.Abs(gf[k]))
			other = math.Max(other, math.Abs(gr[k]))
			if a := math.Abs(gi[k]); a > eq.MaxImbalanceN || eq.Joint == "" {
				eq.MaxImbalanceN = a
				eq.Joint = m.s.Nodes[i].ID
			}
		}
		if sp := m.lo.supportOf[i]; sp >= 0 {
			res.Reactions = append(res.Reactions, Reaction{Node: i, ID: m.s.Nodes[i].ID, Force: gr})
		}
	}
	for k := 0; k < 3; k++ {
		if a := math.Abs(eq.GlobalN[k]); a > eq.MaxImbalanceN {
			eq.MaxImbalanceN = a
			eq.Joint = "(global)"
		}
	}
	scale = math.Max(scale, m.equivalentLoadScale(ls))
	if scale == 0 {
		for _, v := range n {
			other = math.Max(other, math.Abs(v))
		}
		scale = other
	}
	if scale > 0 {
		eq.Relative = eq.MaxImbalanceN / scale
	}
	if den := m.stiffnessNormInf()*maxAbs(w) + math.Max(maxAbs(ls.f), m.equivalentLoadScale(ls)); den > 0 {
		eq.BackwardError = eq.MaxImbalanceN / den
	}
	eq.Limit = BackwardErrorLimit(len(m.lo.free))
	res.Equilibrium = eq
	return res
}

// stiffnessNormInf returns ||K_f||_inf, the largest absolute row sum of the
// stiffness rows of the free DOFs (members and springs, full width).
func (m *Model) stiffnessNormInf() float64 {
	d := m.lo.dim
	row := make([]float64, d*m.lo.nn)
	for e := range m.lo.mem {
		mg := &m.lo.mem[e]
		var sum float64
		for b := 0; b < d; b++ {
			sum += math.Abs(mg.bi[b]) + math.Abs(mg.bj[b])
		}
		for a := 0; a < d; a++ {
			row[mg.i*d+a] += mg.k * math.Abs(mg.bi[a]) * sum
			row[mg.j*d+a] += mg.k * math.Abs(mg.bj[a]) * sum
		}
	}
	for i, sw := range m.lo.spring {
		if sw == nil {
			continue
		}
		for a := 0; a < d; a++ {
			for b := 0; b < d; b++ {
				row[i*d+a] += math.Abs(sw[a][b])
			}
		}
	}
	var nk float64
	for _, dof := range m.lo.free {
		nk = math.Max(nk, row[dof])
	}
	return nk
}

// maxAbs returns the largest absolute value of v (0 for an empty slice).
func maxAbs(v []float64) float64 {
	var a float64
	for _, x := range v {
		a = math.Max(a, math.Abs(x))
	}
	return a
}

// equivalentLoadScale returns the largest equivalent nodal force of the
// temperature changes (E A alpha |dT|) and settlements (|K_full w_r|).
func (m *Model) equivalentLoadScale(ls *loadSet) float64 {
	var sc float64
	for e, t := range ls.dT {
		sc = math.Max(sc, math.Abs(m.lo.mem[e].eaa*t))
	}
	if wp := m.fullPrescribed(ls); wp != nil {
		kw := make([]float64, len(wp))
		m.lo.applyK(wp, kw)
		for _, v := range kw {
			sc = math.Max(sc, math.Abs(v))
		}
	}
	return sc
}
