package alerts

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"go.yaml.in/yaml/v3"
)

// promtool returns the path of Prometheus's promtool, skipping the test
// when it is missing (failing when TRUSSMON_REQUIRE_TOOLS=1).
func promtool(t *testing.T) string {
	t.Helper()
	p, err := exec.LookPath("promtool")
	if err != nil {
		if os.Getenv("TRUSSMON_REQUIRE_TOOLS") == "1" {
			t.Fatalf("promtool not found (TRUSSMON_REQUIRE_TOOLS=1): install Debian's prometheus package (apt-get install prometheus)")
		}
		t.Skip("promtool not found; install Debian's prometheus package to run this test")
	}
	return p
}

// scenario is a 41-minute history of one structure, one sample a minute,
// that drives every rule: the same numbers become Prometheus input series
// and evaluator observations.
type scenario struct {
	minutes   int
	w         map[string][]float64 // member -> w
	checkable map[string][]bool
	pvalue    []float64
	chi       []float64            // chi-square statistic of the fit (13 degrees of freedom)
	lastRead  map[string][]float64 // channel -> last reading, seconds
	skew      []float64            // cumulative
	rejects   map[string][]float64 // reason -> cumulative; NaN = series absent
	util      map[string][]float64 // member -> utilisation; NaN = no value yet
	commits   []float64            // failed commits, cumulative
	connected []float64            // broker connection, 1 or 0
	recDrops  []float64            // readings left out of live reconciliation, cumulative
}

