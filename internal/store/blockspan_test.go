package store

import (
	"context"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
	"time"
)

// TestChooseSpan checks the block period chosen for sample intervals from
// 200 Hz to one an hour: the longest of blockSpans holding at most
// BlockTarget (4096) readings.
func TestChooseSpan(t *testing.T) {
	for _, c := range []struct {
		interval time.Duration
		want     time.Duration
	}{
		{0, time.Hour}, // fewer than two readings seen
		{5 * time.Millisecond, time.Hour},
		{time.Second, time.Hour},             // 3,600 readings
		{2 * time.Second, 2 * time.Hour},     // 3,600
		{10 * time.Second, 8 * time.Hour},    // 2,880
		{time.Minute, 48 * time.Hour},        // 2,880
		{5 * time.Minute, 168 * time.Hour},   // 2,016
		{time.Hour, 168 * time.Hour},         // 168: the longest period
		{1200 * time.Millisecond, time.Hour}, // 3,000; 2 h would hold 6,000
	} {
		got := chooseSpan(c.interval)
		if got != c.want {
			t.Errorf("chooseSpan(%v) = %v, want %v", c.interval, got, c.want)
		}
		if c.interval > 0 && got > blockSpans[0] && got/c.interval > BlockTarget {
			t.Errorf("chooseSpan(%v) = %v holds %d readings, more than %d", c.interval, got, got/c.interval, BlockTarget)
		}
	}
}

// TestBlockPlanPeriods checks the periods of a plan with one-hour blocks
// before block_from (a migrated file) and two-day periods after.
func TestBlockPlanPeriods(t *testing.T) {
	h := int64(time.Hour)
	day2 := 48 * h
	base := floorTo(dayStart.UnixNano(), day2) // a two-day boundary
	p := blockPlan{span: day2, from: base + 5*h}
	for _, c := range []struct {
		ts, start, end int64
	}{
		{base + 4*h + 1, base + 4*h, base + 5*h},                           // an hour before from
		{base + 5*h, base + 5*h, base + day2},                              // the cut first long period
		{base + day2 - 1, base + 5*h, base + day2},                         // its last nanosecond
		{base + day2, base + day2, base + 2*day2},                          // a whole long period
		{base - 1, base - h, base},                                         // hours before
		{math.MaxInt64 - 1, floorTo(math.MaxInt64-1, day2), math.MaxInt64}, // saturates
	} {
		s, e := p.period(c.ts)
		if s != c.start || e != c.end {
			t.Errorf("period(%d) = [%d, %d), want [%d, %d)", c.ts, s, e, c.start, c.end)
		}
		if c.ts < s || c.ts >= e && e != math.MaxInt64 {
			t.Errorf("period(%d) = [%d, %d) does not hold it", c.ts, s, e)
		}
		if es := p.earliestStart(c.ts); es >= s && s != math.MinInt64 {
			t.Errorf("earliestStart(%d) = %d, not below the start %d", c.ts, es, s)
		}
	}
}

