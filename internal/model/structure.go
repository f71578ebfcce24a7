// Package model holds the in-memory truss model (geometry, members, supports,
// load patterns and cases, all in SI units) and the mechanics on it: stiffness
// assembly by the direct stiffness method, the solver front end, reactions,
// equilibrium checks, determinacy and mechanism detection, influence matrices
// and the method of joints.
//
// Structure files are read by package structfile, which resolves units and
// produces a *Structure; everything in this package works in SI (N, m, Pa, K).
package model

import (
	"trussmonitor/internal/capacity"
	"trussmonitor/internal/units"
)

// Structure is a pin-jointed truss ready for analysis. All quantities are SI.
// Indices (Member.I, Support.Node, ...) refer to positions in Nodes and
// Members. Line fields carry the source line of the declaration (0 when the
// structure was built in code) so errors can name the place.
type Structure struct {
	// Name is the short identifier used in topics and metric labels
	// (for example "alder-creek").
	Name string
	// Title is a human-readable description.
	Title string
	// File is the path the structure was read from, if any.
	File string
	// Hash is the content hash of the source file (hex SHA-256), if any.
	Hash string
	// Units is the system of units the source file declared its default
	// units in (units.SI when built in code); reports use it by default.
	Units units.System
	// Dim is 2 for a plane truss (x, y) or 3 for a space truss (x, y, z).
	Dim int
	// Gravity is the unit vector of gravity; default -y in 2D, -z in 3D.
	Gravity [3]float64
	// Nodes are the joints.
	Nodes []Node
	// Members are the two-force members.
	Members []Member
	// Supports restrain node translations.
	Supports []Support
	// Groups maps a member group name to member indices (for temperature
	// groups and reporting).
	Groups map[string][]int
	// Patterns are the named load patterns.
	Patterns []Pattern
	// Cases are named combinations of patterns with factors.
	Cases []Case
	// Design is the design basis for member resistance (nil when the file
	// declares none: no resistance or utilisation is computed).
	Design *capacity.Design
	// DesignLine is the line of the design declaration.
	DesignLine int
}

// Node is a joint. X holds the coordinates in metres; X[2] is 0 in 2D.
type Node struct {
	ID   string
	X    [3]float64
	Line int
}

// Member is a straight two-force member between nodes I and J with axial
// stiffness E*A and thermal coefficient Alpha.
type Member struct {
	ID       string
	I, J     int
	Section  string
	Material string
	// E is the modulus of elasticity in Pa.
	E float64
	// A is the cross-section area in m^2.
	A float64
	// Alpha is the coefficient of thermal expansion in 1/K.
	Alpha float64
	// Density is the mass density in kg/m^3 (for self-weight).
	Density float64
	// Fy is the yield strength of the material in Pa (0 when not given).
	Fy float64
	// RadiusOfGyration is the section's radius of gyration about its
	// weaker axis in m (given, or sqrt(I/A) from the second moment; 0 when
	// neither is given).
	RadiusOfGyration float64
	// BucklingLength is the buckling length in m; 0 means BucklingFactor
	// times the member length.
	BucklingLength float64
	// BucklingFactor multiplies the member length when BucklingLength is
	// 0; 0 means 1.0.
	BucklingFactor float64
	// Curve is the EN 1993-1-1 buckling curve (member, else section;
	// 0 when not given).
	Curve capacity.Curve
	Line  int
}

// Support restrains translations of one node.
//
// Fixed[k] fixes translation k (x, y, z). Normal, when non-nil, makes the node
// a roller on an inclined plane (3D) or line (2D): the displacement component
// along the unit normal is zero and the node is free in the plane. Spring[k]
// adds an elastic restraint of that stiffness (N/m) in global direction k.
type Support struct {
	Node   int
	Fixed  [3]bool
	Normal *[3]float64
	Spring [3]float64
	Line   int
}

// NodalForce is a force in newtons applied at a node.
type NodalForce struct {
	Node int
	F    [3]float64
	Line int
}

// MemberTemperature is a uniform temperature change of one member in kelvin.
type MemberTemperature struct {
	Member int
	DeltaK float64
	Line   int
}

