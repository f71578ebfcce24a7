package model

import (
	"fmt"
	"math"
)

// MaxCoordinateM is the largest node coordinate magnitude Validate accepts,
// in metres (1000 km). Beyond it no truss is plausible, and in float64 the
// rounding of a coordinate (about 1e-16 of it) would reach the size of real
// member lengths, so that distinct nodes could appear to coincide.
const MaxCoordinateM = 1e6

// Plausibility bounds on the size of a truss, common practice: the longest
// truss members built are tens of metres and the largest truss spans a few
// hundred metres; members shorter than 10 mm and sites wider than a few
// kilometres are typing or unit mistakes far more often than real. A value
// beyond them is warned about, not refused.
const (
	// PlausibleMaxMemberM is the longest plausible member, in metres.
	PlausibleMaxMemberM = 300.0
	// PlausibleMinMemberM is the shortest plausible member, in metres.
	PlausibleMinMemberM = 0.01
	// PlausibleMaxCoordinateM is the largest plausible coordinate
	// magnitude, in metres.
	PlausibleMaxCoordinateM = 5000.0
)

// Geometry summarises the size of a structure: extents, the shortest and
// longest member, the total self-weight, and warnings on implausible sizes.
type Geometry struct {
	// Min and Max are the smallest and largest node coordinates per axis, m.
	Min, Max [3]float64
	// Shortest and Longest are member indices (-1 without members);
	// ShortestM and LongestM their lengths in metres.
	Shortest, Longest   int
	ShortestM, LongestM float64
	// SelfWeightN is the total weight of the members, sum density A L g,
	// in newtons; NoDensity counts members without a density (not included).
	SelfWeightN float64
	NoDensity   int
	// Warnings name each implausible size with the bound it exceeds.
	Warnings []string
}

// Measure returns the geometry summary of a validated structure.
func Measure(s *Structure) Geometry {
	g := Geometry{Shortest: -1, Longest: -1}
	for i, n := range s.Nodes {
		for k := 0; k < 3; k++ {
			if i == 0 || n.X[k] < g.Min[k] {
				g.Min[k] = n.X[k]
			}
			if i == 0 || n.X[k] > g.Max[k] {
				g.Max[k] = n.X[k]
			}
		}
		if c := maxAbs3(n.X); c > PlausibleMaxCoordinateM {
			g.Warnings = append(g.Warnings, fmt.Sprintf("node %s: coordinate %g m is beyond %g m (%g km) from the origin; is the length unit right?", n.ID, c, PlausibleMaxCoordinateM, PlausibleMaxCoordinateM/1e3))
		}
	}
	for e, mb := range s.Members {
		l := MemberLength(s, e)
		if g.Shortest < 0 || l < g.ShortestM {
			g.Shortest, g.ShortestM = e, l
		}
		if g.Longest < 0 || l > g.LongestM {
			g.Longest, g.LongestM = e, l
		}
		if mb.Density > 0 {
			g.SelfWeightN += mb.Density * mb.A * l * StandardGravity
		} else {
			g.NoDensity++
		}
		switch {
		case l > PlausibleMaxMemberM:
			g.Warnings = append(g.Warnings, fmt.Sprintf("member %s: length %.3f m is longer than %g m; is the length unit right (a node at 8000 meant as mm)?", mb.ID, l, PlausibleMaxMemberM))
		case l < PlausibleMinMemberM:
			g.Warnings = append(g.Warnings, fmt.Sprintf("member %s: length %.6f m is shorter than %g m (%g mm); is the length unit right?", mb.ID, l, PlausibleMinMemberM, PlausibleMinMemberM*1e3))
		}
	}
	return g
}

// MemberLength returns the length of member e in metres.
func MemberLength(s *Structure, e int) float64 {
	a, b := s.Nodes[s.Members[e].I].X, s.Nodes[s.Members[e].J].X
	return norm3([3]float64{b[0] - a[0], b[1] - a[1], b[2] - a[2]})
}

func maxAbs3(x [3]float64) float64 {
	return math.Max(math.Abs(x[0]), math.Max(math.Abs(x[1]), math.Abs(x[2])))
}