// TestSlowChannelKeepsEveryPromise streams three channels at one reading
// a minute (after a few late readings) over five days through the store and through stageModel, in
// batches with redeliveries, conflicts, late readings and duplicates
// (stageBatch), compacting after every batch with the service's horizon
// (CompactAfter). It checks that the channels get two-day blocks, that
// every closed hour is compacted at once (no reading older than the
// horizon's hour stays in rows), that commits and reads match the model
// throughout, that counts and partial reads cut long blocks right, and
// that retention inside a long block, a reopened store and a backup keep
// them.
func TestSlowChannelKeepsEveryPromise(t *testing.T) {
	ctx := context.Background()
	st := openTemp(t)
	rng := rand.New(rand.NewPCG(14, 8))
	chans := []string{"g1", "g2", "g3"}
	model := stageModel{}
	step := int64(time.Minute)
	t0 := dayStart.UnixNano()
	end := dayStart.Add(5 * 24 * time.Hour).UnixNano()
	var horizon time.Time
	for t0 < end {
		packs := 1 + rng.IntN(90)
		b := stageBatch(rng, chans, t0, step, packs)
		want := model.commit(b)
		got, err := st.Commit(ctx, b)
		if err != nil {
			t.Fatal(err)
		}
		sameResult(t, "batch", got, want)
		t0 += int64(packs) * step
		horizon = time.Unix(0, t0).Add(-CompactAfter)
		if _, err := st.Compact(ctx, horizon); err != nil {
			t.Fatal(err)
		}
		var left int64
		h := floorTo(horizon.UnixNano(), spanNs)
		if err := st.db.QueryRow(`SELECT (SELECT count(*) FROM readings WHERE ts < ?1) + (SELECT count(*) FROM staged_readings WHERE first < ?1)`, h).Scan(&left); err != nil {
			t.Fatal(err)
		}
		if left != 0 {
			t.Fatalf("%d rows older than the compaction horizon %v", left, time.Unix(0, h).UTC())
		}
		if rng.IntN(8) == 0 {
			if err := sameReadings(model.readings(math.MinInt64, math.MaxInt64), readAll(t, st, "bridge")); err != nil {
				t.Fatalf("at %v: %v", time.Unix(0, t0).UTC(), err)
			}
		}
	}
	if err := sameReadings(model.readings(math.MinInt64, math.MaxInt64), readAll(t, st, "bridge")); err != nil {
		t.Fatal(err)
	}
	rows, err := st.db.Query(`SELECT c.block_span, b.start, b.first, b.last, b.n FROM reading_blocks b JOIN channels c ON c.id = b.channel`)
	if err != nil {
		t.Fatal(err)
	}
	nb := 0
	for rows.Next() {
		var span, start, first, last, n int64
		if err := rows.Scan(&span, &start, &first, &last, &n); err != nil {
			t.Fatal(err)
		}
		nb++
		if span != int64(48*time.Hour) || start%span != 0 || first < start || last >= start+span {
			t.Errorf("block [%v, +%v) holds %v to %v", time.Unix(0, start).UTC(), time.Duration(span), time.Unix(0, first).UTC(), time.Unix(0, last).UTC())
		}
	}
	rows.Close()
	// Five days from dayStart touch three or four two-day periods.
	if nb < 3*len(chans) || nb > 4*len(chans) {
		t.Errorf("%d blocks, want 3 or 4 per channel", nb)
	}

	// Counts and partial reads over ranges that cut long blocks.
	for _, c := range [][2]time.Duration{{0, 5 * 24 * time.Hour}, {13 * time.Hour, 13*time.Hour + 90*time.Second}, {47 * time.Hour, 50 * time.Hour}, {-time.Hour, 30 * time.Hour}} {
		lo, hi := dayStart.Add(c[0]), dayStart.Add(c[1])
		want := model.readings(lo.UnixNano(), hi.UnixNano())
		n, err := st.CountReadings(ctx, "bridge", lo, hi)
		if err != nil || n != int64(len(want)) {
			t.Errorf("count [%v, %v): %d (%v), want %d", c[0], c[1], n, err, len(want))
		}
		var got []Reading
		if err := st.ReadReadings(ctx, "bridge", lo, hi, func(r Reading) error {
			got = append(got, r)
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		if err := sameReadings(want, got); err != nil {
			t.Errorf("read [%v, %v): %v", c[0], c[1], err)
		}
	}

	// Retention cuts inside a long block.
	cut := dayStart.Add(30*time.Hour + 30*time.Second).UnixNano()
	n, err := st.Prune(ctx, ClassReadings, time.Unix(0, cut))
	if err != nil {
		t.Fatal(err)
	}
	var pruned int64
	for k := range model {
		if k.ts < cut {
			delete(model, k)
			pruned++
		}
	}
	if n != pruned {
		t.Errorf("pruned %d, want %d", n, pruned)
	}
	all := model.readings(math.MinInt64, math.MaxInt64)
	if err := sameReadings(all, readAll(t, st, "bridge")); err != nil {
		t.Fatalf("after retention: %v", err)
	}
	lastRs, err := st.LastReadings(ctx, "bridge", time.Time{})
	if err != nil {
		t.Fatal(err)
	}
	for _, ch := range chans {
		var want int64
		for k := range model {
			if k.ch == ch && k.ts > want {
				want = k.ts
			}
		}
		if lastRs[ch].UnixNano() != want {
			t.Errorf("last reading of %s: %v, want %v", ch, lastRs[ch], time.Unix(0, want).UTC())
		}
	}
	// Reopened: a redelivery and a conflict inside a long block's period,
	// and a late reading merging into it.
	path := st.Path()
	st.Close()
	st2, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st2.Close()
	old := all[len(all)/3]
	late := Reading{Channel: old.Channel, Time: old.Time.Add(17 * time.Second), Value: 0.5}
	b := Batch{Groups: []Group{{Structure: "bridge", Readings: []Reading{old, {old.Channel, old.Time, old.Value + 1}, late}}}}
	want := model.commit(b)
	got, err := st2.Commit(ctx, b)
	if err != nil {
		t.Fatal(err)
	}
	sameResult(t, "after reopening", got, want)
	if want.Inserted[0] != 1 || len(want.Conflicts[0]) != 1 {
		t.Fatalf("the model sees %+v; the test needs one new reading and one conflict", want)
	}
	if cs, err := st2.Compact(ctx, horizon); err != nil || cs.Readings != 1 {
		t.Fatalf("compacting the late reading: %+v, %v", cs, err)
	}
	all = model.readings(math.MinInt64, math.MaxInt64)
	if err := sameReadings(all, readAll(t, st2, "bridge")); err != nil {
		t.Fatalf("after the late reading: %v", err)
	}
	backup := filepath.Join(t.TempDir(), "backup.db")
	if err := st2.Backup(ctx, backup); err != nil {
		t.Fatal(err)
	}
	bk, err := Open(backup, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer bk.Close()
	if err := sameReadings(all, readAll(t, bk, "bridge")); err != nil {
		t.Fatalf("backup: %v", err)
	}
}

// TestMigrationToBlockSpans opens a file written at schema version 7
// (testdata/v7.db, written by testdata/v7gen_test.go.txt: channels s1 and
// s2 once a minute for three hours, the first two in one-hour blocks, the
// third in staged runs) and checks that its readings read back, that its
// one-hour blocks stay and still decide redeliveries, conflicts and late
// readings, and that the readings after them go into the two-day blocks
// chosen for one reading a minute, starting where the old blocks end.
func TestMigrationToBlockSpans(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "v7.db")
	src, err := os.Open("testdata/v7.db")
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
		t.Fatalf("opening the version 7 file: %v", err)
	}
	defer st.Close()
	if v, _ := st.SchemaVersion(ctx); v != 8 {
		t.Fatalf("schema version %d after opening, want 8", v)
	}
	old := v7Readings()
	model := stageModel{}
	model.commit(Batch{Groups: []Group{{Structure: "footbridge", Readings: old}}})
	if err := sameReadings(model.readings(math.MinInt64, math.MaxInt64), readAll(t, st, "footbridge")); err != nil {
		t.Fatalf("readings of the version 7 file: %v", err)
	}
	// A redelivery and a conflict with the old blocks, a late reading in an
	// old block's hour, and the next hours once a minute.
	rs := []Reading{old[10], {"s1", old[20].Time, old[20].Value + 1}, {"s2", v7Start.Add(30*time.Minute + 30*time.Second), 0.25}}
	for m := 180; m < 300; m++ {
		rs = append(rs, Reading{"s1", v7Start.Add(time.Duration(m) * time.Minute), float64(m)})
	}
	b := Batch{Groups: []Group{{Structure: "footbridge", Readings: rs}}}
	want := model.commit(b)
	got, err := st.Commit(ctx, b)
	if err != nil {
		t.Fatal(err)
	}
	sameResult(t, "commit on the migrated file", got, want)
	if len(got.Conflicts[0]) != 1 || got.Conflicts[0][0].Stored != old[20].Value {
		t.Errorf("conflict with the old block: %v", got.Conflicts[0])
	}
	if _, err := st.Compact(ctx, v7Start.Add(5*time.Hour)); err != nil {
		t.Fatal(err)
	}
	if n := rowCount(t, st); n != 0 {
		t.Errorf("%d readings outside blocks after compacting everything", n)
	}
	if err := sameReadings(model.readings(math.MinInt64, math.MaxInt64), readAll(t, st, "footbridge")); err != nil {
		t.Fatalf("after compaction: %v", err)
	}
	type blk struct {
		name       string
		start, n   int64
		span, from int64
	}
	rows, err := st.db.Query(`SELECT c.name, b.start, b.n, c.block_span, c.block_from FROM reading_blocks b JOIN channels c ON c.id = b.channel ORDER BY c.name, b.start`)
	if err != nil {
		t.Fatal(err)
	}
	var bs []blk
	for rows.Next() {
		var x blk
		if err := rows.Scan(&x.name, &x.start, &x.n, &x.span, &x.from); err != nil {
			t.Fatal(err)
		}
		bs = append(bs, x)
	}
	rows.Close()
	h := int64(time.Hour)
	s0 := v7Start.UnixNano()
	wantBlocks := []blk{
		{"s1", s0, 60, 48 * h, s0 + 2*h},
		{"s1", s0 + h, 60, 48 * h, s0 + 2*h},
		{"s1", s0 + 2*h, 180, 48 * h, s0 + 2*h}, // the staged hour and two more
		{"s2", s0, 61, 48 * h, s0 + 2*h},        // with the late reading
		{"s2", s0 + h, 60, 48 * h, s0 + 2*h},
		{"s2", s0 + 2*h, 60, 48 * h, s0 + 2*h},
	}
	if len(bs) != len(wantBlocks) {
		t.Fatalf("blocks %+v, want %+v", bs, wantBlocks)
	}
	for i := range bs {
		if bs[i] != wantBlocks[i] {
			t.Errorf("block %d: %+v, want %+v", i, bs[i], wantBlocks[i])
		}
	}
}

// v7Readings and v7Start are the generator of testdata/v7.db, the same as
// in testdata/v7gen_test.go.txt.
func v7Readings() []Reading {
	var rs []Reading
	for s := 0; s < 180; s++ {
		t := v7Start.Add(time.Duration(s) * time.Minute)
		for k, ch := range []string{"s1", "s2"} {
			v := math.Round(1e7*(1e-4*math.Sin(float64(s)/20+float64(k)))) / 1e7
			rs = append(rs, Reading{Channel: ch, Time: t, Value: v})
		}
	}
	return rs
}

var v7Start = time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)

