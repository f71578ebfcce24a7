package main

import (
	"encoding/json"
	"math"
	"testing"

	"trussmonitor/internal/model"
	"trussmonitor/internal/structfile"
)

// TestSolveZeroStateForTotals: `monitor solve --json --case dead_only` of
// the example footbridge prints, for every member, the force that the
// member state of the pipeline takes as its zero-state force. The sensor
// map zeroes the gauges under the dead load at the reference temperature,
// which is the load case dead_only; internal/replay's
// TestMemberStateRecordedDay checks every total force of the recorded day
// against model.SolveCase("dead_only") plus the measured change, so with
// this test the totals are checked against the command's own output
// (equal to within 1e-12 relative: JSON keeps every float64 digit).
func TestSolveZeroStateForTotals(t *testing.T) {
	code, out, errs := runModelCmd(t, runSolve, "--json", "--case", "dead_only", footbridgeFile)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var js struct {
		Members []struct {
			ID     string  `json:"id"`
			ForceN float64 `json:"force_n"`
		} `json:"members"`
	}
	if err := json.Unmarshal([]byte(out), &js); err != nil {
		t.Fatalf("JSON: %v", err)
	}
	st, err := structfile.LoadFile(footbridgeFile)
	if err != nil {
		t.Fatal(err)
	}
	m, err := model.Analyze(st)
	if err != nil {
		t.Fatal(err)
	}
	zero, err := m.SolveCase("dead_only")
	if err != nil {
		t.Fatal(err)
	}
	if len(js.Members) != len(st.Members) {
		t.Fatalf("solve printed %d members, structure has %d", len(js.Members), len(st.Members))
	}
	nonzero := 0
	for k, mb := range js.Members {
		if mb.ID != st.Members[k].ID {
			t.Fatalf("member %d is %s, want %s", k, mb.ID, st.Members[k].ID)
		}
		if d := math.Abs(mb.ForceN - zero.Forces[k]); d > 1e-12*math.Max(math.Abs(zero.Forces[k]), 1e3) {
			t.Errorf("%s: monitor solve %.17g N, zero state of the member state %.17g N", mb.ID, mb.ForceN, zero.Forces[k])
		}
		if math.Abs(mb.ForceN) > 1e3 {
			nonzero++
		}
	}
	if nonzero < len(st.Members)/2 {
		t.Errorf("only %d of %d members carry more than 1 kN under the dead load", nonzero, len(st.Members))
	}
}
