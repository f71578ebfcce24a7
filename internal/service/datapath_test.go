package service

import (
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/broker"
	"trussmonitor/internal/config"
	"trussmonitor/internal/store"
)

// testConfig is the footbridge on the embedded broker, ports and files of
// the test's own.
func testConfig(t *testing.T, dir, clientID string) *config.Config {
	t.Helper()
	cfg := config.Defaults()
	cfg.File = "(test)"
	cfg.Database = filepath.Join(dir, "monitor.db")
	cfg.HTTP.Listen = "127.0.0.1:0"
	cfg.Broker.Embedded = true
	cfg.Broker.Listen = "127.0.0.1:0"
	cfg.Broker.ClientID = clientID
	cfg.Structures = []config.Structure{{Structure: "../../testdata/footbridge/structure.yaml", Sensors: "../../testdata/footbridge/sensors.yaml"}}
	if err := cfg.Validate(); err != nil {
		t.Fatal(err)
	}
	return &cfg
}

// startService starts a service and returns it with a stop function that
// shuts it down and returns Run's error.
func startService(t *testing.T, cfg *config.Config, log *slog.Logger) (*Service, func() error) {
	t.Helper()
	if log == nil {
		log = slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	svc, err := New(cfg, Options{Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	if err := svc.Start(ctx); err != nil {
		cancel()
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- svc.Run(ctx) }()
	stopped := false
	var runErr error
	stop := func() error {
		if stopped {
			return runErr
		}
		stopped = true
		cancel()
		select {
		case runErr = <-done:
		case <-time.After(60 * time.Second):
			runErr = context.DeadlineExceeded
		}
		return runErr
	}
	t.Cleanup(func() { stop() })
	return svc, stop
}

func httpGet(t *testing.T, url string) (int, string) {
	t.Helper()
	resp, err := http.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, string(b)
}

// TestSilenceSurvivesRestart: a channel that reported before the service
// started and not since is silent, with its last-reading series seeded
// from the store at start; a channel that never reported since the start
// is silent too (issue 10, defect 3: no ChannelSilent after 70 s and no
// last-reading series at all).
func TestSilenceSurvivesRestart(t *testing.T) {
	dir := t.TempDir()
	cfg := testConfig(t, dir, "silence-test")
	cfg.Alarms.SilentAfter = config.Duration(2 * time.Second)
	// The logger reported once, three minutes ago, before this start.
	last := time.Now().UTC().Add(-3 * time.Minute).Truncate(time.Millisecond)
	st, err := store.Open(cfg.Database, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	// B2_b also has a reading stamped 2255, stored by an earlier version
	// without the time window: it must not hold B2_b's silence off.
	if _, err := st.InsertReadings(context.Background(), "alder-creek", []store.Reading{{Channel: "B2_a", Time: last, Value: 1e-5},
		{Channel: "B2_b", Time: last, Value: 1e-5}, {Channel: "B2_b", Time: time.Date(2255, 1, 1, 0, 0, 0, 0, time.UTC), Value: 1e-5}}); err != nil {
		t.Fatal(err)
	}
	st.Close()

	svc, stop := startService(t, cfg, nil)
	base := "http://" + svc.HTTPAddr()
	_, m := httpGet(t, base+"/metrics")
	series := `shm_channel_last_reading_timestamp_seconds{channel="B2_a",structure="alder-creek"}`
	if !strings.Contains(m, series) {
		t.Errorf("/metrics at start lacks %s (seeded from the store)", series)
	}
	raised := func() map[string]bool {
		evs, err := svc.Store().Events(context.Background(), "alder-creek", time.Time{}, time.Time{})
		if err != nil {
			t.Fatal(err)
		}
		out := map[string]bool{}
		for _, e := range evs {
			if alerts.RuleName(e.Rule) == alerts.RuleChannelSilent && alerts.EventKind(e.Kind) == alerts.Raised {
				out[e.Subject] = true
			}
		}
		return out
	}
	deadline := time.Now().Add(2 * time.Minute)
	var got map[string]bool
	for time.Now().Before(deadline) {
		got = raised()
		if got["B2_a"] && got["B2_b"] && got["B4_a"] {
			break
		}
		time.Sleep(100 * time.Millisecond)
	}
	if !got["B2_a"] {
		t.Errorf("no ChannelSilent for B2_a, silent since %s before the start; raised for %v", last, got)
	}
	if !got["B2_b"] {
		t.Errorf("no ChannelSilent for B2_b, whose last plausible reading is %s (and one stamped 2255); raised for %v", last, got)
	}
	if !got["B4_a"] {
		t.Errorf("no ChannelSilent for B4_a, which never reported since the start; raised for %v", got)
	}
	if err := stop(); err != nil {
		t.Fatal(err)
	}
}

// waitHTTP polls url until cond holds on its status and body, or fails
// after a generous limit.
func waitHTTP(t *testing.T, url, what string, cond func(code int, body string) bool) string {
	t.Helper()
	deadline := time.Now().Add(90 * time.Second)
	var code int
	var body string
	for time.Now().Before(deadline) {
		code, body = httpGet(t, url)
		if cond(code, body) {
			return body
		}
		time.Sleep(50 * time.Millisecond)
	}
	t.Fatalf("%s: GET %s still %d %q after 90 s", what, url, code, body)
	return ""
}

// TestReadinessTellsThePresent: /readyz says not ready while store commits
// fail and while the broker is gone, ready again when they recover, and the
// metrics count commit failures and show the broker connection (issue 10,
// defect 2: 40 s of failing commits and 60 s without a broker showed
// "ready" and no metric).
func TestReadinessTellsThePresent(t *testing.T) {
	brk, err := broker.Start(broker.Config{Address: "127.0.0.1:0", AllowAnonymous: true})
	if err != nil {
		t.Fatal(err)
	}
	defer brk.Close()
	dir := t.TempDir()
	cfg := testConfig(t, dir, "readiness-test")
	cfg.Broker.Embedded = false
	cfg.Broker.URL = "tcp://" + brk.Addr()
	svc, stop := startService(t, cfg, nil)
	base := "http://" + svc.HTTPAddr()
	ready := func(code int, _ string) bool { return code == http.StatusOK }
	notReady := func(code int, _ string) bool { return code == http.StatusServiceUnavailable }
	waitHTTP(t, base+"/readyz", "at start", ready)

	// Commits fail: another connection holds the database's write lock.
	lock, err := sql.Open("sqlite", cfg.Database)
	if err != nil {
		t.Fatal(err)
	}
	defer lock.Close()
	conn, err := lock.Conn(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	if _, err := conn.ExecContext(context.Background(), "BEGIN IMMEDIATE"); err != nil {
		t.Fatal(err)
	}
	pub := mqtt.NewClient(mqtt.NewClientOptions().AddBroker("tcp://" + brk.Addr()).SetClientID("readiness-logger"))
	if tok := pub.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("publisher: %v", tok.Error())
	}
	defer pub.Disconnect(50)
	payload := fmt.Sprintf(`[{"bt":%d,"u":"/","v":1e-5}]`, time.Now().Unix())
	pub.Publish("shm/alder-creek/B2_a", 1, false, []byte(payload)).WaitTimeout(10 * time.Second)
	body := waitHTTP(t, base+"/readyz", "while commits fail", notReady)
	t.Logf("commits failing: /readyz %q", body)
	if !strings.Contains(body, "commit") {
		t.Errorf("/readyz %q does not name the failing commits", body)
	}
	_, m := httpGet(t, base+"/metrics")
	if !strings.Contains(m, `shm_ingest_commit_failures_total{structure="alder-creek"}`) || strings.Contains(m, `shm_ingest_commit_failures_total{structure="alder-creek"} 0`+"\n") {
		t.Errorf("/metrics shows no commit failure")
	}
	if _, err := conn.ExecContext(context.Background(), "ROLLBACK"); err != nil {
		t.Fatal(err)
	}
	conn.Close()
	waitHTTP(t, base+"/readyz", "after the lock is released", ready)
	n, err := svc.Store().CountReadings(context.Background(), "alder-creek", time.Time{}, time.Time{})
	if err != nil || n != 1 {
		t.Errorf("stored %d readings after the commits recovered (%v); want 1", n, err)
	}

	// The broker goes away.
	brk.Close()
	body = waitHTTP(t, base+"/readyz", "without a broker", notReady)
	t.Logf("broker gone: /readyz %q", body)
	if !strings.Contains(body, "broker") {
		t.Errorf("/readyz %q does not name the broker", body)
	}
	_, m = httpGet(t, base+"/metrics")
	if !strings.Contains(m, `shm_broker_connected{structure="alder-creek"} 0`) {
		t.Errorf("/metrics does not show the broker disconnected")
	}
	// The broker returns on the same address: ready again, one reconnect.
	brk2, err := broker.Start(broker.Config{Address: brk.Addr(), AllowAnonymous: true})
	if err != nil {
		t.Fatalf("restarting the broker on %s: %v", brk.Addr(), err)
	}
	defer brk2.Close()
	waitHTTP(t, base+"/readyz", "after the broker returned", ready)
	_, m = httpGet(t, base+"/metrics")
	if !strings.Contains(m, `shm_broker_connected{structure="alder-creek"} 1`) || !strings.Contains(m, `shm_broker_reconnects_total{structure="alder-creek"} 1`) {
		t.Errorf("/metrics after the broker returned lacks shm_broker_connected 1 and shm_broker_reconnects_total 1")
	}
	if err := stop(); err != nil {
		t.Fatal(err)
	}
}

// TestDeadLetterAPI: GET /api/dead-letters lists what the service
// rejected, with time, topic, reason and excerpt, filtered by reason
// (issue 10, defect 12).
func TestDeadLetterAPI(t *testing.T) {
	cfg := testConfig(t, t.TempDir(), "dead-letter-api")
	svc, stop := startService(t, cfg, nil)
	ctx := context.Background()
	waitSubscribed(t, ctx, svc) // publishes "probe, not JSON" until it is dead-lettered
	base := "http://" + svc.HTTPAddr()
	code, body := httpGet(t, base+"/api/dead-letters")
	if code != http.StatusOK {
		t.Fatalf("GET /api/dead-letters: %d %s", code, body)
	}
	var got struct {
		DeadLetters []struct {
			Received string `json:"received"`
			Repeats  int64  `json:"repeats"`
			Topic    string `json:"topic"`
			Reason   string `json:"reason"`
			Excerpt  string `json:"excerpt"`
			Size     int    `json:"payload_bytes"`
		} `json:"dead_letters"`
	}
	if err := json.Unmarshal([]byte(body), &got); err != nil {
		t.Fatal(err)
	}
	if len(got.DeadLetters) == 0 || got.DeadLetters[0].Topic != "shm/alder-creek" || got.DeadLetters[0].Reason != "malformed_json" ||
		got.DeadLetters[0].Excerpt != "probe, not JSON" || got.DeadLetters[0].Size != len("probe, not JSON") || got.DeadLetters[0].Received == "" {
		t.Errorf("dead letters %s", body)
	}
	if _, body := httpGet(t, base+"/api/dead-letters?reason=unknown_structure"); strings.Contains(body, "malformed_json") {
		t.Errorf("reason filter: %s", body)
	}
	if code, body := httpGet(t, base+"/api/dead-letters?limit=0"); code != http.StatusBadRequest || !strings.Contains(body, "limit") {
		t.Errorf("limit=0: %d %s", code, body)
	}
	if err := stop(); err != nil {
		t.Fatal(err)
	}
}

// TestReadinessSeesStalledEpochs: readings keep arriving at a pipeline that
// closes no epoch; after the stall limit /readyz's condition names it
// (issue 10, defect 2: "epochs flowing").
func TestReadinessSeesStalledEpochs(t *testing.T) {
	cfg := testConfig(t, t.TempDir(), "stall-test")
	var mu sync.Mutex
	now := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	clock := func() time.Time { mu.Lock(); defer mu.Unlock(); return now }
	svc, err := New(cfg, Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil)), Clock: clock})
	if err != nil {
		t.Fatal(err)
	}
	defer svc.Close()
	if err := svc.Start(context.Background()); err != nil {
		t.Fatal(err)
	}
	p := svc.Pipeline("alder-creek")
	stall := svc.epochStall()
	// One channel, one logger time: its epoch stays open (no Tick flushes
	// it), so readings arrive and no epoch closes.
	reading := []store.Reading{{Channel: "B2_a", Time: now, Value: 1e-5}}
	for step := time.Duration(0); step <= 2*stall; step += stall / 4 {
		mu.Lock()
		now = now.Add(stall / 4)
		mu.Unlock()
		p.Feed(context.Background(), reading)
		svc.trackFlows(clock())
		err := svc.ready()
		stalled := err != nil && strings.Contains(err.Error(), "no epoch closed")
		// step is the time since the first reading was noted.
		if want := step > stall; stalled != want {
			t.Errorf("after %s of readings without an epoch: readiness %v; want the stall named: %v", step, err, want)
		}
	}
}
