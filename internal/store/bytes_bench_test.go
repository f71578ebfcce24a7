package store_test

import (
	"context"
	"flag"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"trussmonitor/internal/sensors"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/store"
	"trussmonitor/internal/structfile"
)

var storageHours = flag.Int("storage-hours", 2, "hours of the 100-channel footbridge at 1 Hz that BenchmarkStorageBytes stores")

// fileSize returns the size of a compact copy of the store (VACUUM INTO).
func fileSize(b *testing.B, st *store.Store, dir, name string) int64 {
	b.Helper()
	path := filepath.Join(dir, name)
	if err := st.Backup(context.Background(), path); err != nil {
		b.Fatal(err)
	}
	fi, err := os.Stat(path)
	if err != nil {
		b.Fatal(err)
	}
	return fi.Size()
}

// BenchmarkStorageBytes stores hours of the footbridge with 100 gauge,
// load and temperature channels at 1 Hz (the simulator's day, values
// printed with 8 significant digits as a logger's CSV carries them, see
// loggercsv), and reports the bytes per reading of a compact copy of the
// file with every reading in the keyed row table and after Compact moved
// them into blocks, and their ratio.
func BenchmarkStorageBytes(b *testing.B) {
	ctx := context.Background()
	st, err := structfile.LoadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		b.Fatal(err)
	}
	sm, err := sensors.LoadFile("../../testdata/footbridge/sensors-100.yaml", st)
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		dir := b.TempDir()
		opt := simulate.DefaultOptions()
		opt.Duration = time.Duration(*storageHours) * time.Hour
		opt.BadRate = 0
		g, err := simulate.New(st, sm, opt)
		if err != nil {
			b.Fatal(err)
		}
		db, err := store.Open(filepath.Join(dir, "monitor.db"), store.Options{})
		if err != nil {
			b.Fatal(err)
		}
		var batch []store.Reading
		var n int64
		commit := func() error {
			res, err := db.Commit(ctx, store.Batch{Groups: []store.Group{{Structure: st.Name, Readings: batch}}})
			if err == nil {
				n += int64(res.Inserted[0])
			}
			batch = batch[:0]
			return err
		}
		if err := g.Run(func(s simulate.Step) error {
			for _, r := range s.Readings {
				v, _ := strconv.ParseFloat(strconv.FormatFloat(r.Value, 'g', 8, 64), 64)
				batch = append(batch, store.Reading{Channel: r.Channel, Time: s.Time, Value: v})
			}
			if len(batch) >= 20000 {
				return commit()
			}
			return nil
		}); err != nil {
			b.Fatal(err)
		}
		if err := commit(); err != nil {
			b.Fatal(err)
		}
		rows := fileSize(b, db, dir, "rows.db")
		cs, err := db.Compact(ctx, opt.Start.Add(opt.Duration+store.BlockSpan))
		if err != nil {
			b.Fatal(err)
		}
		if cs.Readings != n {
			b.Fatalf("compacted %d of %d readings", cs.Readings, n)
		}
		blocks := fileSize(b, db, dir, "blocks.db")
		db.Close()
		b.ReportMetric(float64(rows)/float64(n), "row-bytes/reading")
		b.ReportMetric(float64(blocks)/float64(n), "block-bytes/reading")
		b.ReportMetric(float64(rows)/float64(blocks), "ratio")
	}
}