func buildScenario() scenario {
	const n = 41
	s := scenario{minutes: n, w: map[string][]float64{}, checkable: map[string][]bool{},
		lastRead: map[string][]float64{}, rejects: map[string][]float64{}}
	b4 := make([]float64, n)
	d2 := make([]float64, n)
	b4ok := make([]bool, n)
	d2ok := make([]bool, n)
	for k := 0; k < n; k++ {
		b4ok[k] = true
		switch {
		case k >= 5 && k <= 9:
			b4[k] = 3.5 // raised at 5, fires at 7
		case k == 10:
			b4[k] = -3.0 // below the raise value but above the clearing value: held
		case k == 11:
			b4[k] = 2.0 // clears
		case k == 12 || k == 13:
			b4[k] = 3.6 // pending...
		case k == 14:
			b4[k] = 1.0 // ...reset before the for-duration
		case k >= 15 && k <= 20:
			b4[k] = -4.0 // fires at 17
		default:
			b4[k] = 0.3
		}
		d2[k] = 5 // large, but not checkable except in 25..30
		d2ok[k] = k >= 25 && k <= 30
	}
	s.w["B4"], s.w["D2"] = b4, d2
	s.checkable["B4"], s.checkable["D2"] = b4ok, d2ok
	// The fit: chi-square 60 (Wilson-Hilferty score 5.22 at 13 degrees of
	// freedom) in minutes 8..14, 35 (score 3.12) in 15 and 16, 13 (score
	// 0.13) otherwise. Mean over [t-2m, t] above max(3.09, 5.20/sqrt(n)):
	// at 8 (0.13, 0.13, 5.22) mean 1.83, no; at 9 mean 3.52, but B4's
	// MemberDiverging fires (7..9), which suppresses it; at 10 (B4 cleared
	// first) mean 5.22: raised; at 17
	// (3.12, 3.12, 0.13) mean 2.12, no, but the 10-minute mean [7, 17] is
	// 3.91 > 2.33: held (the hold-off), and 3.91, 3.45, 2.99, 2.52 at 18..21;
	// at 22 it is 2.06: cleared.
	s.pvalue = make([]float64, n)
	s.chi = make([]float64, n)
	for k := range s.pvalue {
		switch {
		case k >= 8 && k <= 14:
			s.pvalue[k], s.chi[k] = 1.4e-7, 60
		case k == 15 || k == 16:
			s.pvalue[k], s.chi[k] = 0.0015, 35
		default:
			s.pvalue[k], s.chi[k] = 0.45, 13
		}
	}
	a := make([]float64, n)
	for k := range a {
		switch {
		case k <= 20 || k >= 30:
			a[k] = float64(60 * k)
		default:
			a[k] = 1200 // stuck: silent from 23 (180 s > 120 s) to 29
		}
	}
	s.lastRead["B4_a"] = a
	// B5_a reports first at minute 30: silent since watching began (0)
	// from minute 3 (180 s > 120 s) to 29.
	b5 := make([]float64, n)
	for k := range b5 {
		b5[k] = nan
		if k >= 30 {
			b5[k] = float64(60 * k)
		}
	}
	s.lastRead["B5_a"] = b5
	s.skew = make([]float64, n)
	for k := range s.skew {
		if k >= 12 {
			s.skew[k] = 3 // seen at 12: alarm 12..16
		}
	}
	uc := make([]float64, n)
	nf := make([]float64, n)
	for k := range uc {
		nf[k] = 1
		switch {
		case k < 20:
			uc[k] = nan // series created at the first rejection of this reason
		case k <= 26:
			uc[k] = float64(5 * (k - 20))
		default:
			uc[k] = 30
		}
	}
	s.rejects["unknown_channel"], s.rejects["not_finite"] = uc, nf
	// Utilisation of T4: no series before minute 2; above 0.90 from 20 to
	// 24 (fires at 22), 0.87 at 25 and 26 (held above the clearing 0.85),
	// 0.80 at 27 (clears); 0.95 at 33 and 34 only (pending, reset at 35).
	t4 := make([]float64, n)
	for k := range t4 {
		switch {
		case k < 2:
			t4[k] = nan
		case k >= 20 && k <= 24:
			t4[k] = 0.93
		case k == 25 || k == 26:
			t4[k] = 0.87
		case k == 33 || k == 34:
			t4[k] = 0.95
		default:
			t4[k] = 0.42
		}
	}
	s.util = map[string][]float64{"T4": t4}
	s.commits = make([]float64, n)
	s.connected = make([]float64, n)
	s.recDrops = make([]float64, n)
	for k := range s.commits {
		if k >= 2 {
			s.recDrops[k] = 1200 // a full reconciliation queue at 2: alarm 2..6
		}
		if k >= 33 {
			s.commits[k] = 2 // two failures at 33: alarm 33..37
		}
		s.connected[k] = 1
		if k >= 34 && k <= 37 {
			s.connected[k] = 0 // down at 34, fires at 35, clears at 38
		}
	}
	return s
}

var nan = func() float64 { var z float64; return z / z }()

func isNaN(v float64) bool { return v != v }

