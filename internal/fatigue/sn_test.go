package fatigue

import (
	"math"
	"testing"
)

func near(a, b, rel float64) bool { return math.Abs(a-b) <= rel*math.Abs(b) }

// TestCategoryLimits: Delta sigma_D and Delta sigma_L of every detail
// category of EN 1993-1-9 Table 8.1 against the values printed beside the
// curves of EN 1993-1-9 Figure 7.1 (from memory, rounded to 1 MPa there, so
// compared to within 1 MPa).
func TestCategoryLimits(t *testing.T) {
	// category: {Delta sigma_D, Delta sigma_L} in MPa, EN 1993-1-9 Figure 7.1 (from memory)
	fig71 := map[float64][2]float64{
		160: {117, 64}, 140: {103, 57}, 125: {92, 51}, 112: {83, 45}, 100: {74, 40},
		90: {66, 36}, 80: {59, 32}, 71: {52, 29}, 63: {46, 25}, 56: {41, 23},
		50: {37, 20}, 45: {33, 18}, 40: {29, 16}, 36: {26, 15},
	}
	if len(fig71) != len(Categories) {
		t.Fatalf("%d categories, Table 8.1 lists %d", len(Categories), len(fig71))
	}
	for _, c := range Categories {
		want, ok := fig71[c]
		if !ok {
			t.Fatalf("category %g is not in EN 1993-1-9 Table 8.1", c)
		}
		d := ConstantAmplitudeLimit(c)
		l := CutOffLimit(d)
		if math.Abs(d-want[0]) > 1 || math.Abs(l-want[1]) > 1 {
			t.Errorf("category %g: D %.2f L %.2f MPa, Figure 7.1 shows %v", c, d, l, want)
		}
	}
	// The curve is continuous at N_D and N_L (EN 1993-1-9, 7.1(3): the limits
	// are the strengths at 5e6 and 1e8 cycles).
	cv, _ := NewCurve(71, 1, 1)
	sD := ConstantAmplitudeLimit(cv.DeltaSigmaC)
	if n := cv.Endurance(sD); !near(n, ND, 1e-12) {
		t.Errorf("N at Delta sigma_D = %g, want %g", n, ND)
	}
	if n := cv.Endurance(CutOffLimit(sD)); !near(n, NL, 1e-12) {
		t.Errorf("N at Delta sigma_L = %g, want %g", n, NL)
	}
	if n := cv.Endurance(cv.DeltaSigmaC); !near(n, NC, 1e-12) {
		t.Errorf("N at Delta sigma_C = %g, want %g", n, NC)
	}
}

// TestConstantAmplitudeDamage: closed forms of Miner's sum on the
// EN 1993-1-9 curve for constant-amplitude histories counted by the rainflow
// counter (ranges at bin midpoints, so the histogram is exact).
func TestConstantAmplitudeDamage(t *testing.T) {
	for _, tc := range []struct {
		cat, gFf, gMf float64
		rangeMPa      float64
		want          func(s, n float64, c Curve) float64
		name          string
	}{
		{cat: 71, gFf: 1, gMf: 1, rangeMPa: 100.25, name: "above Delta sigma_D: n (s/Delta sigma_C)^3 / 2e6",
			want: func(s, n float64, c Curve) float64 { return n * math.Pow(s/c.DeltaSigmaC, 3) / 2e6 }},
		{cat: 90, gFf: 1, gMf: 1.35, rangeMPa: 60.25, name: "above Delta sigma_D with gamma_Mf: n (gamma_Mf s/Delta sigma_C)^3 / 2e6",
			want: func(s, n float64, c Curve) float64 { return n * math.Pow(1.35*s/c.DeltaSigmaC, 3) / 2e6 }},
		{cat: 71, gFf: 1, gMf: 1, rangeMPa: 45.25, name: "between L and D: n (s/Delta sigma_D)^5 / 5e6",
			want: func(s, n float64, c Curve) float64 {
				return n * math.Pow(s/ConstantAmplitudeLimit(c.DeltaSigmaC), 5) / 5e6
			}},
		{cat: 71, gFf: 1.1, gMf: 1.15, rangeMPa: 40.25, name: "between L and D, both factors",
			want: func(s, n float64, c Curve) float64 {
				return n * math.Pow(1.1*s/ConstantAmplitudeLimit(c.DeltaSigmaC/1.15), 5) / 5e6
			}},
		{cat: 71, gFf: 1, gMf: 1, rangeMPa: 28.25, name: "below the cut-off (28.7 MPa for 71): none",
			want: func(s, n float64, c Curve) float64 { return 0 }},
	} {
		c, err := NewCurve(tc.cat, tc.gFf, tc.gMf)
		if err != nil {
			t.Fatal(err)
		}
		const cycles = 12345
		s := tc.rangeMPa * 1e6
		xs := make([]float64, 0, 2*cycles+1)
		for i := 0; i < cycles; i++ {
			xs = append(xs, 10e6, 10e6+s)
		}
		xs = append(xs, 10e6)
		var h Histogram
		var k Counter
		k.Add(xs, &h)
		k.Residue(&h)
		if h.Cycles() != cycles {
			t.Fatalf("%s: %g cycles counted, want %d", tc.name, h.Cycles(), cycles)
		}
		got := c.HistogramDamage(&h)
		want := tc.want(s, cycles, c)
		if want == 0 && got != 0 || !near(got, want, 1e-12) {
			t.Errorf("%s: damage %.15g, closed form %.15g", tc.name, got, want)
		}
		if d := c.Miner([]Block{{s, cycles}}); !near(d, want, 1e-12) {
			t.Errorf("%s: Miner %g, closed form %g", tc.name, d, want)
		}
	}
}

func TestNewCurveRejects(t *testing.T) {
	for _, tc := range [][3]float64{{70, 1, 1}, {71, 0.9, 1}, {71, 1, 0}, {71, 1, math.NaN()}, {71, 3, 1}} {
		if _, err := NewCurve(tc[0], tc[1], tc[2]); err == nil {
			t.Errorf("NewCurve%v accepted", tc)
		}
	}
}
