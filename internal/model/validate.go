package model

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// Problem is one thing wrong with a Structure, with the place it was
// declared (Line is 0 for structures built in code).
type Problem struct {
	// Line is the source line of the offending declaration, 0 if unknown.
	Line int
	// Field names the offending item, for example "members[3] (B4).E".
	Field string
	// Msg says what is wrong and what to do.
	Msg string
}

// String formats the problem as "file:line: field: message".
func (p Problem) String() string {
	var b strings.Builder
	if p.Line > 0 {
		fmt.Fprintf(&b, "line %d: ", p.Line)
	}
	if p.Field != "" {
		b.WriteString(p.Field)
		b.WriteString(": ")
	}
	b.WriteString(p.Msg)
	return b.String()
}

// ValidationError lists every problem found in a Structure before analysis.
type ValidationError struct {
	// File is the structure's source file, if any.
	File string
	// Problems are all problems found, in declaration order.
	Problems []Problem
}

// Error lists all problems, one per line.
func (e *ValidationError) Error() string {
	var b strings.Builder
	name := e.File
	if name == "" {
		name = "structure"
	}
	fmt.Fprintf(&b, "%s: %d problem(s) in the truss model:", name, len(e.Problems))
	for _, p := range e.Problems {
		b.WriteString("\n  ")
		if e.File != "" && p.Line > 0 {
			fmt.Fprintf(&b, "%s:%d: ", e.File, p.Line)
			p.Line = 0
		}
		b.WriteString(p.String())
	}
	return b.String()
}

// finite reports whether every value is neither NaN nor infinite.
func finite(v ...float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}

