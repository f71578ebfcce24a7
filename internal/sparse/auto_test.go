package sparse

import (
	"fmt"
	"testing"
)

// TestAutoRuleThresholds pins the switch points of autoRule (stated in
// doc.go and README.md).
func TestAutoRuleThresholds(t *testing.T) {
	cases := []struct {
		n, k int
		m    Method
		o    Ordering
	}{
		{40, 39, Dense, Natural},
		{41, 40, Band, RCMOrdering},
		{300000, 20, Band, RCMOrdering},
		{1000000, 64, Band, RCMOrdering},
		{10000, 65, Supernodal, MinimumDegree},
		{2000, 140, Band, RCMOrdering}, // n·k² = 3.9e7 <= 4e7
		{2100, 140, Supernodal, MinimumDegree},
		{10000, 239, Supernodal, MinimumDegree},
		{10000, 240, Supernodal, NestedDissection},
		{300000, 1346, Supernodal, NestedDissection},
	}
	for _, c := range cases {
		m, o := autoRule(c.n, c.k)
		if m != c.m || o != c.o {
			t.Errorf("autoRule(n=%d, k=%d) = %v/%v, want %v/%v", c.n, c.k, m, o, c.m, c.o)
		}
	}
}

// TestAutoPicksBandForBridgesAndDissectionForRoofs: the long box bridges
// (RCM half-bandwidth 20 at every length, George and Liu 1981 ch. 4) take
// the band method; the wide square roof grids take the supernodal method
// after nested dissection; a small roof takes the band and a 5k one
// minimum degree.
func TestAutoPicksBandForBridgesAndDissectionForRoofs(t *testing.T) {
	type tc struct {
		name string
		a    func() *Sym
		m    Method
		o    Ordering
	}
	var cases []tc
	for _, dof := range []int{1000, 10000, 100000} {
		cases = append(cases, tc{fmt.Sprintf("bridge-%d", dof), func() *Sym { a, _ := boxBridge(dof/12, 1).stiffness(); return a }, Band, RCMOrdering})
	}
	cases = append(cases,
		tc{"roof-1k", func() *Sym { a, _ := doubleLayerGrid(gridForDOF(1000), 1).stiffness(); return a }, Band, RCMOrdering},
		tc{"roof-5k", func() *Sym { a, _ := doubleLayerGrid(30, 1).stiffness(); return a }, Supernodal, MinimumDegree},
		tc{"roof-10k", func() *Sym { a, _ := doubleLayerGrid(gridForDOF(10000), 1).stiffness(); return a }, Supernodal, NestedDissection},
		tc{"roof-60k", func() *Sym { a, _ := doubleLayerGrid(gridForDOF(60000), 1).stiffness(); return a }, Supernodal, NestedDissection},
	)
	for _, c := range cases {
		a := c.a()
		k := halfBandwidth(a, rcmNodes(a))
		m, o := autoRule(a.N(), k)
		if m != c.m || o != c.o {
			t.Errorf("%s (n=%d, RCM k=%d): Auto picks %v/%v, want %v/%v", c.name, a.N(), k, m, o, c.m, c.o)
		}
	}
}

// countingOrderers wraps the package's orderings and counts their calls.
func countingOrderers(calls map[string]int) orderers {
	p := productOrderers()
	return orderers{
		rcm: func(a *Sym) []int { calls["rcm"]++; return p.rcm(a) },
		amd: func(a *Sym) []int { calls["amd"]++; return p.amd(a) },
		nd:  func(a *Sym) []int { calls["nd"]++; return p.nd(a) },
	}
}

// TestAutoComputesOnlyTheChosenOrdering: the Auto path runs RCM once (for
// the half-bandwidth) and then only the ordering of the method it picks;
// in particular no minimum degree ordering when it picks the band. The
// bridge is long enough (120k DOF, band work n·k² = 4.8e7 over
// bandCheapWork) that the earlier rule computed minimum degree and the
// symbolic factorisation before choosing the band.
func TestAutoComputesOnlyTheChosenOrdering(t *testing.T) {
	bridge, _ := boxBridge(10000, 1).stiffness()
	roof5k, _ := doubleLayerGrid(30, 1).stiffness()
	roof10k, _ := doubleLayerGrid(gridForDOF(10000), 1).stiffness()
	small, _ := boxBridge(2, 1).stiffness()
	cases := []struct {
		name string
		a    *Sym
		m    Method
		want map[string]int
	}{
		{"bridge-120k", bridge, Band, map[string]int{"rcm": 1}},
		{"roof-5k", roof5k, Supernodal, map[string]int{"rcm": 1, "amd": 1}},
		{"roof-10k", roof10k, Supernodal, map[string]int{"rcm": 1, "nd": 1}},
		{"bridge-2panels", small, Dense, map[string]int{}},
	}
	for _, c := range cases {
		calls := map[string]int{}
		f, err := factorizeAuto(c.a, AutoOrdering, DefaultPivotTol, countingOrderers(calls))
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if f.Stats().Method != c.m {
			t.Errorf("%s: method %v, want %v", c.name, f.Stats().Method, c.m)
		}
		for _, name := range []string{"rcm", "amd", "nd"} {
			if calls[name] != c.want[name] {
				t.Errorf("%s: %s ordering computed %d times, want %d", c.name, name, calls[name], c.want[name])
			}
		}
		x := make([]float64, c.a.N())
		b := make([]float64, c.a.N())
		for i := range b {
			b[i] = 1
		}
		f.Solve(x, b)
		if eta := backwardError(c.a, x, b); eta > 1e-15 {
			t.Errorf("%s: backward error %.3g", c.name, eta)
		}
	}
}
