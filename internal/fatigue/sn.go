package fatigue

import (
	"fmt"
	"math"
)

// EN 1993-1-9, 7.1 and Figure 7.1: the fatigue strength curves for direct
// stress ranges.
const (
	// NC is the number of cycles at which a detail category is named (2 million).
	NC = 2e6
	// ND is the constant-amplitude fatigue limit's number of cycles (5 million).
	ND = 5e6
	// NL is the cut-off limit's number of cycles (100 million).
	NL = 1e8
	// M1 is the slope of the curve up to ND.
	M1 = 3
	// M2 is the slope of the curve from ND to NL.
	M2 = 5
)

// Categories are the detail categories of EN 1993-1-9 (the fourteen curves
// of Figure 7.1, the categories the detail tables of section 8, from Table
// 8.1 on, assign), as Delta sigma_C in MPa.
var Categories = [...]float64{160, 140, 125, 112, 100, 90, 80, 71, 63, 56, 50, 45, 40, 36}

// IsCategory reports whether mpa is one of Categories.
func IsCategory(mpa float64) bool {
	for _, c := range Categories {
		if c == mpa {
			return true
		}
	}
	return false
}

// Curve is the S-N curve of one detail with its partial factors, per
// EN 1993-1-9. Stresses in Pa.
type Curve struct {
	// DeltaSigmaC is the reference fatigue strength at NC cycles (the detail
	// category), Pa.
	DeltaSigmaC float64
	// GammaFf is the partial factor for the fatigue stress ranges
	// (EN 1993-1-9, 3(7); recommended 1.0).
	GammaFf float64
	// GammaMf is the partial factor for fatigue strength (EN 1993-1-9,
	// Table 3.1; recommended 1.00 to 1.35).
	GammaMf float64
}

// NewCurve is the curve of a detail category given in MPa (one of
// Categories) with its partial factors (each from 1 to 2).
func NewCurve(categoryMPa, gammaFf, gammaMf float64) (Curve, error) {
	if !IsCategory(categoryMPa) {
		return Curve{}, fmt.Errorf("detail category %g MPa is not one of EN 1993-1-9 Table 8.1 (%v)", categoryMPa, Categories)
	}
	for _, g := range []struct {
		name string
		v    float64
	}{{"gamma_Ff", gammaFf}, {"gamma_Mf", gammaMf}} {
		if !(g.v >= 1 && g.v <= 2) {
			return Curve{}, fmt.Errorf("%s = %g; want a partial factor from 1 to 2 (EN 1993-1-9 recommends gamma_Ff 1.0, gamma_Mf 1.00 to 1.35)", g.name, g.v)
		}
	}
	return Curve{DeltaSigmaC: categoryMPa * 1e6, GammaFf: gammaFf, GammaMf: gammaMf}, nil
}

// ConstantAmplitudeLimit is Delta sigma_D = (2/5)^(1/3) Delta sigma_C
// (EN 1993-1-9, 7.1(3), Figure 7.1).
func ConstantAmplitudeLimit(deltaSigmaC float64) float64 {
	return math.Cbrt(2.0/5.0) * deltaSigmaC
}

// CutOffLimit is Delta sigma_L = (5/100)^(1/5) Delta sigma_D
// (EN 1993-1-9, 7.1(3), Figure 7.1).
func CutOffLimit(deltaSigmaD float64) float64 {
	return math.Pow(5.0/100.0, 1.0/5.0) * deltaSigmaD
}

// Endurance is the number of cycles N_R a design stress range sd (already
// multiplied by gamma_Ff) can be applied, on the curve of design strength
// Delta sigma_C / gamma_Mf (EN 1993-1-9, 7.1 and Figure 7.1):
//
//	N_R = NC (Delta sigma_C,d / sd)^3            for sd >= Delta sigma_D,d
//	N_R = ND (Delta sigma_D,d / sd)^5            for Delta sigma_L,d <= sd < Delta sigma_D,d
//	N_R = +Inf                                    below the cut-off Delta sigma_L,d
func (c Curve) Endurance(sd float64) float64 {
	sC := c.DeltaSigmaC / c.GammaMf
	sD := ConstantAmplitudeLimit(sC)
	sL := CutOffLimit(sD)
	switch {
	case sd >= sD:
		return NC * math.Pow(sC/sd, M1)
	case sd >= sL:
		return ND * math.Pow(sD/sd, M2)
	default:
		return math.Inf(1)
	}
}

// Damage is the Palmgren-Miner damage of n cycles of the measured stress
// range s (Pa): n / N_R(gamma_Ff s) (EN 1993-1-9, Annex A, A.5: D_d = sum n_Ei / N_Ri).
func (c Curve) Damage(s, n float64) float64 {
	N := c.Endurance(c.GammaFf * s)
	if math.IsInf(N, 1) {
		return 0
	}
	return n / N
}

// Block is a number of cycles of one stress range (Pa).
type Block struct {
	Range  float64
	Cycles float64
}

// Miner is the Palmgren-Miner sum over a stress-range spectrum
// (EN 1993-1-9, Annex A, A.5).
func (c Curve) Miner(blocks []Block) float64 {
	var d float64
	for _, b := range blocks {
		d += c.Damage(b.Range, b.Cycles)
	}
	return d
}

// HistogramDamage is the Miner sum of a histogram, each bin at its midpoint.
func (c Curve) HistogramDamage(h *Histogram) float64 {
	var d float64
	for i, n := range h.bins {
		if n != 0 {
			d += c.Damage(BinMid(i), n)
		}
	}
	return d
}
