package alerts

import (
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/capacity"
)

// TestUtilisationCaution: every place the alarm machinery shows a
// utilisation carries capacity.Caution (DESIGN.md, Safety; issue 12): the
// message of a raised and of a cleared utilisation event, the utilisation
// rule's description, and that description as written into the
// Prometheus rules file.
func TestUtilisationCaution(t *testing.T) {
	sig := SignalUtilisation.String()
	for _, e := range []Event{
		{Kind: Raised, Evidence: Evidence{Signal: sig, Value: 0.93, Threshold: 0.9}},
		{Kind: Cleared, Evidence: Evidence{Signal: sig, Value: 0.81, Threshold: 0.85}},
	} {
		if m := Message(e); !strings.Contains(m, capacity.Caution) || !strings.Contains(m, "utilisation 0.") {
			t.Errorf("%v message %q lacks the utilisation caution", e.Kind, m)
		}
	}
	rules, err := DefaultRules()
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, r := range rules {
		if r.Signal == SignalUtilisation {
			found = true
			if !strings.Contains(r.Description, capacity.Caution) {
				t.Errorf("rule %s: description %q lacks the utilisation caution", r.Name, r.Description)
			}
		}
	}
	if !found {
		t.Fatal("no utilisation rule among the default rules")
	}
	out, err := PrometheusRulesFor(rules, []string{"example-footbridge"})
	if err != nil {
		t.Fatal(err)
	}
	var file struct {
		Groups []struct {
			Rules []struct {
				Alert       string            `yaml:"alert"`
				Annotations map[string]string `yaml:"annotations"`
			} `yaml:"rules"`
		} `yaml:"groups"`
	}
	if err := yaml.Unmarshal(out, &file); err != nil {
		t.Fatal(err)
	}
	n := 0
	for _, g := range file.Groups {
		for _, r := range g.Rules {
			if r.Alert == string(RuleUtilisationHigh) {
				n++
				if d := r.Annotations["description"]; !strings.Contains(d, capacity.Caution) {
					t.Errorf("rules file: %s description %q lacks the utilisation caution", r.Alert, d)
				}
			}
		}
	}
	if n != 1 {
		t.Errorf("rules file has %d %s alerts, want 1", n, RuleUtilisationHigh)
	}
}
