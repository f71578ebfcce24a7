package store

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

var t0 = time.Date(2026, 3, 1, 12, 0, 0, 0, time.UTC)

func openTemp(t *testing.T) *Store {
	t.Helper()
	s, err := Open(filepath.Join(t.TempDir(), "monitor.db"), Options{})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { s.Close() })
	return s
}

func TestOpenVerifiesPragmas(t *testing.T) {
	s := openTemp(t)
	ctx := context.Background()
	mode, err := s.JournalMode(ctx)
	if err != nil || mode != "wal" {
		t.Fatalf("journal mode = %q, %v; want wal", mode, err)
	}
	// Every pooled connection must carry the pragmas, not only the first.
	conns := make([]*sql.Conn, 3)
	for i := range conns {
		c, err := s.db.Conn(ctx)
		if err != nil {
			t.Fatal(err)
		}
		conns[i] = c
		var sync, busy int
		if err := c.QueryRowContext(ctx, "PRAGMA synchronous").Scan(&sync); err != nil {
			t.Fatal(err)
		}
		if err := c.QueryRowContext(ctx, "PRAGMA busy_timeout").Scan(&busy); err != nil {
			t.Fatal(err)
		}
		if sync != 1 || busy != 5000 {
			t.Errorf("connection %d: synchronous=%d busy_timeout=%d, want 1 and 5000", i, sync, busy)
		}
	}
	for _, c := range conns {
		c.Close()
	}
	if v, _ := s.SchemaVersion(ctx); v != len(migrations) {
		t.Errorf("schema version %d, want %d", v, len(migrations))
	}
}

func TestOpenRefusesNonWAL(t *testing.T) {
	// An in-memory database cannot be in WAL mode: the check must say so
	// rather than run without the durability ack-after-commit relies on.
	_, err := Open(":memory:", Options{})
	if err == nil || !strings.Contains(err.Error(), "journal_mode") {
		t.Fatalf("Open(:memory:) error = %v, want a journal_mode error", err)
	}
}

