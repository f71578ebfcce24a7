package store

import (
	"cmp"
	"context"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"testing"
	"time"

	"trussmonitor/internal/blocks"
)

func TestRunRoundTrip(t *testing.T) {
	for _, c := range []struct {
		name string
		pts  []blocks.Point
	}{
		{"empty", nil},
		{"one", []blocks.Point{{Time: -5, Value: math.Copysign(0, -1)}}},
		{"extremes", []blocks.Point{{Time: math.MinInt64, Value: math.MaxFloat64}, {Time: math.MaxInt64, Value: math.SmallestNonzeroFloat64}}},
		{"ten ms", func() []blocks.Point {
			var p []blocks.Point
			for i := range 200 {
				p = append(p, blocks.Point{Time: 1_780_000_000_000_000_000 + int64(i)*10_000_000, Value: 1e-4 * float64(i%7)})
			}
			return p
		}()},
	} {
		t.Run(c.name, func(t *testing.T) {
			got, err := decodeRun(nil, encodeRun(c.pts))
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != len(c.pts) {
				t.Fatalf("%d points, want %d", len(got), len(c.pts))
			}
			for i := range got {
				if got[i].Time != c.pts[i].Time || math.Float64bits(got[i].Value) != math.Float64bits(c.pts[i].Value) {
					t.Fatalf("point %d: %v, want %v", i, got[i], c.pts[i])
				}
			}
		})
	}
}

// FuzzDecodeRun: decodeRun never panics, returns strictly increasing times
// when it succeeds, and what it decodes encodes to the same bytes.
func FuzzDecodeRun(f *testing.F) {
	f.Add(encodeRun([]blocks.Point{{Time: 1, Value: 2}, {Time: 3, Value: 4}}))
	f.Add([]byte{})
	f.Add([]byte{0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff, 0x01})
	f.Add(encodeRun([]blocks.Point{{Time: math.MaxInt64 - 1, Value: 1}}))
	f.Fuzz(func(t *testing.T, b []byte) {
		pts, err := decodeRun(nil, b)
		if err != nil {
			return
		}
		for i := 1; i < len(pts); i++ {
			if pts[i].Time <= pts[i-1].Time {
				t.Fatalf("times not increasing at %d", i)
			}
		}
		back, err := decodeRun(nil, encodeRun(pts))
		if err != nil || len(back) != len(pts) {
			t.Fatalf("re-encoding: %d points, %v", len(back), err)
		}
	})
}

// stageModel is the row store's contract written as plainly as possible:
// a map from (channel, time) to the first value committed under it.
type stageModel map[rowKeyName]float64

type rowKeyName struct {
	ch string
	ts int64
}

// commit applies a batch to the model and returns the result the store
// must give.
func (m stageModel) commit(b Batch) CommitResult {
	res := CommitResult{Inserted: make([]int, len(b.Groups)), New: make([][]bool, len(b.Groups)), Conflicts: make([][]Conflict, len(b.Groups))}
	for g, grp := range b.Groups {
		res.New[g] = make([]bool, len(grp.Readings))
		for i, r := range grp.Readings {
			k := rowKeyName{r.Channel, r.Time.UnixNano()}
			if v, ok := m[k]; ok {
				if v != r.Value {
					res.Conflicts[g] = append(res.Conflicts[g], Conflict{Index: i, Stored: v})
				}
				continue
			}
			m[k] = r.Value
			res.New[g][i] = true
			res.Inserted[g]++
		}
	}
	return res
}

// readings returns the model's readings in [lo, hi) in the store's read
// order (time, then channel name).
func (m stageModel) readings(lo, hi int64) []Reading {
	var out []Reading
	for k, v := range m {
		if k.ts >= lo && k.ts < hi {
			out = append(out, Reading{Channel: k.ch, Time: time.Unix(0, k.ts).UTC(), Value: v})
		}
	}
	slices.SortFunc(out, func(a, b Reading) int {
		return cmp.Or(a.Time.Compare(b.Time), cmp.Compare(a.Channel, b.Channel))
	})
	return out
}

func sameResult(t *testing.T, step string, got, want CommitResult) {
	t.Helper()
	if !slices.Equal(got.Inserted, want.Inserted) {
		t.Fatalf("%s: inserted %v, want %v", step, got.Inserted, want.Inserted)
	}
	for g := range want.New {
		if !slices.Equal(got.New[g], want.New[g]) {
			t.Fatalf("%s: group %d new %v, want %v", step, g, got.New[g], want.New[g])
		}
		if !slices.Equal(got.Conflicts[g], want.Conflicts[g]) {
			t.Fatalf("%s: group %d conflicts %v, want %v", step, g, got.Conflicts[g], want.Conflicts[g])
		}
	}
}

