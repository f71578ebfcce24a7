package capacity_test

import (
	"fmt"

	"trussmonitor/internal/capacity"
)

// A web diagonal of the example footbridge: SHS 120x120x6.3 in S355
// (A = 2820 mm2, i = 45.5 mm), 3.905 m long, buckling curve a, to
// EN 1993-1-1 with gamma_M0 = gamma_M1 = 1.0.
func ExampleCompute() {
	r, err := capacity.Compute(capacity.Design{Standard: capacity.EN1993, GammaM0: 1, GammaM1: 1}, capacity.Member{
		A: 2820e-6, E: 210e9, Fy: 355e6, RadiusOfGyration: 0.0455, BucklingLength: 3.905, Curve: capacity.CurveA,
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("lambda-bar %.3f, chi %.3f\n", r.RelativeSlenderness, r.Chi)
	fmt.Printf("N_pl,Rd %.1f kN, N_b,Rd %.1f kN\n", r.TensionN/1e3, r.CompressionN/1e3)
	fmt.Printf("utilisation at -150 kN: %.3f\n", capacity.Utilisation(-150e3, r))
	// Output:
	// lambda-bar 1.123, chi 0.580
	// N_pl,Rd 1001.1 kN, N_b,Rd 580.9 kN
	// utilisation at -150 kN: 0.258
}
