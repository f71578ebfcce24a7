package fatigue

import (
	"math"
	"testing"
	"time"
)

// TestSummarise: 10 days of the same hourly traffic (1000 cycles of 80.25 MPa
// every hour) on category 71 with gamma = 1. Per hour the damage is
// n (s / Delta sigma_C)^3 / 2e6 (EN 1993-1-9, 7.1, s above Delta sigma_D); a
// day is 24 times that; the remaining life is (1 - D) / rate (Miner).
func TestSummarise(t *testing.T) {
	c, _ := NewCurve(71, 1, 1)
	s := 80.25e6
	perHour := 1000 * math.Pow(s/71e6, 3) / 2e6
	t0 := time.Date(2026, 4, 1, 0, 0, 0, 0, time.UTC)
	var hours []HourHistogram
	for i := 0; i < 240; i++ {
		var h Histogram
		h.Cycle(s, 1000)
		hours = append(hours, HourHistogram{Hour: t0.Add(time.Duration(i) * time.Hour), Hist: &h})
	}
	start := t0.Add(48 * time.Hour) // the declared start: the first two days do not count
	l := Summarise(c, hours, start, t0.Add(72*time.Hour), t0.Add(240*time.Hour))
	if len(l.Days) != 7 || !l.Days[0].Day.Equal(t0.Add(72*time.Hour)) {
		t.Fatalf("%d days from %v", len(l.Days), l.Days[0].Day)
	}
	for _, d := range l.Days {
		if !near(d.Damage, 24*perHour, 1e-12) || d.Cycles != 24000 {
			t.Errorf("day %v: damage %g cycles %g, want %g and 24000", d.Day, d.Damage, d.Cycles, 24*perHour)
		}
	}
	if !near(l.Total, 7*24*perHour, 1e-12) || !near(l.Accumulated, 8*24*perHour, 1e-12) {
		t.Errorf("total %g accumulated %g, want %g and %g", l.Total, l.Accumulated, 7*24*perHour, 8*24*perHour)
	}
	if l.WindowDays != 7 || !near(l.RatePerDay, 24*perHour, 1e-12) {
		t.Errorf("window %g days, rate %g, want 7 and %g", l.WindowDays, l.RatePerDay, 24*perHour)
	}
	want := (1 - 8*24*perHour) / (24 * perHour) / 365.25
	if !near(l.RemainingYears, want, 1e-12) {
		t.Errorf("remaining %g years, want %g", l.RemainingYears, want)
	}
	// A period shorter than the window averages over its own span.
	l = Summarise(c, hours, time.Time{}, t0.Add(228*time.Hour), t0.Add(240*time.Hour))
	if l.WindowDays != 0.5 || !near(l.RatePerDay, 24*perHour, 1e-12) || !near(l.Accumulated, 240*perHour, 1e-12) {
		t.Errorf("half day: window %g rate %g accumulated %g", l.WindowDays, l.RatePerDay, l.Accumulated)
	}
	if RemainingYears(1.2, 1e-3) != 0 || !math.IsInf(RemainingYears(0.1, 0), 1) {
		t.Error("RemainingYears at D >= 1 or zero rate")
	}
}
