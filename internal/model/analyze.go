package model

import (
	"errors"
	"fmt"
	"math"

	"trussmonitor/internal/sparse"
)

// Model is an analysed structure: its DOF layout, the stiffness matrix of the
// free DOFs assembled by the direct stiffness method, and its Cholesky
// factor, computed once and reused for every right-hand side. A Model is
// safe for concurrent use by several goroutines once built.
type Model struct {
	s    *Structure
	lo   *layout
	grav [3]float64
	k    *sparse.Sym
	chol *sparse.Cholesky
	det  Determinacy
}

// Structure returns the structure the model was built from. Callers must
// not modify it.
func (m *Model) Structure() *Structure { return m.s }

// Determinacy returns the degree of static indeterminacy by counting and by
// rank.
func (m *Model) Determinacy() Determinacy { return m.det }

// FreeDOFs returns the number of unrestrained degrees of freedom (the order
// of the factored stiffness matrix).
func (m *Model) FreeDOFs() int { return len(m.lo.free) }

// Stats returns the sparse factorisation's statistics.
func (m *Model) Stats() sparse.Stats {
	if m.chol == nil {
		return sparse.Stats{}
	}
	return m.chol.Stats()
}

// Determinacy is the degree of static indeterminacy of a truss.
//
// By counting (Maxwell's rule) it is members + reactions - dim x joints, with
// every restrained direction and every spring direction counted as one
// reaction. By rank it is members + reactions - rank(A), A the equilibrium
// matrix; the number of independent mechanisms is dim x joints - rank(A),
// computed here as the nullity of the free-DOF stiffness matrix (whose rank
// equals that of the compatibility matrix).
type Determinacy struct {
	// ByCounting is m + r - dim*j.
	ByCounting int
	// ByRank is m + r - rank(A), never negative.
	ByRank int
	// Mechanisms is the number of independent free motions (dim*j - rank A).
	Mechanisms int
	// Stable is true when there is no mechanism.
	Stable bool
	// Agree is true when counting tells the truth: as many mechanisms as
	// members are missing by count (none when the count is not negative).
	Agree bool
	// Members, Reactions and Joints are the counted quantities.
	Members, Reactions, Joints int
	// Note explains the result in words.
	Note string
}

// MechanismError reports a singular or near-singular stiffness matrix: the
// truss can move without deforming its members.
type MechanismError struct {
	// Structure is the structure's name.
	Structure string
	// Motions are the free motions found (a basis of the null space, or the
	// DOFs where the factorisation's pivot failed for large models).
	Motions []FreeMotion
	// Partial is true when Motions is only a lower bound (large models).
	Partial bool
	// Determinacy is the counting and rank result.
	Determinacy Determinacy
}

// FreeMotion is one independent free motion of a mechanism.
type FreeMotion struct {
	// Nodes are the nodes that move, largest motion first, with their global
	// displacement direction scaled so that the largest has unit length.
	Nodes []NodeMotion
	// Moving is the number of nodes that move (Nodes may list fewer).
	Moving int
	// Ratio is the eigenvalue of this motion relative to the largest
	// eigenvalue of the stiffness (0 for an exact mechanism; dense path only).
	Ratio float64
	// PivotDOF names the DOF where the Cholesky pivot failed (sparse path).
	PivotDOF string
	// Dim is the structure's dimension: String prints this many components
	// per node (3 when unset).
	Dim int
}

// freeMotionListed is how many moving nodes FreeMotion.String names before
// it says how many more move.
const freeMotionListed = 6

// NodeMotion is the displacement of one node in a free motion.
type NodeMotion struct {
	Node int
	ID   string
	Dir  [3]float64
}