// expectedFiring are the alarms the scenario must fire, worked out by hand
// from the rules (minute ranges, inclusive; -1: still firing at the end).
//
// MemberDiverging decides on the mean w over [t-2m, t] (3 samples a minute
// apart) against max(3.29, 5.33/sqrt(n)). B4: at 6 the mean of (0.3, 3.5,
// 3.5) is 2.43, at 7 it is 3.5: raised; at 10 (3.5, 3.5, -3.0) gives 1.33
// and the 10-minute mean 16/11 = 1.45 <= 2.58: cleared; at 16 (1, -4, -4)
// gives |-2.33|, at 17 4.0: raised; at 21 (-4, -4, 0.3) gives 2.57 and the
// 10-minute mean |-13.5/11| = 1.23: cleared. D2 is checkable only in
// 25..30 (w = 5): at 25 one sample (5 < 5.33), at 26 two (5 > 3.77):
// raised; from 32 on the 2-minute window holds at most one sample, but the
// 10-minute mean stays 5 > 2.58 while the samples of 25..30 are in it (to
// 40): held.
//
// MemberShifted decides on the mean over the last hour (all samples here)
// against max(0.5, 5.33/sqrt(n)) and does not raise on a member whose
// MemberDiverging alarm fires: B4 at 9 has 19/10 = 1.9 > 1.69 but
// MemberDiverging fires; at 10 16/11 = 1.45 < 1.61, at 11 18/12 = 1.5 <
// 1.54; at 12 21.6/13 = 1.66 > 1.48 and at 13 25.2/14 = 1.8 > 1.42, but
// B4's own |w| of 3.6 is above k = 3.29 (DeferAbove: a deviation that
// large is MemberDiverging's to raise); at 14 (|w| 1.0) 26.2/15 = 1.75 >
// 1.38: raised; at 17 the mean is 14.2/18 = 0.79, held above max(0.25,
// 3.29/sqrt(18)) = 0.775, at 18 10.2/19 = 0.54 < 0.755: cleared. D2 never:
// its MemberDiverging alarm fires from 26 on.
var expectedFiring = map[string][][2]int{
	"MemberDiverging/B4": {{7, 9}, {17, 20}},
	"MemberDiverging/D2": {{26, -1}},
	"MemberShifted/B4":   {{14, 17}},
	"FitRejected/":       {{10, 21}},
	"ChannelSilent/B4_a": {{23, 29}},
	"ClockSkew/":         {{12, 16}},
	"IngestRejects/":     {{23, 30}},
	// MemberUtilisationHigh: raise > 0.90 for 2 minutes, clear <= 0.85.
	"MemberUtilisationHigh/T4": {{22, 26}},
	"ChannelSilent/B5_a":       {{3, 29}},
	"CommitsFailing/":          {{33, 37}},
	"BrokerDisconnected/":      {{35, 37}},
	"ReconcileDropping/":       {{2, 6}},
}

func (s scenario) observation(k int) Observation {
	o := Observation{Time: time.Unix(int64(60*k), 0).UTC(), Structure: "alder-creek",
		Fit: &Fit{PValue: s.pvalue[k], ChiSquare: s.chi[k], DOF: 13}, SkewCount: uint64(s.skew[k]),
		CommitFailures: uint64(s.commits[k]), BrokerConnected: &[]bool{s.connected[k] == 1}[0], ReconcileDropped: uint64(s.recDrops[k])}
	for _, m := range sortedKeys(s.w) {
		o.Members = append(o.Members, Member{Member: m, W: s.w[m][k], Checkable: s.checkable[m][k], EstimatedBias: 1000 * s.w[m][k]})
	}
	for _, c := range sortedKeys(s.lastRead) {
		ch := Channel{Channel: c, WatchedSince: time.Unix(0, 0)}
		if v := s.lastRead[c][k]; !isNaN(v) {
			ch.LastReading = time.Unix(int64(v), 0)
		}
		o.Channels = append(o.Channels, ch)
	}
	for _, r := range sortedKeys(s.rejects) {
		if v := s.rejects[r][k]; !isNaN(v) {
			o.RejectCount += uint64(v)
		}
	}
	for _, m := range sortedKeys(s.util) {
		if v := s.util[m][k]; !isNaN(v) {
			o.Utilisation = append(o.Utilisation, Utilisation{Member: m, Value: v})
		}
	}
	return o
}

func sortedKeys[T any](m map[string]T) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return out
}

func seriesValues(v []float64) string {
	parts := make([]string, len(v))
	for i, x := range v {
		if isNaN(x) {
			parts[i] = "_"
		} else {
			parts[i] = num(x)
		}
	}
	return strings.Join(parts, " ")
}

func boolValues(v []bool) string {
	parts := make([]string, len(v))
	for i, x := range v {
		parts[i] = "0"
		if x {
			parts[i] = "1"
		}
	}
	return strings.Join(parts, " ")
}

