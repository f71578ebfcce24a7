package store

import (
	"bytes"
	"context"
	"database/sql"
	"fmt"
	"path/filepath"
	"testing"
	"time"
)

// TestDeadLetterRepeatsAndCap: a dead letter keeps an excerpt of
// ExcerptBytes and the payload's size; the same topic, reason and excerpt
// within RepeatPeriod is counted on one row; rows above the cap are
// dropped oldest first and counted (issue 10, defect 7).
func TestDeadLetterRepeatsAndCap(t *testing.T) {
	ctx := context.Background()
	s, err := Open(filepath.Join(t.TempDir(), "m.db"), Options{MaxDeadLetters: 100})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	big := bytes.Repeat([]byte("x"), 60<<10)
	var b Batch
	for i := range 1000 {
		b.DeadLetters = append(b.DeadLetters, DeadLetter{Topic: "shm/alder-creek/g00", Received: t0.Add(time.Duration(i) * time.Second),
			Reason: "malformed_json", Detail: "unexpected end", Payload: big})
	}
	res, err := s.Commit(ctx, b)
	if err != nil {
		t.Fatal(err)
	}
	if res.DeadLettersAdded != 1 {
		t.Errorf("1,000 identical dead letters within %s added %d rows; want 1", RepeatPeriod, res.DeadLettersAdded)
	}
	ds, err := s.ListDeadLetters(ctx, DeadLetterFilter{})
	if err != nil {
		t.Fatal(err)
	}
	if len(ds) != 1 || ds[0].Repeats != 1000 || len(ds[0].Payload) != ExcerptBytes || ds[0].Size != len(big) ||
		!ds[0].LastReceived.Equal(t0.Add(999*time.Second)) || !ds[0].Received.Equal(t0) {
		t.Fatalf("dead letters %d rows, first %+v; want one row of 1000 repeats, a %d-byte excerpt of %d bytes, first %s last %s",
			len(ds), ds[0], ExcerptBytes, len(big), t0, t0.Add(999*time.Second))
	}
	// After the repeat period: a new row.
	if err := s.DeadLetter(ctx, DeadLetter{Topic: "shm/alder-creek/g00", Received: t0.Add(RepeatPeriod + time.Second), Reason: "malformed_json", Payload: big}); err != nil {
		t.Fatal(err)
	}
	// 300 distinct ones: the cap of 100 rows holds, the oldest go first.
	var dropped int64
	for i := range 300 {
		res, err := s.Commit(ctx, Batch{DeadLetters: []DeadLetter{{Topic: "shm/alder-creek/g00", Received: t0.Add(2*RepeatPeriod + time.Duration(i)*time.Second),
			Reason: "malformed_json", Payload: fmt.Appendf(nil, "message %d", i)}}})
		if err != nil {
			t.Fatal(err)
		}
		dropped += res.DeadLettersDropped
	}
	ds, err = s.ListDeadLetters(ctx, DeadLetterFilter{})
	if err != nil {
		t.Fatal(err)
	}
	if len(ds) != 100 || dropped != 202 || string(ds[0].Payload) != "message 200" {
		t.Errorf("after 302 rows with a cap of 100: %d rows, %d dropped, oldest %q; want 100, 202, \"message 200\"", len(ds), dropped, ds[0].Payload)
	}
	// Filter by reason and time.
	if ds, _ := s.ListDeadLetters(ctx, DeadLetterFilter{Reason: "bad_topic"}); len(ds) != 0 {
		t.Errorf("reason filter: %d rows of bad_topic, want 0", len(ds))
	}
	if ds, _ := s.ListDeadLetters(ctx, DeadLetterFilter{From: t0.Add(2*RepeatPeriod + 290*time.Second)}); len(ds) != 10 {
		t.Errorf("since filter: %d rows, want 10", len(ds))
	}
}

