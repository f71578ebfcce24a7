package service

import (
	"context"
	"log/slog"
	"path/filepath"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/metrics"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/store"
)

// BenchmarkFeed compares the footbridge's simulated readings (one pack of
// 46 a second, b.N seconds) fed to its pipeline on the calling goroutine, as the commit
// goroutine did before the reconciliation queue, with the same readings
// offered to the queue and fed by the feeder's goroutine: "offer" is the
// time the commit goroutine spends per pack now, "queued" the whole
// throughput through the queue (offer and feed, drained at the end).
func BenchmarkFeed(b *testing.B) {
	mon, err := instrumented.Load("../../testdata/footbridge/structure.yaml", "../../testdata/footbridge/sensors.yaml")
	if err != nil {
		b.Fatal(err)
	}
	// packs simulates n seconds of the footbridge (one pack a second).
	packs := func(b *testing.B, n int) [][]store.Reading {
		opt := simulate.DefaultOptions()
		opt.Seed, opt.Start, opt.Duration, opt.Rate, opt.BadRate = 9, time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC), time.Duration(n)*time.Second, time.Second, 0
		gen, err := simulate.New(mon.Structure, mon.Sensors, opt)
		if err != nil {
			b.Fatal(err)
		}
		var out [][]store.Reading
		for s, err := range gen.All() {
			if err != nil {
				b.Fatal(err)
			}
			rs := make([]store.Reading, len(s.Readings))
			for i, r := range s.Readings {
				rs[i] = store.Reading{Channel: r.Channel, Time: s.Time, Value: r.Value}
			}
			out = append(out, rs)
		}
		return out[:n]
	}
	newPipe := func(b *testing.B) *pipeline.Pipeline {
		p, err := pipeline.New(mon.Model, mon.Sensors, pipeline.Config{Window: time.Second, MaxLateness: 5 * time.Second})
		if err != nil {
			b.Fatal(err)
		}
		return p
	}
	perPack := float64(len(mon.Sensors.Channels()))
	report := func(b *testing.B) {
		b.ReportMetric(perPack*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
	}
	b.Run("direct", func(b *testing.B) {
		p := newPipe(b)
		in := make([][]store.Reading, b.N)
		for k, rs := range packs(b, b.N) {
			for _, r := range rs {
				in[k] = append(in[k], store.Reading{Channel: r.Channel, Time: r.Time, Value: r.Value})
			}
		}
		b.ResetTimer()
		for k := range b.N {
			p.Feed(context.Background(), in[k])
		}
		report(b)
	})
	newFeed := func(b *testing.B) *feeder {
		st, err := store.Open(filepath.Join(b.TempDir(), "m.db"), store.Options{})
		if err != nil {
			b.Fatal(err)
		}
		b.Cleanup(func() { st.Close() })
		met, err := metrics.New(prometheus.NewRegistry())
		if err != nil {
			b.Fatal(err)
		}
		return newFeeder(newPipe(b), st, 1<<30, time.Time{}, slog.New(slog.DiscardHandler), met)
	}
	b.Run("offer", func(b *testing.B) {
		f := newFeed(b) // not running: measures the commit goroutine's share
		in := packs(b, b.N)
		b.ResetTimer()
		for k := range b.N {
			f.offer(in[k])
		}
		report(b)
	})
	b.Run("queued", func(b *testing.B) {
		f := newFeed(b)
		in := packs(b, b.N)
		go f.run(context.Background())
		b.ResetTimer()
		for k := range b.N {
			f.offer(in[k])
		}
		f.close()
		report(b)
	})
}
