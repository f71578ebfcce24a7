package deploytest

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"iter"
	"log/slog"
	"net"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/config"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/service"
	"trussmonitor/internal/settings"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/publish"
)

// TestAlertmanagerConfig checks the shipped routing with Alertmanager's own
// checker.
func TestAlertmanagerConfig(t *testing.T) {
	amtool := tool(t, "amtool", "apt-get install -y prometheus-alertmanager")
	if out, err := run(t, amtool, "check-config", "alertmanager/alertmanager.yml"); err != nil {
		t.Fatalf("amtool check-config: %v\n%s", err, out)
	}
	// The routing tree sends the example structure's alerts of both
	// severities to its own receiver.
	for _, labels := range []string{"structure=alder-creek severity=critical", "structure=alder-creek severity=warning"} {
		args := append([]string{"config", "routes", "test", "--config.file=alertmanager/alertmanager.yml", "--verify.receivers=alder-creek-on-call"}, strings.Fields(labels)...)
		if out, err := run(t, amtool, args...); err != nil {
			t.Errorf("amtool config routes test %s: %v\n%s", labels, err, out)
		}
	}
}

// webhookAlert is one alert of Alertmanager's webhook payload (version 4).
type webhookAlert struct {
	Status   string            `json:"status"`
	Labels   map[string]string `json:"labels"`
	StartsAt time.Time         `json:"startsAt"`
}

// freeAddr returns a loopback address with a port that was free a moment
// ago, for a program that cannot report the port it bound.
func freeAddr(t *testing.T) string {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer ln.Close()
	return ln.Addr().String()
}

// startProgram starts a long-running outside program with its output in a
// file of the test's folder, and stops it at the end of the test.
func startProgram(t *testing.T, dir, name string, args ...string) {
	t.Helper()
	logPath := filepath.Join(dir, filepath.Base(name)+".log")
	logFile, err := os.Create(logPath)
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(name, args...)
	cmd.Stdout, cmd.Stderr = logFile, logFile
	if err := cmd.Start(); err != nil {
		t.Fatalf("starting %s: %v", name, err)
	}
	t.Cleanup(func() {
		cmd.Process.Signal(os.Interrupt)
		done := make(chan struct{})
		go func() { cmd.Wait(); close(done) }()
		select {
		case <-done:
		case <-time.After(30 * time.Second):
			cmd.Process.Kill()
			<-done
		}
		logFile.Close()
		if t.Failed() {
			if b, err := os.ReadFile(logPath); err == nil {
				t.Logf("%s output:\n%s", name, tail(string(b), 4000))
			}
		}
	})
}

func tail(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return "..." + s[len(s)-n:]
}

