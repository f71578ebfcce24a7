package model

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// InputKind says what one column of an influence matrix is per unit of.
type InputKind int

const (
	// PatternInput is one unit of a load pattern's factor.
	PatternInput InputKind = iota
	// TemperatureInput is +1 K on every member of a member group.
	TemperatureInput
)

// String names the kind.
func (k InputKind) String() string {
	switch k {
	case PatternInput:
		return "pattern"
	case TemperatureInput:
		return "temperature"
	}
	return fmt.Sprintf("InputKind(%d)", int(k))
}

// Input is one column of an influence matrix.
type Input struct {
	// Kind is PatternInput or TemperatureInput.
	Kind InputKind
	// Name is the pattern name or the member group name.
	Name string
}

// loadSetOf builds the load set of one unit input.
func (m *Model) loadSetOf(in Input) (*loadSet, error) {
	ls := m.newLoadSet()
	switch in.Kind {
	case PatternInput:
		pi, ok := m.s.PatternIndex(in.Name)
		if !ok {
			return nil, fmt.Errorf("structure %q: influence input: unknown load pattern %q", m.s.Name, in.Name)
		}
		m.addPattern(ls, &m.s.Patterns[pi], 1)
	case TemperatureInput:
		if err := m.addGroupTemperature(ls, in.Name, 1); err != nil {
			return nil, fmt.Errorf("influence input: %w", err)
		}
	default:
		return nil, fmt.Errorf("structure %q: influence input %q has unknown kind %d", m.s.Name, in.Name, int(in.Kind))
	}
	return ls, nil
}

// checkMembers rejects member indices out of range.
func (m *Model) checkMembers(members []int) error {
	for _, e := range members {
		if e < 0 || e >= len(m.s.Members) {
			return fmt.Errorf("structure %q: member index %d out of range (%d members)", m.s.Name, e, len(m.s.Members))
		}
	}
	return nil
}

// Influence returns H, the force (N) in each listed member per unit of each
// input: rows follow members, columns follow inputs. It uses the direct
// method (one solve per input) or the adjoint method (one solve per member,
// N_k = z_k . f_eff + direct terms with K z_k = g_k), whichever needs fewer
// solves; both give the same matrix to rounding.
func (m *Model) Influence(members []int, inputs []Input) (*mat.Dense, error) {
	if len(inputs) <= len(members) {
		return m.influenceDirect(members, inputs)
	}
	return m.influenceAdjoint(members, inputs)
}

// influenceDirect solves once per input and reads the member forces.
func (m *Model) influenceDirect(members []int, inputs []Input) (*mat.Dense, error) {
	if err := m.checkMembers(members); err != nil {
		return nil, err
	}
	if len(members) == 0 || len(inputs) == 0 {
		return &mat.Dense{}, emptyInfluence(members, inputs)
	}
	h := mat.NewDense(len(members), len(inputs), nil)
	for c, in := range inputs {
		ls, err := m.loadSetOf(in)
		if err != nil {
			return nil, err
		}
		_, n := m.solveLoads(ls)
		for r, e := range members {
			h.Set(r, c, n[e])
		}
	}
	return h, nil
}

func emptyInfluence(members []int, inputs []Input) error {
	return fmt.Errorf("influence matrix needs at least one member and one input (got %d members, %d inputs)", len(members), len(inputs))
}

// memberGradient returns g_e over the free DOFs: N_e = g_e . w_f + ...,
// g_e = (E A / L) b_e restricted to the free DOFs.
func (m *Model) memberGradient(e int) []float64 {
	g := make([]float64, len(m.lo.free))
	d := m.lo.dim
	mg := &m.lo.mem[e]
	for k := 0; k < d; k++ {
		if w := mg.i*d + k; m.lo.kind[w] == dofFree {
			g[m.lo.index[w]] -= mg.k * mg.bi[k]
		}
		if w := mg.j*d + k; m.lo.kind[w] == dofFree {
			g[m.lo.index[w]] += mg.k * mg.bj[k]
		}
	}
	return g
}

