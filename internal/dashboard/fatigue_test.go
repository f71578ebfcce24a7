package dashboard

import (
	"context"
	"encoding/json"
	"math"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/fatigue"
)

type memFatigue []FatigueGauge

func (m memFatigue) Fatigue(_ context.Context, s string) ([]FatigueGauge, error) {
	if s != "alder-creek" {
		return nil, nil
	}
	return m, nil
}

func TestFatigueJSON(t *testing.T) {
	src, _ := fixture(t)
	h := New(src, Options{Fatigue: memFatigue{{Gauge: "B4_a", CategoryMPa: 71, GammaFf: 1, GammaMf: 1.15,
		Start: time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC), DamageTotal: 2.5e-4, RatePerDay: 1e-6, WindowDays: 7,
		RemainingYears: math.Inf(1), Days: []FatigueDay{{Day: time.Date(2026, 6, 14, 0, 0, 0, 0, time.UTC), Cycles: 1500.5, Damage: 1e-6}}}}})
	code, body, _ := get(t, h, "/api/structures/alder-creek/fatigue")
	if code != 200 {
		t.Fatalf("status %d: %s", code, body)
	}
	var f fatigueJSON
	if err := json.Unmarshal([]byte(body), &f); err != nil {
		t.Fatal(err)
	}
	if f.Caution != fatigue.Caution || !strings.Contains(f.Caution, "licensed engineer") {
		t.Errorf("caution %q", f.Caution)
	}
	if len(f.Gauges) != 1 || f.Gauges[0].RemainingYears != nil || *f.Gauges[0].DamageTotal != 2.5e-4 ||
		*f.Gauges[0].Start != "2026-01-01T00:00:00Z" || f.Gauges[0].Days[0].Day != "2026-06-14" || f.Gauges[0].LastSample != nil {
		t.Errorf("gauges %s", body)
	}
	// Without a source the endpoint lists no gauges; unknown structures are 404.
	_, h0 := fixture(t)
	if code, body, _ := get(t, h0, "/api/structures/alder-creek/fatigue"); code != 200 || !strings.Contains(body, `"gauges": []`) {
		t.Errorf("no source: %d %s", code, body)
	}
	if code, _, _ := get(t, h0, "/api/structures/nowhere/fatigue"); code != 404 {
		t.Errorf("unknown structure: %d", code)
	}
	// The page loads the panel's script, which carries no remote reference.
	if _, page, _ := get(t, h0, "/"); !strings.Contains(page, `src="fatigue.js"`) || !strings.Contains(page, `id="fatigue-panel"`) {
		t.Error("index.html lacks the fatigue panel")
	}
	if code, js, _ := get(t, h0, "/fatigue.js"); code != 200 || strings.Count(js, "http://") != 1 || strings.Contains(js, "https://") {
		t.Errorf("fatigue.js: %d, refers to the network beyond the SVG namespace", code)
	}
}
