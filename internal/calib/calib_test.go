package calib

import (
	"fmt"
	"math"
	"testing"
)

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// TestQuarterBridgePublished checks the quarter-bridge non-linearity against
// the values for GF = 2 of Dally and Riley, Experimental Stress Analysis
// (Wheatstone-bridge non-linearity; from memory, as quoted in the task).
func TestQuarterBridgePublished(t *testing.T) {
	tests := []struct {
		strain, mVperV float64
	}{
		{1000e-6, 0.499500},   // Dally and Riley, from memory
		{-1000e-6, -0.500501}, // Dally and Riley, from memory
		{10000e-6, 4.950495},  // Dally and Riley, from memory
	}
	for _, tc := range tests {
		got := QuarterBridgeOutput(2, tc.strain) * 1e3
		if !near(got, tc.mVperV, 5e-7) {
			t.Errorf("QuarterBridgeOutput(2, %g) = %.7f mV/V, want %.6f", tc.strain, got, tc.mVperV)
		}
		back := QuarterBridgeStrain(2, tc.mVperV*1e-3)
		if !near(back, tc.strain, 5e-9) { // published values carry 6 decimals of mV/V
			t.Errorf("QuarterBridgeStrain(2, %g mV/V) = %g, want %g", tc.mVperV, back, tc.strain)
		}
	}
	// The non-linearity, the shortfall below the linear GF e / 4, is about
	// 0.1 % per 1000 microstrain at GF = 2 (common practice): 0.002/2.002 =
	// 0.0999 %.
	if eta := 1 - QuarterBridgeOutput(2, 1000e-6)/(2*1000e-6/4); !near(eta, 0.000999001, 1e-9) {
		t.Errorf("non-linearity = %g", eta)
	}
}

// dividerBridge is an independent computation of the bridge output from
// Ohm's law on the two voltage dividers, with arm resistances
// R_i = R0 (1 + GF e_i) for a 350 ohm bridge: Vo/Vs = R1/(R1+R2) - R4/(R3+R4).
func dividerBridge(gf float64, e [4]float64) float64 {
	const r0 = 350.0
	var r [4]float64
	for i := range e {
		r[i] = r0 * (1 + gf*e[i])
	}
	return r[0]/(r[0]+r[1]) - r[3]/(r[2]+r[3])
}

func TestBridgeArrangementsAgainstDivider(t *testing.T) {
	const gf, nu = 2.1, 0.3
	for _, e := range []float64{-3000e-6, -500e-6, -1e-6, 0, 2e-6, 800e-6, 5000e-6} {
		checks := []struct {
			name string
			got  float64
			arms [4]float64
		}{
			{"quarter", QuarterBridgeOutput(gf, e), [4]float64{e, 0, 0, 0}},
			{"half Poisson", HalfBridgePoissonOutput(gf, nu, e), [4]float64{e, -nu * e, 0, 0}},
			{"full Poisson", FullBridgePoissonOutput(gf, nu, e), [4]float64{e, -nu * e, e, -nu * e}},
		}
		for _, c := range checks {
			want := dividerBridge(gf, c.arms)
			if !near(c.got, want, 1e-15) {
				t.Errorf("%s at e=%g: %g, divider gives %g", c.name, e, c.got, want)
			}
		}
	}
}

func TestBridgeFactors(t *testing.T) {
	// Linear output = factor * GF e / 4 (Dally and Riley, bridge
	// arrangements; from memory): 1 + nu half Poisson, 2 (1 + nu) full.
	const gf, nu, e = 2, 0.3, 1e-7 // tiny strain: non-linearity negligible
	if f := HalfBridgePoissonOutput(gf, nu, e) / (gf * e / 4); !near(f, halfBridgePoissonFactor(nu), 1e-6) {
		t.Errorf("half Poisson factor %g", f)
	}
	if f := FullBridgePoissonOutput(gf, nu, e) / (gf * e / 4); !near(f, fullBridgePoissonFactor(nu), 1e-6) {
		t.Errorf("full Poisson factor %g", f)
	}
	// Full Poisson bridge at GF 2, nu 0.3, 1000 microstrain, closed form
	// 2.6e-3 / 2.0014 = 1.2990906 mV/V.
	if r := FullBridgePoissonOutput(2, 0.3, 1000e-6) * 1e3; !near(r, 1.2990906, 1e-7) {
		t.Errorf("full Poisson output %g mV/V", r)
	}
}