// TestMedianInterval checks the interval estimate on a regular series with
// late readings, a gap and duplicates mixed in.
func TestMedianInterval(t *testing.T) {
	m := int64(time.Minute)
	var ts []int64
	for i := range int64(40) {
		ts = append(ts, 1000*m+i*m)
	}
	ts = append(ts, 3*m, 17*m, 500*m, 1020*m, 1020*m) // late readings and a duplicate
	for i := range int64(10) {
		ts = append(ts, 5000*m+i*m) // after a gap
	}
	if got := medianInterval(ts, intervalSample); got != time.Minute {
		t.Errorf("median interval %v, want 1m", got)
	}
	if got := medianInterval([]int64{5, 5}, intervalSample); got != 0 {
		t.Errorf("one distinct time: %v, want 0", got)
	}
}

// TestOpenRefusesBlockSpan checks that Options.BlockSpan must be a whole
// number of hours.
func TestOpenRefusesBlockSpan(t *testing.T) {
	for _, c := range []struct {
		span time.Duration
		ok   bool
	}{{0, true}, {time.Hour, true}, {48 * time.Hour, true}, {30 * time.Minute, false}, {90 * time.Minute, false}, {-time.Hour, false}} {
		st, err := Open(filepath.Join(t.TempDir(), "s.db"), Options{BlockSpan: c.span})
		if (err == nil) != c.ok {
			t.Errorf("block period %v: error %v, want ok %v", c.span, err, c.ok)
		}
		if err == nil {
			st.Close()
		}
	}
}
