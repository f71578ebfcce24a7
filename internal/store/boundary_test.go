package store

import (
	"context"
	"path/filepath"
	"testing"
	"time"
)

// TestStorableRange: the range is the whole seconds of an int64 count of
// nanoseconds since 1970 (Go's time package: 1677-09-21T00:12:43.145224192Z
// to 2262-04-11T23:47:16.854775807Z), less one at either end; both ends are
// storable, one nanosecond beyond is refused.
func TestStorableRange(t *testing.T) {
	lo, hi := StorableRange()
	if lo.Format(time.DateOnly) != "1677-09-21" || hi.Format(time.DateOnly) != "2262-04-11" {
		t.Fatalf("StorableRange = %s, %s", lo, hi)
	}
	cases := []struct {
		t    time.Time
		want bool
	}{
		{lo, true}, {hi, true},
		{lo.Add(-time.Nanosecond), false}, {hi.Add(time.Nanosecond), false},
		{time.Date(1970, 6, 1, 0, 0, 0, 0, time.UTC), true},
		{time.Date(2262, 3, 1, 0, 0, 0, 0, time.UTC), true},
		{time.Date(9999, 1, 1, 0, 0, 0, 0, time.UTC), false},
	}
	for _, c := range cases {
		if got := Storable(c.t); got != c.want {
			t.Errorf("Storable(%s) = %v, want %v", c.t.Format(time.RFC3339Nano), got, c.want)
		}
		if err := checkReading("s", Reading{Channel: "g1", Time: c.t, Value: 1}); (err == nil) != c.want {
			t.Errorf("checkReading at %s: %v, want storable %v", c.t.Format(time.RFC3339Nano), err, c.want)
		}
	}
}

// TestLastReading: the latest reading over every channel of the structure,
// up to the storable range's last instant (the replay's own search had
// stopped at 2262-01-01 and missed a reading after it); none for a
// structure without readings.
func TestLastReading(t *testing.T) {
	ctx := context.Background()
	s, err := Open(filepath.Join(t.TempDir(), "m.db"), Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if _, ok, err := s.LastReading(ctx, "alder-creek"); ok || err != nil {
		t.Fatalf("empty store: ok %v, err %v", ok, err)
	}
	_, hi := StorableRange()
	t0 := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	late := time.Date(2262, 3, 1, 0, 0, 0, 0, time.UTC)
	rs := []Reading{{"g1", t0, 1}, {"g2", late, 2}, {"g3", t0.Add(time.Hour), 3}}
	if _, err := s.InsertReadings(ctx, "alder-creek", rs); err != nil {
		t.Fatal(err)
	}
	if _, err := s.InsertReadings(ctx, "harbour-hall", []Reading{{"g1", hi, 1}}); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		structure string
		want      time.Time
	}{{"alder-creek", late}, {"harbour-hall", hi}} {
		got, ok, err := s.LastReading(ctx, c.structure)
		if err != nil || !ok || !got.Equal(c.want) {
			t.Errorf("LastReading(%s) = %s, %v, %v; want %s", c.structure, got, ok, err, c.want)
		}
	}
}
