package capacity

import (
	"fmt"
	"math"
)

// Design is a structure's design basis for member resistance.
type Design struct {
	Standard Standard
	// GammaM0 and GammaM1 are the partial factors of EN 1993-1-1 6.1
	// (resistance of cross-sections; of members to instability), from the
	// national annex in force. Unused for AISC 360-16.
	GammaM0, GammaM1 float64
}

// Member is what the axial resistance of one member needs, in SI.
type Member struct {
	// A is the gross cross-section area (m^2), E the modulus (Pa), Fy the
	// yield strength (Pa).
	A, E, Fy float64
	// RadiusOfGyration is i (EN) or r (AISC) about the weaker axis (m).
	RadiusOfGyration float64
	// BucklingLength is L_cr (EN) or L_c (AISC) (m).
	BucklingLength float64
	// Curve is the EN 1993-1-1 buckling curve (unused for AISC 360-16).
	Curve Curve
}

// Resistance is the axial design resistance of one member with the
// intermediate values that explain it.
type Resistance struct {
	// TensionN is N_pl,Rd (EN 6.2.3) or phi_t P_n (AISC D2), newtons.
	TensionN float64
	// CompressionN is N_b,Rd (EN 6.3.1) or phi_c P_n (AISC E3), newtons,
	// a positive number.
	CompressionN float64
	// Slenderness is L_cr / i.
	Slenderness float64
	// RelativeSlenderness (lambda-bar) and Chi are the EN 1993-1-1 values
	// (0 for AISC 360-16).
	RelativeSlenderness, Chi float64
	// CriticalStressPa is the AISC 360-16 F_cr (0 for EN 1993-1-1).
	CriticalStressPa float64
}

// Compute returns the resistance of member m under design basis d.
func Compute(d Design, m Member) (Resistance, error) {
	for _, v := range []struct {
		name string
		x    float64
	}{{"area", m.A}, {"modulus", m.E}, {"yield strength", m.Fy}, {"radius of gyration", m.RadiusOfGyration}, {"buckling length", m.BucklingLength}} {
		if !(v.x > 0) || math.IsInf(v.x, 0) {
			return Resistance{}, fmt.Errorf("%s is %g; it must be a positive finite number", v.name, v.x)
		}
	}
	slender := m.BucklingLength / m.RadiusOfGyration
	r, err := compute(d, m, slender)
	if err != nil {
		return Resistance{}, err
	}
	for _, v := range []float64{r.TensionN, r.CompressionN} {
		if !(v > 0) || math.IsInf(v, 0) {
			return Resistance{}, fmt.Errorf("resistance %g N is not a positive finite number (slenderness L/i = %g); check the units of the area, yield strength, radius of gyration and buckling length", v, slender)
		}
	}
	return r, nil
}

// compute evaluates the standard's formulas for checked inputs.
func compute(d Design, m Member, slender float64) (Resistance, error) {
	switch d.Standard {
	case EN1993:
		if !(d.GammaM0 > 0) || !(d.GammaM1 > 0) {
			return Resistance{}, fmt.Errorf("EN 1993-1-1 needs positive partial factors gamma_M0 and gamma_M1, got %g and %g", d.GammaM0, d.GammaM1)
		}
		alpha, err := ImperfectionFactor(m.Curve)
		if err != nil {
			return Resistance{}, err
		}
		i := m.A * m.RadiusOfGyration * m.RadiusOfGyration
		lambda := RelativeSlenderness(m.A, m.Fy, ElasticCriticalForce(m.E, i, m.BucklingLength))
		chi := ReductionFactor(alpha, lambda)
		return Resistance{
			TensionN:            PlasticTensionResistance(m.A, m.Fy, d.GammaM0),
			CompressionN:        BucklingResistance(chi, m.A, m.Fy, d.GammaM1),
			Slenderness:         slender,
			RelativeSlenderness: lambda,
			Chi:                 chi,
		}, nil
	case AISC360:
		fcr := CriticalStress(m.E, m.Fy, slender)
		return Resistance{
			TensionN:         TensileYieldStrength(m.Fy, m.A),
			CompressionN:     CompressiveStrength(fcr, m.A),
			Slenderness:      slender,
			CriticalStressPa: fcr,
		}, nil
	}
	return Resistance{}, fmt.Errorf("no design standard given (%v)", d.Standard)
}

// Governing returns the resistance that governs an axial force n (tension
// positive): the tension resistance for n >= 0, the compression
// resistance otherwise.
func (r Resistance) Governing(n float64) float64 {
	if n >= 0 {
		return r.TensionN
	}
	return r.CompressionN
}

// Utilisation is |N| / N_Rd with N_Rd the resistance governing the sign
// of n (a ratio; 1 means the force equals the design resistance).
func Utilisation(n float64, r Resistance) float64 {
	return math.Abs(n) / r.Governing(n)
}