// adjoint solves K z_e = g_e for every listed member, one column each.
func (m *Model) adjoint(members []int) *mat.Dense {
	nf := len(m.lo.free)
	if nf == 0 {
		return nil
	}
	b := mat.NewDense(nf, len(members), nil)
	for c, e := range members {
		b.SetCol(c, m.memberGradient(e))
	}
	z := mat.NewDense(nf, len(members), nil)
	m.chol.SolveMany(z, b)
	return z
}

// influenceAdjoint uses one solve per member: with w_f = K^-1 f_eff,
// N_e = g_e . w_f + (E A / L) b_e . w_r - E A alpha dT_e = z_e . f_eff + ...
func (m *Model) influenceAdjoint(members []int, inputs []Input) (*mat.Dense, error) {
	if err := m.checkMembers(members); err != nil {
		return nil, err
	}
	if len(members) == 0 || len(inputs) == 0 {
		return &mat.Dense{}, emptyInfluence(members, inputs)
	}
	z := m.adjoint(members)
	h := mat.NewDense(len(members), len(inputs), nil)
	for c, in := range inputs {
		ls, err := m.loadSetOf(in)
		if err != nil {
			return nil, err
		}
		f := m.rhs(ls)
		wp := m.fullPrescribed(ls)
		for r, e := range members {
			var v float64
			for i, fi := range f {
				if fi != 0 {
					v += z.At(i, r) * fi
				}
			}
			if wp != nil {
				v += m.lo.mem[e].k * m.lo.elongation(e, wp)
			}
			if ls.dT != nil {
				v -= m.lo.mem[e].eaa * ls.dT[e]
			}
			h.Set(r, c, v)
		}
	}
	return h, nil
}

// Signatures holds the adjoint solutions z_g = K^-1 g_g of a gauged member
// set, from which the cause signatures of reconciliation follow by products:
// member stiffness changes, support settlements and unmodelled nodal loads.
type Signatures struct {
	m       *Model
	members []int
	z       *mat.Dense // free DOFs x G
}

// Signatures precomputes the adjoint solutions for the gauged members.
func (m *Model) Signatures(members []int) (*Signatures, error) {
	if err := m.checkMembers(members); err != nil {
		return nil, err
	}
	if len(members) == 0 {
		return nil, fmt.Errorf("structure %q: signatures need at least one gauged member", m.s.Name)
	}
	return &Signatures{m: m, members: append([]int(nil), members...), z: m.adjoint(members)}, nil
}

// Members returns the gauged member indices, in row order.
func (sg *Signatures) Members() []int { return append([]int(nil), sg.members...) }

// Stiffness returns the G x M sensitivity of the gauge-inferred forces
// y_g = (E A)_g,nominal * strain_g of the gauged members to a relative change
// s_k of each member's axial stiffness (E A_k -> (1 + s_k) E A_k) at the state
// with member forces `forces` (N, all members).
//
// Derivation: K(s) = K + s K_k with K_k = (E A / L)_k b_k b_k^T, and the
// thermal load of member k scales with (1 + s) too, so differentiating
// K w = f gives K dw/ds = -N_k b_k (N_k the member's elastic force, thermal
// part included). For g != k, dN_g/ds = g_g . dw_f/ds = -N_k z_g . b_k. For
// g = k the gauge reads the strain, N_k / ((1+s) E A_k), times the nominal
// E A_k, so dy_k/ds = dN_k/ds - N_k = -N_k z_k . b_k as well. Hence
// S[g][k] = -N_k (z_g . b_k,f).
func (sg *Signatures) Stiffness(forces []float64) *mat.Dense {
	m := sg.m
	nm := len(m.s.Members)
	out := mat.NewDense(len(sg.members), nm, nil)
	if sg.z == nil {
		return out
	}
	d := m.lo.dim
	for k := 0; k < nm; k++ {
		if k >= len(forces) || forces[k] == 0 {
			continue
		}
		mg := &m.lo.mem[k]
		for r := range sg.members {
			var zb float64
			for a := 0; a < d; a++ {
				if w := mg.i*d + a; m.lo.kind[w] == dofFree {
					zb -= sg.z.At(m.lo.index[w], r) * mg.bi[a]
				}
				if w := mg.j*d + a; m.lo.kind[w] == dofFree {
					zb += sg.z.At(m.lo.index[w], r) * mg.bj[a]
				}
			}
			out.Set(r, k, -forces[k]*zb)
		}
	}
	return out
}

