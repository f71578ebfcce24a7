package model

import (
	"fmt"
	"math"
)

// Working coordinates. Every node carries Dim translational degrees of
// freedom. A node on an inclined roller has its DOFs expressed in a local
// orthonormal basis whose first axis is the roller's normal (so the normal
// displacement is a single restrained DOF, exactly, without a penalty); every
// other node uses the global axes. For a node with rotation T (rows = local
// axes in global coordinates) the working displacement is w = T u and the
// global one u = T^T w.

// dofKind says how a working DOF is treated.
type dofKind int8

const (
	dofFree dofKind = iota
	dofRestrained
)

// memberGeom is a member's geometry in working coordinates.
type memberGeom struct {
	i, j int        // node indices
	l    float64    // length, m
	c    [3]float64 // global unit vector from i to j
	bi   [3]float64 // T_i c: elongation = bj.w_j - bi.w_i
	bj   [3]float64 // T_j c
	k    float64    // axial stiffness E A / L, N/m
	ea   float64    // E A, N
	eaa  float64    // E A alpha, N/K
}

// layout numbers the DOFs of a structure and holds its member geometry.
type layout struct {
	dim   int
	nn    int
	rot   []*[3][3]float64 // per node: local basis rows, nil for global axes
	kind  []dofKind        // per working DOF (node*dim + axis)
	index []int            // per working DOF: index among free or among restrained DOFs
	free  []int            // free index -> working DOF
	rest  []int            // restrained index -> working DOF
	// spring per node in working coordinates (dim x dim used), nil if none.
	spring []*[3][3]float64
	mem    []memberGeom
	// supportOf maps a node to its support index, -1 if none.
	supportOf []int
}

// rollerBasis returns an orthonormal basis whose first row is the unit
// normal n (Gram-Schmidt against the axis least aligned with n).
func rollerBasis(n [3]float64, dim int) [3][3]float64 {
	var t [3][3]float64
	l := norm3(n)
	for k := range n {
		n[k] /= l
	}
	t[0] = n
	if dim == 2 {
		t[1] = [3]float64{-n[1], n[0], 0}
		t[2] = [3]float64{0, 0, 1}
		return t
	}
	e := [3]float64{1, 0, 0}
	if math.Abs(n[1]) < math.Abs(n[0]) && math.Abs(n[1]) <= math.Abs(n[2]) {
		e = [3]float64{0, 1, 0}
	} else if math.Abs(n[2]) < math.Abs(n[0]) {
		e = [3]float64{0, 0, 1}
	}
	t1 := cross(n, e)
	l1 := norm3(t1)
	for k := range t1 {
		t1[k] /= l1
	}
	t[1] = t1
	t[2] = cross(n, t1)
	return t
}

