package units

import "fmt"

// System is a system of units for output: SI or US customary.
type System int

// The systems of units.
const (
	// SI reports in kN, MPa, mm, m.
	SI System = iota
	// US reports in kip, ksi, in, ft.
	US
)

// String returns "si" or "us", the values of the --units flag.
func (s System) String() string {
	if s == US {
		return "us"
	}
	return "si"
}

// ParseSystem reads "si" or "us".
func ParseSystem(text string) (System, error) {
	switch text {
	case "si", "SI":
		return SI, nil
	case "us", "US":
		return US, nil
	}
	return SI, fmt.Errorf("unknown system of units %q; use si or us", text)
}

// usCustomary lists the canonical symbols of US customary units.
var usCustomary = map[string]bool{
	"ft": true, "in": true, "lbf": true, "kip": true, "psi": true, "ksi": true,
	"psf": true, "in2": true, "ft2": true, "degF": true, "1/degF": true,
	"lb/ft3": true, "lbf/in": true, "kip/in": true, "lb": true,
}

// SystemOf returns US when any of the symbols (canonical or alias) is a US
// customary unit, else SI: the system a file's declared units are written in.
func SystemOf(symbols ...string) System {
	for _, s := range symbols {
		if c, ok := aliases[s]; ok {
			s = c
		}
		if usCustomary[s] {
			return US
		}
	}
	return SI
}

// Output is the set of units a report is printed in: one unit per kind of
// result.
type Output struct {
	// Force of members and reactions, Stress of members, Displacement of
	// nodes, Length of members and extents.
	Force, Stress, Displacement, Length Unit
}

// OutputOf returns the report units of a system: kN, MPa, mm, m for SI and
// kip, ksi, in, ft for US customary (the units engineers of each system
// read member forces, stresses and deflections in, common practice).
func OutputOf(s System) Output {
	pick := func(sym string) Unit {
		u, _ := Lookup(sym)
		return u
	}
	if s == US {
		return Output{Force: pick("kip"), Stress: pick("ksi"), Displacement: pick("in"), Length: pick("ft")}
	}
	return Output{Force: pick("kN"), Stress: pick("MPa"), Displacement: pick("mm"), Length: pick("m")}
}

// FromSI converts an SI value to this unit (1000 N in kN gives 1).
func (u Unit) FromSI(v float64) float64 { return v / u.ToSI }
