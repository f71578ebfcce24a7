package service

import (
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"math"
	"net/http"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/fatigue"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/publish"
)

// TestServiceFatigue runs the service on the footbridge (four gauges with a
// fatigue block), publishes ten simulated minutes of the 50 Hz record with
// frequent vehicle crossings, and checks the fatigue panel's endpoint and
// metrics; a second service on the same store restores the same damage.
func TestServiceFatigue(t *testing.T) {
	dir := t.TempDir()
	cfg := testConfig(t, dir, "service-fatigue-test")
	mon, err := instrumented.Load(cfg.Structures[0].Structure, cfg.Structures[0].Sensors)
	if err != nil {
		t.Fatal(err)
	}
	log := slog.New(slog.NewTextHandler(io.Discard, nil))
	svc, err := New(cfg, Options{Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	if svc.Fatigue() == nil || svc.Fatigue().Len() != 4 {
		t.Fatalf("fatigue tracker %v, want four gauges", svc.Fatigue())
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
	sopt.Start = time.Now().UTC().Add(-20 * time.Minute).Truncate(time.Second)
	sopt.Duration = 10 * time.Minute
	gen, err := simulate.New(mon.Structure, mon.Sensors, sopt)
	if err != nil {
		t.Fatal(err)
	}
	hr := simulate.DefaultHighRate()
	hr.Vehicle.CrossingsPerDay = 24 * 60 // about one a minute
	ps, err := publish.RunHighRate(ctx, gen.HighRate(hr), publish.Options{Broker: "tcp://" + svc.BrokerAddr(), Structure: mon.Structure.Name, ClientID: "service-fatigue-logger"})
	if err != nil {
		t.Fatal(err)
	}
	want := uint64(ps.Readings / 4)
	deadline := time.Now().Add(3 * time.Minute)
	for {
		gs := svc.Fatigue().Gauges()
		all := true
		for _, g := range gs {
			all = all && g.LastTime.Equal(sopt.Start.Add(sopt.Duration-hr.Interval))
		}
		if all {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("fatigue count did not reach the end of the record (%d samples per gauge): %+v", want, gs)
		}
		time.Sleep(50 * time.Millisecond)
	}
	base := "http://" + svc.HTTPAddr()
	get := func(path string) string {
		resp, err := http.Get(base + path)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		if resp.StatusCode != 200 {
			t.Fatalf("GET %s: %d %s", path, resp.StatusCode, b)
		}
		return string(b)
	}
	var f struct {
		Caution string `json:"caution"`
		Gauges  []struct {
			Gauge       string   `json:"gauge"`
			DamageTotal *float64 `json:"damage_total"`
			Days        []struct {
				Cycles float64 `json:"cycles"`
			} `json:"days"`
		} `json:"gauges"`
	}
	if err := json.Unmarshal([]byte(get("/api/structures/alder-creek/fatigue")), &f); err != nil {
		t.Fatal(err)
	}
	if f.Caution != fatigue.Caution || len(f.Gauges) != 4 {
		t.Fatalf("fatigue answer: %+v", f)
	}
	damage := map[string]float64{}
	for _, g := range svc.Fatigue().Gauges() {
		damage[g.Channel] = g.DamageTotal
	}
	for _, g := range f.Gauges {
		if g.DamageTotal == nil || *g.DamageTotal != damage[g.Gauge] || len(g.Days) == 0 {
			t.Errorf("gauge %s: %+v, tracker says damage %g", g.Gauge, g, damage[g.Gauge])
		}
	}
	if damage["D1_a"] <= 0 {
		t.Errorf("D1_a shows no damage after ten minutes with a vehicle a minute")
	}
	metrics := get("/metrics")
	for _, w := range []string{`shm_fatigue_damage_ratio{gauge="D1_a",structure="alder-creek"}`, `shm_fatigue_stress_range_cycles_total{gauge="B4_b",structure="alder-creek"}`} {
		if !strings.Contains(metrics, w) {
			t.Errorf("metrics lack %s", w)
		}
	}
	cancel()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	if err := svc.Close(); err != nil {
		t.Fatal(err)
	}

	// A restart restores every counter and the accumulated damage (summed
	// per stored hour instead of per commit: equal to rounding).
	svc2, err := New(cfg, Options{Logger: log})
	if err != nil {
		t.Fatal(err)
	}
	defer svc2.Close()
	for _, g := range svc2.Fatigue().Gauges() {
		if math.Abs(g.DamageTotal-damage[g.Channel]) > 1e-12*damage[g.Channel] || !g.LastTime.Equal(sopt.Start.Add(sopt.Duration-hr.Interval)) {
			t.Errorf("after restart %s: damage %g (was %g), last sample %s", g.Channel, g.DamageTotal, damage[g.Channel], g.LastTime)
		}
	}
}
