package report

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestFatigueSection: a report with fatigue gauges parses as XHTML-clean
// markup, carries the fatigue caution, a histogram and a damage plot per
// gauge; a report without them has no fatigue section at all.
func TestFatigueSection(t *testing.T) {
	r := smallReport()
	day := time.Date(2026, 6, 14, 0, 0, 0, 0, time.UTC)
	r.Fatigue = []FatigueGauge{
		{Gauge: "B4_a", Detail: "71 MPa, gamma_Ff 1.00, gamma_Mf 1.15", Source: "stored hourly histograms",
			Bins:                   []FatigueBin{{0, 0.5e6, 120000}, {30e6, 30.5e6, 3.5}, {45e6, 45.5e6, 0.5}},
			ConstantAmplitudeLimit: 45.5e6, CutOff: 25e6,
			Days:  []FatigueDay{{day, 1e-7}, {day.Add(24 * time.Hour), 3e-7}},
			Total: 4e-7, Accumulated: 9e-7, RatePerDay: 2e-7, WindowDays: 2, RemainingYears: 13698.6},
		{Gauge: "D1_a", Detail: "56 MPa", Source: "recount of the raw readings", RemainingYears: math.Inf(1)},
	}
	dir := t.TempDir()
	if err := Write(dir, r); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(filepath.Join(dir, HTMLFile))
	if err != nil {
		t.Fatal(err)
	}
	root := parseHTML(t, b)
	ids := map[string]*xmlTree{}
	root.walk(func(n *xmlTree) {
		if id := n.attr("id"); id != "" {
			ids[id] = n
		}
	})
	for _, id := range []string{"fatigue", "fatigue-caution", "fatigue-summary", "fatigue-hist-B4_a", "fatigue-damage-B4_a", "fatigue-hist-D1_a"} {
		if ids[id] == nil {
			t.Errorf("no element with id %q", id)
		}
	}
	if c := ids["fatigue-caution"]; c == nil || !strings.Contains(c.text(), "not a design check or an assessment") || !strings.Contains(c.text(), "licensed engineer") {
		t.Error("fatigue caution missing")
	}
	html := string(b)
	for _, want := range []string{"no damage at the recent rate", "13698.6 years", "cut-off", "no cycles counted"} {
		if !strings.Contains(html, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	plain := writeSmall(t)
	pb, _ := os.ReadFile(filepath.Join(plain, HTMLFile))
	if strings.Contains(string(pb), "fatigue") {
		t.Error("a report without fatigue gauges mentions fatigue")
	}
}
