// Package units parses quantities written with units (SI and US customary)
// and converts them to SI: metres, newtons, pascals, kelvin (as temperature
// differences), kilograms, hertz.
//
// A quantity is a decimal number followed by a unit symbol, with or without a
// space ("12.5 mm", "210GPa", "-20 kN"), or a bare number that takes a
// declared default unit. Every unit belongs to exactly one Dimension, and a
// quantity is only accepted for the dimension the caller expects.
//
// Conversion factors are exact. The US customary ones follow NIST Special
// Publication 811, 2008 edition, Appendix B: 1 in = 0.0254 m and
// 1 ft = 0.3048 m exactly (B.6), 1 lb (avoirdupois) = 0.45359237 kg exactly,
// and 1 lbf = 1 lb x standard gravity 9.80665 m/s^2 = 4.4482216152605 N
// exactly (B.8 lists it rounded as 4.448 222 N); 1 kip = 1000 lbf. Derived
// units (psi, psf, lbf/in, lb/ft3, ...) are computed from these in float64, so
// they carry only rounding in the last bit.
package units

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"unicode"
)

// Dimension is the physical kind of a quantity.
type Dimension int

// The dimensions understood by the parser.
const (
	// Length in metres.
	Length Dimension = iota + 1
	// Force in newtons.
	Force
	// Stress is force per area in pascals: stress, modulus of elasticity
	// and pressure share it.
	Stress
	// Area in square metres.
	Area
	// TemperatureChange is a temperature difference in kelvin (degC and
	// degF are read as differences, never as absolute temperatures).
	TemperatureChange
	// ThermalCoefficient is a coefficient of thermal expansion in 1/K.
	ThermalCoefficient
	// Density is mass density in kg/m^3.
	Density
	// Stiffness is a spring stiffness (force per length) in N/m.
	Stiffness
	// Mass in kilograms.
	Mass
	// SecondMoment is a second moment of area (moment of inertia of a
	// section) in m^4.
	SecondMoment
	// Frequency in hertz (a logger's sampling rate).
	Frequency
)

// Pressure is the same dimension as Stress (force per area); the name reads
// better for area loads such as a crowd or snow load.
const Pressure = Stress

var dimensionNames = map[Dimension]string{
	Length:             "length",
	Force:              "force",
	Stress:             "stress (force per area)",
	Area:               "area",
	TemperatureChange:  "temperature change",
	ThermalCoefficient: "thermal coefficient",
	Density:            "density",
	Stiffness:          "stiffness (force per length)",
	Mass:               "mass",
	SecondMoment:       "second moment of area",
	Frequency:          "frequency",
}

var siSymbols = map[Dimension]string{
	Length:             "m",
	Force:              "N",
	Stress:             "Pa",
	Area:               "m2",
	TemperatureChange:  "K",
	ThermalCoefficient: "1/K",
	Density:            "kg/m3",
	Stiffness:          "N/m",
	Mass:               "kg",
	SecondMoment:       "m4",
	Frequency:          "Hz",
}

// String names the dimension in words, for messages.
func (d Dimension) String() string {
	if s, ok := dimensionNames[d]; ok {
		return s
	}
	return fmt.Sprintf("dimension(%d)", int(d))
}

// SI returns the symbol of the SI unit the parser converts this dimension to.
func (d Dimension) SI() string { return siSymbols[d] }

// Exact base definitions, NIST Special Publication 811 (2008), Appendix B.
const (
	inch          = 0.0254     // m, exact (B.6)
	foot          = 12 * inch  // 0.3048 m, exact
	pound         = 0.45359237 // kg, avoirdupois pound, exact
	gravity       = 9.80665    // m/s^2, standard acceleration of gravity, exact (CGPM 1901)
	poundForce    = pound * gravity
	kip           = 1000 * poundForce
	nistSource    = "NIST SP 811 (2008) App. B"
	siSource      = "SI prefix"
	derivedSource = "NIST SP 811 (2008) App. B, derived"
)

