package model

import (
	"errors"
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/sparse"
)

// denseNullLimit is the largest number of free DOFs for which the null space
// of the stiffness matrix is computed by a dense symmetric eigen
// decomposition (pure Go: about 30 s at 1400 DOF, so kept small); beyond it
// the free motions come from restraining the DOFs where the sparse Cholesky
// pivot failed.
const denseNullLimit = 300

// nullRatio is the eigenvalue ratio (to the largest) below which a motion is
// counted as free.
const nullRatio = 1e-9

// mechanism builds the *MechanismError for a model whose factorisation
// failed at free index pivot (-1 when the factor succeeded but the probe
// solve showed near-singularity).
func (m *Model) mechanism(pivot int) error {
	nf := len(m.lo.free)
	e := &MechanismError{Structure: m.s.Name}
	if nf <= denseNullLimit {
		e.Motions = m.denseNullSpace()
	}
	if len(e.Motions) == 0 {
		e.Motions, e.Partial = m.pivotMotions(pivot)
	}
	m.det.finish(len(e.Motions), e.Partial)
	e.Determinacy = m.det
	return e
}

// denseNullSpace returns a basis of the null space of K_ff from its
// symmetric eigen decomposition: eigenvectors whose eigenvalue is below
// nullRatio times the largest; if none is (a near-singular but not singular
// matrix), the weakest eigenvector. It returns nil if the decomposition
// fails.
func (m *Model) denseNullSpace() []FreeMotion {
	nf := len(m.lo.free)
	k := mat.NewSymDense(nf, nil)
	m.lo.eachEntry(func(p, q int, v float64) {
		if p > q {
			p, q = q, p
		}
		k.SetSym(p, q, k.At(p, q)+v)
	})
	var eig mat.EigenSym
	if !eig.Factorize(k, true) {
		return nil // the caller falls back to the sparse path
	}
	vals := eig.Values(nil)
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	lmax := math.Abs(vals[len(vals)-1])
	if lmax == 0 {
		lmax = 1
	}
	var out []FreeMotion
	for i, l := range vals {
		if l > nullRatio*lmax {
			break
		}
		fm := m.describe(mat.Col(nil, i, &vecs))
		fm.Ratio = math.Max(l, 0) / lmax
		out = append(out, fm)
	}
	if len(out) == 0 {
		// No exact null vector (near-singular): report the weakest motion.
		fm := m.describe(mat.Col(nil, 0, &vecs))
		fm.Ratio = vals[0] / lmax
		out = append(out, fm)
	}
	return out
}

