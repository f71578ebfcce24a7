// Package calib holds the calibration formulas that turn logger readings into
// engineering values: Wheatstone-bridge equations for foil strain gauges
// (quarter, half and full bridge, with the Poisson arrangements used on axial
// members and their non-linearity), the gauge factor, thermal-output
// compensation of foil gauges, the vibrating-wire gauge equation with its
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

// BridgeOutput returns the exact output ratio Vo/Vs of a Wheatstone bridge
// with four arms of equal nominal resistance and gauge factor gf whose arms
// see strains e1..e4 (a completion resistor has strain 0):
//
//	Vo/Vs = (1+x1)/(2+x1+x2) - (1+x4)/(2+x3+x4),  x_i = GF e_i
//
// To first order this is GF (e1 - e2 + e3 - e4) / 4.
func BridgeOutput(gf, e1, e2, e3, e4 float64) float64 {
	x1, x2, x3, x4 := gf*e1, gf*e2, gf*e3, gf*e4
	return (1+x1)/(2+x1+x2) - (1+x4)/(2+x3+x4)
}

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

// QuarterBridgeNonlinearity is the relative shortfall of the exact quarter-
// bridge output below its linear approximation GF e / 4:
//
//	eta = 1 - (Vo/Vs) / (GF e / 4) = GF e / (2 + GF e)
//
// About 0.1 % per 1000 microstrain at GF = 2.
func QuarterBridgeNonlinearity(gf, strain float64) float64 {
	return gf * strain / (2 + gf*strain)
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

// PoissonBridgeNonlinearity is the relative shortfall of the exact output of
// either Poisson arrangement (half or full bridge) below its linear
// approximation factor * GF e / 4:
//
//	eta = GF e (1 - nu) / (2 + GF e (1 - nu))
//
// The half and full bridges share it, since both outputs are their linear
// forms times 2 / (2 + GF e (1 - nu)). It is smaller than the quarter
// bridge's GF e / (2 + GF e) by about the factor (1 - nu), because the
// Poisson gauge's resistance falls while the axial gauge's rises. The
// bending arrangements (HalfBridgeBendingOutput, FullBridgeBendingOutput)
// are exactly linear.
func PoissonBridgeNonlinearity(gf, nu, strain float64) float64 {
	x := gf * strain * (1 - nu)
	return x / (2 + x)
}

// HalfBridgePoissonFactor is the bridge factor 1 + nu of
// HalfBridgePoissonOutput: the linear output is factor * GF e / 4.
func HalfBridgePoissonFactor(nu float64) float64 { return 1 + nu }

// HalfBridgeBendingOutput is a half bridge with two active gauges on
// opposite faces in adjacent arms (strains +e and -e, pure bending):
//
//	Vo/Vs = GF e / 2
//
// Exactly linear (bridge factor 2), and blind to axial strain: it is not a
// member-force arrangement, but it is the form logged by bending channels.
func HalfBridgeBendingOutput(gf, strain float64) float64 {
	return gf * strain / 2
}

// HalfBridgeBendingStrain inverts HalfBridgeBendingOutput: e = 2 r / GF.
func HalfBridgeBendingStrain(gf, ratio float64) float64 {
	return 2 * ratio / gf
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

// FullBridgePoissonFactor is the bridge factor 2 (1 + nu) of
// FullBridgePoissonOutput: the linear output is factor * GF e / 4.
func FullBridgePoissonFactor(nu float64) float64 { return 2 * (1 + nu) }

// FullBridgeBendingOutput is a full bridge of four active gauges, two at +e
// (arms 1 and 3) and two at -e (arms 2 and 4):
//
//	Vo/Vs = GF e
//
// Exactly linear, bridge factor 4.
func FullBridgeBendingOutput(gf, strain float64) float64 {
	return gf * strain
}

// FullBridgeBendingStrain inverts FullBridgeBendingOutput: e = r / GF.
func FullBridgeBendingStrain(gf, ratio float64) float64 {
	return ratio / gf
}

// RatioFromVolts converts a bridge output measured in volts to the ratio
// Vo/Vs by the excitation voltage: r = Vo / Vs.
func RatioFromVolts(vo, excitation float64) float64 { return vo / excitation }

// VoltsFromRatio is the inverse of RatioFromVolts: Vo = r Vs.
func VoltsFromRatio(ratio, excitation float64) float64 { return ratio * excitation }