func TestPoissonNonlinearity(t *testing.T) {
	const gf, nu = 2, 0.3
	for _, e := range []float64{-2000e-6, 500e-6, 1000e-6, 5000e-6} {
		half := 1 - HalfBridgePoissonOutput(gf, nu, e)/(halfBridgePoissonFactor(nu)*gf*e/4)
		full := 1 - FullBridgePoissonOutput(gf, nu, e)/(fullBridgePoissonFactor(nu)*gf*e/4)
		eta := poissonBridgeNonlinearity(gf, nu, e)
		if !near(half, eta, 1e-12) || !near(full, eta, 1e-12) {
			t.Errorf("e=%g: half %g full %g formula %g", e, half, full, eta)
		}
	}
	// GF 2, nu 0.3, 1000 microstrain: 0.0014 / 2.0014 = 0.06995 %, against
	// the quarter bridge's 0.0999 % (closed form).
	if eta := poissonBridgeNonlinearity(2, 0.3, 1000e-6); !near(eta, 0.0014/2.0014, 1e-15) {
		t.Errorf("eta %g", eta)
	}
}

func TestInverseRoundTrip(t *testing.T) {
	const gf, nu = 2.05, 0.29
	pairs := []struct {
		name string
		fwd  func(float64) float64
		inv  func(float64) float64
	}{
		{"quarter", func(e float64) float64 { return QuarterBridgeOutput(gf, e) }, func(r float64) float64 { return QuarterBridgeStrain(gf, r) }},
		{"half Poisson", func(e float64) float64 { return HalfBridgePoissonOutput(gf, nu, e) }, func(r float64) float64 { return HalfBridgePoissonStrain(gf, nu, r) }},
		{"full Poisson", func(e float64) float64 { return FullBridgePoissonOutput(gf, nu, e) }, func(r float64) float64 { return FullBridgePoissonStrain(gf, nu, r) }},
		{"thermal", func(e float64) float64 { return AddThermalOutput(e, []float64{-20e-6, 1.5e-6, -0.04e-6}, 31, 15) },
			func(r float64) float64 {
				return CompensateThermalOutput(r, []float64{-20e-6, 1.5e-6, -0.04e-6}, 31, 15)
			}},
		{"vibrating wire", func(e float64) float64 { return VibratingWireFrequency(3.5e-9, e, 800, 12.2e-6, 11.7e-6, 25, 15) },
			func(f float64) float64 { return VibratingWireStrain(3.5e-9, f, 800, 12.2e-6, 11.7e-6, 25, 15) }},
		{"member force", func(e float64) float64 { return MemberForce(210e9, 7.4e-3, e) }, func(n float64) float64 { return memberStrain(210e9, 7.4e-3, n) }},
	}
	for _, p := range pairs {
		for _, e := range []float64{-2000e-6, -100e-6, 0, 3e-6, 450e-6, 2500e-6} {
			t.Run(fmt.Sprintf("%s/%g", p.name, e), func(t *testing.T) {
				if back := p.inv(p.fwd(e)); !near(back, e, 1e-12) {
					t.Errorf("round trip %g -> %g -> %g", e, p.fwd(e), back)
				}
			})
		}
	}
}

func TestThermalOutput(t *testing.T) {
	// Linear coefficient: 2 microstrain/K over 10 K is 20 microstrain.
	if d := CompensateThermalOutput(120e-6, []float64{0, 2e-6}, 25, 15); !near(d, 100e-6, 1e-15) {
		t.Errorf("linear compensation %g", d)
	}
	// Polynomial by Horner equals the explicit sum.
	c := []float64{-30e-6, 2.2e-6, -5e-8, 3e-10, -6e-13}
	for _, tc := range []float64{-20, 0, 15, 40, 80} {
		want := c[0] + c[1]*tc + c[2]*tc*tc + c[3]*tc*tc*tc + c[4]*tc*tc*tc*tc
		if got := ThermalOutput(c, tc); !near(got, want, 1e-18) {
			t.Errorf("ThermalOutput(%g) = %g, want %g", tc, got, want)
		}
	}
	// At the zeroing temperature nothing is removed.
	if d := CompensateThermalOutput(55e-6, c, 15, 15); d != 55e-6 {
		t.Errorf("compensation at T0 changed the strain: %g", d)
	}
	if ThermalOutput(nil, 30) != 0 {
		t.Error("empty polynomial is not zero")
	}
}

