package main

import (
	"strings"
	"testing"

	"trussmonitor/internal/capacity"
)

// TestCheckCapacity: `monitor check` prints a row per member with its
// resistance and utilisation per load case and the utilisation caution for
// the roof (AISC 360-16); a structure without a design basis prints no such
// section.
func TestCheckCapacity(t *testing.T) {
	code, out, errs := runModelCmd(t, runCheck, "../../testdata/roof/structure.yaml")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	i := strings.Index(out, "member resistance (AISC 360-16)")
	if i < 0 {
		t.Fatalf("no resistance section:\n%s", out)
	}
	sec := out[i:]
	rows := 0
	for _, l := range strings.Split(sec, "\n") {
		if strings.HasPrefix(l, "  TX") || strings.HasPrefix(l, "  TY") || strings.HasPrefix(l, "  BX") || strings.HasPrefix(l, "  BY") || strings.HasPrefix(l, "  W") {
			rows++
		}
	}
	if rows != 384 {
		t.Errorf("%d member rows, want 384", rows)
	}
	for _, want := range []string{"Fcr MPa", "snow_drift", "largest utilisation", capacity.Caution} {
		if !strings.Contains(sec, want) {
			t.Errorf("resistance section lacks %q", want)
		}
	}
	_, out, _ = runModelCmd(t, runCheck, "../../testdata/reference/pratt-4.yaml")
	if strings.Contains(out, "member resistance") || strings.Contains(out, "utilisation") {
		t.Errorf("a structure without a design basis prints a resistance section")
	}
}
