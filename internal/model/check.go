package model

import (
	"errors"
	"fmt"
	"math"
)

// StructureCheck is the analysis behind `monitor check`: determinacy,
// stability, size plausibility, the extreme member forces of every load
// case with its equilibrium check, and the method-of-joints cross-check.
type StructureCheck struct {
	Structure *Structure
	// Model is nil when the truss is a mechanism.
	Model       *Model
	Mechanism   *MechanismError
	Determinacy Determinacy
	// Geometry is the size summary with its plausibility warnings.
	Geometry Geometry
	Cases    []CaseCheck
	// Joints is the method-of-joints cross-check; JointsNote says why it
	// was not run when Joints is empty.
	Joints     []JointsCheck
	JointsNote string
}

// CaseCheck holds the extreme member forces of one load case (of each
// pattern at factor 1 when the structure has no cases) and its
// equilibrium check; Err when the case could not be solved.
type CaseCheck struct {
	Name                 string
	Factors              []Factor
	MaxTension           float64
	MaxTensionMember     string
	MaxCompression       float64
	MaxCompressionMember string
	Equilibrium          Equilibrium
	Err                  error
}

// JointsCheck compares the stiffness solution of one case with the method
// of joints (SolveByJoints): the largest difference of a member force.
type JointsCheck struct {
	Case      string
	MaxDiffN  float64
	Member    string
	MaxForceN float64
	ResidualN float64
	Err       error
}

// CheckStructure analyses s and gathers the check. It returns an error
// only for a structure that cannot be analysed at all (invalid input);
// a mechanism is part of the check.
func CheckStructure(s *Structure) (*StructureCheck, error) {
	rep := &StructureCheck{Structure: s, Geometry: Measure(s)}
	m, err := Analyze(s)
	var me *MechanismError
	switch {
	case errors.As(err, &me):
		rep.Mechanism = me
		rep.Determinacy = me.Determinacy
		return rep, nil
	case err != nil:
		return nil, err
	}
	rep.Model = m
	rep.Determinacy = m.Determinacy()
	cases := s.Cases
	if len(cases) == 0 {
		for _, p := range s.Patterns {
			cases = append(cases, Case{Name: "pattern " + p.Name, Factors: []Factor{{Pattern: p.Name, Factor: 1}}})
		}
	}
	springs := false
	for _, sp := range s.Supports {
		springs = springs || sp.Spring != [3]float64{}
	}
	runJoints := s.Dim == 2 && rep.Determinacy.ByRank == 0 && !springs
	switch {
	case s.Dim != 2:
		rep.JointsNote = "not applicable: space truss (the method of joints here is for plane trusses)"
	case springs:
		rep.JointsNote = "not applicable: spring supports make the forces depend on stiffness"
	case rep.Determinacy.ByRank != 0:
		rep.JointsNote = fmt.Sprintf("not applicable: statically indeterminate (degree %d)", rep.Determinacy.ByRank)
	}
	for _, c := range cases {
		cs := CaseCheck{Name: c.Name, Factors: c.Factors}
		r, err := m.SolveFactors(c.Factors)
		if err != nil {
			cs.Err = err
			rep.Cases = append(rep.Cases, cs)
			continue
		}
		cs.Equilibrium = r.Equilibrium
		cs.MaxTension, cs.MaxTensionMember, cs.MaxCompression, cs.MaxCompressionMember = memberForceExtremes(s, r.Forces)
		rep.Cases = append(rep.Cases, cs)
		if !runJoints {
			continue
		}
		jc := JointsCheck{Case: c.Name}
		j, err := SolveByJoints(s, c.Factors)
		if err != nil {
			jc.Err = err
		} else {
			jc.ResidualN = j.MaxResidualN
			for e := range r.Forces {
				jc.MaxForceN = math.Max(jc.MaxForceN, math.Abs(r.Forces[e]))
				if d := math.Abs(r.Forces[e] - j.Forces[e]); d > jc.MaxDiffN || jc.Member == "" {
					jc.MaxDiffN, jc.Member = d, s.Members[e].ID
				}
			}
		}
		rep.Joints = append(rep.Joints, jc)
	}
	return rep, nil
}

// memberForceExtremes returns the largest tension and compression and their members.
// Of members equal to rounding (symmetric trusses) the first in file order
// is named, so the output does not depend on the solver's rounding.
func memberForceExtremes(s *Structure, forces []float64) (maxT float64, idT string, maxC float64, idC string) {
	for _, n := range forces {
		maxT, maxC = math.Max(maxT, n), math.Min(maxC, n)
	}
	tol := 1e-9 * math.Max(maxT, -maxC)
	for e, n := range forces {
		if idT == "" && n >= maxT-tol {
			idT = s.Members[e].ID
		}
		if idC == "" && n <= maxC+tol {
			idC = s.Members[e].ID
		}
	}
	return maxT, idT, maxC, idC
}

// EquilibriumFailures names the solved cases whose equilibrium check failed.
func (r *StructureCheck) EquilibriumFailures() []string {
	var bad []string
	for _, c := range r.Cases {
		if c.Err == nil && !c.Equilibrium.OK() {
			bad = append(bad, c.Name)
		}
	}
	return bad
}