// Error describes the mechanism and what to do.
func (e *MechanismError) Error() string {
	count := fmt.Sprint(len(e.Motions))
	if e.Partial {
		count = "at least " + count
	}
	msg := fmt.Sprintf("structure %q is a mechanism: %s independent free motion(s)", e.Structure, count)
	for i, fm := range e.Motions {
		if i == 3 {
			msg += fmt.Sprintf("; and %d more", len(e.Motions)-3)
			break
		}
		msg += fmt.Sprintf("; motion %d: %s", i+1, fm.String())
	}
	return msg + "; add members or restraints to stop it"
}

// String lists the moving nodes, e.g. "U3 moves (0, 1), U4 moves (0, 0.5)".
func (fm FreeMotion) String() string {
	s := ""
	if fm.PivotDOF != "" {
		s = "pivot failed at " + fm.PivotDOF + ": "
	}
	dim := fm.Dim
	if dim != 2 {
		dim = 3
	}
	for i, nm := range fm.Nodes {
		if i == freeMotionListed {
			break
		}
		if i > 0 {
			s += ", "
		}
		if dim == 2 {
			s += fmt.Sprintf("%s moves (%.3g, %.3g)", nm.ID, nm.Dir[0], nm.Dir[1])
		} else {
			s += fmt.Sprintf("%s moves (%.3g, %.3g, %.3g)", nm.ID, nm.Dir[0], nm.Dir[1], nm.Dir[2])
		}
	}
	if more := fm.Moving - min(len(fm.Nodes), freeMotionListed); more > 0 {
		s += fmt.Sprintf(" and %d more node(s) (%d move in all)", more, fm.Moving)
	}
	return s
}

// Analyze validates the structure, numbers its DOFs (inclined rollers in a
// local basis), assembles the free-DOF stiffness matrix by the direct
// stiffness method and factors it once by sparse Cholesky with a
// bandwidth/fill-reducing ordering. A mechanism gives a *MechanismError with
// its free motions; invalid input gives a *ValidationError.
func Analyze(s *Structure) (*Model, error) {
	if err := Validate(s); err != nil {
		return nil, err
	}
	lo := newLayout(s)
	m := &Model{s: s, lo: lo, grav: gravityOf(s)}
	m.det = countDeterminacy(s, lo)
	nf := len(lo.free)
	if nf > 0 {
		m.k = lo.assemble()
		ch, err := sparse.Factorize(m.k, sparse.Options{})
		var npd *sparse.NotPositiveDefiniteError
		switch {
		case errors.As(err, &npd):
			return nil, m.mechanism(npd.Index)
		case err != nil:
			return nil, fmt.Errorf("structure %q: factorising the stiffness matrix (%d free DOFs): %w", s.Name, nf, err)
		}
		m.chol = ch
		if !m.probeSolve() {
			return nil, m.mechanism(-1)
		}
	}
	m.det.finish(0, false)
	return m, nil
}

// gravityOf returns the unit gravity direction (default -y in 2D, -z in 3D).
func gravityOf(s *Structure) [3]float64 {
	g := s.Gravity
	if l := norm3(g); l > 0 {
		return [3]float64{g[0] / l, g[1] / l, g[2] / l}
	}
	if s.Dim == 2 {
		return [3]float64{0, -1, 0}
	}
	return [3]float64{0, 0, -1}
}

// assemble builds the stiffness matrix of the free DOFs: for each member
// k_e = (E A / L) b b^T in working coordinates (b = [-T_i c; T_j c]), which
// in global coordinates is (E A / L)[c c^T, -c c^T; -c c^T, c c^T]; springs
// add T diag(k) T^T to their node's block.
func (lo *layout) assemble() *sparse.Sym {
	b := sparse.NewBuilder(len(lo.free))
	lo.eachEntry(func(p, q int, v float64) { b.Add(p, q, v) })
	return b.Matrix()
}