func cross(a, b [3]float64) [3]float64 {
	return [3]float64{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}

func dot3(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

// toWorking returns T v for node n (v in global coordinates).
func (lo *layout) toWorking(n int, v [3]float64) [3]float64 {
	t := lo.rot[n]
	if t == nil {
		return v
	}
	return [3]float64{dot3(t[0], v), dot3(t[1], v), dot3(t[2], v)}
}

// toGlobal returns T^T w for node n (w in working coordinates).
func (lo *layout) toGlobal(n int, w [3]float64) [3]float64 {
	t := lo.rot[n]
	if t == nil {
		return w
	}
	var g [3]float64
	for r := 0; r < 3; r++ {
		for k := 0; k < 3; k++ {
			g[k] += t[r][k] * w[r]
		}
	}
	return g
}

// newLayout numbers the DOFs: restrained are fixed axes and inclined-roller
// normals; all others are free, numbered in node order.
func newLayout(s *Structure) *layout {
	d := s.Dim
	lo := &layout{dim: d, nn: len(s.Nodes)}
	lo.rot = make([]*[3][3]float64, lo.nn)
	lo.spring = make([]*[3][3]float64, lo.nn)
	lo.supportOf = make([]int, lo.nn)
	for i := range lo.supportOf {
		lo.supportOf[i] = -1
	}
	nd := d * lo.nn
	lo.kind = make([]dofKind, nd)
	lo.index = make([]int, nd)
	for si, sp := range s.Supports {
		n := sp.Node
		lo.supportOf[n] = si
		if sp.Normal != nil {
			nv := *sp.Normal
			if d == 2 {
				nv[2] = 0
			}
			t := rollerBasis(nv, d)
			lo.rot[n] = &t
			lo.kind[n*d] = dofRestrained
		} else {
			for k := 0; k < d; k++ {
				if sp.Fixed[k] {
					lo.kind[n*d+k] = dofRestrained
				}
			}
		}
		if sp.Spring != [3]float64{} {
			// S_w = T diag(k) T^T.
			var sw [3][3]float64
			for a := 0; a < d; a++ {
				for b := 0; b < d; b++ {
					for k := 0; k < d; k++ {
						ta, tb := unitRow(lo.rot[n], a, k), unitRow(lo.rot[n], b, k)
						sw[a][b] += ta * sp.Spring[k] * tb
					}
				}
			}
			lo.spring[n] = &sw
		}
	}
	for w := 0; w < nd; w++ {
		if lo.kind[w] == dofFree {
			lo.index[w] = len(lo.free)
			lo.free = append(lo.free, w)
		} else {
			lo.index[w] = len(lo.rest)
			lo.rest = append(lo.rest, w)
		}
	}
	lo.mem = make([]memberGeom, len(s.Members))
	for e, m := range s.Members {
		var dx [3]float64
		for k := 0; k < 3; k++ {
			dx[k] = s.Nodes[m.J].X[k] - s.Nodes[m.I].X[k]
		}
		l := norm3(dx)
		var c [3]float64
		for k := range c {
			c[k] = dx[k] / l
		}
		lo.mem[e] = memberGeom{
			i: m.I, j: m.J, l: l, c: c,
			bi: lo.toWorking(m.I, c), bj: lo.toWorking(m.J, c),
			k: m.E * m.A / l, ea: m.E * m.A, eaa: m.E * m.A * m.Alpha,
		}
	}
	return lo
}

// unitRow returns T[a][k] (identity when t is nil).
func unitRow(t *[3][3]float64, a, k int) float64 {
	if t == nil {
		if a == k {
			return 1
		}
		return 0
	}
	return t[a][k]
}

// dofs returns the 2*dim working DOFs of member e and the vector b_e (the
// elongation per unit working displacement): elongation = b_e . w.
func (lo *layout) memberDofs(e int, dofs []int, b []float64) {
	mg := &lo.mem[e]
	d := lo.dim
	for k := 0; k < d; k++ {
		dofs[k] = mg.i*d + k
		b[k] = -mg.bi[k]
		dofs[d+k] = mg.j*d + k
		b[d+k] = mg.bj[k]
	}
}

// elongation returns b_e . w for member e and the full working vector w.
func (lo *layout) elongation(e int, w []float64) float64 {
	mg := &lo.mem[e]
	d := lo.dim
	var s float64
	for k := 0; k < d; k++ {
		s += mg.bj[k]*w[mg.j*d+k] - mg.bi[k]*w[mg.i*d+k]
	}
	return s
}

// applyK adds K w to out (full working vectors), element by element plus
// springs: the direct stiffness method without a stored matrix.
func (lo *layout) applyK(w, out []float64) {
	d := lo.dim
	for e := range lo.mem {
		mg := &lo.mem[e]
		t := mg.k * lo.elongation(e, w)
		for k := 0; k < d; k++ {
			out[mg.i*d+k] -= t * mg.bi[k]
			out[mg.j*d+k] += t * mg.bj[k]
		}
	}
	for n, sw := range lo.spring {
		if sw == nil {
			continue
		}
		for a := 0; a < d; a++ {
			for b := 0; b < d; b++ {
				out[n*d+a] += sw[a][b] * w[n*d+b]
			}
		}
	}
}

// dofLabel names working DOF w: "U3 x" for a global axis, "U3 n" for an
// inclined roller's normal, "U3 t" / "U3 t1" / "U3 t2" for its tangents.
func (lo *layout) dofLabel(s *Structure, w int) string {
	n, a := w/lo.dim, w%lo.dim
	id := s.Nodes[n].ID
	if lo.rot[n] == nil {
		return id + " " + axisLabel(a)
	}
	switch {
	case a == 0:
		return id + " n"
	case lo.dim == 2:
		return id + " t"
	default:
		return fmt.Sprintf("%s t%d", id, a)
	}
}
