package replay_test

import (
	"context"
	"flag"
	"os"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/replay"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/simtest"
	"trussmonitor/internal/store"
)

var benchHours = flag.Int("bench-hours", 24, "hours of 1 Hz footbridge readings BenchmarkReplayDay replays")

// benchStore is a store BenchmarkReplayDay replays, generated once per test
// binary (a benchmark function runs several times).
type benchStore struct {
	once     sync.Once
	path     string
	readings int64
	setup    time.Duration
	err      error
}

// benchStores are the benchmark's stores (with and without the fault) and
// the folder holding them, removed by TestMain.
var benchStores struct {
	dir                  string
	fault, intact, dense benchStore
}

const denseSensorsFile = "../../testdata/footbridge/sensors-100.yaml"

func TestMain(m *testing.M) {
	flag.Parse()
	code := m.Run()
	if benchStores.dir != "" {
		os.RemoveAll(benchStores.dir)
	}
	os.Exit(code)
}

// generateDay stores hours of the footbridge at one reading per channel
// per second (46 channels; with fault, a 30 % stiffness loss of D2
// half-way), with the structure file as the model in force.
func generateDay(hours int, fault bool, sensorsPath string) (string, int64, error) {
	pair, err := instrumented.Load(structureFile, sensorsPath)
	if err != nil {
		return "", 0, err
	}
	st, sm := pair.Structure, pair.Sensors
	f, err := simulate.ParseFault("stiffness:D2:" + (time.Duration(hours) * time.Hour / 2).String() + ":0.3")
	if err != nil {
		return "", 0, err
	}
	opt := simulate.DefaultOptions()
	opt.Duration = time.Duration(hours) * time.Hour
	opt.BadRate = 0
	name := "intact.db"
	if fault {
		opt.Faults = []simulate.Fault{f}
		name = "fault.db"
	}
	g, err := simulate.New(st, sm, opt)
	if err != nil {
		return "", 0, err
	}
	if benchStores.dir == "" {
		if benchStores.dir, err = os.MkdirTemp("", "replay-bench-"); err != nil {
			return "", 0, err
		}
	}
	path := filepath.Join(benchStores.dir, name)
	db, err := store.Open(path, store.Options{})
	if err != nil {
		return "", 0, err
	}
	defer db.Close()
	ctx := context.Background()
	batch := make([]store.Reading, 0, 10000)
	var n int64
	commit := func() error {
		if len(batch) == 0 {
			return nil
		}
		res, err := db.Commit(ctx, store.Batch{Groups: []store.Group{{Structure: st.Name, Readings: batch}}})
		if err == nil {
			n += int64(res.Inserted[0])
		}
		batch = batch[:0]
		return err
	}
	err = simtest.Run(g, func(s simulate.Step) error {
		for _, r := range s.Readings {
			batch = append(batch, store.Reading{Channel: r.Channel, Time: s.Time, Value: r.Value})
		}
		if len(batch) >= 10000 {
			return commit()
		}
		return nil
	})
	if err == nil {
		err = commit()
	}
	if err != nil {
		return "", 0, err
	}
	content, err := os.ReadFile(structureFile)
	if err != nil {
		return "", 0, err
	}
	if _, err := db.PutModel(ctx, st.Name, content, opt.Start.Add(-time.Hour)); err != nil {
		return "", 0, err
	}
	return path, n, nil
}

// BenchmarkReplayDay replays a stored day of the footbridge at 1 Hz (46
// channels, 3.97 million readings; -bench-hours N for a shorter period)
// with 1 s epochs, writing the report, and reports readings per second of
// wall time and per second of CPU time. Two days: "d2-loss" with a 30 %
// stiffness loss of D2 half-way (every epoch after it is rejected and
// ranks causes over the window), and "intact" without a fault.
// Target (issue): 8.64 million readings (100 channels for a day at 1 Hz) in
// under a minute on two cores, >= 144,000 readings/s. It also reports the
// replay's peak heap (HeapInuse sampled every 10 ms) and peak RSS, which
// stay flat in the period (issue 14: under 200 MB for any period; run
// -bench-hours 720 for 30 days).
func BenchmarkReplayDay(b *testing.B) {
	b.Run("d2-loss", func(b *testing.B) { benchReplay(b, &benchStores.fault, true, sensorsFile) })
	b.Run("intact", func(b *testing.B) { benchReplay(b, &benchStores.intact, false, sensorsFile) })
	// The case: 100 channels (every member gauged, ten with four
	// gauges; testdata/footbridge/sensors-100.yaml), with the fault.
	b.Run("100ch-d2-loss", func(b *testing.B) { benchReplay(b, &benchStores.dense, true, denseSensorsFile) })
}