// Settlement is a prescribed displacement (metres) of a support node. Only
// components along restrained directions (fixed axes, or the normal of an
// inclined roller, given as the displacement along the normal in D[0]) act.
type Settlement struct {
	Node int
	D    [3]float64
	Line int
}

// Pattern is a named load pattern: nodal forces, self-weight, member
// temperature changes and prescribed support displacements, all per unit
// pattern factor.
type Pattern struct {
	Name string
	// Forces are nodal forces.
	Forces []NodalForce
	// SelfWeight multiplies the members' self-weight (density * A * L * g,
	// half to each end node, along Gravity); 0 for none.
	SelfWeight float64
	// Temperatures are member temperature changes.
	Temperatures []MemberTemperature
	// Settlements are prescribed support displacements.
	Settlements []Settlement
	// Unknown marks a load shape whose magnitude is not measured and is
	// estimated by reconciliation (for example crowd or snow drift).
	Unknown bool
	// ReferenceValue and ReferenceUnit are the load the pattern represents
	// at factor 1 as written in the file (for example 1 and "kPa"), used
	// to show an estimated factor in the pattern's engineering unit; empty
	// ReferenceUnit when not given.
	ReferenceValue float64
	ReferenceUnit  string
	Line           int
}

// InReferenceUnit returns factor times the pattern's reference load in its
// engineering unit, or ok false when the pattern declares none.
func (p Pattern) InReferenceUnit(factor float64) (value float64, unit string, ok bool) {
	if p.ReferenceUnit == "" {
		return 0, "", false
	}
	return factor * p.ReferenceValue, p.ReferenceUnit, true
}

// Factor is one pattern with its factor in a load case.
type Factor struct {
	Pattern string
	Factor  float64
}

// Case is a named load case: a linear combination of patterns.
type Case struct {
	Name    string
	Factors []Factor
	Line    int
}

// StandardGravity is g in m/s^2 (the conventional value fixed by the CGPM,
// 1901).
const StandardGravity = 9.80665

// NodeIndex returns the index of the node with the given id.
func (s *Structure) NodeIndex(id string) (int, bool) {
	for i := range s.Nodes {
		if s.Nodes[i].ID == id {
			return i, true
		}
	}
	return -1, false
}

// MemberIndex returns the index of the member with the given id.
func (s *Structure) MemberIndex(id string) (int, bool) {
	for i := range s.Members {
		if s.Members[i].ID == id {
			return i, true
		}
	}
	return -1, false
}

// PatternIndex returns the index of the pattern with the given name.
func (s *Structure) PatternIndex(name string) (int, bool) {
	for i := range s.Patterns {
		if s.Patterns[i].Name == name {
			return i, true
		}
	}
	return -1, false
}

// CaseIndex returns the index of the load case with the given name.
func (s *Structure) CaseIndex(name string) (int, bool) {
	for i := range s.Cases {
		if s.Cases[i].Name == name {
			return i, true
		}
	}
	return -1, false
}

// HasMember reports whether a member with this id exists.
func (s *Structure) HasMember(id string) bool {
	_, ok := s.MemberIndex(id)
	return ok
}

// HasPattern reports whether a load pattern with this name exists.
func (s *Structure) HasPattern(name string) bool {
	_, ok := s.PatternIndex(name)
	return ok
}

// HasGroup reports whether a member group with this name exists.
func (s *Structure) HasGroup(name string) bool {
	_, ok := s.Groups[name]
	return ok
}

// MemberProperties returns the modulus E (Pa), area A (m^2) and thermal
// coefficient alpha (1/K) of the member with the given id.
func (s *Structure) MemberProperties(id string) (e, a, alpha float64, ok bool) {
	i, found := s.MemberIndex(id)
	if !found {
		return 0, 0, 0, false
	}
	m := s.Members[i]
	return m.E, m.A, m.Alpha, true
}

// UnknownPatterns returns the names of the patterns marked Unknown, in file
// order.
func (s *Structure) UnknownPatterns() []string {
	var out []string
	for _, p := range s.Patterns {
		if p.Unknown {
			out = append(out, p.Name)
		}
	}
	return out
}
