package units

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"
)

// close reports whether got equals want to a relative 1e-15 (the factors are
// exact definitions; only float64 rounding separates them).
func close(got, want float64) bool {
	if want == 0 {
		return got == 0
	}
	return math.Abs(got-want) <= 1e-15*math.Abs(want)
}

func TestParse(t *testing.T) {
	tests := []struct {
		text string
		dim  Dimension
		def  string
		want float64
		// source of the expected value
		src string
	}{
		{"12.5 mm", Length, "", 0.0125, "SI prefix milli"},
		{"12.5mm", Length, "", 0.0125, "SI prefix milli, no space"},
		{"3", Length, "m", 3, "default unit"},
		{"2.5", Length, "mm", 0.0025, "default unit"},
		{"1 in", Length, "", 0.0254, "NIST SP 811 (2008) B.6: 1 in = 0.0254 m exactly"},
		{"1 ft", Length, "", 0.3048, "NIST SP 811 (2008) B.6: 1 ft = 0.3048 m exactly"},
		{"4 cm", Length, "", 0.04, "SI prefix centi"},
		{"-20 kN", Force, "", -20000, "SI prefix kilo"},
		{"+1.5 MN", Force, "", 1.5e6, "SI prefix mega"},
		{"1 lbf", Force, "", 4.4482216152605, "NIST SP 811 (2008) B.8: 1 lbf = 4.4482216152605 N exactly"},
		{"10 kip", Force, "", 44482.216152605, "1 kip = 1000 lbf"},
		{"210 GPa", Stress, "", 210e9, "SI prefix giga"},
		{"210000 N/mm2", Stress, "", 210e9, "1 N/mm2 = 1 MPa"},
		{"2.1e5 N/mm^2", Stress, "", 210e9, "alias N/mm^2"},
		{"355 MPa", Stress, "", 355e6, "SI prefix mega"},
		{"1 psi", Stress, "", 6894.757293168361, "NIST SP 811 (2008) B.8: 1 psi = 6.894 757 kPa"},
		{"30e6 psi", Stress, "", 30e6 * 6894.757293168361, "Logan example: E = 30e6 psi"},
		{"1 ksi", Stress, "", 6894757.293168361, "1 ksi = 1000 psi"},
		{"1 psf", Stress, "", 47.880258980335840, "NIST SP 811 (2008) B.8: 1 lbf/ft2 = 47.880 26 Pa"},
		{"1 kPa", Pressure, "", 1000, "SI prefix kilo"},
		{"2 in2", Area, "", 2 * 0.00064516, "NIST SP 811 (2008) B.8: 1 in2 = 6.4516e-4 m2 exactly"},
		{"1 ft2", Area, "", 0.09290304, "NIST SP 811 (2008) B.8: 1 ft2 = 9.290304e-2 m2 exactly"},
		{"7420 mm2", Area, "", 7.42e-3, "SI"},
		{"7420 mm²", Area, "", 7.42e-3, "alias mm²"},
		{"50 cm2", Area, "", 5e-3, "SI"},
		{"0.1 m2", Area, "", 0.1, "SI"},
		{"20 K", TemperatureChange, "", 20, "SI"},
		{"20 degC", TemperatureChange, "", 20, "a difference of 1 degC is 1 K"},
		{"9 degF", TemperatureChange, "", 5, "NIST SP 811 (2008) 4.2.1.1: a difference of 1 degF is 5/9 K"},
		{"-9 °F", TemperatureChange, "", -5, "alias °F"},
		{"12e-6 1/K", ThermalCoefficient, "", 12e-6, "SI"},
		{"12e-6 /K", ThermalCoefficient, "", 12e-6, "alias /K"},
		{"6.5e-6 1/degF", ThermalCoefficient, "", 6.5e-6 * 1.8, "1/degF = 9/5 1/K"},
		{"7850 kg/m3", Density, "", 7850, "SI"},
		{"1 lb/ft3", Density, "", 16.018463373960138, "NIST SP 811 (2008) B.8: 1 lb/ft3 = 16.018 46 kg/m3"},
		{"20 MN/m", Stiffness, "", 20e6, "SI"},
		{"5 kN/mm", Stiffness, "", 5e6, "SI"},
		{"1 N/mm", Stiffness, "", 1e3, "SI"},
		{"1 lbf/in", Stiffness, "", 175.12683524647639, "lbf / in from NIST SP 811 B.8 exact factors"},
		{"1 kip/in", Stiffness, "", 175126.83524647639, "1000 lbf/in"},
		{"1 lb", Mass, "", 0.45359237, "NIST SP 811 (2008) B.8: 1 lb = 0.453 592 37 kg exactly"},
		{"75 kg", Mass, "", 75, "SI"},
		{"1 in4", SecondMoment, "", 4.162314256e-07, "0.0254^4 m^4, NIST SP 811 (2008) B.6 exact inch"},
		{"2060 cm4", SecondMoment, "", 2.06e-05, "SI prefix"},
		{"4.5e6 mm^4", SecondMoment, "", 4.5e-06, "SI prefix"},
		{"50 Hz", Frequency, "", 50, "SI"},
		{"2 kHz", Frequency, "", 2000, "SI prefix"},
		{"6 1/min", Frequency, "", 0.1, "SI Brochure (9th ed.) Table 8: 1 min = 60 s"},
		{"  .5 m ", Length, "", 0.5, "leading fraction, spaces"},
		{"1E3 N", Force, "", 1000, "upper-case exponent"},
		{"2e3mm", Length, "", 2, "exponent then unit without space"},
	}
	for _, tc := range tests {
		t.Run(tc.text, func(t *testing.T) {
			got, err := Parse(tc.text, tc.dim, tc.def)
			if err != nil {
				t.Fatalf("Parse(%q, %v, %q): %v", tc.text, tc.dim, tc.def, err)
			}
			if !close(got, tc.want) {
				t.Errorf("Parse(%q) = %.17g, want %.17g (%s)", tc.text, got, tc.want, tc.src)
			}
		})
	}
}