// Validate checks a structure built in code or read from a file for the
// model-level conditions the mechanics rely on: dimension, finite
// coordinates, member ends in range and distinct, non-zero member length,
// positive E and A, valid supports, loads that refer to existing nodes and
// members, settlements only on restrained directions, and cases that refer to
// existing patterns. It returns a *ValidationError listing every problem, or
// nil.
func Validate(s *Structure) error {
	if s == nil {
		return &ValidationError{Problems: []Problem{{Msg: "no structure given"}}}
	}
	v := &ValidationError{File: s.File}
	add := func(line int, field, format string, a ...any) {
		v.Problems = append(v.Problems, Problem{Line: line, Field: field, Msg: fmt.Sprintf(format, a...)})
	}
	if s.Dim != 2 && s.Dim != 3 {
		add(0, "dimension", "must be 2 (plane truss) or 3 (space truss), got %d", s.Dim)
		return v
	}
	if len(s.Nodes) == 0 {
		add(0, "nodes", "the structure has no nodes; declare at least two joints")
	}
	if !finite(s.Gravity[:]...) {
		add(0, "gravity", "direction is not a finite vector: %v", s.Gravity)
	}
	scale := 0.0
	badNode := make([]bool, len(s.Nodes))
	for i, n := range s.Nodes {
		f := fmt.Sprintf("nodes[%d] (%s)", i, n.ID)
		if !finite(n.X[:]...) {
			add(n.Line, f, "coordinates %v are not finite numbers", n.X)
			badNode[i] = true
			continue
		}
		if c := maxAbs3(n.X); c > MaxCoordinateM {
			add(n.Line, f, "coordinate %g m is beyond the valid range of +-%g m (%g km): no truss is that large and lengths would be lost to rounding; check the number and the file's length unit", c, MaxCoordinateM, MaxCoordinateM/1e3)
			badNode[i] = true
			continue
		}
		if s.Dim == 2 && n.X[2] != 0 {
			add(n.Line, f, "z = %g in a plane truss; give only x and y or declare dimension 3", n.X[2])
		}
		for k := 0; k < 3; k++ {
			scale = math.Max(scale, math.Abs(n.X[k]))
		}
	}
	nodeOK := func(i int) bool { return i >= 0 && i < len(s.Nodes) }
	for i, m := range s.Members {
		f := fmt.Sprintf("members[%d] (%s)", i, m.ID)
		if !nodeOK(m.I) || !nodeOK(m.J) {
			add(m.Line, f, "end node index out of range (I=%d, J=%d, %d nodes)", m.I, m.J, len(s.Nodes))
			continue
		}
		if m.I == m.J {
			add(m.Line, f, "both ends at the same node %s; a member joins two different joints", s.Nodes[m.I].ID)
		} else if !badNode[m.I] && !badNode[m.J] {
			var d [3]float64
			for k := 0; k < 3; k++ {
				d[k] = s.Nodes[m.J].X[k] - s.Nodes[m.I].X[k]
			}
			if l := norm3(d); finite(l) && l <= 1e-9*math.Max(scale, 1) {
				add(m.Line, f, "zero length: nodes %s and %s coincide; remove the member or move a node", s.Nodes[m.I].ID, s.Nodes[m.J].ID)
			}
		}
		if !finite(m.E) || m.E <= 0 {
			add(m.Line, f+".E", "modulus must be a positive finite number of Pa, got %g", m.E)
		}
		if !finite(m.A) || m.A <= 0 {
			add(m.Line, f+".A", "area must be a positive finite number of m2, got %g", m.A)
		}
		if !finite(m.Alpha) {
			add(m.Line, f+".Alpha", "thermal coefficient is not finite: %g", m.Alpha)
		}
		if !finite(m.Density) || m.Density < 0 {
			add(m.Line, f+".Density", "density must be zero or a positive finite number of kg/m3, got %g", m.Density)
		}
	}
	seen := map[int]int{}
	for i, sp := range s.Supports {
		f := fmt.Sprintf("supports[%d]", i)
		if !nodeOK(sp.Node) {
			add(sp.Line, f, "node index %d out of range (%d nodes)", sp.Node, len(s.Nodes))
			continue
		}
		f = fmt.Sprintf("supports[%d] (%s)", i, s.Nodes[sp.Node].ID)
		if prev, dup := seen[sp.Node]; dup {
			add(sp.Line, f, "node already has a support (supports[%d]); put all its restraints in one entry", prev)
		}
		seen[sp.Node] = i
		for k := s.Dim; k < 3; k++ {
			if sp.Fixed[k] || sp.Spring[k] != 0 {
				add(sp.Line, f, "restraint in z in a plane truss")
			}
		}
		if sp.Normal != nil {
			nv := *sp.Normal
			if s.Dim == 2 {
				nv[2] = 0
			}
			if !finite(nv[:]...) || norm3(nv) == 0 {
				add(sp.Line, f+".Normal", "inclined roller normal %v must be a finite non-zero vector", *sp.Normal)
			}
			if sp.Fixed != [3]bool{} {
				add(sp.Line, f, "an inclined roller cannot also fix axes; use either Fixed or Normal")
			}
		}
		for k := 0; k < 3; k++ {
			if !finite(sp.Spring[k]) || sp.Spring[k] < 0 {
				add(sp.Line, f+".Spring", "spring stiffness must be zero or positive finite N/m, got %g", sp.Spring[k])
			}
			if sp.Fixed[k] && sp.Spring[k] != 0 {
				add(sp.Line, f+".Spring", "%s is both fixed and on a spring; use one", axisLabel(k))
			}
		}
	}
	gnames := make([]string, 0, len(s.Groups))
	for g := range s.Groups {
		gnames = append(gnames, g)
	}
	sort.Strings(gnames)
	for _, gname := range gnames {
		for _, mi := range s.Groups[gname] {
			if mi < 0 || mi >= len(s.Members) {
				add(0, "groups."+gname, "member index %d out of range (%d members)", mi, len(s.Members))
			}
		}
	}
	for pi, p := range s.Patterns {
		pf := fmt.Sprintf("patterns[%d] (%s)", pi, p.Name)
		if !finite(p.SelfWeight) {
			add(p.Line, pf+".SelfWeight", "factor is not finite")
		}
		for _, fo := range p.Forces {
			if !nodeOK(fo.Node) {
				add(fo.Line, pf+".Forces", "node index %d out of range", fo.Node)
			} else if !finite(fo.F[:]...) {
				add(fo.Line, pf+".Forces", "force %v at %s is not finite", fo.F, s.Nodes[fo.Node].ID)
			} else if s.Dim == 2 && fo.F[2] != 0 {
				add(fo.Line, pf+".Forces", "force in z at %s in a plane truss", s.Nodes[fo.Node].ID)
			}
		}
		for _, t := range p.Temperatures {
			if t.Member < 0 || t.Member >= len(s.Members) {
				add(t.Line, pf+".Temperatures", "member index %d out of range", t.Member)
			} else if !finite(t.DeltaK) {
				add(t.Line, pf+".Temperatures", "temperature change of %s is not finite", s.Members[t.Member].ID)
			}
		}
		for _, st := range p.Settlements {
			if !nodeOK(st.Node) {
				add(st.Line, pf+".Settlements", "node index %d out of range", st.Node)
				continue
			}
			si, ok := seen[st.Node]
			if !ok {
				add(st.Line, pf+".Settlements", "node %s has no support; a prescribed displacement needs a restraint", s.Nodes[st.Node].ID)
				continue
			}
			if !finite(st.D[:]...) {
				add(st.Line, pf+".Settlements", "displacement at %s is not finite", s.Nodes[st.Node].ID)
				continue
			}
			sp := s.Supports[si]
			if sp.Normal != nil {
				if st.D[1] != 0 || st.D[2] != 0 {
					add(st.Line, pf+".Settlements", "node %s is an inclined roller: give the settlement along the normal in D[0] only", s.Nodes[st.Node].ID)
				}
				continue
			}
			for k := 0; k < 3; k++ {
				if st.D[k] != 0 && !sp.Fixed[k] {
					add(st.Line, pf+".Settlements", "node %s is not fixed in %s; a settlement needs a fixed direction", s.Nodes[st.Node].ID, axisLabel(k))
				}
			}
		}
	}
	for ci, c := range s.Cases {
		for _, fa := range c.Factors {
			if !s.HasPattern(fa.Pattern) {
				add(c.Line, fmt.Sprintf("cases[%d] (%s)", ci, c.Name), "unknown load pattern %q", fa.Pattern)
			} else if !finite(fa.Factor) {
				add(c.Line, fmt.Sprintf("cases[%d] (%s)", ci, c.Name), "factor of %q is not finite", fa.Pattern)
			}
		}
	}
	if len(v.Problems) > 0 {
		return v
	}
	return nil
}

// axisLabel names global axis k (0, 1, 2) as "x", "y" or "z".
func axisLabel(k int) string { return "xyz"[k : k+1] }

func norm3(v [3]float64) float64 { return math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2]) }
