// Package loggercsvtest holds what tests need to compare logger CSV texts
// (the simulator's recorded day against a fresh run). Only tests import it.
package loggercsvtest

import (
	"math"
	"strconv"
	"strings"
)

// SameWithin reports whether two logger CSV texts agree: the same lines and
// cells, where cells that differ must both be numbers within the relative
// tolerance rel (a recorded file printed to 8 significant digits moves in
// its last digit when the solver's ordering changes). On a difference it
// returns the first line that differs (1-based).
func SameWithin(got, want []byte, rel float64) (line int, ok bool) {
	gl := strings.Split(string(got), "\n")
	wl := strings.Split(string(want), "\n")
	if len(gl) != len(wl) {
		return min(len(gl), len(wl)) + 1, false
	}
	for i := range gl {
		if gl[i] == wl[i] {
			continue
		}
		gc, wc := strings.Split(gl[i], ","), strings.Split(wl[i], ",")
		if len(gc) != len(wc) {
			return i + 1, false
		}
		for j := range gc {
			if gc[j] == wc[j] {
				continue
			}
			a, err1 := strconv.ParseFloat(gc[j], 64)
			b, err2 := strconv.ParseFloat(wc[j], 64)
			if err1 != nil || err2 != nil || math.Abs(a-b) > rel*math.Max(math.Abs(a), math.Abs(b))+1e-15 {
				return i + 1, false
			}
		}
	}
	return 0, true
}