// TestVibratingWireMersenne checks the gauge equation against the taut-
// string law f = (1/2L) sqrt(sigma/rho) (Mersenne's law, closed form): a
// 150 mm steel wire (rho 7850 kg/m3, E 200 GPa; common practice values)
// strained by 1000 microstrain more than at its zero reading.
func TestVibratingWireMersenne(t *testing.T) {
	const l, rho, e = 0.150, 7850.0, 200e9
	freq := func(strain float64) float64 { return math.Sqrt(e*strain/rho) / (2 * l) }
	g := wireGaugeConstant(l, rho, e)
	if !near(g, 3.5325e-9, 1e-13) {
		t.Errorf("G = %g per Hz^2", g)
	}
	const pre = 2500e-6 // pretension strain of the wire at the zero reading
	f0, f1 := freq(pre), freq(pre+1000e-6)
	if s := VibratingWireStrain(g, f1, f0, 11.7e-6, 11.7e-6, 22, 15); !near(s, 1000e-6, 1e-12) {
		t.Errorf("strain %g, want 1000e-6 (f0 %.2f Hz, f %.2f Hz)", s, f0, f1)
	}
	// Temperature term: wire 12.2e-6/K on steel 11.7e-6/K, 20 K warmer
	// with the frequency unchanged: e_sigma = 0.5e-6 * 20 = 10 microstrain.
	if s := VibratingWireStrain(g, f0, f0, 12.2e-6, 11.7e-6, 35, 15); !near(s, 10e-6, 1e-15) {
		t.Errorf("temperature term %g", s)
	}
	if !math.IsNaN(VibratingWireFrequency(g, -1, 100, 0, 0, 0, 0)) {
		t.Error("slack wire did not give NaN")
	}
}

func TestMemberForce(t *testing.T) {
	// N = E A e: 210 GPa x 7.4e-3 m2 x 100 microstrain = 155.4 kN.
	strains := []float64{130e-6, 70e-6} // bending +-30 about an axial 100
	mean := MeanStrain(strains)
	if n := MemberForce(210e9, 7.4e-3, mean); !near(n, 155400, 1e-6) {
		t.Errorf("N = %g", n)
	}
	// Two gauges of 3 microstrain: sigma of the mean 3/sqrt(2).
	s := MeanStrainSigma([]float64{3e-6, 3e-6})
	if !near(s, 3e-6/math.Sqrt2, 1e-18) {
		t.Errorf("sigma mean %g", s)
	}
	if sn := MemberForceSigma(210e9, 7.4e-3, s); !near(sn, 210e9*7.4e-3*3e-6/math.Sqrt2, 1e-9) {
		t.Errorf("sigma N %g", sn)
	}
	if !math.IsNaN(MeanStrain(nil)) || !math.IsNaN(MeanStrainSigma(nil)) {
		t.Error("empty gauge list did not give NaN")
	}
}

func ExampleQuarterBridgeOutput() {
	// 1000 microstrain on a quarter bridge with GF = 2.
	fmt.Printf("%.6f mV/V\n", QuarterBridgeOutput(2, 1000e-6)*1e3)
	// Output: 0.499500 mV/V
}

func ExampleVibratingWireStrain() {
	// Gauge constant 3.5e-9 /Hz^2, zeroed at 800 Hz and 15 degC, now
	// 820 Hz at 25 degC, wire 12.2e-6/K on steel 11.7e-6/K.
	e := VibratingWireStrain(3.5e-9, 820, 800, 12.2e-6, 11.7e-6, 25, 15)
	fmt.Printf("%.2f microstrain\n", e*1e6)
	// Output: 118.40 microstrain
}