func TestMigrationFromVersion1(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "old.db")
	// Write a file as the first release did: schema version 1 only.
	db, err := sql.Open("sqlite", "file:"+path+"?_pragma=journal_mode(WAL)")
	if err != nil {
		t.Fatal(err)
	}
	if err := migrate(ctx, db, 1); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec(`INSERT INTO channels (id, structure, name) VALUES (7, 'alder-creek', 'g1')`); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec(`INSERT INTO readings (channel, ts, value) VALUES (7, ?, 12.5)`, t0.UnixNano()); err != nil {
		t.Fatal(err)
	}
	if v, _ := schemaVersion(ctx, db); v != 1 {
		t.Fatalf("old file at version %d, want 1", v)
	}
	db.Close()

	s, err := Open(path, Options{})
	if err != nil {
		t.Fatalf("upgrading a version 1 file: %v", err)
	}
	defer s.Close()
	if v, _ := s.SchemaVersion(ctx); v != len(migrations) {
		t.Fatalf("after upgrade version %d, want %d", v, len(migrations))
	}
	var got []Reading
	if err := s.ReadReadings(ctx, "alder-creek", time.Time{}, time.Time{}, func(r Reading) error {
		got = append(got, r)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if len(got) != 1 || got[0].Value != 12.5 || !got[0].Time.Equal(t0) || got[0].Channel != "g1" {
		t.Fatalf("readings after upgrade = %+v", got)
	}
	// The tables of later versions work.
	if err := s.PutEvent(ctx, Event{Structure: "alder-creek", Rule: "r", Kind: Raised, Time: t0}); err != nil {
		t.Fatal(err)
	}
	// Reopening an up-to-date file changes nothing.
	s.Close()
	s2, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	s2.Close()
}

func TestOpenRefusesNewerSchema(t *testing.T) {
	path := filepath.Join(t.TempDir(), "new.db")
	s, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.db.Exec(`UPDATE schema_version SET version = 99`); err != nil {
		t.Fatal(err)
	}
	s.Close()
	if _, err := Open(path, Options{}); err == nil || !strings.Contains(err.Error(), "newer") {
		t.Fatalf("Open of a version 99 file: err = %v, want a 'newer' error", err)
	}
}

func TestInsertDedupe(t *testing.T) {
	s := openTemp(t)
	ctx := context.Background()
	rs := []Reading{
		{"g1", t0, 1}, {"g2", t0, 2}, {"g1", t0.Add(time.Second), 3},
	}
	n, err := s.InsertReadings(ctx, "alder-creek", rs)
	if err != nil || n != 3 {
		t.Fatalf("first insert: %d, %v; want 3", n, err)
	}
	// Redelivery of the same message: nothing new.
	n, err = s.InsertReadings(ctx, "alder-creek", rs)
	if err != nil || n != 0 {
		t.Fatalf("redelivery: %d, %v; want 0", n, err)
	}
	// Same channel names on another structure are other channels.
	n, err = s.InsertReadings(ctx, "harbour-hall", rs[:2])
	if err != nil || n != 2 {
		t.Fatalf("other structure: %d, %v; want 2", n, err)
	}
	// A batch with one old, one new and one repeated key inside the batch.
	res, err := s.Commit(ctx, Batch{Groups: []Group{
		{"alder-creek", []Reading{{"g1", t0, 9}, {"g3", t0, 4}}},
		{"alder-creek", []Reading{{"g3", t0, 5}}},
	}})
	if err != nil {
		t.Fatal(err)
	}
	if fmt.Sprint(res.Inserted, res.New) != "[1 0] [[false true] [false]]" {
		t.Fatalf("commit result %v %v", res.Inserted, res.New)
	}
	for st, want := range map[string]int64{"alder-creek": 4, "harbour-hall": 2} {
		if c, err := s.CountReadings(ctx, st, time.Time{}, time.Time{}); err != nil || c != want {
			t.Errorf("count %s = %d, %v; want %d", st, c, err, want)
		}
	}
	// The first value stored wins; a redelivery never overwrites.
	var v float64
	if err := s.ReadReadings(ctx, "alder-creek", t0, t0.Add(time.Nanosecond), func(r Reading) error {
		if r.Channel == "g1" {
			v = r.Value
		}
		return nil
	}); err != nil || v != 1 {
		t.Fatalf("g1 at t0 = %v, %v; want 1", v, err)
	}
}

func TestInsertRejectsUnstorable(t *testing.T) {
	s := openTemp(t)
	ctx := context.Background()
	for name, r := range map[string]Reading{
		"nan":      {"g1", t0, math.NaN()},
		"inf":      {"g1", t0, math.Inf(-1)},
		"year1":    {"g1", time.Date(1, 1, 1, 0, 0, 0, 0, time.UTC), 1},
		"nochan":   {"", t0, 1},
		"year3000": {"g1", time.Date(3000, 1, 1, 0, 0, 0, 0, time.UTC), 1},
	} {
		if _, err := s.InsertReadings(ctx, "alder-creek", []Reading{{"ok", t0, 1}, r}); err == nil {
			t.Errorf("%s: stored without error", name)
		}
	}
	if c, _ := s.CountReadings(ctx, "alder-creek", time.Time{}, time.Time{}); c != 0 {
		t.Errorf("a failed batch left %d readings; want 0 (all or nothing)", c)
	}
}

func TestReadOrderAndChunks(t *testing.T) {
	path := filepath.Join(t.TempDir(), "m.db")
	// A tiny first chunk forces many chunks and the gap skipping.
	s, err := Open(path, Options{ReadChunk: 3 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	ctx := context.Background()
	var rs []Reading
	chans := []string{"w", "b", "a"} // inserted out of name order
	for i := range 500 {
		ts := t0.Add(time.Duration(i) * time.Millisecond)
		if i >= 250 {
			ts = ts.Add(time.Hour) // a gap
		}
		for _, c := range chans {
			rs = append(rs, Reading{c, ts, float64(i)})
		}
	}
	if _, err := s.InsertReadings(ctx, "alder-creek", rs); err != nil {
		t.Fatal(err)
	}
	var got []Reading
	err = s.ReadReadings(ctx, "alder-creek", time.Time{}, time.Time{}, func(r Reading) error {
		got = append(got, r)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != len(rs) {
		t.Fatalf("read %d readings, want %d", len(got), len(rs))
	}
	for i := 1; i < len(got); i++ {
		a, b := got[i-1], got[i]
		if b.Time.Before(a.Time) || (b.Time.Equal(a.Time) && b.Channel <= a.Channel) {
			t.Fatalf("order broken at %d: %v then %v", i, a, b)
		}
	}
	// A half-open range and an early stop.
	n := 0
	stop := errors.New("stop")
	err = s.ReadReadings(ctx, "alder-creek", t0.Add(10*time.Millisecond), t0.Add(20*time.Millisecond), func(r Reading) error {
		n++
		if n == 12 {
			return stop
		}
		return nil
	})
	if !errors.Is(err, stop) || n != 12 {
		t.Fatalf("early stop: n=%d err=%v", n, err)
	}
	c, _ := s.CountReadings(ctx, "alder-creek", t0.Add(10*time.Millisecond), t0.Add(20*time.Millisecond))
	if c != 30 {
		t.Fatalf("count in [10ms, 20ms) = %d, want 30", c)
	}
}

func TestDeadLettersAndRetention(t *testing.T) {
	s := openTemp(t)
	ctx := context.Background()
	for i, reason := range []string{"malformed_json", "malformed_json", "unknown_channel"} {
		err := s.DeadLetter(ctx, DeadLetter{
			Topic: "shm/alder-creek/g9", Received: t0.Add(time.Duration(i) * time.Hour),
			Reason: reason, Detail: "detail " + reason, Payload: []byte(`{"v":`),
		})
		if err != nil {
			t.Fatal(err)
		}
	}
	if err := s.DeadLetter(ctx, DeadLetter{Topic: "x"}); err == nil {
		t.Error("dead letter without reason accepted")
	}
	counts, err := s.CountDeadLetters(ctx)
	if err != nil || counts["malformed_json"] != 2 || counts["unknown_channel"] != 1 {
		t.Fatalf("dead letter counts %v, %v", counts, err)
	}
	dl, err := s.DeadLetters(ctx, time.Time{}, time.Time{}, 2)
	if err != nil || len(dl) != 2 || string(dl[0].Payload) != `{"v":` || !dl[1].Received.Equal(t0.Add(time.Hour)) {
		t.Fatalf("dead letters %+v, %v", dl, err)
	}

	// Retention: readings over three days, events and results likewise.
	var rs []Reading
	for d := range 3 {
		for _, c := range []string{"g1", "g2"} {
			rs = append(rs, Reading{c, t0.Add(time.Duration(d) * 24 * time.Hour), 1})
		}
		ts := t0.Add(time.Duration(d) * 24 * time.Hour)
		if err := s.PutEvent(ctx, Event{Structure: "alder-creek", Rule: "fit", Kind: Raised, Time: ts, Evidence: json.RawMessage(`{"T":3}`)}); err != nil {
			t.Fatal(err)
		}
		if err := s.PutResult(ctx, Result{Structure: "alder-creek", Time: ts, Payload: json.RawMessage(`{"ok":true}`)}); err != nil {
			t.Fatal(err)
		}
	}
	if _, err := s.InsertReadings(ctx, "alder-creek", rs); err != nil {
		t.Fatal(err)
	}
	now := t0.Add(2*24*time.Hour + time.Minute)
	got, err := s.ApplyRetention(ctx, now, Retention{Readings: 36 * time.Hour, DeadLetters: 24 * time.Hour, Events: 72 * time.Hour})
	if err != nil {
		t.Fatal(err)
	}
	want := map[Class]int64{ClassReadings: 2, ClassDeadLetters: 3, ClassEvents: 0}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Fatalf("pruned %v, want %v (results kept forever)", got, want)
	}
	if c, _ := s.CountReadings(ctx, "alder-creek", time.Time{}, time.Time{}); c != 4 {
		t.Errorf("%d readings left, want 4", c)
	}
	nres := 0
	s.Results(ctx, "alder-creek", time.Time{}, time.Time{}, func(Result) error { nres++; return nil })
	if nres != 3 {
		t.Errorf("%d results left, want 3", nres)
	}
	if _, err := s.Prune(ctx, Class("models"), now); err == nil {
		t.Error("pruning models accepted; model versions must never be pruned")
	}
}

func TestModelsEventsResults(t *testing.T) {
	s := openTemp(t)
	ctx := context.Background()
	a, b := []byte("members: [a]"), []byte("members: [a, b]")
	ha, err := s.PutModel(ctx, "alder-creek", a, t0)
	if err != nil {
		t.Fatal(err)
	}
	if ha2, _ := s.PutModel(ctx, "alder-creek", a, t0.Add(time.Minute)); ha2 != ha {
		t.Fatal("same content, different hash")
	}
	hb, _ := s.PutModel(ctx, "alder-creek", b, t0.Add(time.Hour))
	s.PutModel(ctx, "alder-creek", a, t0.Add(2*time.Hour)) // back to the old one
	for _, c := range []struct {
		at   time.Duration
		want string
	}{{30 * time.Minute, ha}, {90 * time.Minute, hb}, {3 * time.Hour, ha}} {
		m, err := s.ModelAt(ctx, "alder-creek", t0.Add(c.at))
		if err != nil || m.Hash != c.want {
			t.Errorf("model at +%v = %s, %v; want %s", c.at, m.Hash, err, c.want)
		}
	}
	if _, err := s.ModelAt(ctx, "alder-creek", t0.Add(-time.Hour)); !errors.Is(err, ErrNotFound) {
		t.Errorf("model before the first: err %v, want ErrNotFound", err)
	}
	ms, _ := s.Models(ctx, "alder-creek")
	if len(ms) != 2 || string(ms[1].Content) != string(b) || !ms[0].FirstSeen.Equal(t0) {
		t.Errorf("models %+v", ms)
	}
	if ModelHash(a) != ha {
		t.Error("ModelHash differs from PutModel's hash")
	}

	if err := s.PutEvent(ctx, Event{Structure: "alder-creek", Rule: "r", Kind: "flapped", Time: t0}); err == nil {
		t.Error("bad kind accepted")
	}
	s.PutEvent(ctx, Event{Structure: "harbour-hall", Rule: "w", Subject: "m12", Kind: Raised, Time: t0.Add(time.Second), Evidence: json.RawMessage(`{"w":4.1}`)})
	s.PutEvent(ctx, Event{Structure: "harbour-hall", Rule: "w", Subject: "m12", Kind: Cleared, Time: t0.Add(2 * time.Second)})
	ev, err := s.Events(ctx, "harbour-hall", time.Time{}, time.Time{})
	if err != nil || len(ev) != 2 || ev[0].Kind != Raised || string(ev[0].Evidence) != `{"w":4.1}` || string(ev[1].Evidence) != "{}" {
		t.Fatalf("events %+v, %v", ev, err)
	}

	// A revision replaces the raised row's evidence only; the cleared row
	// and a raised row of another subject stay; a row not stored is
	// reported, not an error; evidence that is not JSON is refused.
	s.PutEvent(ctx, Event{Structure: "harbour-hall", Rule: "w", Subject: "m13", Kind: Raised, Time: t0.Add(time.Second), Evidence: json.RawMessage(`{"w":3.9}`)})
	if ok, err := s.ReviseEvent(ctx, Event{Structure: "harbour-hall", Rule: "w", Subject: "m12", Time: t0.Add(time.Second), Evidence: json.RawMessage(`{"w":4.1,"causes":[{"size":-29.7}]}`)}); !ok || err != nil {
		t.Fatalf("revising the stored raised event: %v, %v", ok, err)
	}
	if ok, err := s.ReviseEvent(ctx, Event{Structure: "harbour-hall", Rule: "w", Subject: "m12", Time: t0.Add(3 * time.Second), Evidence: json.RawMessage(`{}`)}); ok || err != nil {
		t.Errorf("revising an event never stored: %v, %v; want false, nil", ok, err)
	}
	if _, err := s.ReviseEvent(ctx, Event{Structure: "harbour-hall", Rule: "w", Subject: "m12", Time: t0.Add(time.Second), Evidence: json.RawMessage(`{`)}); err == nil {
		t.Error("revision with invalid JSON evidence accepted")
	}
	ev, err = s.Events(ctx, "harbour-hall", time.Time{}, time.Time{})
	if err != nil || len(ev) != 3 {
		t.Fatalf("events after the revision %+v, %v", ev, err)
	}
	for _, e := range ev {
		want := map[string]string{"m12" + Raised: `{"w":4.1,"causes":[{"size":-29.7}]}`, "m12" + Cleared: "{}", "m13" + Raised: `{"w":3.9}`}[e.Subject+e.Kind]
		if string(e.Evidence) != want {
			t.Errorf("%s %s evidence %s, want %s", e.Subject, e.Kind, e.Evidence, want)
		}
	}

	s.PutResult(ctx, Result{Structure: "harbour-hall", Time: t0, Payload: json.RawMessage(`{"T":1}`)})
	s.PutResult(ctx, Result{Structure: "harbour-hall", Time: t0, Payload: json.RawMessage(`{"T":2}`)})
	if err := s.PutResult(ctx, Result{Structure: "harbour-hall", Time: t0, Payload: json.RawMessage(`{`)}); err == nil {
		t.Error("invalid JSON result accepted")
	}
	var got []string
	s.Results(ctx, "harbour-hall", time.Time{}, time.Time{}, func(r Result) error { got = append(got, string(r.Payload)); return nil })
	if fmt.Sprint(got) != `[{"T":2}]` {
		t.Errorf("results %v, want the replaced one only", got)
	}
}

func BenchmarkCommit(b *testing.B) {
	for _, per := range []int{1, 50} {
		b.Run(fmt.Sprintf("readings_per_group=%d/groups=200", per), func(b *testing.B) {
			s, err := Open(filepath.Join(b.TempDir(), "b.db"), Options{})
			if err != nil {
				b.Fatal(err)
			}
			defer s.Close()
			ctx := context.Background()
			n := 0
			b.ResetTimer()
			for range b.N {
				var batch Batch
				for range 200 {
					g := Group{Structure: "alder-creek"}
					for c := range per {
						g.Readings = append(g.Readings, Reading{fmt.Sprintf("g%02d", c), t0.Add(time.Duration(n) * time.Millisecond), 1})
					}
					n++
					batch.Groups = append(batch.Groups, g)
				}
				if _, err := s.Commit(ctx, batch); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.N*200*per)/b.Elapsed().Seconds(), "readings/s")
		})
	}
}
