// Package deploytest checks the deployment kit in deploy/ with the tools
// that consume it: promtool for the Prometheus configuration and the
// dashboard's queries, systemd-analyze for the unit, and the service's own
// configuration types for the example monitor.yaml.
package deploytest

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"testing"

	"go/ast"
	"go/parser"
	"go/token"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/config"
)

// tool returns the path of an outside tool, skipping the test when it is
// missing, or failing when TRUSSMON_REQUIRE_TOOLS=1.
func tool(t *testing.T, name, install string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err == nil {
		return p
	}
	msg := fmt.Sprintf("%s not found (%s)", name, install)
	if os.Getenv("TRUSSMON_REQUIRE_TOOLS") == "1" {
		t.Fatal(msg + "; TRUSSMON_REQUIRE_TOOLS=1 forbids skipping")
	}
	t.Skip(msg)
	return ""
}

func run(t *testing.T, name string, args ...string) (string, error) {
	t.Helper()
	cmd := exec.Command(name, args...)
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	err := cmd.Run()
	return out.String(), err
}

const rulesFile = "prometheus/rules/trussmonitor.rules.yml"

func TestPrometheusConfig(t *testing.T) {
	promtool := tool(t, "promtool", "apt-get install -y prometheus")

	t.Run("contents", func(t *testing.T) {
		b, err := os.ReadFile("prometheus/prometheus.yml")
		if err != nil {
			t.Fatal(err)
		}
		var cfg struct {
			RuleFiles     []string `yaml:"rule_files"`
			ScrapeConfigs []struct {
				JobName       string `yaml:"job_name"`
				MetricsPath   string `yaml:"metrics_path"`
				StaticConfigs []struct {
					Targets []string `yaml:"targets"`
				} `yaml:"static_configs"`
			} `yaml:"scrape_configs"`
		}
		if err := yaml.Unmarshal(b, &cfg); err != nil {
			t.Fatal(err)
		}
		if len(cfg.RuleFiles) != 1 || cfg.RuleFiles[0] != "rules/trussmonitor.rules.yml" {
			t.Errorf("rule_files %v, want [rules/trussmonitor.rules.yml]", cfg.RuleFiles)
		}
		found := false
		for _, sc := range cfg.ScrapeConfigs {
			if sc.JobName == "trussmonitor" && sc.MetricsPath == "/metrics" &&
				len(sc.StaticConfigs) == 1 && len(sc.StaticConfigs[0].Targets) == 1 && sc.StaticConfigs[0].Targets[0] == "127.0.0.1:9470" {
				found = true
			}
		}
		if !found {
			t.Errorf("no trussmonitor job scraping /metrics on 127.0.0.1:9470")
		}
	})

	// The scrape configuration alone, beside an empty rules file in a
	// temporary copy, so its validity is known even before the rules exist.
	t.Run("scrape config in a temporary copy", func(t *testing.T) {
		dir := t.TempDir()
		b, err := os.ReadFile("prometheus/prometheus.yml")
		if err != nil {
			t.Fatal(err)
		}
		if err := os.MkdirAll(filepath.Join(dir, "rules"), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, "prometheus.yml"), b, 0o644); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, "rules", "trussmonitor.rules.yml"), []byte("groups: []\n"), 0o644); err != nil {
			t.Fatal(err)
		}
		if out, err := run(t, promtool, "check", "config", filepath.Join(dir, "prometheus.yml")); err != nil {
			t.Errorf("promtool check config: %v\n%s", err, out)
		}
	})

	// The real file with the real generated rules.
	t.Run("real config with generated rules", func(t *testing.T) {
		if _, err := os.Stat(rulesFile); err != nil {
			t.Fatalf("%s is missing: generate it with the monitor's rules command (internal/alerts) and commit it: %v", rulesFile, err)
		}
		out, err := run(t, promtool, "check", "config", "prometheus/prometheus.yml")
		if err != nil {
			t.Fatalf("promtool check config prometheus/prometheus.yml: %v\n%s", err, out)
		}
		if !strings.Contains(out, "SUCCESS") {
			t.Errorf("promtool did not report success:\n%s", out)
		}
	})
}

