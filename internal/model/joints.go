package model

import (
	"fmt"
	"math"
	"strings"
)

// JointsResult is the solution of a statically determinate plane truss by
// the method of joints.
type JointsResult struct {
	// Forces are the member forces in newtons, tension positive.
	Forces []float64
	// Reactions are the support reactions, one per support node, global axes.
	Reactions []Reaction
	// Order lists the joints in the order they were solved; "(global)" marks
	// the reactions found first from the equilibrium of the whole truss.
	Order []string
	// MaxResidualN is the largest force left over at any joint once every
	// force is known (the consistency check of the hand method).
	MaxResidualN float64
}

// StuckError reports that the method of joints found no joint with at most
// two unknown forces (the truss is indeterminate, unstable, or needs the
// method of sections).
type StuckError struct {
	// Structure is the structure's name.
	Structure string
	// Solved are the joints solved before getting stuck.
	Solved []string
	// Remaining lists the unsolved joints with their number of unknowns.
	Remaining []string
}

// Error says where the method stopped and what to do.
func (e *StuckError) Error() string {
	rem := e.Remaining
	if len(rem) > 8 {
		rem = append(append([]string(nil), rem[:8]...), fmt.Sprintf("... (%d joints)", len(e.Remaining)))
	}
	return fmt.Sprintf("structure %q: method of joints stuck after %d joint(s): no joint has at most two unknown forces (%s); the truss is indeterminate or unstable, or needs the method of sections", e.Structure, len(e.Solved), strings.Join(rem, ", "))
}

// jointUnknown is one unknown force: a member force (tension positive) or a
// support reaction along a fixed direction.
type jointUnknown struct {
	member int        // member index, or -1 for a reaction
	node   int        // reaction node
	dir    [3]float64 // reaction direction (unit)
	known  bool
	value  float64
}