// pivotMotions finds the free motions by refactoring with a restraint of
// stiffness kappa (the largest diagonal entry) at each DOF where the
// Cholesky pivot failed: each such restraint removes exactly one null
// direction. Once the restrained matrix K' = K + kappa sum e_p e_p^T
// factors, the solutions of K' x_p = e_p lie exactly in the null space of K
// (K' v / kappa = e_p for a null vector v with v_p = 1), so they are a basis
// of the free motions. At most maxRounds refactorisations are made; beyond
// that the list is partial. When the factorisation succeeded but the probe
// solve failed (near-singular), inverse iteration gives the weakest motion.
func (m *Model) pivotMotions(pivot int) ([]FreeMotion, bool) {
	if pivot < 0 {
		return []FreeMotion{m.inverseIteration()}, false
	}
	nf := len(m.lo.free)
	maxRounds := 100
	if nf > 20000 {
		maxRounds = 8
	}
	var kappa float64
	m.lo.eachEntry(func(p, q int, v float64) {
		if p == q {
			kappa = math.Max(kappa, v)
		}
	})
	if kappa == 0 {
		kappa = 1
	}
	var pins []int
	pinned := map[int]bool{}
	partial := false
	var ch *sparse.Cholesky
	for round := 0; ; round++ {
		if pivot < 0 || pivot >= nf || pinned[pivot] || round == maxRounds {
			partial = true
			break
		}
		pinned[pivot] = true
		pins = append(pins, pivot)
		b := sparse.NewBuilder(nf)
		m.lo.eachEntry(func(p, q int, v float64) { b.Add(p, q, v) })
		for _, p := range pins {
			b.Add(p, p, kappa)
		}
		var err error
		ch, err = sparse.Factorize(b.Matrix(), sparse.Options{})
		if err == nil {
			break
		}
		var npd *sparse.NotPositiveDefiniteError
		if !errors.As(err, &npd) {
			partial = true
			break
		}
		pivot = npd.Index
	}
	out := make([]FreeMotion, 0, len(pins))
	e := make([]float64, nf)
	x := make([]float64, nf)
	for _, p := range pins {
		var fm FreeMotion
		if ch != nil && !partial {
			clear(e)
			e[p] = 1
			ch.Solve(x, e)
			fm = m.describe(x)
		}
		if len(fm.Nodes) == 0 {
			// No factor to solve with: report the failed DOF itself.
			w := m.lo.free[p]
			n := w / m.lo.dim
			fm = FreeMotion{Nodes: []NodeMotion{{Node: n, ID: m.s.Nodes[n].ID, Dir: m.lo.toGlobal(n, unitAxis(w%m.lo.dim))}}, Moving: 1, Dim: m.lo.dim}
		}
		fm.PivotDOF = m.lo.dofLabel(m.s, m.lo.free[p])
		out = append(out, fm)
	}
	return out, partial
}

// inverseIteration returns the weakest motion of the factored K_ff by three
// steps of inverse iteration from a fixed start vector.
func (m *Model) inverseIteration() FreeMotion {
	nf := len(m.lo.free)
	x := make([]float64, nf)
	for i := range x {
		x[i] = 1 + 0.1*float64(i%7)
	}
	y := make([]float64, nf)
	for it := 0; it < 3; it++ {
		m.chol.Solve(y, x)
		var mx float64
		for _, v := range y {
			if finite(v) {
				mx = math.Max(mx, math.Abs(v))
			}
		}
		if mx == 0 {
			break
		}
		for i, v := range y {
			if !finite(v) {
				v = 0
			}
			x[i] = v / mx
		}
	}
	return m.describe(x)
}

func unitAxis(a int) [3]float64 {
	var v [3]float64
	v[a] = 1
	return v
}

// describe turns a vector over the free DOFs into the node motions it
// represents (global directions, largest first, scaled to unit maximum;
// nodes moving less than 1e-3 of the largest are left out).
func (m *Model) describe(v []float64) FreeMotion {
	d := m.lo.dim
	w := make([]float64, d*m.lo.nn)
	for i, dof := range m.lo.free {
		w[dof] = v[i]
	}
	type nm struct {
		n   int
		u   [3]float64
		mag float64
	}
	var all []nm
	var mx float64
	for n := 0; n < m.lo.nn; n++ {
		var wn [3]float64
		copy(wn[:d], w[n*d:n*d+d])
		u := m.lo.toGlobal(n, wn)
		l := norm3(u)
		all = append(all, nm{n, u, l})
		mx = math.Max(mx, l)
	}
	if mx == 0 {
		return FreeMotion{}
	}
	sort.SliceStable(all, func(a, b int) bool { return all[a].mag > all[b].mag })
	fm := FreeMotion{Dim: d}
	for _, a := range all {
		if a.mag < 1e-3*mx {
			break
		}
		fm.Moving++
		if len(fm.Nodes) < 20 {
			var dir [3]float64
			for k := range dir {
				dir[k] = roundSmall(a.u[k] / mx)
			}
			fm.Nodes = append(fm.Nodes, NodeMotion{Node: a.n, ID: m.s.Nodes[a.n].ID, Dir: dir})
		}
	}
	return fm
}

// roundSmall sets values below 1e-9 in magnitude to zero for readability.
func roundSmall(x float64) float64 {
	if math.Abs(x) < 1e-9 {
		return 0
	}
	return x
}