// TestPromtoolAgreesWithEvaluator feeds the scenario to the in-process
// evaluator, checks its firing minutes against the hand-worked ones, then
// writes the same numbers as promtool input series with the evaluator's
// firing alerts (every rule, every minute) as expected alerts, and lets
// Prometheus's own rule engine (promtool test rules) verify them.
func TestPromtoolAgreesWithEvaluator(t *testing.T) {
	rules, err := DefaultRules()
	if err != nil {
		t.Fatal(err)
	}
	sc := buildScenario()
	ev, err := NewEvaluator(rules, nil)
	if err != nil {
		t.Fatal(err)
	}
	firing := make([][]Alarm, sc.minutes)
	got := map[string][][2]int{}
	for k := 0; k < sc.minutes; k++ {
		events, err := ev.Observe(context.Background(), sc.observation(k))
		if err != nil {
			t.Fatal(err)
		}
		for _, e := range events {
			key := string(e.Rule) + "/" + e.Subject
			if e.Kind == Raised {
				got[key] = append(got[key], [2]int{k, -1})
			} else {
				r := got[key]
				r[len(r)-1][1] = k - 1
			}
		}
		firing[k] = ev.Active("alder-creek")
	}
	for key, want := range expectedFiring {
		if fmt.Sprint(got[key]) != fmt.Sprint(want) {
			t.Errorf("%s fired in minutes %v, want %v", key, got[key], want)
		}
	}
	for key := range got {
		if _, ok := expectedFiring[key]; !ok {
			t.Errorf("unexpected alarm %s in minutes %v", key, got[key])
		}
	}

	bin := promtool(t)
	dir := t.TempDir()
	rulesYAML, err := PrometheusRulesFor(rules, []string{"alder-creek"})
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "rules.yml"), rulesYAML, 0o644); err != nil {
		t.Fatal(err)
	}
	testYAML, nAlerts := promtoolTestFile(t, rules, sc, firing)
	if err := os.WriteFile(filepath.Join(dir, "test.yml"), testYAML, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("promtool test file: %d checks, %d expected firing alerts", len(rules)*sc.minutes, nAlerts)
	for _, args := range [][]string{{"check", "rules", "rules.yml"}, {"test", "rules", "test.yml"}} {
		cmd := exec.Command(bin, args...)
		cmd.Dir = dir
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("promtool %s: %v\n%s\ntest file:\n%s", strings.Join(args, " "), err, out, testYAML)
		}
		t.Logf("promtool %s: %s", strings.Join(args, " "), bytes.TrimSpace(out))
	}
	// Not vacuous: move one expected firing a minute early and promtool
	// must fail.
	broken := firing[6]
	firing[6] = append(append([]Alarm(nil), firing[6]...), Alarm{Rule: "MemberDiverging", Subject: "B4"})
	bad, _ := promtoolTestFile(t, rules, sc, firing)
	firing[6] = broken
	if err := os.WriteFile(filepath.Join(dir, "bad.yml"), bad, 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(bin, "test", "rules", "bad.yml")
	cmd.Dir = dir
	if out, err := cmd.CombinedOutput(); err == nil {
		t.Fatalf("promtool accepted an alert expected a minute early:\n%s", out)
	}
}

