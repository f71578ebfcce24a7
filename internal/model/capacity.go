package model

import (
	"fmt"

	"trussmonitor/internal/capacity"
	"trussmonitor/internal/units"
)

// EffectiveBucklingLength returns the buckling length of member k in
// metres: its declared buckling length, else its buckling-length factor
// (default 1.0) times its length.
func (s *Structure) EffectiveBucklingLength(k int) float64 {
	mb := s.Members[k]
	if mb.BucklingLength > 0 {
		return mb.BucklingLength
	}
	f := mb.BucklingFactor
	if f == 0 {
		f = 1
	}
	return f * memberLength(s, mb)
}

// Resistances returns the axial design resistance of every member under
// the structure's design basis, in member order, or nil when the
// structure declares no design basis.
func (s *Structure) Resistances() ([]capacity.Resistance, error) {
	if s.Design == nil {
		return nil, nil
	}
	out := make([]capacity.Resistance, len(s.Members))
	for k, mb := range s.Members {
		r, err := capacity.Compute(*s.Design, capacity.Member{
			A: mb.A, E: mb.E, Fy: mb.Fy, RadiusOfGyration: mb.RadiusOfGyration,
			BucklingLength: s.EffectiveBucklingLength(k), Curve: mb.Curve,
		})
		if err != nil {
			return nil, fmt.Errorf("structure %s: member %s (line %d): resistance: %w", s.Name, mb.ID, mb.Line, err)
		}
		out[k] = r
	}
	return out, nil
}

// Utilisations returns |N_k| / N_Rd,k for member forces n (tension
// positive, in member order) with the resistance governing each force's
// sign, or nil when the structure declares no design basis. A monitoring
// estimate, not a design check (capacity.Caution).
func (s *Structure) Utilisations(n []float64) ([]float64, error) {
	rs, err := s.Resistances()
	if err != nil || rs == nil {
		return nil, err
	}
	if len(n) != len(rs) {
		return nil, fmt.Errorf("structure %s: %d member forces for %d members", s.Name, len(n), len(rs))
	}
	out := make([]float64, len(n))
	for k := range n {
		out[k] = capacity.Utilisation(n[k], rs[k])
	}
	return out, nil
}

// ReferenceSI returns the pattern's reference load (the load at factor 1)
// in SI base units with its dimension: newtons (force), pascals (pressure)
// or newtons per metre (line load); ok is false when the pattern declares
// none.
func (p Pattern) ReferenceSI() (value float64, dim units.Dimension, ok bool) {
	if p.ReferenceUnit == "" {
		return 0, 0, false
	}
	u, found := units.Lookup(p.ReferenceUnit)
	if !found {
		return 0, 0, false
	}
	return p.ReferenceValue * u.ToSI, u.Dim, true
}
