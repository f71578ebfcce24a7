package store

import (
	"bufio"
	"context"
	"encoding/hex"
	"os"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/blocks"
)

// goldenV1 returns the block of series name from internal/blocks' golden
// file of format version 1 (blocks as the previous release wrote them).
func goldenV1(t *testing.T, name string) []byte {
	t.Helper()
	f, err := os.Open("../blocks/testdata/v1.golden")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(nil, 1<<20)
	for sc.Scan() {
		if n, hx, ok := strings.Cut(sc.Text(), " "); ok && n == name {
			b, err := hex.DecodeString(hx)
			if err != nil {
				t.Fatal(err)
			}
			return b
		}
	}
	t.Fatalf("no series %s in the version 1 golden file", name)
	return nil
}

// TestVersion1Blocks puts a block of format version 1 into a store (as a
// file written by the previous release holds it) and checks that it reads,
// catches a redelivery and a conflict, and merges a late reading into a
// block rewritten in the current version with every reading intact.
func TestVersion1Blocks(t *testing.T) {
	ctx := context.Background()
	st := openTemp(t)
	old := goldenV1(t, "strain-res") // 600 readings from 2026-06-01T00:00:00Z at 1 s
	if old[0] != 1 {
		t.Fatalf("golden block has version %d, want 1", old[0])
	}
	pts, err := blocks.Decode(old)
	if err != nil {
		t.Fatal(err)
	}
	if !time.Unix(0, pts[0].Time).Equal(dayStart) {
		t.Fatalf("golden block starts at %v, want %v", time.Unix(0, pts[0].Time).UTC(), dayStart)
	}
	want := make([]Reading, len(pts))
	for i, p := range pts {
		want[i] = Reading{Channel: "a", Time: time.Unix(0, p.Time).UTC(), Value: p.Value}
	}
	// The channel and its block as the previous release left them: rows
	// compacted into one block whose data is then the version 1 block.
	if n, err := st.InsertReadings(ctx, "bridge", want); err != nil || n != len(want) {
		t.Fatalf("insert: %d, %v", n, err)
	}
	if cs, err := st.Compact(ctx, dayStart.Add(2*time.Hour)); err != nil || cs.Blocks != 1 {
		t.Fatalf("compact: %+v, %v", cs, err)
	}
	if _, err := st.db.ExecContext(ctx, `UPDATE reading_blocks SET data = ?`, old); err != nil {
		t.Fatal(err)
	}
	if err := sameReadings(want, readAll(t, st, "bridge")); err != nil {
		t.Fatalf("version 1 block: %v", err)
	}
	if n, err := st.InsertReadings(ctx, "bridge", want[100:200]); err != nil || n != 0 {
		t.Errorf("redelivery into a version 1 block stored %d (%v), want 0", n, err)
	}
	clash := want[300]
	clash.Value += 1e-6
	res, err := st.Commit(ctx, Batch{Groups: []Group{{Structure: "bridge", Readings: []Reading{clash}}}})
	if err != nil {
		t.Fatal(err)
	}
	if res.Inserted[0] != 0 || len(res.Conflicts[0]) != 1 || res.Conflicts[0][0].Stored != want[300].Value {
		t.Errorf("conflict against a version 1 block: inserted %d, conflicts %+v", res.Inserted[0], res.Conflicts[0])
	}
	late := Reading{Channel: "a", Time: dayStart.Add(5*time.Minute + 500*time.Millisecond), Value: 1.23e-5}
	if n, err := st.InsertReadings(ctx, "bridge", []Reading{late}); err != nil || n != 1 {
		t.Fatalf("late reading stored %d (%v), want 1", n, err)
	}
	merged := append(append(append([]Reading(nil), want[:301]...), late), want[301:]...)
	if cs, err := st.Compact(ctx, dayStart.Add(2*time.Hour)); err != nil || cs.Blocks != 1 || cs.Readings != 1 {
		t.Fatalf("merging the late reading: %+v, %v", cs, err)
	}
	var data []byte
	if err := st.db.QueryRowContext(ctx, `SELECT data FROM reading_blocks`).Scan(&data); err != nil {
		t.Fatal(err)
	}
	if data[0] == 1 {
		t.Errorf("merged block still has format version 1")
	}
	if err := sameReadings(merged, readAll(t, st, "bridge")); err != nil {
		t.Fatalf("after merging into a version %d block: %v", data[0], err)
	}
}
