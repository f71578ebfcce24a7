package calib

import "math"

// ThermalOutput is the apparent strain of a bonded foil gauge at temperature
// t (degC), given as the polynomial of its data sheet,
//
//	e_app(T) = c0 + c1 T + c2 T^2 + ... (coefficients in strain, T in degC)
//
// evaluated by Horner's rule. A linear thermal-output coefficient k (strain
// per kelvin) is the polynomial {0, k}. The data-sheet polynomial belongs to
// the gauge lot on the material it was matched to; it is written for the
// data sheet's gauge factor, so rescale the coefficients with
// GaugeFactorCorrection when the instrument is set differently.
func ThermalOutput(coeffs []float64, t float64) float64 {
	s := 0.0
	for i := len(coeffs) - 1; i >= 0; i-- {
		s = s*t + coeffs[i]
	}
	return s
}

// CompensateThermalOutput removes the change of apparent strain between the
// zero reading (taken at t0) and now (at t):
//
//	e = e_indicated - (e_app(T) - e_app(T0))
//
// Only the change matters: the apparent strain at T0 is inside the zero
// reading.
func CompensateThermalOutput(indicated float64, coeffs []float64, t, t0 float64) float64 {
	return indicated - (ThermalOutput(coeffs, t) - ThermalOutput(coeffs, t0))
}

// AddThermalOutput is the inverse of CompensateThermalOutput, the strain a
// gauge indicates when the member strain is e:
//
//	e_indicated = e + (e_app(T) - e_app(T0))
func AddThermalOutput(strain float64, coeffs []float64, t, t0 float64) float64 {
	return strain + (ThermalOutput(coeffs, t) - ThermalOutput(coeffs, t0))
}

// VibratingWireStrain is the stress-producing strain of the member under a
// vibrating-wire gauge read at frequency f (Hz), relative to the zero reading
// f0 taken at temperature t0 (degC), now at temperature t:
//
//	e_sigma = G (f^2 - f0^2) + (alpha_wire - alpha_steel) (T - T0)
//
// Derivation. The wire is clamped between two anchors on the member, so the
// wire and the member share the same total strain change between the anchors:
//
//	e_total = e_sigma + alpha_steel dT           (member: stress + free expansion)
//	e_total = e_wire  + alpha_wire  dT           (wire: tension + free expansion)
//
// The frequency measures only the wire's tension strain, e_wire =
// G (f^2 - f0^2). Equating the two totals gives e_sigma = e_wire +
// (alpha_wire - alpha_steel) dT. With a steel wire on a steel member the
// coefficients are nearly equal and the term nearly vanishes; the free
// thermal strain of the member itself is (correctly) not reported, since it
// produces no force in a free member.
func VibratingWireStrain(g, f, f0, alphaWire, alphaSteel, t, t0 float64) float64 {
	return g*(f*f-f0*f0) + (alphaWire-alphaSteel)*(t-t0)
}

// VibratingWireFrequency inverts VibratingWireStrain for the frequency:
//
//	f = sqrt(f0^2 + (e_sigma - (alpha_wire - alpha_steel)(T - T0)) / G)
//
// NaN when the wire would be slack (negative f^2).
func VibratingWireFrequency(g, strain, f0, alphaWire, alphaSteel, t, t0 float64) float64 {
	f2 := f0*f0 + (strain-(alphaWire-alphaSteel)*(t-t0))/g
	if f2 < 0 {
		return math.NaN()
	}
	return math.Sqrt(f2)
}
