package model

import "testing"

// TestEquilibriumVerdict: a case whose backward error exceeds its limit
// prints FAILED and makes check exit non-zero; within the limit it is ok.
func TestEquilibriumVerdict(t *testing.T) {
	rep := &StructureCheck{Cases: []CaseCheck{
		{Name: "good", Equilibrium: Equilibrium{BackwardError: 1e-16, Limit: 1e-13}},
		{Name: "bad", Equilibrium: Equilibrium{BackwardError: 1e-9, Limit: 1e-13}},
	}}
	if got := rep.EquilibriumFailures(); len(got) != 1 || got[0] != "bad" {
		t.Errorf("failures %v, want [bad]", got)
	}
}