func benchReplay(b *testing.B, bs *benchStore, fault bool, sensorsPath string) {
	bs.once.Do(func() {
		start := time.Now()
		bs.path, bs.readings, bs.err = generateDay(*benchHours, fault, sensorsPath)
		bs.setup = time.Since(start)
	})
	if bs.err != nil {
		b.Fatal(bs.err)
	}
	b.Logf("store: %d readings over %d h, generated and stored in %v", bs.readings, *benchHours, bs.setup.Round(time.Second))
	from := simulate.DefaultOptions().Start
	opt := replay.Options{
		DB: bs.path, From: from, To: from.Add(time.Duration(*benchHours) * time.Hour),
		SensorsFile: sensorsPath, OutDir: b.TempDir(),
	}
	// Peak memory of the replay alone: the heap in use sampled every 10 ms
	// (runtime.ReadMemStats), and the process's peak resident set (VmHWM)
	// after resetting it (clear_refs 5) once the store is generated.
	runtime.GC()
	debug.FreeOSMemory()
	rssReset := os.WriteFile("/proc/self/clear_refs", []byte("5"), 0) == nil
	stop, peakHeap := sampleHeap()
	cpu0 := cpuTime()
	b.ResetTimer()
	var sum *replay.Summary
	for i := 0; i < b.N; i++ {
		var err error
		if sum, err = replay.Run(context.Background(), opt); err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	cpu := cpuTime() - cpu0
	stop()
	b.ReportMetric(float64(*peakHeap)/(1<<20), "peak-heap-MB")
	if hwm, ok := peakRSS(); ok && rssReset {
		b.ReportMetric(float64(hwm)/(1<<20), "peak-rss-MB")
	}
	b.ReportMetric(float64(sum.Readings)*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
	// The machine is shared: CPU time per reading is the steadier figure
	// (user + system time of the whole process, both goroutines and GC).
	b.ReportMetric(float64(sum.Readings)*float64(b.N)/cpu.Seconds(), "readings/cpu-s")
	b.Logf("epochs %d %v, events %d (raised %v)", sum.Epochs, sum.ByOutcome, sum.Events, sum.Raised)
}

// cpuTime returns the process's user plus system CPU time.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// sampleHeap samples HeapInuse every 10 ms until stop is called and keeps
// the largest value.
func sampleHeap() (stop func(), peak *uint64) {
	peak = new(uint64)
	done := make(chan struct{})
	finished := make(chan struct{})
	go func() {
		defer close(finished)
		tick := time.NewTicker(10 * time.Millisecond)
		defer tick.Stop()
		var ms runtime.MemStats
		for {
			runtime.ReadMemStats(&ms)
			if ms.HeapInuse > *peak {
				*peak = ms.HeapInuse
			}
			select {
			case <-done:
				return
			case <-tick.C:
			}
		}
	}()
	return func() { close(done); <-finished }, peak
}

// peakRSS returns the process's peak resident set size (VmHWM of
// /proc/self/status) in bytes.
func peakRSS() (uint64, bool) {
	data, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return 0, false
	}
	for _, line := range strings.Split(string(data), "\n") {
		if f := strings.Fields(line); len(f) >= 2 && f[0] == "VmHWM:" {
			kb, err := strconv.ParseUint(f[1], 10, 64)
			return kb << 10, err == nil
		}
	}
	return 0, false
}

// BenchmarkReplayRecordedDay replays the recorded day of testdata/replay
// (46 channels, one reading a minute, 66,240 readings, 1-minute epochs,
// the report written) and reports readings per second of wall time and of
// CPU time: with 46 readings per epoch its rate is set by the per-epoch
// work (reconciliation, cause ranking, alarm rules, report rows), not by
// the per-reading path.
func BenchmarkReplayRecordedDay(b *testing.B) {
	path := importDayWithout(b, true, nil)
	opt := replay.Options{DB: path, From: dayStart, To: dayEnd, SensorsFile: sensorsFile,
		OutDir: b.TempDir(), Window: time.Minute}
	cpu0 := cpuTime()
	b.ResetTimer()
	var sum *replay.Summary
	for i := 0; i < b.N; i++ {
		var err error
		if sum, err = replay.Run(context.Background(), opt); err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	cpu := cpuTime() - cpu0
	b.ReportMetric(float64(sum.Readings)*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
	b.ReportMetric(float64(sum.Readings)*float64(b.N)/cpu.Seconds(), "readings/cpu-s")
	b.ReportMetric(float64(b.Elapsed().Microseconds())/float64(sum.Epochs*int64(b.N)), "us/epoch")
}