// Unit is one accepted unit symbol with its conversion to SI.
type Unit struct {
	// Symbol is the unit as written, for example "kN" or "N/mm2".
	Symbol string
	// Dim is the dimension it measures.
	Dim Dimension
	// ToSI is the SI value of one unit (1 kN -> 1000).
	ToSI float64
	// Source names where the factor comes from.
	Source string
}

// table lists the canonical symbols; aliases are added by init-free
// construction in newTable.
var canonical = []Unit{
	{"m", Length, 1, siSource},
	{"cm", Length, 1e-2, siSource},
	{"mm", Length, 1e-3, siSource},
	{"ft", Length, foot, nistSource},
	{"in", Length, inch, nistSource},

	{"N", Force, 1, siSource},
	{"kN", Force, 1e3, siSource},
	{"MN", Force, 1e6, siSource},
	{"lbf", Force, poundForce, nistSource},
	{"kip", Force, kip, nistSource},

	{"Pa", Stress, 1, siSource},
	{"kPa", Stress, 1e3, siSource},
	{"MPa", Stress, 1e6, siSource},
	{"GPa", Stress, 1e9, siSource},
	{"N/mm2", Stress, 1e6, siSource},
	{"psi", Stress, poundForce / (inch * inch), derivedSource},
	{"ksi", Stress, kip / (inch * inch), derivedSource},
	{"psf", Stress, poundForce / (foot * foot), derivedSource},

	{"m2", Area, 1, siSource},
	{"cm2", Area, 1e-4, siSource},
	{"mm2", Area, 1e-6, siSource},
	{"in2", Area, inch * inch, nistSource},
	{"ft2", Area, foot * foot, nistSource},

	{"K", TemperatureChange, 1, siSource},
	{"degC", TemperatureChange, 1, "NIST SP 811 (2008) 4.2.1.1, as a difference"},
	{"degF", TemperatureChange, 5.0 / 9.0, "NIST SP 811 (2008) App. B, as a difference"},

	{"1/K", ThermalCoefficient, 1, siSource},
	{"1/degC", ThermalCoefficient, 1, siSource},
	{"1/degF", ThermalCoefficient, 9.0 / 5.0, derivedSource},

	{"kg/m3", Density, 1, siSource},
	{"lb/ft3", Density, pound / (foot * foot * foot), nistSource},

	{"N/m", Stiffness, 1, siSource},
	{"kN/m", Stiffness, 1e3, siSource},
	{"MN/m", Stiffness, 1e6, siSource},
	{"N/mm", Stiffness, 1e3, siSource},
	{"kN/mm", Stiffness, 1e6, siSource},
	{"lbf/in", Stiffness, poundForce / inch, derivedSource},
	{"kip/in", Stiffness, kip / inch, derivedSource},

	{"kg", Mass, 1, siSource},
	{"lb", Mass, pound, nistSource},

	{"m4", SecondMoment, 1, siSource},
	{"cm4", SecondMoment, 1e-8, siSource},
	{"mm4", SecondMoment, 1e-12, siSource},
	{"in4", SecondMoment, inch * inch * inch * inch, nistSource},
	{"Hz", Frequency, 1, siSource},
	{"kHz", Frequency, 1e3, siSource},
	{"1/s", Frequency, 1, siSource},
	{"1/min", Frequency, 1.0 / 60, "SI Brochure (9th ed.) Table 8, minute = 60 s"},
}

// aliases maps alternative spellings to canonical symbols.
var aliases = map[string]string{
	"m^2": "m2", "m²": "m2", "cm^2": "cm2", "cm²": "cm2", "mm^2": "mm2", "mm²": "mm2",
	"in^2": "in2", "in²": "in2", "ft^2": "ft2", "ft²": "ft2",
	"N/mm^2": "N/mm2", "N/mm²": "N/mm2",
	"°C": "degC", "°F": "degF",
	"/K": "1/K", "/degC": "1/degC", "/°C": "1/degC", "1/°C": "1/degC",
	"/degF": "1/degF", "/°F": "1/degF", "1/°F": "1/degF",
	"m^4": "m4", "cm^4": "cm4", "mm^4": "mm4", "in^4": "in4", "/s": "1/s", "/min": "1/min",
	"kg/m^3": "kg/m3", "kg/m³": "kg/m3", "lb/ft^3": "lb/ft3", "lb/ft³": "lb/ft3",
}

