package calib

// Closed forms the tests check the calibration formulas against; none of
// them is used by the monitor itself.

// poissonBridgeNonlinearity is the relative shortfall of the exact output of
// either Poisson arrangement (half or full bridge) below its linear
// approximation factor * GF e / 4:
//
//	eta = GF e (1 - nu) / (2 + GF e (1 - nu))
//
// The half and full bridges share it, since both outputs are their linear
// forms times 2 / (2 + GF e (1 - nu)). It is smaller than the quarter
// bridge's GF e / (2 + GF e) by about the factor (1 - nu), because the
// Poisson gauge's resistance falls while the axial gauge's rises.
func poissonBridgeNonlinearity(gf, nu, strain float64) float64 {
	x := gf * strain * (1 - nu)
	return x / (2 + x)
}

// halfBridgePoissonFactor is the bridge factor 1 + nu of
// HalfBridgePoissonOutput: the linear output is factor * GF e / 4.
func halfBridgePoissonFactor(nu float64) float64 { return 1 + nu }

// fullBridgePoissonFactor is the bridge factor 2 (1 + nu) of
// FullBridgePoissonOutput: the linear output is factor * GF e / 4.
func fullBridgePoissonFactor(nu float64) float64 { return 2 * (1 + nu) }

// memberStrain inverts MemberForce: e_axial = N / (E A).
func memberStrain(e, a, force float64) float64 {
	return force / (e * a)
}

// wireGaugeConstant is the gauge constant G of a vibrating-wire strain gauge
// with a steel wire of free length l (m), density rho (kg/m^3) and modulus
// e (Pa). A taut wire vibrates at f = (1 / 2L) sqrt(sigma / rho) (Mersenne's
// law for a string, sigma the wire stress), so sigma = 4 L^2 rho f^2 and the
// wire's elastic strain is sigma / E:
//
//	G = 4 L^2 rho / E   (strain per Hz^2)
//
// Manufacturers calibrate G per gauge type; this formula is the nominal value.
func wireGaugeConstant(l, rho, e float64) float64 {
	return 4 * l * l * rho / e
}