// stageBatch builds a random batch in the shapes ingest sees: packs of
// every channel at one time (runs long enough to be staged), single
// readings (keyed rows), redeliveries of earlier times with the same or a
// changed value, late readings between earlier times, and duplicates inside
// the batch.
func stageBatch(rng *rand.Rand, chans []string, t0 int64, step int64, packs int) Batch {
	var b Batch
	for p := range packs {
		ts := t0 + int64(p)*step
		var rs []Reading
		switch rng.IntN(10) {
		case 0: // a late reading between earlier times, every channel
			ts -= step*int64(rng.IntN(4*packs)) + step/2
		case 1: // a redelivery of an earlier time
			ts -= step * int64(1+rng.IntN(4*packs))
		}
		for c, ch := range chans {
			v := math.Round(1e6*math.Sin(float64(ts/step)/30+float64(c))) / 1e6
			if rng.IntN(50) == 0 {
				v += 1e-6 // a conflict when the key is taken
			}
			rs = append(rs, Reading{Channel: ch, Time: time.Unix(0, ts).UTC(), Value: v})
		}
		if rng.IntN(20) == 0 {
			rs = append(rs, rs[rng.IntN(len(rs))]) // the same reading twice in one message
		}
		b.Groups = append(b.Groups, Group{Structure: "bridge", Readings: rs})
	}
	return b
}