// TestAlertReachesWebhook proves that an alarm reaches a person through the
// real parts: the service (embedded broker, SQLite, in-process alarms) is
// fed a simulated footbridge logger in real time, one gauge channel falls
// silent (the simulated fault), Debian's Prometheus scrapes the service and
// evaluates the rules generated from the test's service configuration, and
// Debian's Alertmanager routes the alert with deploy/alertmanager's
// configuration to a webhook receiver in this test. The alert must arrive,
// and its start must agree with the time the in-process evaluator raised
// the same alarm within one scrape plus one evaluation interval.
//
// Only addresses and intervals of the deploy files are changed: the scrape
// and evaluation intervals are 1 s instead of 5 s and 15 s so the test
// takes under a minute, and the receivers point at the test's webhook.
func TestAlertReachesWebhook(t *testing.T) {
	if testing.Short() {
		t.Skip("starts Prometheus and Alertmanager and runs about a minute in real time; not with -short")
	}
	promBin := tool(t, "prometheus", "apt-get install -y prometheus")
	amBin := tool(t, "prometheus-alertmanager", "apt-get install -y prometheus-alertmanager")
	dir := t.TempDir()
	const (
		structure     = "alder-creek"
		silentChannel = "D2_a"
		scrapeEvery   = time.Second
		evaluateEvery = time.Second
	)

	// The webhook receiver: every delivered alert, with the path it came to.
	var mu sync.Mutex
	type delivery struct {
		path  string
		alert webhookAlert
	}
	var got []delivery
	hook := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		var p struct {
			Alerts []webhookAlert `json:"alerts"`
		}
		body, _ := io.ReadAll(r.Body)
		if err := json.Unmarshal(body, &p); err != nil {
			t.Errorf("webhook: %v: %s", err, body)
		}
		mu.Lock()
		for _, a := range p.Alerts {
			got = append(got, delivery{r.URL.Path, a})
		}
		mu.Unlock()
	}))
	defer hook.Close()

	// The service, with a short silence limit so the fault alarms quickly.
	cfg := config.Defaults()
	cfg.File = "(alert delivery test)"
	cfg.Database = filepath.Join(dir, "monitor.db")
	cfg.HTTP.Listen = "127.0.0.1:0"
	cfg.Broker.Embedded = true
	cfg.Broker.Listen = "127.0.0.1:0"
	cfg.Broker.ClientID = "alert-delivery-test"
	cfg.Alarms.SilentAfter = config.Duration(10 * time.Second)
	cfg.Structures = []config.Structure{{Structure: "../testdata/footbridge/structure.yaml", Sensors: "../testdata/footbridge/sensors.yaml"}}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	mon, err := instrumented.Load(cfg.Structures[0].Structure, cfg.Structures[0].Sensors)
	if err != nil {
		t.Fatal(err)
	}
	svc, err := service.New(&cfg, service.Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	if err := svc.Start(ctx); err != nil {
		t.Fatal(err)
	}
	runDone := make(chan error, 1)
	go func() { runDone <- svc.Run(ctx) }()
	defer func() { cancel(); <-runDone }()
	if err := svc.WaitReady(ctx); err != nil {
		t.Fatal(err)
	}

	// The rules, generated from the test's own service configuration.
	set, err := settings.FromConfig(&cfg)
	if err != nil {
		t.Fatal(err)
	}
	rules, err := alerts.PrometheusRulesFor(set.Rules, []string{structure})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(rules), "> 10\n") {
		t.Fatalf("generated rules lack the configured 10 s silence limit:\n%s", rules)
	}
	if err := os.MkdirAll(filepath.Join(dir, "rules"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "rules", "trussmonitor.rules.yml"), rules, 0o644); err != nil {
		t.Fatal(err)
	}

	// Alertmanager with the deploy routing, receivers pointed at the hook.
	am, err := os.ReadFile("alertmanager/alertmanager.yml")
	if err != nil {
		t.Fatal(err)
	}
	amText := strings.ReplaceAll(string(am), "http://127.0.0.1:9480", hook.URL)
	if amText == string(am) {
		t.Fatal("alertmanager.yml has no receiver at http://127.0.0.1:9480 to redirect")
	}
	amConfig := filepath.Join(dir, "alertmanager.yml")
	if err := os.WriteFile(amConfig, []byte(amText), 0o644); err != nil {
		t.Fatal(err)
	}
	amAddr := freeAddr(t)
	startProgram(t, dir, amBin, "--config.file="+amConfig, "--storage.path="+filepath.Join(dir, "am"),
		"--web.listen-address="+amAddr, "--cluster.listen-address=")

	// Prometheus with the deploy configuration, the service and the
	// Alertmanager as targets.
	promConfig := prometheusConfigFor(t, svc.HTTPAddr(), amAddr, scrapeEvery, evaluateEvery)
	promConfigPath := filepath.Join(dir, "prometheus.yml")
	if err := os.WriteFile(promConfigPath, promConfig, 0o644); err != nil {
		t.Fatal(err)
	}
	startProgram(t, dir, promBin, "--config.file="+promConfigPath, "--storage.tsdb.path="+filepath.Join(dir, "tsdb"),
		"--web.listen-address="+freeAddr(t))

	// The logger, in real time; the silent channel stops 15 s in.
	sopt := simulate.DefaultOptions()
	sopt.Seed = 11
	sopt.Start = time.Now().UTC().Truncate(time.Second).Add(time.Second)
	sopt.Duration = 10 * time.Minute
	sopt.Rate = time.Second
	sopt.BadRate = 0
	gen, err := simulate.New(mon.Structure, mon.Sensors, sopt)
	if err != nil {
		t.Fatal(err)
	}
	faultAt := sopt.Start.Add(15 * time.Second)
	pubCtx, stopPublishing := context.WithCancel(ctx)
	defer stopPublishing()
	pubDone := make(chan error, 1)
	go func() {
		_, err := publish.Run(pubCtx, withoutChannelAfter(gen.All(), silentChannel, faultAt),
			publish.Options{Broker: "tcp://" + svc.BrokerAddr(), Structure: structure, ClientID: "alert-delivery-logger", Speed: 1})
		pubDone <- err
	}()

	// Wait for the delivery while the parts make progress: the logger
	// publishes, the service reconciles. The overall bound only stops a
	// test whose parts are dead; it is not a timing requirement.
	var firing *webhookAlert
	var firingPath string
	for firing == nil {
		select {
		case err := <-pubDone:
			t.Fatalf("the simulated logger stopped before the alert arrived (err %v); %d deliveries so far", err, len(got))
		case <-time.After(200 * time.Millisecond):
		}
		mu.Lock()
		for _, d := range got {
			if d.alert.Status == "firing" && d.alert.Labels["alertname"] == string(alerts.RuleChannelSilent) && d.alert.Labels["channel"] == silentChannel {
				a := d.alert
				firing, firingPath = &a, d.path
			}
		}
		mu.Unlock()
	}
	stopPublishing()

	if firingPath != "/alerts/"+structure {
		t.Errorf("alert delivered to %s, want the structure's receiver /alerts/%s", firingPath, structure)
	}
	if firing.Labels["structure"] != structure || firing.Labels["severity"] != "warning" {
		t.Errorf("alert labels %v", firing.Labels)
	}
	evs, err := svc.Store().Events(ctx, structure, sopt.Start, sopt.Start.Add(sopt.Duration))
	if err != nil {
		t.Fatal(err)
	}
	var raised time.Time
	for _, e := range evs {
		if alerts.RuleName(e.Rule) == alerts.RuleChannelSilent && e.Subject == silentChannel && alerts.EventKind(e.Kind) == alerts.Raised {
			raised = e.Time
			break
		}
	}
	if raised.IsZero() {
		t.Fatalf("the in-process evaluator raised no ChannelSilent for %s; events %v", silentChannel, evs)
	}
	lag := firing.StartsAt.Sub(raised)
	t.Logf("silent from %s; in-process raise %s; Prometheus alert starts %s (%+.1f s)", faultAt.Format(time.RFC3339), raised.Format(time.RFC3339Nano), firing.StartsAt.Format(time.RFC3339Nano), lag.Seconds())
	if lag.Abs() > scrapeEvery+evaluateEvery {
		t.Errorf("Prometheus's alert starts %v after the in-process raise; want within one scrape and one evaluation interval (%v)", lag, scrapeEvery+evaluateEvery)
	}
}