func TestParseErrors(t *testing.T) {
	tests := []struct {
		text    string
		dim     Dimension
		def     string
		want    error
		mention []string
	}{
		{"12 furlongs", Length, "", ErrUnknownUnit, []string{`"furlongs"`, "m, cm, mm, ft, in"}},
		{"12 KN", Force, "", ErrUnknownUnit, []string{`did you mean "kN"`}},
		{"12 mN", Force, "", ErrUnknownUnit, []string{`"mN"`}},
		{"12 mm", Force, "", ErrWrongDimension, []string{"length", "expected a force unit", "kN"}},
		{"1 kPa", Stiffness, "", ErrWrongDimension, []string{"stress", "stiffness"}},
		{"1 mm", Area, "", ErrWrongDimension, []string{"expected an area unit"}},
		{"12", Force, "", ErrMissingUnit, []string{"no default force unit", "kN"}},
		{"12", Force, "mm", ErrWrongDimension, []string{"length"}},
		{"NaN kN", Force, "", ErrNotFinite, nil},
		{"nan", Force, "kN", ErrNotFinite, nil},
		{"-Inf m", Length, "", ErrNotFinite, nil},
		{".inf", Length, "m", ErrNotFinite, nil},
		{"1e999 m", Length, "", ErrNotFinite, []string{"too large"}},
		{"1e308 ksi", Stress, "", ErrNotFinite, []string{"overflows"}},
		{"", Length, "m", ErrSyntax, []string{"empty"}},
		{"mm", Length, "", ErrSyntax, []string{"does not start with a number"}},
		{"1,5 mm", Length, "", ErrSyntax, []string{`unexpected ","`}},
		{"12e-61/K", ThermalCoefficient, "", ErrSyntax, []string{"put a space"}},
		{"−5 m", Length, "", ErrSyntax, nil}, // U+2212 minus sign
		{"0x10 m", Length, "", ErrUnknownUnit, nil},
	}
	for _, tc := range tests {
		t.Run(tc.text, func(t *testing.T) {
			_, err := Parse(tc.text, tc.dim, tc.def)
			if err == nil {
				t.Fatalf("Parse(%q) succeeded, want %v", tc.text, tc.want)
			}
			if !errors.Is(err, tc.want) {
				t.Errorf("Parse(%q) error %q is not %v", tc.text, err, tc.want)
			}
			for _, m := range tc.mention {
				if !strings.Contains(err.Error(), m) {
					t.Errorf("Parse(%q) error %q does not mention %q", tc.text, err, m)
				}
			}
		})
	}
}

func TestEveryUnitRoundTrips(t *testing.T) {
	for _, u := range canonical {
		got, err := Parse("1 "+u.Symbol, u.Dim, "")
		if err != nil || got != u.ToSI {
			t.Errorf("1 %s = %v, %v; want %v", u.Symbol, got, err, u.ToSI)
		}
		if u.Source == "" {
			t.Errorf("%s has no source", u.Symbol)
		}
	}
	for a, c := range aliases {
		ua, ok1 := Lookup(a)
		uc, ok2 := Lookup(c)
		if !ok1 || !ok2 || ua != uc {
			t.Errorf("alias %q -> %q does not resolve", a, c)
		}
	}
}

