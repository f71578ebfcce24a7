package fatiguetrack_test

import (
	"context"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/broker"
	"trussmonitor/internal/fatiguetrack"
	"trussmonitor/internal/ingest"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/publish"
	"trussmonitor/internal/store"
)

// BenchmarkIngest20Gauges200Hz: 20 footbridge gauges sampled at 200 Hz
// (4,000 readings a second), sent as one SenML pack per gauge-second of all
// 20 gauges through the embedded broker, ingested into SQLite with the
// fatigue count of all 20 in the readings' transactions. One iteration is
// one simulated minute (240,000 readings). Reported: readings per second of
// wall time, the multiple of real time that is, and the Go heap in use
// (after a collection) and the process's resident set at the end of the
// first and of the last iteration, to show that memory stays flat.
//
//	go test -run XXX -bench Ingest20 -benchtime 10x ./internal/fatiguetrack/
func BenchmarkIngest20Gauges200Hz(b *testing.B) {
	root := filepath.Join("..", "..", "testdata", "footbridge")
	pair, err := instrumented.Load(filepath.Join(root, "structure.yaml"), filepath.Join(root, "sensors.yaml"))
	if err != nil {
		b.Fatal(err)
	}
	st, sm := pair.Structure, pair.Sensors
	// 20 gauges, each counting fatigue on the detail of the first fatigue
	// gauge of the map.
	detail := sm.FatigueGauges()[0].Fatigue
	var gauges []sensors.FatigueGauge
	var ids []string
	for _, ch := range sm.Channels() {
		if ch.Kind.IsGauge() && len(ids) < 20 {
			ids = append(ids, ch.ID)
			e, _, _, _ := st.MemberProperties(ch.Member)
			gauges = append(gauges, sensors.FatigueGauge{Channel: ch.ID, Member: ch.Member, E: e, Fatigue: detail})
		}
	}
	brk, err := broker.Start(broker.Config{Address: "127.0.0.1:0", AllowAnonymous: true})
	if err != nil {
		b.Fatal(err)
	}
	defer brk.Close()
	db, err := store.Open(filepath.Join(b.TempDir(), "m.db"), store.Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer db.Close()
	tr := fatiguetrack.New(nil)
	tr.Add(st.Name, sm, gauges)
	// The simulated record is dated 2026-06-01 (a fixed morning peak), so
	// the backlog bound is off (MaxBehind < 0), as in the end-to-end test.
	in, err := ingest.New(ingest.Config{Broker: "tcp://" + brk.Addr(), ClientID: "bench-ingest", MaxBehind: -1},
		ingest.Deps{Store: db, Registries: map[string]ingest.Registry{st.Name: sm}, Fatigue: tr})
	if err != nil {
		b.Fatal(err)
	}
	ctx, stop := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- in.Run(ctx) }()
	for deadline := time.Now().Add(60 * time.Second); in.Stats().Subscribed == 0; time.Sleep(20 * time.Millisecond) {
		if time.Now().After(deadline) {
			b.Fatal("ingest did not subscribe")
		}
	}
	heap := func() float64 {
		runtime.GC()
		var ms runtime.MemStats
		runtime.ReadMemStats(&ms)
		return float64(ms.HeapInuse) / (1 << 20)
	}
	// rss is the process's resident set (MB) from /proc, which also covers
	// SQLite's memory (modernc.org/sqlite allocates outside the Go heap);
	// 0 where /proc is missing.
	rss := func() float64 {
		b, err := os.ReadFile("/proc/self/status")
		if err != nil {
			return 0
		}
		for _, line := range strings.Split(string(b), "\n") {
			if f := strings.Fields(line); len(f) >= 2 && f[0] == "VmRSS:" {
				kb, _ := strconv.ParseFloat(f[1], 64)
				return kb / 1024
			}
		}
		return 0
	}
	opt := simulate.DefaultOptions()
	hr := simulate.DefaultHighRate()
	hr.Interval = 5 * time.Millisecond // 200 Hz
	hr.Channels = ids
	var total int64
	var firstHeap, lastHeap, firstRSS, lastRSS float64
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		opt.Start = time.Date(2026, 6, 1, 8, 0, 0, 0, time.UTC).Add(time.Duration(i) * time.Minute)
		opt.Duration = time.Minute
		opt.Seed = uint64(i + 1)
		gen, err := simulate.New(st, sm, opt)
		if err != nil {
			b.Fatal(err)
		}
		ps, err := publish.RunHighRate(context.Background(), gen.HighRate(hr), publish.Options{Broker: "tcp://" + brk.Addr(), Structure: st.Name, ClientID: "bench-logger"})
		if err != nil {
			b.Fatal(err)
		}
		total += int64(ps.Readings)
		for last, lastAt := int64(-1), time.Now(); in.Stats().Stored < total; time.Sleep(5 * time.Millisecond) {
			if s := in.Stats().Stored; s != last {
				last, lastAt = s, time.Now()
			} else if time.Since(lastAt) > 60*time.Second {
				b.Fatalf("ingest stalled at %d of %d", s, total)
			}
		}
		b.StopTimer()
		h := heap()
		r := rss()
		if i == 0 {
			firstHeap, firstRSS = h, r
		}
		lastHeap, lastRSS = h, r
		b.StartTimer()
	}
	b.StopTimer()
	rate := float64(total) / b.Elapsed().Seconds()
	b.ReportMetric(rate, "readings/s")
	b.ReportMetric(rate/4000, "x_realtime")
	b.ReportMetric(firstHeap, "heapMB_first")
	b.ReportMetric(lastHeap, "heapMB_last")
	b.ReportMetric(firstRSS, "rssMB_first")
	b.ReportMetric(lastRSS, "rssMB_last")
	stop()
	if err := <-done; err != nil {
		b.Fatal(err)
	}
}
