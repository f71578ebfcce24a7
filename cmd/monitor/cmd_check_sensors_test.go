package main

import (
	"bytes"
	"context"
	"strings"
	"testing"
)

// TestCheckWithSensors: monitor check --sensors adds the detectability
// section: one row per gauged member of the footbridge's sensor map, the
// weakest member and the suggested additional gauges.
func TestCheckWithSensors(t *testing.T) {
	var out, errb bytes.Buffer
	code := dispatch(context.Background(), []string{"check", "../../testdata/footbridge/structure.yaml", "--sensors", "../../testdata/footbridge/sensors.yaml"}, &out, &errb)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	s := out.String()
	// The separability section: D2 is a gauged diagonal of a determinate
	// panel, so its gauge fault and its stiffness change form one group
	// (the hand-truss case of reconcile.TestSeparabilityHandTruss).
	for _, want := range []string{"detectability", "redundancy", "MDB [kN]", "B4 ", "C5 ", "weakest member:", "additional gauge pair", "not a safety verdict",
		"separability of the candidate causes", "cannot be told apart: gauge D2 | E A of D2 |", "untestable in one epoch"} {
		if !strings.Contains(s, want) {
			t.Errorf("output lacks %q", want)
		}
	}
	// A sensor map that names a missing member is an error naming the file.
	code = dispatch(context.Background(), []string{"check", "../../testdata/reference/two-bar.yaml", "--sensors", "../../testdata/footbridge/sensors.yaml"}, &out, &errb)
	if code == 0 || !strings.Contains(errb.String(), "sensors.yaml") {
		t.Errorf("mismatched sensor map: exit %d, stderr %q", code, errb.String())
	}
}
