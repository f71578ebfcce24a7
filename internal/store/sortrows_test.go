package store

import (
	"trussmonitor/internal/blocks"

	"cmp"
	"context"
	"database/sql"
	"math/rand/v2"
	"slices"
	"testing"
	"time"
)

// TestSortRows checks the counting sort of a batch's rows against a plain
// stable sort by (channel, time): same order, batch order kept among equal
// keys, for dense and sparse channel ids and for runs out of time order.
func TestSortRows(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, tc := range []struct {
		name             string
		n                int
		chSpan, tsSpan   int64
		inOrderPerPacket bool
	}{
		{"packs in time order", 2000, 50, 1 << 40, true},
		{"shuffled times with repeats", 2000, 7, 30, false},
		{"sparse channel ids", 300, 1 << 40, 1000, false},
		{"one row", 1, 3, 3, false},
		{"empty", 0, 3, 3, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rows := make([]batchRow, tc.n)
			for j := range rows {
				ts := rng.Int64N(tc.tsSpan)
				if tc.inOrderPerPacket {
					ts = int64(j / 50)
				}
				rows[j] = batchRow{key: rowKey{ch: rng.Int64N(tc.chSpan) + 1, ts: ts}, val: float64(j), pos: rowPos{j / 50, j % 50}}
			}
			want := slices.Clone(rows)
			slices.SortStableFunc(want, func(a, b batchRow) int {
				return cmp.Or(cmp.Compare(a.key.ch, b.key.ch), cmp.Compare(a.key.ts, b.key.ts))
			})
			if got := sortRows(rows); !slices.Equal(got, want) {
				t.Fatalf("order differs from a stable sort by (channel, time)")
			}
		})
	}
}

// TestCommitKeepsForeignKeys checks the readings' foreign key under
// Commit: a channel id that is not in the channels table is refused for
// keyed rows and for staged runs, and the connections of the pool keep
// SQLite's own checks on (SQLite documents foreign_keys as a
// per-connection setting, off by default).
func TestCommitKeepsForeignKeys(t *testing.T) {
	s := openTemp(t)
	ctx := context.Background()
	t0 := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	if _, err := s.Commit(ctx, Batch{Groups: []Group{{Structure: "bridge", Readings: []Reading{{Channel: "g1", Time: t0, Value: 1}}}}}); err != nil {
		t.Fatal(err)
	}
	// The connection just used is the pool's most recent; take several.
	conns := make([]*sql.Conn, 3)
	for i := range conns {
		c, err := s.db.Conn(ctx)
		if err != nil {
			t.Fatal(err)
		}
		conns[i] = c
		var fk int
		if err := c.QueryRowContext(ctx, "PRAGMA foreign_keys").Scan(&fk); err != nil {
			t.Fatal(err)
		}
		if fk != 1 {
			t.Errorf("connection %d: foreign_keys=%d after Commit, want 1", i, fk)
		}
	}
	for _, c := range conns {
		c.Close()
	}
	var id int64
	if err := s.db.QueryRowContext(ctx, `SELECT id FROM channels WHERE name = 'g1'`).Scan(&id); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name  string
		write func(tx *sql.Tx, ch int64) error
	}{
		{"keyed rows", func(tx *sql.Tx, ch int64) error {
			return s.insertRows(ctx, tx, []batchRow{{key: rowKey{ch, 5}}, {key: rowKey{ch, 6}}})
		}},
		{"staged runs", func(tx *sql.Tx, ch int64) error {
			rows := appendRuns(nil, id, []blocks.Point{{Time: 5, Value: 1}, {Time: 6, Value: 2}})
			return s.insertStaged(ctx, tx, appendRuns(rows, ch, []blocks.Point{{Time: 7, Value: 1}, {Time: 8, Value: 2}}))
		}},
	} {
		for _, ch := range []int64{id, id + 1000} {
			tx, err := s.db.BeginTx(ctx, nil)
			if err != nil {
				t.Fatal(err)
			}
			err = c.write(tx, ch)
			tx.Rollback()
			if ok := ch == id; ok != (err == nil) {
				t.Errorf("%s of channel id %d (stored: %v): error %v", c.name, ch, ok, err)
			}
		}
	}
}
