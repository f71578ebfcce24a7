// Package capacity computes the axial design resistance of a truss member
// and its utilisation under a given axial force, per EN 1993-1-1 (tension
// 6.2.3, flexural buckling 6.3.1) or AISC 360-16 (tension yielding D2,
// flexural buckling E3). One function per formula; the names follow the
// symbols of the standards.
//
// Scope, stated once: gross-section yield in tension (net-section fracture
// at connections is not checked, it needs the connection geometry);
// flexural buckling about the section's weaker axis with one buckling
// length (no torsional or flexural-torsional buckling, no local buckling:
// sections are taken as class 1 to 3 in EN 1993-1-1 terms, nonslender in
// AISC 360-16 terms, so the gross area is effective). A utilisation is a
// monitoring estimate from the recorded loads, not a design check or an
// assessment; assessment rests with a licensed engineer under local codes.
package capacity

import "fmt"

// Caution is the sentence every screen and report showing a utilisation
// carries (DESIGN.md, Safety).
const Caution = "Utilisation is a monitoring estimate, not a design check or an assessment; assessment rests with a licensed engineer under local codes."

// Standard is a design standard for member resistance.
type Standard int

// The supported standards.
const (
	// EN1993 is EN 1993-1-1 (Eurocode 3, general rules and rules for
	// buildings), with partial factors gamma_M0 and gamma_M1 from the
	// structure file (the national annex's values).
	EN1993 Standard = iota + 1
	// AISC360 is ANSI/AISC 360-16, load and resistance factor design
	// (phi = 0.90 for tension yielding and compression).
	AISC360
)

// standardNames are the spellings accepted in structure files and shown in
// output.
var standardNames = map[Standard]string{EN1993: "EN 1993-1-1", AISC360: "AISC 360-16"}

// String returns the standard's name, for example "EN 1993-1-1".
func (s Standard) String() string {
	if n, ok := standardNames[s]; ok {
		return n
	}
	return fmt.Sprintf("Standard(%d)", int(s))
}

// ParseStandard reads a standard's name as written in a structure file.
func ParseStandard(name string) (Standard, error) {
	for s, n := range standardNames {
		if n == name {
			return s, nil
		}
	}
	return 0, fmt.Errorf("unknown design standard %q; use %q or %q", name, EN1993, AISC360)
}

// Curve is a flexural buckling curve of EN 1993-1-1 6.3.1.2.
type Curve int

// The buckling curves of EN 1993-1-1 Table 6.1.
const (
	CurveA0 Curve = iota + 1
	CurveA
	CurveB
	CurveC
	CurveD
)

var curveNames = map[Curve]string{CurveA0: "a0", CurveA: "a", CurveB: "b", CurveC: "c", CurveD: "d"}

// String returns the curve's letter ("a0", "a", ..., "d").
func (c Curve) String() string {
	if n, ok := curveNames[c]; ok {
		return n
	}
	return fmt.Sprintf("Curve(%d)", int(c))
}

// ParseCurve reads a buckling curve's letter.
func ParseCurve(name string) (Curve, error) {
	for c, n := range curveNames {
		if n == name {
			return c, nil
		}
	}
	return 0, fmt.Errorf("unknown buckling curve %q; use one of a0, a, b, c, d (EN 1993-1-1 Table 6.2)", name)
}

// ImperfectionFactor returns alpha of a buckling curve, EN 1993-1-1
// Table 6.1: a0 0.13, a 0.21, b 0.34, c 0.49, d 0.76.
func ImperfectionFactor(c Curve) (float64, error) {
	switch c {
	case CurveA0:
		return 0.13, nil
	case CurveA:
		return 0.21, nil
	case CurveB:
		return 0.34, nil
	case CurveC:
		return 0.49, nil
	case CurveD:
		return 0.76, nil
	}
	return 0, fmt.Errorf("buckling curve %v has no imperfection factor", c)
}