// withoutChannelAfter drops one channel's readings from the steps at and
// after t: the channel falls silent.
func withoutChannelAfter(steps iter.Seq2[simulate.Step, error], channel string, t time.Time) iter.Seq2[simulate.Step, error] {
	return func(yield func(simulate.Step, error) bool) {
		for st, err := range steps {
			if err == nil && !st.Time.Before(t) {
				kept := st.Readings[:0:0]
				for _, r := range st.Readings {
					if r.Channel != channel {
						kept = append(kept, r)
					}
				}
				st.Readings = kept
			}
			if !yield(st, err) {
				return
			}
		}
	}
}

// prometheusConfigFor returns deploy/prometheus/prometheus.yml with the
// monitor's scrape target and the Alertmanager target replaced, the
// intervals shortened, and the self-scrape job left out.
func prometheusConfigFor(t *testing.T, monitorAddr, amAddr string, scrape, evaluate time.Duration) []byte {
	t.Helper()
	b, err := os.ReadFile("prometheus/prometheus.yml")
	if err != nil {
		t.Fatal(err)
	}
	var cfg map[string]any
	if err := yaml.Unmarshal(b, &cfg); err != nil {
		t.Fatal(err)
	}
	global, ok := cfg["global"].(map[string]any)
	if !ok {
		t.Fatal("prometheus.yml: no global section")
	}
	global["scrape_interval"] = fmt.Sprintf("%ds", int(scrape.Seconds()))
	global["evaluation_interval"] = fmt.Sprintf("%ds", int(evaluate.Seconds()))
	set := func(section any, target string) {
		list, _ := section.([]any)
		if len(list) == 0 {
			t.Fatalf("prometheus.yml: empty section for %s", target)
		}
		first, _ := list[0].(map[string]any)
		statics, _ := first["static_configs"].([]any)
		if len(statics) == 0 {
			t.Fatalf("prometheus.yml: no static_configs for %s", target)
		}
		sc, _ := statics[0].(map[string]any)
		sc["targets"] = []string{target}
	}
	alerting, _ := cfg["alerting"].(map[string]any)
	set(alerting["alertmanagers"], amAddr)
	var jobs []any
	for _, j := range cfg["scrape_configs"].([]any) {
		if m, _ := j.(map[string]any); m["job_name"] == "trussmonitor" {
			m["scrape_interval"] = global["scrape_interval"]
			m["scrape_timeout"] = global["scrape_interval"]
			jobs = append(jobs, m)
		}
	}
	if len(jobs) != 1 {
		t.Fatal("prometheus.yml: no trussmonitor scrape job")
	}
	cfg["scrape_configs"] = jobs
	set(cfg["scrape_configs"], monitorAddr)
	out, err := yaml.Marshal(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return out
}
