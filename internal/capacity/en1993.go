package capacity

import "math"

// PlasticTensionResistance is the design plastic resistance of the gross
// cross-section in tension, EN 1993-1-1 6.2.3(2) a), equation (6.6):
//
//	N_pl,Rd = A f_y / gamma_M0
//
// a in m^2, fy in Pa; newtons.
func PlasticTensionResistance(a, fy, gammaM0 float64) float64 {
	return a * fy / gammaM0
}

// ElasticCriticalForce is the Euler critical force of a pin-ended strut of
// buckling length lcr about the axis of second moment i:
//
//	N_cr = pi^2 E I / L_cr^2
//
// (the elastic critical force of EN 1993-1-1 6.3.1.2(1)); newtons.
func ElasticCriticalForce(e, i, lcr float64) float64 {
	return math.Pi * math.Pi * e * i / (lcr * lcr)
}

// RelativeSlenderness is the non-dimensional slenderness of EN 1993-1-1
// 6.3.1.2(1), equation (6.49), for class 1 to 3 cross-sections:
//
//	lambda-bar = sqrt(A f_y / N_cr)
func RelativeSlenderness(a, fy, ncr float64) float64 {
	return math.Sqrt(a * fy / ncr)
}

// BucklingPhi is the value Phi of EN 1993-1-1 6.3.1.2(1):
//
//	Phi = 0.5 [1 + alpha (lambda-bar - 0.2) + lambda-bar^2]
func BucklingPhi(alpha, lambda float64) float64 {
	return 0.5 * (1 + alpha*(lambda-0.2) + lambda*lambda)
}

// ReductionFactor is the flexural buckling reduction factor chi of
// EN 1993-1-1 6.3.1.2(1), equation (6.49):
//
//	chi = 1 / (Phi + sqrt(Phi^2 - lambda-bar^2)),  chi <= 1
//
// and chi = 1 for lambda-bar <= 0.2 (6.3.1.2(4): buckling effects may be
// ignored).
func ReductionFactor(alpha, lambda float64) float64 {
	if lambda <= 0.2 {
		return 1
	}
	phi := BucklingPhi(alpha, lambda)
	chi := 1 / (phi + math.Sqrt(phi*phi-lambda*lambda))
	return math.Min(chi, 1)
}

// BucklingResistance is the design buckling resistance of a compression
// member with a class 1 to 3 cross-section, EN 1993-1-1 6.3.1.1(3),
// equation (6.47):
//
//	N_b,Rd = chi A f_y / gamma_M1
func BucklingResistance(chi, a, fy, gammaM1 float64) float64 {
	return chi * a * fy / gammaM1
}