// promtoolTestFile writes the promtool unit-test file: the scenario as
// input series and, for every rule and minute, the alerts the evaluator
// had firing then.
func promtoolTestFile(t *testing.T, rules []Rule, sc scenario, firing [][]Alarm) ([]byte, int) {
	t.Helper()
	type series struct {
		Series string `yaml:"series"`
		Values string `yaml:"values"`
	}
	type alert struct {
		ExpLabels      map[string]string `yaml:"exp_labels"`
		ExpAnnotations map[string]string `yaml:"exp_annotations"`
	}
	type alertTest struct {
		EvalTime  string  `yaml:"eval_time"`
		Alertname string  `yaml:"alertname"`
		ExpAlerts []alert `yaml:"exp_alerts"`
	}
	type test struct {
		Interval   string      `yaml:"interval"`
		Input      []series    `yaml:"input_series"`
		AlertTests []alertTest `yaml:"alert_rule_test"`
	}
	var file struct {
		RuleFiles          []string `yaml:"rule_files"`
		EvaluationInterval string   `yaml:"evaluation_interval"`
		Tests              []test   `yaml:"tests"`
	}
	file.RuleFiles = []string{"rules.yml"}
	file.EvaluationInterval = "1m"
	tc := test{Interval: "1m"}
	const st = `structure="alder-creek"`
	for _, m := range sortedKeys(sc.w) {
		tc.Input = append(tc.Input,
			series{fmt.Sprintf(`shm_member_w_statistic{%s, member=%q}`, st, m), seriesValues(sc.w[m])},
			series{fmt.Sprintf(`shm_member_checkable{%s, member=%q}`, st, m), boolValues(sc.checkable[m])})
	}
	dof := make([]float64, len(sc.chi))
	for i := range dof {
		dof[i] = 13
	}
	tc.Input = append(tc.Input, series{fmt.Sprintf(`shm_fit_p_value{%s}`, st), seriesValues(sc.pvalue)},
		series{fmt.Sprintf(`shm_fit_chi_square{%s}`, st), seriesValues(sc.chi)},
		series{fmt.Sprintf(`shm_fit_degrees_of_freedom{%s}`, st), seriesValues(dof)})
	for _, c := range sortedKeys(sc.lastRead) {
		tc.Input = append(tc.Input, series{fmt.Sprintf(`shm_channel_last_reading_timestamp_seconds{%s, channel=%q}`, st, c), seriesValues(sc.lastRead[c])},
			series{fmt.Sprintf(`shm_channel_watched_since_timestamp_seconds{%s, channel=%q}`, st, c), fmt.Sprintf("0+0x%d", sc.minutes-1)})
	}
	tc.Input = append(tc.Input, series{fmt.Sprintf(`shm_clock_skew_readings_total{%s}`, st), seriesValues(sc.skew)})
	for _, r := range sortedKeys(sc.rejects) {
		tc.Input = append(tc.Input, series{fmt.Sprintf(`shm_ingest_rejections_total{%s, reason=%q}`, st, r), seriesValues(sc.rejects[r])})
	}
	for _, m := range sortedKeys(sc.util) {
		tc.Input = append(tc.Input, series{fmt.Sprintf(`shm_member_utilisation_ratio{%s, member=%q}`, st, m), seriesValues(sc.util[m])})
	}
	tc.Input = append(tc.Input, series{fmt.Sprintf(`shm_ingest_commit_failures_total{%s}`, st), seriesValues(sc.commits)},
		series{fmt.Sprintf(`shm_broker_connected{%s}`, st), seriesValues(sc.connected)},
		series{fmt.Sprintf(`shm_reconcile_queue_dropped_readings_total{%s}`, st), seriesValues(sc.recDrops)})
	n := 0
	for k := 0; k < sc.minutes; k++ {
		for _, r := range rules {
			at := alertTest{EvalTime: fmt.Sprintf("%dm", k), Alertname: string(r.Name), ExpAlerts: []alert{}}
			for _, a := range firing[k] {
				if a.Rule != r.Name {
					continue
				}
				labels := map[string]string{"severity": r.Severity, "structure": "alder-creek"}
				switch r.Signal.Scope() {
				case ScopeMember:
					labels["member"] = a.Subject
				case ScopeChannel:
					labels["channel"] = a.Subject
				}
				at.ExpAlerts = append(at.ExpAlerts, alert{ExpLabels: labels, ExpAnnotations: map[string]string{
					"summary": expand(r.Summary, labels), "description": expand(r.Description, labels)}})
				n++
			}
			tc.AlertTests = append(tc.AlertTests, at)
		}
	}
	file.Tests = []test{tc}
	out, err := yaml.Marshal(file)
	if err != nil {
		t.Fatal(err)
	}
	return out, n
}

// expand fills the {{ $labels.x }} placeholders as Prometheus's template
// expansion does for these plain annotations.
func expand(s string, labels map[string]string) string {
	for k, v := range labels {
		s = strings.ReplaceAll(s, "{{ $labels."+k+" }}", v)
	}
	return s
}