// eachEntry calls add once per unordered pair of free DOFs (p <= q not
// implied) for every element and spring contribution to K_ff.
func (lo *layout) eachEntry(add func(p, q int, v float64)) {
	d := lo.dim
	dofs := make([]int, 2*d)
	bv := make([]float64, 2*d)
	for e := range lo.mem {
		lo.memberDofs(e, dofs, bv)
		k := lo.mem[e].k
		for p := 0; p < 2*d; p++ {
			if lo.kind[dofs[p]] != dofFree {
				continue
			}
			for q := p; q < 2*d; q++ {
				if lo.kind[dofs[q]] != dofFree {
					continue
				}
				if v := k * bv[p] * bv[q]; v != 0 || p == q {
					add(lo.index[dofs[p]], lo.index[dofs[q]], v)
				}
			}
		}
	}
	for n, sw := range lo.spring {
		if sw == nil {
			continue
		}
		for a := 0; a < d; a++ {
			if lo.kind[n*d+a] != dofFree {
				continue
			}
			for c := a; c < d; c++ {
				if lo.kind[n*d+c] != dofFree || sw[a][c] == 0 {
					continue
				}
				add(lo.index[n*d+a], lo.index[n*d+c], sw[a][c])
			}
		}
	}
}

// probeSolve checks the factor on a known solution: x0 pseudo-random,
// b = K x0, x = K^-1 b. A near-singular K amplifies the rounding of b by its
// condition number, so a relative error above 1e-6 (condition number of
// order 1e10 or more) is treated as a mechanism.
func (m *Model) probeSolve() bool {
	n := len(m.lo.free)
	x0 := make([]float64, n)
	seed := uint64(0x9E3779B97F4A7C15)
	for i := range x0 {
		seed ^= seed << 13
		seed ^= seed >> 7
		seed ^= seed << 17
		x0[i] = float64(seed>>11)/float64(1<<53) - 0.5
	}
	b := make([]float64, n)
	m.k.MulVec(b, x0)
	x := make([]float64, n)
	m.chol.Solve(x, b)
	var num, den float64
	for i := range x {
		if !finite(x[i]) {
			return false
		}
		num += (x[i] - x0[i]) * (x[i] - x0[i])
		den += x0[i] * x0[i]
	}
	return math.Sqrt(num/den) < 1e-6
}

// countDeterminacy counts members, reactions (restrained directions plus
// spring directions) and joints.
func countDeterminacy(s *Structure, lo *layout) Determinacy {
	r := len(lo.rest)
	for _, sp := range s.Supports {
		for k := 0; k < s.Dim; k++ {
			if sp.Spring[k] > 0 {
				r++
			}
		}
	}
	d := Determinacy{Members: len(s.Members), Reactions: r, Joints: len(s.Nodes)}
	d.ByCounting = d.Members + d.Reactions - s.Dim*d.Joints
	return d
}

// finish sets the rank-based figures from the number of mechanisms found
// (a lower bound when partial).
func (d *Determinacy) finish(mechanisms int, partial bool) {
	d.Mechanisms = mechanisms
	d.ByRank = d.ByCounting + mechanisms
	d.Stable = mechanisms == 0
	want := 0
	if d.ByCounting < 0 {
		want = -d.ByCounting
	}
	d.Agree = mechanisms == want
	switch {
	case d.Stable && d.ByRank == 0:
		d.Note = "statically determinate and stable; counting and rank agree"
	case d.Stable:
		d.Note = fmt.Sprintf("stable, statically indeterminate to degree %d; counting and rank agree", d.ByRank)
	case d.ByCounting >= 0:
		d.Note = fmt.Sprintf("counting gives %d (enough members and reactions) but the rank shows %d mechanism(s): members are badly placed; static indeterminacy by rank %d", d.ByCounting, mechanisms, d.ByRank)
	case d.Agree:
		d.Note = fmt.Sprintf("unstable: %d member(s) or reaction(s) short by counting, %d mechanism(s) by rank", -d.ByCounting, mechanisms)
	default:
		d.Note = fmt.Sprintf("unstable: counting says %d short, but the rank shows %d mechanism(s)", -d.ByCounting, mechanisms)
	}
	if partial {
		d.Note += " (mechanism count is a lower bound: the model is too large for a full null-space computation)"
	}
}
