package units

import (
	"fmt"
	"math"
	"strings"
)

// ParseWritten reads a number with a unit symbol that measures one of dims
// and returns the number as written with its unit (no conversion), for
// quantities that are shown back to the user in the unit they chose, such
// as the reference load of a load pattern ("1 kPa", "2.5 kN/m"). A unit is
// required.
func ParseWritten(text string, dims ...Dimension) (float64, Unit, error) {
	v, sym, err := split(text)
	if err != nil {
		return 0, Unit{}, err
	}
	var names []string
	for _, d := range dims {
		names = append(names, fmt.Sprintf("%s (%s)", d, Symbols(d)))
	}
	if sym == "" {
		return 0, Unit{}, fmt.Errorf("%w: %s has no unit; write it with a unit of %s", ErrMissingUnit, formatNumber(v), strings.Join(names, " or "))
	}
	u, ok := Lookup(sym)
	if !ok {
		return 0, Unit{}, fmt.Errorf("%w %q; use a unit of %s", ErrUnknownUnit, sym, strings.Join(names, " or "))
	}
	for _, d := range dims {
		if u.Dim == d {
			if math.IsInf(v*u.ToSI, 0) {
				return 0, Unit{}, fmt.Errorf("%w: %q overflows", ErrNotFinite, text)
			}
			return v, u, nil
		}
	}
	return 0, Unit{}, fmt.Errorf("%w: %q measures %s; use a unit of %s", ErrWrongDimension, sym, u.Dim, strings.Join(names, " or "))
}
