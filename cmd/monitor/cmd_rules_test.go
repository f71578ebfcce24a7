package main

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

func TestRulesCommand(t *testing.T) {
	out := filepath.Join(t.TempDir(), "rules.yml")
	var stdout, stderr bytes.Buffer
	code := runRules(context.Background(), []string{"--out", out,
		"../../testdata/footbridge/structure.yaml", "../../testdata/roof/structure.yaml"}, &stdout, &stderr)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	got, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	want, err := os.ReadFile("../../deploy/prometheus/rules/trussmonitor.rules.yml")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Error("monitor rules output differs from deploy/prometheus/rules/trussmonitor.rules.yml")
	}
	stderr.Reset()
	if code := runRules(context.Background(), nil, &stdout, &stderr); code != 2 || !strings.Contains(stderr.String(), "no structure file") {
		t.Errorf("no arguments: exit %d, %q", code, stderr.String())
	}
	stderr.Reset()
	if code := runRules(context.Background(), []string{"missing.yaml"}, &stdout, &stderr); code != 1 || !strings.Contains(stderr.String(), "missing.yaml") {
		t.Errorf("missing file: exit %d, %q", code, stderr.String())
	}
}

// TestRulesCommandConfig checks that `monitor rules --config` writes the
// configuration's own thresholds (silent_after 7m, 4 rejections a minute)
// for the configuration's structures, and lets Prometheus's rule engine
// (promtool test rules) confirm them on series built for those thresholds:
// a channel silent for 6 minutes does not alarm, for 8 minutes does; 3
// rejections a minute (15 in the 5-minute window) do not, 5 a minute (25)
// do.
func TestRulesCommandConfig(t *testing.T) {
	dir := t.TempDir()
	abs := func(p string) string {
		a, err := filepath.Abs(p)
		if err != nil {
			t.Fatal(err)
		}
		return a
	}
	cfg := "database: monitor.db\n" +
		"alarms: {silent_after: 7m, reject_rate_per_minute: 4}\n" +
		"structures:\n" +
		"  - {structure: " + abs("../../testdata/footbridge/structure.yaml") + ", sensors: " + abs("../../testdata/footbridge/sensors.yaml") + "}\n"
	cfgPath := filepath.Join(dir, "monitor.yaml")
	if err := os.WriteFile(cfgPath, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	rulesPath := filepath.Join(dir, "rules.yml")
	var stdout, stderr bytes.Buffer
	if code := runRules(context.Background(), []string{"--config", cfgPath, "--out", rulesPath}, &stdout, &stderr); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	if !strings.Contains(stderr.String(), "(1 structure)") {
		t.Errorf("summary %q, want the singular", stderr.String())
	}
	rules, err := os.ReadFile(rulesPath)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"> 420", "> 20\n"} {
		if !strings.Contains(string(rules), want) {
			t.Errorf("rules file lacks the configured threshold %q", want)
		}
	}
	promtool, err := exec.LookPath("promtool")
	if err != nil {
		if os.Getenv("TRUSSMON_REQUIRE_TOOLS") == "1" {
			t.Fatal("promtool not found (TRUSSMON_REQUIRE_TOOLS=1): apt-get install prometheus")
		}
		t.Skip("promtool not found; install Debian's prometheus package for the rule-engine half of this test")
	}
	test := `rule_files: [rules.yml]
evaluation_interval: 1m
tests:
  - interval: 1m
    input_series:
      - series: 'shm_channel_last_reading_timestamp_seconds{structure="alder-creek", channel="D2_a"}'
        values: '0x20'
      - series: 'shm_ingest_rejections_total{structure="alder-creek", reason="bad_payload"}'
        values: '0+3x6 18+5x12'
    alert_rule_test:
      - {eval_time: 6m, alertname: ChannelSilent, exp_alerts: []}
      - eval_time: 8m
        alertname: ChannelSilent
        exp_alerts:
          - exp_labels: {severity: warning, structure: alder-creek, channel: D2_a}
            exp_annotations:
              summary: Channel D2_a of alder-creek has not reported
              description: No reading from the channel for more than the silence limit; check the logger, the sensor cable and the broker connection.
      - {eval_time: 6m, alertname: IngestRejects, exp_alerts: []}
      - eval_time: 13m
        alertname: IngestRejects
        exp_alerts:
          - exp_labels: {severity: warning, structure: alder-creek}
            exp_annotations:
              summary: Ingest of alder-creek rejects payloads
              description: More payloads than the limit were rejected (dead letters) in the counting window; see the dead-letter table for the reasons.
`
	testPath := filepath.Join(dir, "test.yml")
	if err := os.WriteFile(testPath, []byte(test), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(promtool, "test", "rules", "test.yml")
	cmd.Dir = dir
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("promtool test rules: %v\n%s", err, out)
	}
}
