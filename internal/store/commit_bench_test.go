package store_test

import (
	"context"
	"fmt"
	"path/filepath"
	"testing"
	"time"

	"trussmonitor/internal/store"
)

// BenchmarkCommitPacks commits batches in the shape ingest writes under
// load: 200 messages (groups) of 50 channels at one time each, times
// advancing, into a file store. One op is one reading; run with e.g.
// -benchtime 1000000x.
func BenchmarkCommitPacks(b *testing.B) {
	const perPack, packs = 50, 200
	ctx := context.Background()
	st, err := store.Open(filepath.Join(b.TempDir(), "bench.db"), store.Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer st.Close()
	names := make([]string, perPack)
	for c := range names {
		names[c] = fmt.Sprintf("g%02d", c)
	}
	t0 := time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)
	seq := 0
	b.ResetTimer()
	for done := 0; done < b.N; {
		var batch store.Batch
		for range packs {
			rs := make([]store.Reading, perPack)
			for c := range rs {
				rs[c] = store.Reading{Channel: names[c], Time: t0.Add(time.Duration(seq) * 10 * time.Millisecond), Value: float64(seq%1000) + float64(c)/8}
			}
			seq++
			batch.Groups = append(batch.Groups, store.Group{Structure: "alder-creek", Readings: rs})
		}
		res, err := st.Commit(ctx, batch)
		if err != nil {
			b.Fatal(err)
		}
		for _, n := range res.Inserted {
			if n != perPack {
				b.Fatalf("inserted %d of %d", n, perPack)
			}
		}
		done += perPack * packs
	}
}