// Settlement returns the labels of every restrained support direction
// ("L8 y", or "L8 n" for an inclined roller's normal) and the G x S
// sensitivity of the gauged member forces per metre of prescribed
// displacement there: dN_g/dw_r = (E A / L)_g b_g[r] - z_g . (K e_r)_f.
func (sg *Signatures) Settlement() ([]string, *mat.Dense) {
	m := sg.m
	nr := len(m.lo.rest)
	labels := make([]string, nr)
	out := mat.NewDense(len(sg.members), max(nr, 1), nil)
	if nr == 0 {
		return nil, &mat.Dense{}
	}
	// Column r of K_full: only the members at the node and its spring.
	d := m.lo.dim
	incident := make([][]int, m.lo.nn)
	for e := range m.lo.mem {
		incident[m.lo.mem[e].i] = append(incident[m.lo.mem[e].i], e)
		incident[m.lo.mem[e].j] = append(incident[m.lo.mem[e].j], e)
	}
	type entry struct {
		w int
		v float64
	}
	var col []entry // in a fixed order, so sums are reproducible
	for r, dof := range m.lo.rest {
		labels[r] = m.lo.dofLabel(m.s, dof)
		n, a := dof/d, dof%d
		col = col[:0]
		for _, e := range incident[n] {
			mg := &m.lo.mem[e]
			// b_e at this DOF: -bi[a] at end i, +bj[a] at end j.
			bd := mg.bj[a]
			if mg.i == n {
				bd = -mg.bi[a]
			}
			for k := 0; k < d; k++ {
				col = append(col, entry{mg.i*d + k, -mg.k * bd * mg.bi[k]}, entry{mg.j*d + k, mg.k * bd * mg.bj[k]})
			}
		}
		if sw := m.lo.spring[n]; sw != nil {
			for k := 0; k < d; k++ {
				col = append(col, entry{n*d + k, sw[k][a]})
			}
		}
		for g, mi := range sg.members {
			mg := &m.lo.mem[mi]
			var v float64
			// (E A / L)_g b_g[r]
			if mg.i == n {
				v -= mg.k * mg.bi[a]
			}
			if mg.j == n {
				v += mg.k * mg.bj[a]
			}
			if sg.z != nil {
				for _, c := range col {
					if m.lo.kind[c.w] == dofFree && c.v != 0 {
						v -= sg.z.At(m.lo.index[c.w], g) * c.v
					}
				}
			}
			out.Set(g, r, v)
		}
	}
	return labels, out
}

// NodalLoad returns the labels of every free node direction ("U3 x", or
// "U3 t" for an inclined roller's tangent) and the G x D sensitivity of the
// gauged member forces per newton of force there: dN_g/df_i = z_g[i].
func (sg *Signatures) NodalLoad() ([]string, *mat.Dense) {
	m := sg.m
	nf := len(m.lo.free)
	if nf == 0 {
		return nil, &mat.Dense{}
	}
	labels := make([]string, nf)
	for i, dof := range m.lo.free {
		labels[i] = m.lo.dofLabel(m.s, dof)
	}
	out := mat.NewDense(len(sg.members), nf, nil)
	out.Copy(sg.z.T())
	return labels, out
}