// TestStagedRunsMatchRowStore commits random batches through the store and
// through stageModel and checks, after every batch and around compactions,
// retention and a backup, that the store gives the model's commit results
// and readings: redeliveries stored once, conflicts decided against the
// value kept wherever it is (batch, keyed row, staged run, block), and
// every read seeing staged runs.
func TestStagedRunsMatchRowStore(t *testing.T) {
	ctx := context.Background()
	st := openTemp(t)
	rng := rand.New(rand.NewPCG(14, 3))
	chans := []string{"g1", "g2", "g3"}
	model := stageModel{}
	start := dayStart.UnixNano()
	const step = int64(2 * time.Second) // runs cross StageSpan and BlockSpan boundaries
	t0 := start
	compacted := start // the end of the compacted hours
	check := func(step string) {
		t.Helper()
		if err := sameReadings(model.readings(math.MinInt64, math.MaxInt64), readAll(t, st, "bridge")); err != nil {
			t.Fatalf("%s: %v", step, err)
		}
	}
	for batch := range 120 {
		packs := 1 + rng.IntN(60) // 1 to 60 readings per channel: keyed rows and staged runs
		b := stageBatch(rng, chans, t0, step, packs)
		want := model.commit(b)
		got, err := st.Commit(ctx, b)
		if err != nil {
			t.Fatal(err)
		}
		sameResult(t, "batch", got, want)
		t0 += int64(packs) * step
		if batch%10 == 9 {
			// Every closed hour into blocks: later late readings and
			// redeliveries reach back into them.
			check("before compaction")
			if _, err := st.Compact(ctx, time.Unix(0, t0)); err != nil {
				t.Fatal(err)
			}
			compacted = floorTo(t0, spanNs)
			check("after compaction")
		}
	}
	var staged, keyed int
	if err := st.db.QueryRow(`SELECT (SELECT count(*) FROM staged_readings), (SELECT count(*) FROM readings)`).Scan(&staged, &keyed); err != nil {
		t.Fatal(err)
	}
	if staged == 0 || keyed == 0 {
		t.Fatalf("%d staged rows and %d keyed rows; the test must exercise both", staged, keyed)
	}
	var wide int
	if err := st.db.QueryRow(`SELECT count(*) FROM staged_readings WHERE last - first >= ?`, stageNs).Scan(&wide); err != nil || wide != 0 {
		t.Fatalf("%d staged rows wider than StageSpan (%v)", wide, err)
	}
	check("end")

	// Counts, partial reads and last readings over ranges that cut staged
	// runs.
	for range 40 {
		lo := start + rng.Int64N(t0-start)
		hi := lo + rng.Int64N(int64(30*time.Minute))
		want := model.readings(lo, hi)
		n, err := st.CountReadings(ctx, "bridge", time.Unix(0, lo), time.Unix(0, hi))
		if err != nil || n != int64(len(want)) {
			t.Fatalf("count [%d, %d): %d (%v), want %d", lo, hi, n, err, len(want))
		}
		var part []Reading
		if err := st.ReadReadings(ctx, "bridge", time.Unix(0, lo), time.Unix(0, hi), func(r Reading) error {
			part = append(part, r)
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		if err := sameReadings(want, part); err != nil {
			t.Fatalf("read [%d, %d): %v", lo, hi, err)
		}
		// LastReadings passes over a block that ends after its bound (the
		// bound is the receiver's clock plus the lateness ingest allows,
		// past every closed hour), so the bound is drawn after the
		// compacted hours, where the staged runs are.
		hi = compacted + rng.Int64N(t0-compacted+int64(time.Minute))
		last, err := st.LastReadings(ctx, "bridge", time.Unix(0, hi))
		if err != nil {
			t.Fatal(err)
		}
		for _, ch := range chans {
			var w int64 = math.MinInt64
			for k := range model {
				if k.ch == ch && k.ts <= hi && k.ts > w {
					w = k.ts
				}
			}
			if got, ok := last[ch]; ok != (w != math.MinInt64) || ok && got.UnixNano() != w {
				t.Fatalf("last reading of %s at or before %d: %v (%v), want %d", ch, hi, got, ok, w)
			}
		}
	}

	// A backup copies the staged runs.
	backup := filepath.Join(t.TempDir(), "backup.db")
	if err := st.Backup(ctx, backup); err != nil {
		t.Fatal(err)
	}
	b, err := Open(backup, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if err := sameReadings(model.readings(math.MinInt64, math.MaxInt64), readAll(t, b, "bridge")); err != nil {
		t.Fatalf("backup: %v", err)
	}
	b.Close()

	// Retention cuts through staged runs.
	cut := t0 - int64(37*time.Minute) - step/3
	n, err := st.Prune(ctx, ClassReadings, time.Unix(0, cut))
	if err != nil {
		t.Fatal(err)
	}
	removed := 0
	for k := range model {
		if k.ts < cut {
			delete(model, k)
			removed++
		}
	}
	if n != int64(removed) {
		t.Errorf("pruned %d, want %d", n, removed)
	}
	check("after retention")
	// Everything into blocks.
	if _, err := st.Compact(ctx, time.Unix(0, t0+int64(2*BlockSpan))); err != nil {
		t.Fatal(err)
	}
	if n := rowCount(t, st); n != 0 {
		t.Errorf("%d readings outside blocks after compacting everything", n)
	}
	check("after the last compaction")
	// A redelivery of everything is stored once, against the blocks.
	all := model.readings(math.MinInt64, math.MaxInt64)
	res, err := st.Commit(ctx, Batch{Groups: []Group{{Structure: "bridge", Readings: all}}})
	if err != nil || res.Inserted[0] != 0 || len(res.Conflicts[0]) != 0 {
		t.Fatalf("redelivery of everything: %d new, %d conflicts, %v", res.Inserted[0], len(res.Conflicts[0]), err)
	}
}

// TestStagedRunShape: a pack stream of one commit becomes one staged row per
// channel and StageSpan period; a short run becomes keyed rows.
func TestStagedRunShape(t *testing.T) {
	ctx := context.Background()
	st := openTemp(t)
	var b Batch
	// 100 packs of 2 channels at 1 s from 30 s before a minute boundary:
	// two StageSpan periods and a bit of a third.
	for p := range 100 {
		ts := dayStart.Add(-30*time.Second + time.Duration(p)*time.Second)
		b.Groups = append(b.Groups, Group{Structure: "bridge", Readings: []Reading{{"a", ts, float64(p)}, {"b", ts, -float64(p)}}})
	}
	b.Groups = append(b.Groups, Group{Structure: "bridge", Readings: []Reading{{"c", dayStart, 1}}})
	if _, err := st.Commit(ctx, b); err != nil {
		t.Fatal(err)
	}
	var staged, keyed, n int
	if err := st.db.QueryRow(`SELECT (SELECT count(*) FROM staged_readings), (SELECT sum(n) FROM staged_readings), (SELECT count(*) FROM readings)`).Scan(&staged, &n, &keyed); err != nil {
		t.Fatal(err)
	}
	if staged != 6 || n != 200 || keyed != 1 {
		t.Errorf("%d staged rows holding %d readings and %d keyed rows; want 6 rows (2 channels x 3 periods) of 200 and 1 keyed row", staged, n, keyed)
	}
}

// TestMigrationToStagedRuns opens a file written by the store at schema
// version 6 (testdata/v6.db, written at commit dbeaa11 by
// testdata/v6gen_test.go.txt: two channels every 10 s for two hours, the
// first hour compacted into blocks, the second in keyed rows, one dead
// letter), checks that every reading reads back, that redeliveries and
// conflicts are decided against the old rows and blocks, and that the old
// rows and new staged runs compact together.
func TestMigrationToStagedRuns(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "v6.db")
	src, err := os.Open("testdata/v6.db")
	if err != nil {
		t.Fatal(err)
	}
	dst, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := io.Copy(dst, src); err != nil {
		t.Fatal(err)
	}
	src.Close()
	dst.Close()
	st, err := Open(path, Options{})
	if err != nil {
		t.Fatalf("opening the version 6 file: %v", err)
	}
	defer st.Close()
	if v, _ := st.SchemaVersion(ctx); v != len(migrations) {
		t.Fatalf("schema version %d after opening, want %d", v, len(migrations))
	}
	old := v6Readings()
	model := stageModel{}
	model.commit(Batch{Groups: []Group{{Structure: "footbridge", Readings: old}}})
	if err := sameReadings(model.readings(math.MinInt64, math.MaxInt64), readAll(t, st, "footbridge")); err != nil {
		t.Fatalf("readings of the version 6 file: %v", err)
	}
	if ds, err := st.ListDeadLetters(ctx, DeadLetterFilter{}); err != nil || len(ds) != 1 {
		t.Fatalf("dead letters of the version 6 file: %d, %v", len(ds), err)
	}
	// Packs of both channels over the last 20 minutes of the old file and
	// 20 minutes beyond, every 5 s: the old times are redeliveries (one
	// with another value, a conflict with a keyed row, and one with a
	// block's reading), the others new and staged.
	var b Batch
	for s := 0; s < 480; s++ {
		ts := v6Start.Add(100*time.Minute + time.Duration(s)*5*time.Second)
		var rs []Reading
		for _, ch := range []string{"g1", "g2"} {
			v := float64(s)
			if w, ok := model[rowKeyName{ch, ts.UnixNano()}]; ok {
				v = w
			}
			rs = append(rs, Reading{Channel: ch, Time: ts, Value: v})
		}
		b.Groups = append(b.Groups, Group{Structure: "footbridge", Readings: rs})
	}
	b.Groups[2].Readings[0].Value += 1
	b.Groups = append(b.Groups, Group{Structure: "footbridge", Readings: []Reading{{"g2", old[1].Time, old[1].Value + 1}, old[3]}})
	want := model.commit(b)
	got, err := st.Commit(ctx, b)
	if err != nil {
		t.Fatal(err)
	}
	sameResult(t, "commit on the migrated file", got, want)
	if c := got.Conflicts[2]; len(c) != 1 || c[0].Stored != model[rowKeyName{"g1", b.Groups[2].Readings[0].Time.UnixNano()}] {
		t.Errorf("conflict with the keyed row: %v", c)
	}
	if c := got.Conflicts[len(b.Groups)-1]; len(c) != 1 || c[0].Stored != old[1].Value {
		t.Errorf("conflict with the block: %v", c)
	}
	var staged int
	if err := st.db.QueryRow(`SELECT count(*) FROM staged_readings`).Scan(&staged); err != nil || staged == 0 {
		t.Fatalf("%d staged rows after a pack stream (%v)", staged, err)
	}
	if err := sameReadings(model.readings(math.MinInt64, math.MaxInt64), readAll(t, st, "footbridge")); err != nil {
		t.Fatal(err)
	}
	if _, err := st.Compact(ctx, v6Start.Add(3*time.Hour)); err != nil {
		t.Fatal(err)
	}
	if n := rowCount(t, st); n != 0 {
		t.Errorf("%d readings outside blocks after compacting everything", n)
	}
	if err := sameReadings(model.readings(math.MinInt64, math.MaxInt64), readAll(t, st, "footbridge")); err != nil {
		t.Fatalf("after compaction: %v", err)
	}
}

// v6Readings and v6Start are the generator of testdata/v6.db, the same as
// in testdata/v6gen_test.go.txt.
func v6Readings() []Reading {
	var rs []Reading
	for s := 0; s < 720; s++ {
		t := v6Start.Add(time.Duration(s) * 10 * time.Second)
		for k, ch := range []string{"g1", "g2"} {
			v := math.Round(1e7*(1e-4*math.Sin(float64(s)/50+float64(k)))) / 1e7
			rs = append(rs, Reading{Channel: ch, Time: t, Value: v})
		}
	}
	return rs
}

var v6Start = time.Date(2026, 5, 4, 0, 0, 0, 0, time.UTC)
