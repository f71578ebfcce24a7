package store

import (
	"context"
	"errors"
	"path/filepath"
	"testing"
	"time"
)

// TestFatigueInSameTransaction: the fatigue update is written with the
// readings, and an error from it rolls the readings back too.
func TestFatigueInSameTransaction(t *testing.T) {
	ctx := context.Background()
	s, err := Open(filepath.Join(t.TempDir(), "m.db"), Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	t0 := time.Date(2026, 5, 1, 10, 0, 0, 0, time.UTC)
	rs := []Reading{{Channel: "g", Time: t0, Value: 1}, {Channel: "g", Time: t0.Add(time.Second), Value: 2}}
	b := Batch{Groups: []Group{{Structure: "x", Readings: rs}}, Fatigue: func(CommitResult) ([]FatigueUpdate, error) {
		return nil, errors.New("boom")
	}}
	if _, err := s.Commit(ctx, b); err == nil {
		t.Fatal("commit with a failing fatigue update succeeded")
	}
	if n, _ := s.CountReadings(ctx, "x", t0.Add(-time.Hour), t0.Add(time.Hour)); n != 0 {
		t.Fatalf("%d readings kept after the rollback", n)
	}
	up := FatigueUpdate{Structure: "x", Channel: "g", BinWidth: 0.5e6, LastTime: t0.Add(time.Second), State: []byte{1, 2},
		Hours: []FatigueHour{{Hour: t0, Bins: []FatigueBin{{Bin: 3, Cycles: 0.5}, {Bin: 40, Cycles: 2}}}}}
	var seen []int
	b.Fatigue = func(r CommitResult) ([]FatigueUpdate, error) {
		seen = append(seen, r.Inserted[0])
		return []FatigueUpdate{up}, nil
	}
	for i := 0; i < 2; i++ { // twice: cycles add up, the state is replaced
		if _, err := s.Commit(ctx, b); err != nil {
			t.Fatal(err)
		}
	}
	if len(seen) != 2 || seen[0] != 2 || seen[1] != 0 {
		t.Errorf("fatigue stage saw %v new readings, want [2 0] (the second commit is a redelivery)", seen)
	}
	hs, err := s.FatigueHours(ctx, "x", "g", t0, t0.Add(time.Hour))
	if err != nil || len(hs) != 1 || len(hs[0].Bins) != 2 || hs[0].Bins[1] != (FatigueBin{40, 4}) || !hs[0].Hour.Equal(t0) {
		t.Fatalf("hours %+v, %v", hs, err)
	}
	st, err := s.FatigueStates(ctx, "x")
	if err != nil || len(st) != 1 || string(st[0].State) != "\x01\x02" || !st[0].LastTime.Equal(up.LastTime) || st[0].BinWidth != 0.5e6 {
		t.Fatalf("states %+v, %v", st, err)
	}
}
