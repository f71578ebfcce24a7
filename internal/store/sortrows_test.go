package store

import (
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

// TestCommitKeepsForeignKeys checks the two halves of the readings' foreign
// key under Commit: a channel id that is not in the channels table is
// refused (the once-per-channel check), and the connection Commit used
// returns to the pool with SQLite's own checks on (SQLite documents
// foreign_keys as a per-connection setting, off by default).
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
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer tx.Rollback()
	var id int64
	if err := tx.QueryRowContext(ctx, `SELECT id FROM channels WHERE name = 'g1'`).Scan(&id); err != nil {
		t.Fatal(err)
	}
	if err := checkChannels(ctx, tx, []batchRow{{key: rowKey{id, 1}}, {key: rowKey{id, 2}}}); err != nil {
		t.Errorf("stored channel refused: %v", err)
	}
	if err := checkChannels(ctx, tx, []batchRow{{key: rowKey{id, 1}}, {key: rowKey{id + 1000, 2}}}); err == nil {
		t.Error("channel id not in the channels table accepted")
	}
}
