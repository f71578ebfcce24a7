package store

import (
	"bufio"
	"context"
	"database/sql"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
)

// dayStart is an hour boundary for the block tests.
var dayStart = time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)

// someReadings returns readings of channels a and b every second over
// hours hours from dayStart, values printed with 8 significant digits.
func someReadings(hours int, seed uint64) []Reading {
	rng := rand.New(rand.NewPCG(seed, 1))
	var rs []Reading
	for s := 0; s < hours*3600; s++ {
		t := dayStart.Add(time.Duration(s) * time.Second)
		for _, ch := range []string{"a", "b"} {
			v, _ := strconv.ParseFloat(strconv.FormatFloat(1e-4+3e-6*rng.NormFloat64(), 'g', 8, 64), 64)
			rs = append(rs, Reading{Channel: ch, Time: t, Value: v})
		}
	}
	return rs
}

// readAll returns every reading of structure s in the store's read order.
func readAll(t *testing.T, st *Store, structure string) []Reading {
	t.Helper()
	var out []Reading
	if err := st.ReadReadings(context.Background(), structure, time.Time{}, time.Time{}, func(r Reading) error {
		out = append(out, r)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	return out
}

func sameReadings(a, b []Reading) error {
	if len(a) != len(b) {
		return fmt.Errorf("%d readings, want %d", len(b), len(a))
	}
	for i := range a {
		if a[i].Channel != b[i].Channel || !a[i].Time.Equal(b[i].Time) || a[i].Value != b[i].Value {
			return fmt.Errorf("reading %d: %v, want %v", i, b[i], a[i])
		}
	}
	return nil
}

// rowCount counts the readings not in blocks: keyed rows and readings in
// staged runs.
func rowCount(t *testing.T, st *Store) int64 {
	t.Helper()
	var n int64
	if err := st.db.QueryRow(`SELECT (SELECT count(*) FROM readings) + (SELECT coalesce(sum(n), 0) FROM staged_readings)`).Scan(&n); err != nil {
		t.Fatal(err)
	}
	return n
}

// TestCompactKeepsEveryPromise stores three hours of two channels, compacts
// the first two, and checks that reading, counting, redelivery, late
// readings, a second compaction and retention see exactly the readings the
// row store would.
func TestCompactKeepsEveryPromise(t *testing.T) {
	ctx := context.Background()
	st := openTemp(t)
	rs := someReadings(3, 1)
	if n, err := st.InsertReadings(ctx, "bridge", rs); err != nil || n != len(rs) {
		t.Fatalf("insert: %d, %v", n, err)
	}
	before := readAll(t, st, "bridge")
	cs, err := st.Compact(ctx, dayStart.Add(2*time.Hour+30*time.Minute))
	if err != nil {
		t.Fatal(err)
	}
	if cs.Blocks != 4 || cs.Readings != 4*3600 {
		t.Errorf("compacted %+v, want 4 blocks of 3600 readings", cs)
	}
	if n := rowCount(t, st); n != 2*3600 {
		t.Errorf("%d rows left, want the third hour's 7200", n)
	}
	if err := sameReadings(before, readAll(t, st, "bridge")); err != nil {
		t.Fatalf("after compaction: %v", err)
	}
	for _, c := range []struct{ from, to time.Time }{
		{time.Time{}, time.Time{}},
		{dayStart.Add(30 * time.Minute), dayStart.Add(90 * time.Minute)},
		{dayStart.Add(59 * time.Minute), dayStart.Add(2*time.Hour + time.Second)},
	} {
		n, err := st.CountReadings(ctx, "bridge", c.from, c.to)
		if err != nil {
			t.Fatal(err)
		}
		want := 0
		for _, r := range rs {
			if (c.from.IsZero() || !r.Time.Before(c.from)) && (c.to.IsZero() || r.Time.Before(c.to)) {
				want++
			}
		}
		if n != int64(want) {
			t.Errorf("count [%v, %v): %d, want %d", c.from, c.to, n, want)
		}
	}
	// A partial read inside a block.
	var part []Reading
	if err := st.ReadReadings(ctx, "bridge", dayStart.Add(10*time.Minute), dayStart.Add(10*time.Minute+3*time.Second), func(r Reading) error {
		part = append(part, r)
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	if len(part) != 6 || !part[0].Time.Equal(dayStart.Add(10*time.Minute)) {
		t.Errorf("partial read %v", part)
	}

	// Redelivery of compacted readings: nothing new, no rows added.
	if n, err := st.InsertReadings(ctx, "bridge", rs[:5000]); err != nil || n != 0 {
		t.Errorf("redelivery after compaction stored %d (%v), want 0", n, err)
	}
	if n := rowCount(t, st); n != 2*3600 {
		t.Errorf("redelivery added rows: %d", n)
	}
	// Another value at a compacted key is a conflict, decided against the
	// block's value, and not stored.
	clash := rs[100]
	clash.Value += 1e-6
	res, err := st.Commit(ctx, Batch{Groups: []Group{{Structure: "bridge", Readings: []Reading{clash}}}})
	if err != nil {
		t.Fatal(err)
	}
	if res.Inserted[0] != 0 || len(res.Conflicts[0]) != 1 || res.Conflicts[0][0].Stored != rs[100].Value {
		t.Errorf("conflicting value at a compacted key: inserted %d, conflicts %+v; want 0 and one conflict with the stored %v", res.Inserted[0], res.Conflicts[0], rs[100].Value)
	}
	// A late reading in a compacted period joins, then merges.
	late := Reading{Channel: "a", Time: dayStart.Add(90*time.Minute + 500*time.Millisecond), Value: 7.5e-5}
	if n, err := st.InsertReadings(ctx, "bridge", []Reading{late}); err != nil || n != 1 {
		t.Fatalf("late reading stored %d (%v), want 1", n, err)
	}
	// After both channels' readings at 01:30:00 (second 5400).
	want := append(append([]Reading(nil), before[:10802]...), late)
	want = append(want, before[10802:]...)
	if err := sameReadings(want, readAll(t, st, "bridge")); err != nil {
		t.Fatalf("with the late reading: %v", err)
	}
	if cs, err = st.Compact(ctx, dayStart.Add(2*time.Hour)); err != nil || cs.Blocks != 1 || cs.Readings != 1 {
		t.Errorf("second compaction %+v %v, want the late reading merged into one block", cs, err)
	}
	if err := sameReadings(want, readAll(t, st, "bridge")); err != nil {
		t.Fatalf("after merging the late reading: %v", err)
	}
	// Retention cuts inside the first block.
	cut := dayStart.Add(20 * time.Minute)
	n, err := st.Prune(ctx, ClassReadings, cut)
	if err != nil {
		t.Fatal(err)
	}
	if n != 2*1200 {
		t.Errorf("pruned %d, want 2400", n)
	}
	var kept []Reading
	for _, r := range want {
		if !r.Time.Before(cut) {
			kept = append(kept, r)
		}
	}
	if err := sameReadings(kept, readAll(t, st, "bridge")); err != nil {
		t.Fatalf("after retention: %v", err)
	}
	// A store opened again knows its blocks: a redelivery is still caught.
	path := st.Path()
	st.Close()
	st2, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st2.Close()
	if n, err := st2.InsertReadings(ctx, "bridge", rs[3000:3100]); err != nil || n != 0 {
		t.Errorf("redelivery after reopening stored %d (%v), want 0", n, err)
	}
	// VACUUM INTO copies the blocks.
	backup := filepath.Join(t.TempDir(), "backup.db")
	if err := st2.Backup(ctx, backup); err != nil {
		t.Fatal(err)
	}
	b, err := Open(backup, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	if err := sameReadings(kept, readAll(t, b, "bridge")); err != nil {
		t.Fatalf("backup: %v", err)
	}
}

// TestMigrationToBlocks writes a file with the migrations before blocks
// only (as the previous release did), stores rows in it, then opens it with
// this build and compacts it.
func TestMigrationToBlocks(t *testing.T) {
	ctx := context.Background()
	before := -1
	for i, m := range migrations {
		if strings.Contains(m, "CREATE TABLE reading_blocks") {
			before = i
		}
	}
	if before < 0 {
		t.Fatal("no migration creates reading_blocks")
	}
	path := filepath.Join(t.TempDir(), "old.db")
	old, err := sql.Open("sqlite", "file:"+path+"?_pragma=journal_mode(WAL)")
	if err != nil {
		t.Fatal(err)
	}
	if err := migrate(ctx, old, before); err != nil {
		t.Fatal(err)
	}
	rs := someReadings(2, 2)
	if _, err := old.Exec(`INSERT INTO channels (id, structure, name) VALUES (1, 'bridge', 'a'), (2, 'bridge', 'b')`); err != nil {
		t.Fatal(err)
	}
	tx, err := old.Begin()
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range rs {
		ch := 1
		if r.Channel == "b" {
			ch = 2
		}
		if _, err := tx.Exec(`INSERT INTO readings (channel, ts, value) VALUES (?, ?, ?)`, ch, r.Time.UnixNano(), r.Value); err != nil {
			t.Fatal(err)
		}
	}
	if err := tx.Commit(); err != nil {
		t.Fatal(err)
	}
	old.Close()

	st, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if v, _ := st.SchemaVersion(ctx); v != len(migrations) {
		t.Errorf("schema version %d after opening, want %d", v, len(migrations))
	}
	stored := readAll(t, st, "bridge")
	if len(stored) != len(rs) {
		t.Fatalf("%d readings in the migrated file, want %d", len(stored), len(rs))
	}
	if _, err := st.Compact(ctx, dayStart.Add(2*time.Hour)); err != nil {
		t.Fatal(err)
	}
	if n := rowCount(t, st); n != 0 {
		t.Errorf("%d rows left after compacting everything", n)
	}
	if err := sameReadings(stored, readAll(t, st, "bridge")); err != nil {
		t.Fatal(err)
	}
}

// hourReadings returns the readings of hour h (from dayStart) of the kill
// test: channels a and b every second, values depending on the hour.
func hourReadings(h int) []Reading {
	rs := someReadings(1, uint64(100+h))
	for i := range rs {
		rs[i].Time = rs[i].Time.Add(time.Duration(h) * time.Hour)
	}
	return rs
}

// TestCompactKilled kills a process that commits hours of readings and
// compacts them (redelivering the previous hour each time), at points
// chosen by its own progress, in several rounds; then checks that every
// hour it reported committed is stored exactly once, with its values, and
// that no reading is stored twice or half an hour lost.
func TestCompactKilled(t *testing.T) {
	if path := os.Getenv("STORE_COMPACT_CHILD"); path != "" {
		round, _ := strconv.Atoi(os.Getenv("STORE_COMPACT_ROUND"))
		compactChild(path, round)
		return
	}
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "kill.db")
	const rounds, hoursPerRound = 5, 6
	rng := rand.New(rand.NewPCG(9, 9))
	reported := map[int]bool{}
	for round := 0; round < rounds; round++ {
		cmd := exec.Command(os.Args[0], "-test.run=^TestCompactKilled$")
		cmd.Env = append(os.Environ(), "STORE_COMPACT_CHILD="+path, "STORE_COMPACT_ROUND="+strconv.Itoa(round))
		out, err := cmd.StdoutPipe()
		if err != nil {
			t.Fatal(err)
		}
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		killAfter := 1 + rng.IntN(3*hoursPerRound)
		sc := bufio.NewScanner(out)
		lines := 0
		for sc.Scan() {
			f := strings.Fields(sc.Text())
			if len(f) == 2 && f[0] == "committed" {
				h, _ := strconv.Atoi(f[1])
				reported[h] = true
			}
			if len(f) > 0 && f[0] == "error" {
				t.Fatalf("child: %s", sc.Text())
			}
			lines++
			if lines == killAfter {
				cmd.Process.Kill()
				break
			}
		}
		cmd.Wait()
		t.Logf("round %d: killed after %d progress lines", round, lines)
	}
	st, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	check := func(when string) {
		got := readAll(t, st, "bridge")
		byHour := map[int][]Reading{}
		for _, r := range got {
			h := int(r.Time.Sub(dayStart) / time.Hour)
			byHour[h] = append(byHour[h], r)
		}
		for h := range reported {
			if len(byHour[h]) == 0 {
				t.Errorf("%s: hour %d was reported committed and is missing", when, h)
			}
		}
		for h, rs := range byHour {
			if err := sameReadings(hourReadings(h), rs); err != nil {
				t.Errorf("%s: hour %d: %v", when, h, err)
			}
		}
	}
	check("after the kills")
	if _, err := st.Compact(ctx, dayStart.Add(rounds*hoursPerRound*time.Hour)); err != nil {
		t.Fatal(err)
	}
	check("after the final compaction")
	if n := rowCount(t, st); n != 0 {
		t.Errorf("%d rows left after compacting everything", n)
	}
}

// compactChild commits the hours of one round one transaction each,
// redelivering the hour before, and compacts after each; it prints a line
// per committed hour and per block written.
func compactChild(path string, round int) {
	ctx := context.Background()
	fail := func(err error) {
		fmt.Println("error", err)
		os.Exit(1)
	}
	st, err := Open(path, Options{})
	if err != nil {
		fail(err)
	}
	for h := round * 6; h < round*6+6; h++ {
		batch := hourReadings(h)
		if h > 0 {
			batch = append(hourReadings(h-1), batch...)
		}
		if _, err := st.InsertReadings(ctx, "bridge", batch); err != nil {
			fail(err)
		}
		fmt.Println("committed", h)
		cs, err := st.Compact(ctx, dayStart.Add(time.Duration(h)*time.Hour))
		if err != nil {
			fail(err)
		}
		for i := 0; i < cs.Blocks; i++ {
			fmt.Println("block")
		}
	}
	st.Close()
	os.Exit(0)
}

// TestReadChannelReadings: reading some channels gives, in the same order,
// exactly the readings of those channels that reading every channel gives,
// from rows and from blocks (three channels, the first two hours
// compacted), over the whole store and over a period across the compacted
// boundary; an unknown name and an empty list read nothing.
func TestReadChannelReadings(t *testing.T) {
	ctx := context.Background()
	st := openTemp(t)
	rs := someReadings(3, 2)
	for i := range rs {
		if i%4 == 0 {
			r := rs[i]
			r.Channel = "c"
			rs = append(rs, r)
		}
	}
	if n, err := st.InsertReadings(ctx, "bridge", rs); err != nil || n != len(rs) {
		t.Fatalf("insert: %d, %v", n, err)
	}
	if _, err := st.Compact(ctx, dayStart.Add(2*time.Hour+30*time.Minute)); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		channels []string
		from, to time.Time
	}{
		{[]string{"b"}, time.Time{}, time.Time{}},
		{[]string{"c", "a"}, time.Time{}, time.Time{}},
		{[]string{"a", "b", "c"}, dayStart.Add(119 * time.Minute), dayStart.Add(121 * time.Minute)},
		{[]string{"c", "nonesuch"}, dayStart.Add(time.Hour), dayStart.Add(150 * time.Minute)},
		{[]string{"nonesuch"}, time.Time{}, time.Time{}},
		{nil, time.Time{}, time.Time{}},
	} {
		keep := map[string]bool{}
		for _, ch := range c.channels {
			keep[ch] = true
		}
		var want, got []Reading
		if err := st.ReadReadings(ctx, "bridge", c.from, c.to, func(r Reading) error {
			if keep[r.Channel] {
				want = append(want, r)
			}
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		if err := st.ReadChannelReadings(ctx, "bridge", c.channels, c.from, c.to, func(r Reading) error {
			got = append(got, r)
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		if err := sameReadings(want, got); err != nil {
			t.Errorf("channels %v [%v, %v): %v", c.channels, c.from, c.to, err)
		}
		if len(c.channels) > 0 && c.channels[0] != "nonesuch" && len(got) == 0 {
			t.Errorf("channels %v: nothing read", c.channels)
		}
	}
}
