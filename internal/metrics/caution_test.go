package metrics

import (
	"strings"
	"testing"

	"trussmonitor/internal/capacity"
)

// TestUtilisationHelpCarriesCaution: both utilisation series carry the
// utilisation caution in their HELP text, the only text a scrape shows
// beside the value (issue 12: every screen showing utilisation).
func TestUtilisationHelpCarriesCaution(t *testing.T) {
	reg, _ := example(t)
	fams, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	want := map[string]bool{MemberUtilisation: false, MemberUtilisationPredict: false}
	for _, f := range fams {
		if _, ok := want[f.GetName()]; !ok {
			continue
		}
		want[f.GetName()] = true
		if !strings.Contains(f.GetHelp(), capacity.Caution) {
			t.Errorf("%s: HELP %q lacks the utilisation caution", f.GetName(), f.GetHelp())
		}
	}
	for name, seen := range want {
		if !seen {
			t.Errorf("%s not exposed", name)
		}
	}
}