// unitCopy writes the unit with ExecStart's binary replaced by an existing
// one (the real /usr/local/bin/monitor is not installed on a build machine;
// systemd-analyze verify rightly refuses a missing binary). Everything else
// is verified as written.
func unitCopy(t *testing.T, edit func(string) string) string {
	t.Helper()
	b, err := os.ReadFile("systemd/trussmonitor.service")
	if err != nil {
		t.Fatal(err)
	}
	truePath, err := exec.LookPath("true")
	if err != nil {
		t.Fatalf("no true binary to stand in for /usr/local/bin/monitor: %v", err)
	}
	s := string(b)
	if !strings.Contains(s, "\nExecStart=/usr/local/bin/monitor run --config /etc/trussmonitor/monitor.yaml\n") {
		t.Fatalf("ExecStart is not /usr/local/bin/monitor run --config /etc/trussmonitor/monitor.yaml")
	}
	s = strings.Replace(s, "ExecStart=/usr/local/bin/monitor ", "ExecStart="+truePath+" ", 1)
	if edit != nil {
		s = edit(s)
	}
	p := filepath.Join(t.TempDir(), "trussmonitor.service")
	if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestSystemdUnit(t *testing.T) {
	b, err := os.ReadFile("systemd/trussmonitor.service")
	if err != nil {
		t.Fatal(err)
	}
	// Directives the deployment relies on (see deploy/README.md).
	for _, want := range []string{
		"User=trussmonitor", "Group=trussmonitor",
		"ExecStart=/usr/local/bin/monitor run --config /etc/trussmonitor/monitor.yaml",
		"Restart=on-failure", "NoNewPrivileges=yes", "ProtectSystem=strict", "ProtectHome=yes", "PrivateTmp=yes",
		"StateDirectory=trussmonitor", "ReadWritePaths=/var/lib/trussmonitor", "CapabilityBoundingSet=\n",
		"RestrictAddressFamilies=AF_INET AF_INET6 AF_UNIX", "SystemCallFilter=@system-service",
	} {
		if !bytes.Contains(b, []byte("\n"+want)) {
			t.Errorf("unit lacks %q", strings.TrimSpace(want))
		}
	}

	analyze := tool(t, "systemd-analyze", "part of systemd")
	t.Run("verify", func(t *testing.T) {
		// systemd-analyze verify exits 0 even when it ignores a bad line, so
		// any output at all is a failure.
		out, err := run(t, analyze, "verify", unitCopy(t, nil))
		if err != nil || strings.TrimSpace(out) != "" {
			t.Errorf("systemd-analyze verify: %v\n%s", err, out)
		}
	})
	t.Run("verify notices a bad directive", func(t *testing.T) {
		// The check above can fail: a misspelt key is reported.
		out, _ := run(t, analyze, "verify", unitCopy(t, func(s string) string {
			return strings.Replace(s, "NoNewPrivileges=yes", "NoNewPrivilegez=yes", 1)
		}))
		if !strings.Contains(out, "NoNewPrivilegez") {
			t.Errorf("systemd-analyze verify did not report a misspelt key; output:\n%s", out)
		}
	})
	t.Run("security exposure", func(t *testing.T) {
		out, err := run(t, analyze, "security", "--offline=yes", unitCopy(t, nil))
		if err != nil && !strings.Contains(out, "Overall exposure level") {
			t.Skipf("this systemd-analyze has no offline security check: %v\n%s", err, out)
		}
		m := regexp.MustCompile(`Overall exposure level for [^:]+: ([0-9.]+)`).FindStringSubmatch(out)
		if m == nil {
			t.Fatalf("no exposure level in:\n%s", out)
		}
		v, _ := strconv.ParseFloat(m[1], 64)
		t.Logf("systemd-analyze security exposure: %.1f (0 best, 10 worst)", v)
		if v > 2.0 { // our own bar for a network-facing service
			t.Errorf("exposure level %.1f above 2.0:\n%s", v, out)
		}
	})
}

// promqlWords are PromQL keywords, functions and aggregations the dashboard
// may use; every other identifier in an expression must be a metric name.
var promqlWords = map[string]bool{
	"sum": true, "min": true, "max": true, "avg": true, "count": true, "by": true, "without": true, "on": true,
	"ignoring": true, "group_left": true, "group_right": true, "and": true, "or": true, "unless": true,
	"rate": true, "irate": true, "increase": true, "changes": true, "delta": true, "abs": true, "vector": true,
	"time": true, "label_values": true, "bool": true, "offset": true, "clamp_min": true, "clamp_max": true,
	"max_over_time": true, "min_over_time": true, "avg_over_time": true, "absent": true, "topk": true,
	"histogram_quantile": true,
}

// exportedMetrics reads the metric names the monitor declares in
// internal/metrics (string constants starting with shm_), with the series
// names a histogram adds.
func exportedMetrics(t *testing.T) map[string]bool {
	t.Helper()
	fset := token.NewFileSet()
	f, err := parser.ParseFile(fset, filepath.Join("..", "internal", "metrics", "metrics.go"), nil, 0)
	if err != nil {
		t.Fatalf("reading the metric names of internal/metrics: %v", err)
	}
	out := map[string]bool{}
	ast.Inspect(f, func(n ast.Node) bool {
		lit, ok := n.(*ast.BasicLit)
		if !ok || lit.Kind != token.STRING {
			return true
		}
		if v, err := strconv.Unquote(lit.Value); err == nil && strings.HasPrefix(v, "shm_") {
			out[v] = true
			for _, suf := range []string{"_bucket", "_sum", "_count"} {
				out[v+suf] = true
			}
		}
		return true
	})
	if len(out) == 0 {
		t.Fatal("internal/metrics declares no shm_ metric names")
	}
	return out
}

var (
	reMatchers = regexp.MustCompile(`\{[^}]*\}`)
	reGrouping = regexp.MustCompile(`\b(by|without|on|ignoring|group_left|group_right)\s*\([^)]*\)`)
	reRange    = regexp.MustCompile(`\[[^\]]*\]`)
	reIdent    = regexp.MustCompile(`[A-Za-z_:][A-Za-z0-9_:]*`)
	reNumber   = regexp.MustCompile(`\b[0-9]+(\.[0-9]+)?([eE][-+]?[0-9]+)?\b`)
)

// metricNames returns the metric names an expression refers to. For the
// dashboard tool's label_values(selector, label) only the selector counts.
func metricNames(expr string) []string {
	if rest, ok := strings.CutPrefix(strings.TrimSpace(expr), "label_values("); ok {
		rest = strings.TrimSuffix(rest, ")")
		if i := strings.LastIndex(rest, ","); i >= 0 {
			rest = rest[:i]
		}
		expr = rest
	}
	s := reMatchers.ReplaceAllString(expr, " ")
	s = reGrouping.ReplaceAllString(s, " ")
	s = reRange.ReplaceAllString(s, " ")
	s = reNumber.ReplaceAllString(s, " ")
	var out []string
	for _, w := range reIdent.FindAllString(s, -1) {
		if !promqlWords[w] {
			out = append(out, w)
		}
	}
	return out
}

// dashboardExprs collects every query of the dashboard: panel targets,
// template variable queries and annotations.
func dashboardExprs(t *testing.T, v any, path string, out map[string]string) {
	switch x := v.(type) {
	case map[string]any:
		for k, val := range x {
			p := path + "." + k
			if s, ok := val.(string); ok && (k == "expr" || k == "definition") {
				out[p] = s
				continue
			}
			if q, ok := val.(map[string]any); ok && k == "query" {
				if s, ok := q["query"].(string); ok {
					out[p] = s
				}
			}
			dashboardExprs(t, val, p, out)
		}
	case []any:
		for i, val := range x {
			dashboardExprs(t, val, fmt.Sprintf("%s[%d]", path, i), out)
		}
	}
}

func TestDashboardDefinition(t *testing.T) {
	files, _ := filepath.Glob("dashboards/*.json")
	if len(files) == 0 {
		t.Fatal("no dashboard definition in deploy/dashboards/")
	}
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		var d map[string]any
		if err := json.Unmarshal(b, &d); err != nil {
			t.Fatalf("%s: not valid JSON: %v", f, err)
		}
		if !strings.Contains(string(b), "not a safety verdict") {
			t.Errorf("%s does not carry the caution", f)
		}
		exprs := map[string]string{}
		dashboardExprs(t, d, f, exprs)
		if len(exprs) < 10 {
			t.Errorf("%s: only %d queries found", f, len(exprs))
		}
		keys := make([]string, 0, len(exprs))
		for k := range exprs {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		exported := exportedMetrics(t)
		used := map[string]bool{}
		var rules strings.Builder
		rules.WriteString("groups:\n  - name: dashboard-queries\n    rules:\n")
		for i, k := range keys {
			e := exprs[k]
			// dashboard variables replaced by example values
			q := strings.NewReplacer("$structure", "alder-creek", "$member", "D2|B3", "$k", "3.29").Replace(e)
			names := metricNames(q)
			if len(names) == 0 && !strings.Contains(e, "time()") && !strings.Contains(e, "$k") {
				t.Errorf("%s: %q refers to no metric", k, e)
			}
			for _, n := range names {
				used[n] = true
				if !strings.HasPrefix(n, "shm_") {
					t.Errorf("%s: %q refers to %q, which does not start with shm_", k, e, n)
				} else if !exported[n] {
					t.Errorf("%s: %q refers to %q, which internal/metrics does not export", k, e, n)
				}
			}
			if strings.HasPrefix(e, "label_values(") {
				continue // a dashboard-tool function, not PromQL
			}
			fmt.Fprintf(&rules, "      - record: dashboard:query_%d\n        expr: %s\n", i, strconv.Quote(q))
		}
		names := make([]string, 0, len(used))
		for n := range used {
			names = append(names, n)
		}
		sort.Strings(names)
		t.Logf("%s uses %d metrics: %s", f, len(names), strings.Join(names, " "))

		// Every query must parse as PromQL: promtool checks them as
		// recording rules.
		promtool := tool(t, "promtool", "apt-get install -y prometheus")
		rf := filepath.Join(t.TempDir(), "queries.yml")
		if err := os.WriteFile(rf, []byte(rules.String()), 0o644); err != nil {
			t.Fatal(err)
		}
		if out, err := run(t, promtool, "check", "rules", rf); err != nil {
			t.Errorf("%s: a query is not valid PromQL: %v\n%s", f, err, out)
		}
	}
}

func TestMetricNamesCheckCanFail(t *testing.T) {
	cases := []struct {
		expr string
		want []string
	}{
		{`rate(shm_readings_total{structure="a"}[5m])`, []string{"shm_readings_total"}},
		{`sum by (reason) (rate(node_cpu_seconds_total[1m]))`, []string{"node_cpu_seconds_total"}},
		{`a + on(structure, member) (b * on(structure) group_left c{x="1"})`, []string{"a", "b", "c"}},
		{`time() - shm_last_epoch_timestamp_seconds{structure="a"} > 1e3`, []string{"shm_last_epoch_timestamp_seconds"}},
		{`label_values(shm_fit_p_value{structure="a"}, member)`, []string{"shm_fit_p_value"}},
	}
	for _, c := range cases {
		got := metricNames(c.expr)
		if strings.Join(got, ",") != strings.Join(c.want, ",") {
			t.Errorf("metricNames(%q) = %v, want %v", c.expr, got, c.want)
		}
	}
}

// wantMonitorKeys is the exact key tree of deploy/monitor.yaml that the
// service configuration loader (internal/config) reads.
var wantMonitorKeys = []string{
	"alarms", "alarms.reject_rate_per_minute", "alarms.silent_after",
	"broker", "broker.client_id", "broker.embedded", "broker.listen", "broker.max_payload_bytes", "broker.password_file",
	"broker.tls", "broker.tls.ca_file", "broker.tls.cert_file", "broker.tls.key_file", "broker.url", "broker.username",
	"database", "epochs", "epochs.max_lateness", "epochs.missing_load", "epochs.window",
	"http", "http.listen", "ingest", "ingest.max_ahead", "ingest.max_behind", "ingest.max_dead_letters", "ingest.subscribe", "retention", "retention.dead_letters", "retention.readings", "retention.results",
	"structures", "structures[].sensors", "structures[].structure",
}

func keyTree(n *yaml.Node, prefix string, out map[string]bool) {
	switch n.Kind {
	case yaml.DocumentNode:
		for _, c := range n.Content {
			keyTree(c, prefix, out)
		}
	case yaml.MappingNode:
		for i := 0; i+1 < len(n.Content); i += 2 {
			k := n.Content[i].Value
			if prefix != "" {
				k = prefix + "." + k
			}
			out[k] = true
			keyTree(n.Content[i+1], k, out)
		}
	case yaml.SequenceNode:
		for _, c := range n.Content {
			keyTree(c, prefix+"[]", out)
		}
	}
}

func TestMonitorYAML(t *testing.T) {
	b, err := os.ReadFile("monitor.yaml")
	if err != nil {
		t.Fatal(err)
	}
	var root yaml.Node
	if err := yaml.Unmarshal(b, &root); err != nil {
		t.Fatal(err)
	}
	got := map[string]bool{}
	keyTree(&root, "", got)
	keys := make([]string, 0, len(got))
	for k := range got {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	if strings.Join(keys, " ") != strings.Join(wantMonitorKeys, " ") {
		t.Errorf("monitor.yaml keys\n got %v\nwant %v", keys, wantMonitorKeys)
	}
	// Decode strictly into the service's own configuration types; the file
	// paths it names exist only on a deployed host, so Validate is not run.
	c := config.Defaults()
	dec := yaml.NewDecoder(bytes.NewReader(b))
	dec.KnownFields(true)
	if err := dec.Decode(&c); err != nil {
		t.Fatalf("monitor.yaml does not decode into config.Config: %v", err)
	}
	if c.HTTP.Listen != "127.0.0.1:9470" || c.Database != "/var/lib/trussmonitor/monitor.db" || c.Broker.Embedded ||
		c.Epochs.Window.D().Seconds() != 1 || c.Retention.Readings.D().Hours() != 400*24 || len(c.Structures) != 1 {
		t.Errorf("monitor.yaml values: %+v", c)
	}
}