// SolveByJoints solves a statically determinate plane truss under the
// combination f of load patterns by the method of joints, independently of
// the stiffness method: reactions first from the equilibrium of the whole
// truss when there are exactly three reaction components (a pin and a
// roller), then joint by joint, each time a joint with at most two unknown
// forces, solving its two equilibrium equations sum Fx = 0, sum Fy = 0.
// Nodal forces and self-weight act; temperature changes and settlements
// cause no member forces in a determinate truss and are ignored. Elastic
// springs make a truss's forces depend on stiffness, so they are rejected.
func SolveByJoints(s *Structure, f []Factor) (*JointsResult, error) {
	if err := Validate(s); err != nil {
		return nil, err
	}
	if s.Dim != 2 {
		return nil, fmt.Errorf("structure %q: the method of joints here is for plane trusses; this one has dimension %d", s.Name, s.Dim)
	}
	var unk []jointUnknown
	for e := range s.Members {
		unk = append(unk, jointUnknown{member: e})
	}
	nr := 0
	for _, sp := range s.Supports {
		if sp.Spring != [3]float64{} {
			return nil, fmt.Errorf("structure %q: node %s has a spring support; the method of joints needs rigid supports", s.Name, s.Nodes[sp.Node].ID)
		}
		if sp.Normal != nil {
			n := *sp.Normal
			n[2] = 0
			l := norm3(n)
			unk = append(unk, jointUnknown{member: -1, node: sp.Node, dir: [3]float64{n[0] / l, n[1] / l, 0}})
			nr++
			continue
		}
		for k := 0; k < 2; k++ {
			if sp.Fixed[k] {
				unk = append(unk, jointUnknown{member: -1, node: sp.Node, dir: unitAxis(k)})
				nr++
			}
		}
	}
	// Applied loads per node.
	load := make([][3]float64, len(s.Nodes))
	grav := gravityOf(s)
	var scale float64
	for _, fa := range f {
		pi, ok := s.PatternIndex(fa.Pattern)
		if !ok {
			return nil, fmt.Errorf("structure %q: unknown load pattern %q", s.Name, fa.Pattern)
		}
		p := &s.Patterns[pi]
		for _, fo := range p.Forces {
			for k := 0; k < 2; k++ {
				load[fo.Node][k] += fa.Factor * fo.F[k]
			}
		}
		if p.SelfWeight != 0 {
			for _, mb := range s.Members {
				l := memberLength(s, mb)
				w := 0.5 * mb.Density * mb.A * l * StandardGravity * p.SelfWeight * fa.Factor
				for k := 0; k < 2; k++ {
					load[mb.I][k] += w * grav[k]
					load[mb.J][k] += w * grav[k]
				}
			}
		}
	}
	for _, l := range load {
		scale = math.Max(scale, math.Max(math.Abs(l[0]), math.Abs(l[1])))
	}
	// atNode lists the unknowns acting at each joint with their direction
	// (the force on the joint per unit value).
	type term struct {
		u   int
		dir [2]float64
	}
	atNode := make([][]term, len(s.Nodes))
	for ui, u := range unk {
		if u.member >= 0 {
			mb := s.Members[u.member]
			l := memberLength(s, mb)
			dx := (s.Nodes[mb.J].X[0] - s.Nodes[mb.I].X[0]) / l
			dy := (s.Nodes[mb.J].X[1] - s.Nodes[mb.I].X[1]) / l
			// Tension pulls each end towards the other.
			atNode[mb.I] = append(atNode[mb.I], term{ui, [2]float64{dx, dy}})
			atNode[mb.J] = append(atNode[mb.J], term{ui, [2]float64{-dx, -dy}})
		} else {
			atNode[u.node] = append(atNode[u.node], term{ui, [2]float64{u.dir[0], u.dir[1]}})
		}
	}
	res := &JointsResult{}
	// Reactions from the equilibrium of the whole truss (pin and roller).
	if nr == 3 {
		var a [3][3]float64
		var b [3]float64
		col := 0
		var idx [3]int
		for ui, u := range unk {
			if u.member >= 0 {
				continue
			}
			x, y := s.Nodes[u.node].X[0], s.Nodes[u.node].X[1]
			a[0][col], a[1][col], a[2][col] = u.dir[0], u.dir[1], x*u.dir[1]-y*u.dir[0]
			idx[col] = ui
			col++
		}
		for n, l := range load {
			x, y := s.Nodes[n].X[0], s.Nodes[n].X[1]
			b[0] -= l[0]
			b[1] -= l[1]
			b[2] -= x*l[1] - y*l[0]
		}
		if sol, ok := solve3(a, b); ok {
			for c := 0; c < 3; c++ {
				unk[idx[c]].known, unk[idx[c]].value = true, sol[c]
			}
			res.Order = append(res.Order, "(global)")
		}
	}
	done := make([]bool, len(s.Nodes))
	remaining := len(s.Nodes)
	for remaining > 0 {
		progress := false
		for n := range s.Nodes {
			if done[n] {
				continue
			}
			var free []term
			r := [2]float64{load[n][0], load[n][1]} // known forces on the joint
			for _, t := range atNode[n] {
				if unk[t.u].known {
					r[0] += unk[t.u].value * t.dir[0]
					r[1] += unk[t.u].value * t.dir[1]
				} else {
					free = append(free, t)
				}
			}
			switch len(free) {
			case 0:
			case 1:
				// One unknown, two equations: least squares; the other
				// component is checked by the final residual.
				d := free[0].dir
				unk[free[0].u].value = -(r[0]*d[0] + r[1]*d[1]) / (d[0]*d[0] + d[1]*d[1])
				unk[free[0].u].known = true
			case 2:
				a, c := free[0].dir, free[1].dir
				det := a[0]*c[1] - a[1]*c[0]
				if math.Abs(det) < 1e-9 {
					continue // collinear unknowns: try another joint first
				}
				// a x + c y = -r (Cramer's rule).
				x := (-r[0]*c[1] + r[1]*c[0]) / det
				y := (-a[0]*r[1] + a[1]*r[0]) / det
				unk[free[0].u].value, unk[free[0].u].known = x, true
				unk[free[1].u].value, unk[free[1].u].known = y, true
			default:
				continue
			}
			done[n] = true
			remaining--
			progress = true
			res.Order = append(res.Order, s.Nodes[n].ID)
		}
		if !progress {
			e := &StuckError{Structure: s.Name}
			for n := range s.Nodes {
				if done[n] {
					e.Solved = append(e.Solved, s.Nodes[n].ID)
					continue
				}
				c := 0
				for _, t := range atNode[n] {
					if !unk[t.u].known {
						c++
					}
				}
				e.Remaining = append(e.Remaining, fmt.Sprintf("%s: %d unknowns", s.Nodes[n].ID, c))
			}
			return nil, e
		}
	}
	res.Forces = make([]float64, len(s.Members))
	for _, u := range unk {
		if u.member >= 0 {
			res.Forces[u.member] = u.value
		}
	}
	reac := map[int]*Reaction{}
	for _, sp := range s.Supports {
		res.Reactions = append(res.Reactions, Reaction{Node: sp.Node, ID: s.Nodes[sp.Node].ID})
	}
	for i := range res.Reactions {
		reac[res.Reactions[i].Node] = &res.Reactions[i]
	}
	for _, u := range unk {
		if u.member < 0 {
			for k := 0; k < 2; k++ {
				reac[u.node].Force[k] += u.value * u.dir[k]
			}
		}
	}
	for n := range s.Nodes {
		r := [2]float64{load[n][0], load[n][1]}
		for _, t := range atNode[n] {
			r[0] += unk[t.u].value * t.dir[0]
			r[1] += unk[t.u].value * t.dir[1]
		}
		res.MaxResidualN = math.Max(res.MaxResidualN, math.Max(math.Abs(r[0]), math.Abs(r[1])))
	}
	return res, nil
}

func memberLength(s *Structure, mb Member) float64 {
	var d [3]float64
	for k := 0; k < 3; k++ {
		d[k] = s.Nodes[mb.J].X[k] - s.Nodes[mb.I].X[k]
	}
	return norm3(d)
}

// solve3 solves a 3x3 system by Cramer's rule; ok is false when it is
// singular (relative to the size of its entries).
func solve3(a [3][3]float64, b [3]float64) ([3]float64, bool) {
	det := func(m [3][3]float64) float64 {
		return m[0][0]*(m[1][1]*m[2][2]-m[1][2]*m[2][1]) -
			m[0][1]*(m[1][0]*m[2][2]-m[1][2]*m[2][0]) +
			m[0][2]*(m[1][0]*m[2][1]-m[1][1]*m[2][0])
	}
	d := det(a)
	var sc float64
	for r := 0; r < 3; r++ {
		for c := 0; c < 3; c++ {
			sc = math.Max(sc, math.Abs(a[r][c]))
		}
	}
	if math.Abs(d) <= 1e-12*sc*sc*sc {
		return [3]float64{}, false
	}
	var x [3]float64
	for c := 0; c < 3; c++ {
		m := a
		for r := 0; r < 3; r++ {
			m[r][c] = b[r]
		}
		x[c] = det(m) / d
	}
	return x, true
}
