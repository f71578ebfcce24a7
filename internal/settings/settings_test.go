package settings

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/config"
)

func ruleByName(t *testing.T, rules []alerts.Rule, name alerts.RuleName) alerts.Rule {
	t.Helper()
	for _, r := range rules {
		if r.Name == name {
			return r
		}
	}
	t.Fatalf("no rule %s", name)
	return alerts.Rule{}
}

// TestFromConfigAppliesLimits checks that the alarms section becomes the
// rules' thresholds and the epochs section the assembler's settings.
func TestFromConfigAppliesLimits(t *testing.T) {
	cases := []struct {
		name        string
		silentAfter time.Duration
		perMinute   float64
		wantSilent  float64
		wantRejects float64
		wantClear   float64
	}{
		// 5 minute counting window (alerts.CountWindow).
		{"deploy example", 5 * time.Minute, 30, 300, 150, 2},
		{"strict", 45 * time.Second, 0.2, 45, 1, 1},
		{"loose", time.Hour, 100, 3600, 500, 2},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c := config.Defaults()
			c.File = "test.yaml"
			c.Alarms.SilentAfter = config.Duration(tc.silentAfter)
			c.Alarms.RejectRatePerMinute = tc.perMinute
			c.Epochs.Window = config.Duration(10 * time.Second)
			c.Epochs.MaxLateness = config.Duration(30 * time.Second)
			c.Epochs.MissingLoad = "estimate"
			s, err := FromConfig(&c)
			if err != nil {
				t.Fatal(err)
			}
			if s.Window != 10*time.Second || s.MaxLateness != 30*time.Second || !s.EstimateMissingLoads {
				t.Errorf("epoch settings %v %v %v", s.Window, s.MaxLateness, s.EstimateMissingLoads)
			}
			silent := ruleByName(t, s.Rules, alerts.RuleChannelSilent)
			if silent.Raise != tc.wantSilent || silent.Clear != tc.wantSilent {
				t.Errorf("ChannelSilent raise %v clear %v, want %v", silent.Raise, silent.Clear, tc.wantSilent)
			}
			rej := ruleByName(t, s.Rules, alerts.RuleIngestRejects)
			if rej.Raise != tc.wantRejects || rej.Clear != tc.wantClear {
				t.Errorf("IngestRejects raise %v clear %v, want %v and %v", rej.Raise, rej.Clear, tc.wantRejects, tc.wantClear)
			}
			if s.AlphaGlobal != alerts.GlobalTestSize(s.Rules) {
				t.Errorf("alpha %v is not the size of the FitRejected rule's test", s.AlphaGlobal)
			}
		})
	}
}

// TestDefaultsAreTheDeployExample checks that the default settings are the
// ones deploy/monitor.yaml writes out, so the committed rules file (built
// from the defaults) carries the example configuration's thresholds.
func TestDefaultsAreTheDeployExample(t *testing.T) {
	b, err := os.ReadFile("../../deploy/monitor.yaml")
	if err != nil {
		t.Fatal(err)
	}
	var file struct {
		Epochs config.Epochs `yaml:"epochs"`
		Alarms config.Alarms `yaml:"alarms"`
	}
	if err := yaml.Unmarshal(b, &file); err != nil {
		t.Fatal(err)
	}
	def := config.Defaults()
	if file.Alarms != def.Alarms || file.Epochs != def.Epochs {
		t.Errorf("deploy/monitor.yaml alarms %+v epochs %+v; defaults %+v %+v", file.Alarms, file.Epochs, def.Alarms, def.Epochs)
	}
}

// TestDeployedRulesUpToDate checks that the committed rules file is what
// `monitor rules` writes for the two example structures with the default
// settings, and that promtool accepts every rules file under
// deploy/prometheus/rules.
func TestDeployedRulesUpToDate(t *testing.T) {
	s, err := Defaults()
	if err != nil {
		t.Fatal(err)
	}
	want, err := alerts.PrometheusRulesFor(s.Rules, []string{"alder-creek", "harbour-hall"})
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join("..", "..", "deploy", "prometheus", "rules")
	got, err := os.ReadFile(filepath.Join(dir, "trussmonitor.rules.yml"))
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("deploy/prometheus/rules/trussmonitor.rules.yml is stale; regenerate with: go run ./cmd/monitor rules --out deploy/prometheus/rules/trussmonitor.rules.yml testdata/footbridge/structure.yaml testdata/roof/structure.yaml")
	}
	bin, err := exec.LookPath("promtool")
	if err != nil {
		if os.Getenv("TRUSSMON_REQUIRE_TOOLS") == "1" {
			t.Fatalf("promtool not found (TRUSSMON_REQUIRE_TOOLS=1): apt-get install prometheus")
		}
		t.Skip("promtool not found; install Debian's prometheus package to run this check")
	}
	files, err := filepath.Glob(filepath.Join(dir, "*.yml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no rules files in %s (%v)", dir, err)
	}
	for _, f := range files {
		if out, err := exec.Command(bin, "check", "rules", f).CombinedOutput(); err != nil {
			t.Errorf("promtool check rules %s: %v\n%s", f, err, out)
		}
	}
}

// TestAlphaIsAProbability: the global test size shown beside the chi-square
// test is a probability, 0.001 for the default rules (the one-sided upper
// tail of the FitRejected rule's normal-score threshold; it read 3.09,
// the threshold itself, on the dashboard before).
func TestAlphaIsAProbability(t *testing.T) {
	s, err := Defaults()
	if err != nil {
		t.Fatal(err)
	}
	if s.AlphaGlobal != 0.001 {
		t.Errorf("alpha %v, want 0.001", s.AlphaGlobal)
	}
}
