package service

import (
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"net/http"
	"strings"
	"testing"
	"time"

	mqtt "github.com/eclipse/paho.mqtt.golang"

	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/publish"
)

// TestServiceEndToEnd runs the service on the embedded broker with the
// footbridge, publishes five simulated minutes of readings through MQTT
// (QoS 1), and checks that every reading is stored once, epochs are
// reconciled and exported as metrics, the dashboard API answers, and the
// service shuts down cleanly when its context ends.
func TestServiceEndToEnd(t *testing.T) {
	dir := t.TempDir()
	cfg := testConfig(t, dir, "service-test")
	mon, err := instrumented.Load(cfg.Structures[0].Structure, cfg.Structures[0].Sensors)
	if err != nil {
		t.Fatal(err)
	}
	log := slog.New(slog.NewTextHandler(io.Discard, nil))
	svc, err := New(cfg, Options{Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	if err := svc.Start(ctx); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- svc.Run(ctx) }()

	waitSubscribed(t, ctx, svc)

	sopt := simulate.DefaultOptions()
	sopt.Seed = 3
	sopt.Start = time.Now().UTC().Add(-20 * time.Minute).Truncate(time.Second)
	sopt.Duration = 5 * time.Minute
	sopt.Rate = time.Second
	sopt.BadRate = 0
	gen, err := simulate.New(mon.Structure, mon.Sensors, sopt)
	if err != nil {
		t.Fatal(err)
	}
	stats, err := publish.Run(ctx, gen.All(), publish.Options{Broker: "tcp://" + svc.BrokerAddr(), Structure: mon.Structure.Name, ClientID: "service-test-logger"})
	if err != nil {
		t.Fatal(err)
	}
	want := int64(stats.Readings)
	stored := waitStored(t, svc, mon.Structure.Name, sopt.Start, sopt.Start.Add(sopt.Duration), want)
	if stored != want {
		t.Fatalf("stored %d readings, published %d", stored, want)
	}
	deadline := time.Now().Add(3 * time.Minute) // generous: only ends a hung test
	base := "http://" + svc.HTTPAddr()
	get := func(path string) string {
		t.Helper()
		resp, err := http.Get(base + path)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		if resp.StatusCode != http.StatusOK {
			t.Fatalf("GET %s: %s: %s", path, resp.Status, b)
		}
		return string(b)
	}
	var st struct {
		Epoch  time.Time `json:"epoch"`
		Gauged []struct {
			ID string `json:"id"`
		} `json:"gauged"`
	}
	// The last epochs close on the idle flush (one window plus the
	// maximum lateness after the last reading).
	for time.Now().Before(deadline) {
		if err := json.Unmarshal([]byte(get("/api/structures/alder-creek/state")), &st); err != nil {
			t.Fatal(err)
		}
		if !st.Epoch.Before(sopt.Start.Add(sopt.Duration - time.Second)) {
			break
		}
		time.Sleep(200 * time.Millisecond)
	}
	if st.Epoch.Before(sopt.Start.Add(sopt.Duration - time.Second)) {
		t.Errorf("latest epoch %s, want the last simulated second %s", st.Epoch, sopt.Start.Add(sopt.Duration-time.Second))
	}
	if len(st.Gauged) != 18 {
		t.Errorf("%d gauged members in the state, want 18", len(st.Gauged))
	}
	m := get("/metrics")
	for _, w := range []string{`shm_epochs_total{outcome="accepted",structure="alder-creek"}`, `shm_member_w_statistic{member="B4",structure="alder-creek"}`, `shm_ingest_readings_total`,
		`shm_member_force_total_newtons{member="B1",structure="alder-creek"}`, `shm_member_utilisation_ratio{member="D2",structure="alder-creek"}`,
		`shm_member_force_zero_state_newtons{member="D2",structure="alder-creek"}`, `shm_unknown_load_pascals{pattern="crowd",structure="alder-creek"}`} {
		if !strings.Contains(m, w) {
			t.Errorf("/metrics lacks %s", w)
		}
	}
	if s := get("/readyz"); !strings.Contains(s, "ready") {
		t.Errorf("/readyz: %q", s)
	}
	ps := svc.Pipeline("alder-creek").Stats()
	if ps.Epochs != 300 {
		t.Errorf("%d epochs for 300 simulated seconds (by outcome %v)", ps.Epochs, ps.ByOutcome)
	}
	t.Logf("published %d readings in %d messages; stored %d; epochs %v", stats.Readings, stats.Messages, stored, ps.ByOutcome)
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("shutdown: %v", err)
		}
	case <-time.After(30 * time.Second):
		t.Fatal("service did not shut down within 30 s")
	}
}

// waitSubscribed publishes a malformed probe message until the service
// dead-letters one: then its subscription stands, and readings published
// from now on reach it (messages for a subscription that does not exist yet
// are not kept by any broker).
func waitSubscribed(t *testing.T, ctx context.Context, svc *Service) {
	t.Helper()
	c := mqtt.NewClient(mqtt.NewClientOptions().AddBroker("tcp://" + svc.BrokerAddr()).SetClientID("service-test-probe"))
	if tok := c.Connect(); !tok.WaitTimeout(10*time.Second) || tok.Error() != nil {
		t.Fatalf("probe connect: %v", tok.Error())
	}
	defer c.Disconnect(100)
	deadline := time.Now().Add(3 * time.Minute) // generous: the race detector slows ingest tenfold
	for time.Now().Before(deadline) {
		c.Publish("shm/alder-creek", 1, false, []byte("probe, not JSON")).WaitTimeout(5 * time.Second)
		time.Sleep(100 * time.Millisecond)
		n, err := svc.Store().CountDeadLetters(ctx)
		if err != nil {
			t.Fatal(err)
		}
		if n["malformed_json"] > 0 {
			return
		}
	}
	t.Fatal("the service did not subscribe within 30 s")
}