// TestCommitConflicts: a reading whose key is stored (or earlier in the
// batch) with the same value is a duplicate; with another value it is a
// conflict, reported and turned into a dead letter in the same
// transaction (issue 10, defect 5).
func TestCommitConflicts(t *testing.T) {
	ctx := context.Background()
	s := openTemp(t)
	if _, err := s.InsertReadings(ctx, "alder-creek", []Reading{{"g1", t0, 1}}); err != nil {
		t.Fatal(err)
	}
	b := Batch{
		Groups: []Group{
			{"alder-creek", []Reading{{"g1", t0, 1}, {"g1", t0, 2}, {"g2", t0, 7}}},
			{"alder-creek", []Reading{{"g2", t0, 8}, {"g2", t0, 7}}},
		},
		OnConflict: func(g int, cs []Conflict) DeadLetter {
			return DeadLetter{Topic: fmt.Sprintf("group %d", g), Received: t0, Reason: "conflicting_reading", Detail: fmt.Sprint(cs)}
		},
	}
	res, err := s.Commit(ctx, b)
	if err != nil {
		t.Fatal(err)
	}
	want := "[[{1 1}] [{0 7}]]"
	if got := fmt.Sprint(res.Conflicts); got != want || res.Inserted[0] != 1 || res.Inserted[1] != 0 {
		t.Errorf("conflicts %s, inserted %v; want %s, [1 0]", got, res.Inserted, want)
	}
	n, _ := s.CountDeadLetters(ctx)
	if n["conflicting_reading"] != 2 {
		t.Errorf("dead letters %v; want 2 conflicting_reading", n)
	}
}

// TestMigrationOfDeadLetters: a file written by schema version 3 (before
// the data-path migration) opens, its dead letters keep their rows with the
// payload cut to the excerpt, and new ones count repeats.
func TestMigrationOfDeadLetters(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "v3.db")
	db, err := sql.Open("sqlite", "file:"+path+"?_pragma=journal_mode(WAL)")
	if err != nil {
		t.Fatal(err)
	}
	if err := migrate(ctx, db, 3); err != nil {
		t.Fatal(err)
	}
	big := bytes.Repeat([]byte("y"), 5000)
	if _, err := db.Exec(`INSERT INTO dead_letters (topic, received, reason, detail, payload) VALUES ('shm/a/g', ?, 'malformed_json', 'bad', ?)`, t0.UnixNano(), big); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec(`INSERT INTO channels (id, structure, name) VALUES (3, 'alder-creek', 'g1')`); err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec(`INSERT INTO readings (channel, ts, value) VALUES (3, ?, 4.5)`, t0.UnixNano()); err != nil {
		t.Fatal(err)
	}
	db.Close()
	s, err := Open(path, Options{})
	if err != nil {
		t.Fatalf("upgrading a version 3 file: %v", err)
	}
	defer s.Close()
	ds, err := s.ListDeadLetters(ctx, DeadLetterFilter{})
	if err != nil {
		t.Fatal(err)
	}
	if len(ds) != 1 || len(ds[0].Payload) != ExcerptBytes || ds[0].Size != 5000 || ds[0].Repeats != 1 || !ds[0].LastReceived.Equal(t0) {
		t.Fatalf("migrated dead letters %+v", ds)
	}
	if err := s.DeadLetter(ctx, DeadLetter{Topic: "shm/a/g", Received: t0.Add(time.Second), Reason: "malformed_json", Payload: big}); err != nil {
		t.Fatal(err)
	}
	if err := s.DeadLetter(ctx, DeadLetter{Topic: "shm/a/g", Received: t0.Add(2 * time.Second), Reason: "malformed_json", Payload: big}); err != nil {
		t.Fatal(err)
	}
	if ds, _ := s.ListDeadLetters(ctx, DeadLetterFilter{}); len(ds) != 2 || ds[1].Repeats != 2 {
		t.Errorf("after two new identical dead letters: %d rows; want the old row and one new with 2 repeats", len(ds))
	}
	last, err := s.LastReadings(ctx, "alder-creek", time.Time{})
	if err != nil || !last["g1"].Equal(t0) {
		t.Errorf("last readings after upgrade %v, %v", last, err)
	}
	// A reading from the future stored by an earlier version is left out
	// below the bound.
	if _, err := s.InsertReadings(ctx, "alder-creek", []Reading{{"g1", time.Date(2255, 1, 1, 0, 0, 0, 0, time.UTC), 1}}); err != nil {
		t.Fatal(err)
	}
	if last, _ := s.LastReadings(ctx, "alder-creek", t0.Add(time.Hour)); !last["g1"].Equal(t0) {
		t.Errorf("last reading below %s: %v; want %s", t0.Add(time.Hour), last["g1"], t0)
	}
}
