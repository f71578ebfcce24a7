package ingest

import (
	"testing"
	"time"
)

// TestAdmitYears checks the edges of the storable years (bad_time) in UTC
// and in zones far east and west, and the constants of Admit's fast path.
func TestAdmitYears(t *testing.T) {
	if got := time.Date(1971, 1, 2, 0, 0, 0, 0, time.UTC).Unix(); got != safeYearsFrom {
		t.Errorf("safeYearsFrom = %d, want %d", safeYearsFrom, got)
	}
	if got := time.Date(2261, 12, 31, 0, 0, 0, 0, time.UTC).Unix(); got != safeYearsTo {
		t.Errorf("safeYearsTo = %d, want %d", safeYearsTo, got)
	}
	for _, loc := range []*time.Location{time.UTC, time.FixedZone("east", 14*3600), time.FixedZone("west", -12*3600)} {
		for _, c := range []struct {
			t  time.Time
			ok bool
		}{
			{time.Date(1970, 12, 31, 23, 59, 59, 0, loc), false},
			{time.Date(1971, 1, 1, 0, 0, 0, 0, loc), true},
			{time.Date(1971, 1, 1, 23, 0, 0, 0, loc), true},
			{time.Date(2026, 6, 1, 0, 0, 0, 0, loc), true},
			{time.Date(2261, 12, 31, 23, 59, 59, 0, loc), true},
			{time.Date(2262, 1, 1, 0, 0, 0, 0, loc), false},
		} {
			_, rej := Admit(Limits{}, nil, "g1", "", c.t, 1, c.t)
			if ok := rej == nil; ok != c.ok || !ok && rej.Reason != ReasonTimeRange {
				t.Errorf("%s: accepted %v (%v), want %v", c.t.Format(time.RFC3339), ok, rej, c.ok)
			}
		}
	}
}