// Lookup returns the unit with the given symbol (canonical or alias; case
// matters: "mN" is not "MN").
func Lookup(symbol string) (Unit, bool) {
	if c, ok := aliases[symbol]; ok {
		symbol = c
	}
	for _, u := range canonical {
		if u.Symbol == symbol {
			return u, true
		}
	}
	return Unit{}, false
}

// Of returns the canonical units of a dimension in table order.
func Of(d Dimension) []Unit {
	var out []Unit
	for _, u := range canonical {
		if u.Dim == d {
			out = append(out, u)
		}
	}
	return out
}

// Symbols returns the canonical symbols of a dimension joined by ", ", for
// messages.
func Symbols(d Dimension) string {
	var s []string
	for _, u := range Of(d) {
		s = append(s, u.Symbol)
	}
	return strings.Join(s, ", ")
}

// Errors returned (wrapped) by the parser; test with errors.Is.
var (
	// ErrSyntax: the text is not a number optionally followed by a unit.
	ErrSyntax = errors.New("not a number with a unit")
	// ErrUnknownUnit: the unit symbol is not in the table.
	ErrUnknownUnit = errors.New("unknown unit")
	// ErrWrongDimension: the unit measures another dimension.
	ErrWrongDimension = errors.New("wrong dimension")
	// ErrMissingUnit: a bare number and no default unit declared.
	ErrMissingUnit = errors.New("missing unit")
	// ErrNotFinite: NaN or infinity, given or produced by conversion.
	ErrNotFinite = errors.New("not a finite number")
)

// Parse reads a quantity of dimension dim from text and returns it in SI.
// text is a number followed by a unit ("12.5 mm") or a bare number, which
// then takes defaultUnit; defaultUnit "" means there is no default and a unit
// is required.
func Parse(text string, dim Dimension, defaultUnit string) (float64, error) {
	num, sym, err := split(text)
	if err != nil {
		return 0, err
	}
	if sym == "" {
		return FromNumber(num, dim, defaultUnit)
	}
	return Convert(num, sym, dim)
}

// FromNumber converts a bare number given in defaultUnit to SI. It fails with
// ErrMissingUnit when defaultUnit is empty.
func FromNumber(v float64, dim Dimension, defaultUnit string) (float64, error) {
	if defaultUnit == "" {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return 0, fmt.Errorf("%w: %v", ErrNotFinite, v)
		}
		return 0, fmt.Errorf("%w: %s has no unit and no default %s unit is declared; write it with a unit (one of %s)",
			ErrMissingUnit, formatNumber(v), dim, Symbols(dim))
	}
	return Convert(v, defaultUnit, dim)
}

// Convert converts v given in unit symbol to SI, checking that the unit
// measures dim.
func Convert(v float64, symbol string, dim Dimension) (float64, error) {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%w: %v", ErrNotFinite, v)
	}
	u, err := Check(symbol, dim)
	if err != nil {
		return 0, err
	}
	si := v * u.ToSI
	if math.IsInf(si, 0) {
		return 0, fmt.Errorf("%w: %s %s overflows when converted to %s", ErrNotFinite, formatNumber(v), symbol, dim.SI())
	}
	return si, nil
}

// Check returns the unit for symbol if it measures dim, and a descriptive
// error (ErrUnknownUnit or ErrWrongDimension) otherwise.
func Check(symbol string, dim Dimension) (Unit, error) {
	u, ok := Lookup(symbol)
	if !ok {
		msg := fmt.Sprintf("%q", symbol)
		if hint := suggest(symbol); hint != "" {
			msg += fmt.Sprintf(" (did you mean %q?)", hint)
		}
		return Unit{}, fmt.Errorf("%w %s; for %s use one of %s", ErrUnknownUnit, msg, dim, Symbols(dim))
	}
	if u.Dim != dim {
		return Unit{}, fmt.Errorf("%w: %q is a unit of %s, expected %s %s unit (one of %s)",
			ErrWrongDimension, symbol, u.Dim, article(dim.String()), dim, Symbols(dim))
	}
	return u, nil
}

