package store

import (
	"cmp"
	"math/rand/v2"
	"slices"
	"testing"
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
