package ingest

import (
	"testing"
	"time"

	"trussmonitor/internal/store"
)

// TestAdmitTimeRange: bad_time is exactly the store's storable range
// (store.StorableRange), the one definition MQTT ingest and `monitor
// import` share; before, Admit had its own 1971..2261, so a reading of
// 1970 or 2261-06 was refused although storable.
func TestAdmitTimeRange(t *testing.T) {
	lo, hi := store.StorableRange()
	now := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	cases := []struct {
		name string
		t    time.Time
		want Reason // "" for accepted
	}{
		{"earliest storable", lo, ""},
		{"latest storable", hi, ""},
		{"1970", time.Date(1970, 6, 1, 0, 0, 0, 0, time.UTC), ""},
		{"2261", time.Date(2261, 6, 1, 0, 0, 0, 0, time.UTC), ""},
		{"before the range", lo.Add(-time.Microsecond), ReasonTimeRange},
		{"after the range", hi.Add(time.Microsecond), ReasonTimeRange},
		{"year 9999", time.Date(9999, 1, 1, 0, 0, 0, 0, time.UTC), ReasonTimeRange},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			rd, rej := Admit(Limits{}, nil, "g1", "/", c.t, 1, now)
			switch {
			case c.want == "" && rej != nil:
				t.Errorf("refused: %s %s", rej.Reason, rej.Detail)
			case c.want == "" && !store.Storable(rd.Time):
				t.Errorf("admitted time %s is not storable", rd.Time)
			case c.want != "" && (rej == nil || rej.Reason != c.want):
				t.Errorf("got %+v, want %s", rej, c.want)
			}
		})
	}
}