// suggest returns a known symbol that differs from s only in letter case or
// surrounding spaces, or "".
func suggest(s string) string {
	t := strings.ReplaceAll(s, " ", "")
	var found []string
	for _, u := range canonical {
		if strings.EqualFold(u.Symbol, t) && u.Symbol != s {
			found = append(found, u.Symbol)
		}
	}
	for a, c := range aliases {
		if strings.EqualFold(a, t) && a != s {
			found = append(found, c)
		}
	}
	if len(found) == 0 {
		return ""
	}
	sort.Strings(found)
	return found[0]
}

// split separates the number from the unit symbol. The number is decimal:
// optional sign, digits with an optional fraction, optional exponent.
func split(text string) (float64, string, error) {
	s := strings.TrimSpace(text)
	if s == "" {
		return 0, "", fmt.Errorf("%w: empty value", ErrSyntax)
	}
	low := strings.ToLower(strings.TrimLeft(s, "+-"))
	for _, bad := range []string{"nan", "inf", ".nan", ".inf"} {
		if strings.HasPrefix(low, bad) {
			return 0, "", fmt.Errorf("%w: %q", ErrNotFinite, text)
		}
	}
	end := scanNumber(s)
	if end == 0 {
		return 0, "", fmt.Errorf("%w: %q does not start with a number", ErrSyntax, text)
	}
	v, err := strconv.ParseFloat(s[:end], 64)
	if err != nil {
		if errors.Is(err, strconv.ErrRange) && math.IsInf(v, 0) {
			return 0, "", fmt.Errorf("%w: %q is too large", ErrNotFinite, text)
		}
		return 0, "", fmt.Errorf("%w: %q", ErrSyntax, text)
	}
	rest := s[end:]
	sym := strings.TrimSpace(rest)
	if sym == "" {
		return v, "", nil
	}
	r := []rune(sym)[0]
	spaced := len(rest) > 0 && unicode.IsSpace([]rune(rest)[0])
	switch {
	case unicode.IsLetter(r) || r == '°':
	case r == '/' || r == '1':
		// "12e-6 1/K" or "12e-6 /K": the unit starts like a number, so a
		// space must separate it or digits would be swallowed silently.
		if !spaced {
			return 0, "", fmt.Errorf("%w: %q: put a space between the number and the unit %q", ErrSyntax, text, sym)
		}
	default:
		return 0, "", fmt.Errorf("%w: %q: unexpected %q after the number", ErrSyntax, text, string(r))
	}
	return v, sym, nil
}

// scanNumber returns the length of the decimal number at the start of s, or
// 0 if there is none.
func scanNumber(s string) int {
	i := 0
	if i < len(s) && (s[i] == '+' || s[i] == '-') {
		i++
	}
	digits := 0
	for i < len(s) && isDigit(s[i]) {
		i++
		digits++
	}
	if i < len(s) && s[i] == '.' {
		i++
		for i < len(s) && isDigit(s[i]) {
			i++
			digits++
		}
	}
	if digits == 0 {
		return 0
	}
	if i < len(s) && (s[i] == 'e' || s[i] == 'E') {
		j := i + 1
		if j < len(s) && (s[j] == '+' || s[j] == '-') {
			j++
		}
		if j < len(s) && isDigit(s[j]) {
			for j < len(s) && isDigit(s[j]) {
				j++
			}
			i = j
		}
	}
	return i
}

// article returns "an" before a vowel sound and "a" otherwise.
func article(word string) string {
	if word != "" && strings.ContainsRune("aeiou", rune(word[0])) {
		return "an"
	}
	return "a"
}

func isDigit(c byte) bool { return c >= '0' && c <= '9' }

func formatNumber(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
