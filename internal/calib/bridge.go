// Package calib holds the calibration formulas that turn logger readings into
// engineering values: Wheatstone-bridge equations for foil strain gauges
// (quarter bridge, and the half and full Poisson arrangements used on axial
// members), thermal-output compensation of foil gauges, the vibrating-wire gauge equation with its
// temperature term, and the axial force of a member from its gauges.
//
// One function per formula; every function names its equation. Forward
// forms go from strain to reading, inverse forms from reading to strain.
// Strain is dimensionless (m/m, tension positive); bridge output is the
// ratio Vo/Vs of output to excitation voltage (V/V; 1 mV/V = 1e-3).
//
// The bridge equations follow the Wheatstone-bridge treatment in Dally and
// Riley, Experimental Stress Analysis (chapter on strain-gauge circuits;
// edition and chapter from memory). Arms are numbered 1 to 4 round the
// bridge; arms 1 and 3 add to the output, arms 2 and 4 subtract:
//
//	Vo/Vs = R1/(R1+R2) - R4/(R3+R4),  Ri = R (1 + GF e_i)
//
// which, for equal nominal resistances, is
//
//	Vo/Vs = (1+x1)/(2+x1+x2) - (1+x4)/(2+x3+x4),  x_i = GF e_i.
//
// An inverse evaluated outside its domain (for example a quarter-bridge ratio
// of 1/2) returns NaN or an infinity; callers check with math.IsNaN/IsInf.
package calib

// QuarterBridgeOutput is one active gauge with three completion resistors:
//
//	Vo/Vs = GF e / (4 + 2 GF e)
//
// The 2 GF e term in the denominator is the quarter-bridge non-linearity.
func QuarterBridgeOutput(gf, strain float64) float64 {
	return gf * strain / (4 + 2*gf*strain)
}

// QuarterBridgeStrain inverts QuarterBridgeOutput:
//
//	e = 4 r / (GF (1 - 2 r)),  r = Vo/Vs
func QuarterBridgeStrain(gf, ratio float64) float64 {
	return 4 * ratio / (gf * (1 - 2*ratio))
}

// HalfBridgePoissonOutput is a half bridge on an axial member: one gauge
// along the axis (strain e) and one across it (strain -nu e) in adjacent
// arms, with two completion resistors:
//
//	Vo/Vs = GF e (1 + nu) / (4 + 2 GF e (1 - nu))
//
// Bridge factor 1 + nu; the (1 - nu) term is its non-linearity. The
// arrangement also compensates the gauges' thermal output when both gauges
// see the same temperature.
func HalfBridgePoissonOutput(gf, nu, strain float64) float64 {
	return gf * strain * (1 + nu) / (4 + 2*gf*strain*(1-nu))
}

// HalfBridgePoissonStrain inverts HalfBridgePoissonOutput:
//
//	e = 4 r / (GF ((1 + nu) - 2 r (1 - nu)))
func HalfBridgePoissonStrain(gf, nu, ratio float64) float64 {
	return 4 * ratio / (gf * ((1 + nu) - 2*ratio*(1-nu)))
}

// FullBridgePoissonOutput is a full bridge on an axial member: two gauges
// along the axis (arms 1 and 3, strain e) and two across it (arms 2 and 4,
// strain -nu e):
//
//	Vo/Vs = GF e (1 + nu) / (2 + GF e (1 - nu))
//
// Bridge factor 2 (1 + nu); the (1 - nu) term is its non-linearity. With the
// axial gauges on opposite faces the output also cancels bending.
func FullBridgePoissonOutput(gf, nu, strain float64) float64 {
	return gf * strain * (1 + nu) / (2 + gf*strain*(1-nu))
}

// FullBridgePoissonStrain inverts FullBridgePoissonOutput:
//
//	e = 2 r / (GF ((1 + nu) - r (1 - nu)))
func FullBridgePoissonStrain(gf, nu, ratio float64) float64 {
	return 2 * ratio / (gf * ((1 + nu) - ratio*(1-nu)))
}

// RatioFromVolts converts a bridge output measured in volts to the ratio
// Vo/Vs by the excitation voltage: r = Vo / Vs.
func RatioFromVolts(vo, excitation float64) float64 { return vo / excitation }

// VoltsFromRatio is the inverse of RatioFromVolts: Vo = r Vs.
func VoltsFromRatio(ratio, excitation float64) float64 { return ratio * excitation }
