package metrics

import (
	"strings"
	"testing"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
)

func TestFatigueMetrics(t *testing.T) {
	reg := prometheus.NewRegistry()
	f, err := NewFatigue(reg)
	if err != nil {
		t.Fatal(err)
	}
	f.FatigueCounted("alder-creek", "B4_a", 12.5, 1.25e-4)
	f.FatigueCounted("alder-creek", "B4_a", 3, 1.5e-4)
	want := `
# HELP shm_fatigue_stress_range_cycles_total Stress-range cycles counted at the gauge by the rainflow counter (ASTM E1049-85; half cycles count 0.5).
# TYPE shm_fatigue_stress_range_cycles_total counter
shm_fatigue_stress_range_cycles_total{gauge="B4_a",structure="alder-creek"} 15.5
`
	if err := testutil.GatherAndCompare(reg, strings.NewReader(want), FatigueCycles); err != nil {
		t.Error(err)
	}
	if v := testutil.ToFloat64(f.damage.WithLabelValues("alder-creek", "B4_a")); v != 1.5e-4 {
		t.Errorf("damage %v", v)
	}
	if probs, err := testutil.GatherAndLint(reg); err != nil || len(probs) > 0 {
		t.Errorf("lint: %v %v", probs, err)
	}
}