func TestDimensionNames(t *testing.T) {
	for d := Length; d <= Frequency; d++ {
		if strings.HasPrefix(d.String(), "dimension(") || d.SI() == "" {
			t.Errorf("dimension %d has no name or SI unit", int(d))
		}
		u, ok := Lookup(d.SI())
		if !ok || u.ToSI != 1 || u.Dim != d {
			t.Errorf("SI unit %q of %v is not in the table with factor 1", d.SI(), d)
		}
	}
}

func FuzzParse(f *testing.F) {
	for _, s := range []string{"12.5 mm", "210GPa", "-20 kN", "3", "12e-6 1/K", "1e999 m", "nan", "1,5", "°F", "7 lb/ft³", ".5e-3in"} {
		f.Add(s, int(Length))
	}
	f.Fuzz(func(t *testing.T, s string, d int) {
		dim := Dimension(d%10 + 1)
		if d < 0 {
			dim = Length
		}
		v, err := Parse(s, dim, "")
		if err != nil {
			if v != 0 {
				t.Fatalf("error with non-zero value %v", v)
			}
			return
		}
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Fatalf("Parse(%q) = %v without error", s, v)
		}
		// A parsed quantity re-parses to the same SI value when written in SI.
		again, err := Parse(fmt.Sprintf("%.17g %s", v, dim.SI()), dim, "")
		if err != nil || again != v {
			t.Fatalf("re-parse of %q (%v) gave %v, %v", s, v, again, err)
		}
	})
}

func ExampleParse() {
	e, _ := Parse("30e6 psi", Stress, "")
	a, _ := Parse("2 in2", Area, "")
	l, _ := Parse("3", Length, "m") // bare number takes the default unit
	_, err := Parse("12 mm", Force, "")
	fmt.Printf("E = %.4g Pa, A = %.6g m2, L = %g m\n", e, a, l)
	fmt.Println(err)
	// Output:
	// E = 2.068e+11 Pa, A = 0.00129032 m2, L = 3 m
	// wrong dimension: "mm" is a unit of length, expected a force unit (one of N, kN, MN, lbf, kip)
}

// TestSystemOutput: a file's declared units decide the report system, and
// the report units convert SI results exactly back (NIST SP 811 (2008)
// App. B: 1 kip = 4448.2216152605 N, 1 ksi = 6.894757293168361 MPa, 1 in =
// 25.4 mm).
func TestSystemOutput(t *testing.T) {
	for _, c := range []struct {
		symbols []string
		want    System
	}{
		{[]string{"m", "kN", "GPa"}, SI},
		{[]string{"in", "lbf", "psi", "in2"}, US},
		{[]string{"mm", "kip"}, US},
		{[]string{"lb/ft^3"}, US},
		{nil, SI},
	} {
		if got := SystemOf(c.symbols...); got != c.want {
			t.Errorf("SystemOf(%v) = %v, want %v", c.symbols, got, c.want)
		}
	}
	us := OutputOf(US)
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"4448.2216152605 N in kip", us.Force.FromSI(4448.2216152605), 1},
		{"6.894757293168361 MPa in ksi", us.Stress.FromSI(6.894757293168361e6), 1},
		{"25.4 mm in in", us.Displacement.FromSI(0.0254), 1},
		{"0.3048 m in ft", us.Length.FromSI(0.3048), 1},
		{"1000 N in kN", OutputOf(SI).Force.FromSI(1000), 1},
	} {
		if math.Abs(c.got-c.want) > 1e-12 {
			t.Errorf("%s = %.15g, want %g", c.name, c.got, c.want)
		}
	}
	for _, text := range []string{"si", "us"} {
		s, err := ParseSystem(text)
		if err != nil || s.String() != text {
			t.Errorf("ParseSystem(%q) = %v, %v", text, s, err)
		}
	}
	if _, err := ParseSystem("imperial"); err == nil {
		t.Error("ParseSystem(imperial) accepted")
	}
}

func TestParseWritten(t *testing.T) {
	v, u, err := ParseWritten("2.5 kN/m", Force, Pressure, Stiffness)
	if err != nil || v != 2.5 || u.Symbol != "kN/m" || u.ToSI != 1e3 {
		t.Errorf("2.5 kN/m: %v %+v %v", v, u, err)
	}
	v, u, err = ParseWritten("1 kPa", Force, Pressure, Stiffness)
	if err != nil || v != 1 || u.Symbol != "kPa" {
		t.Errorf("1 kPa: %v %+v %v", v, u, err)
	}
	for text, want := range map[string]error{"1": ErrMissingUnit, "1 mm": ErrWrongDimension, "1 kPz": ErrUnknownUnit, "kPa": ErrSyntax, "1e308 MN": ErrNotFinite} {
		if _, _, err := ParseWritten(text, Force, Pressure, Stiffness); !errors.Is(err, want) {
			t.Errorf("%q: %v, want %v", text, err, want)
		}
	}
}
