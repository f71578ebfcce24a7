package simulate_test

import (
	"bufio"
	"bytes"
	"compress/gzip"
	"flag"
	"io"
	"math"
	"os"
	"testing"
	"time"

	"trussmonitor/internal/csvimport"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/loggercsv"
	"trussmonitor/internal/simulate/loggercsv/loggercsvtest"
)

var update = flag.Bool("update", false, "regenerate testdata/replay/footbridge-day.csv.gz")

const replayFile = "../../testdata/replay/footbridge-day.csv.gz"

// replayDay is the recorded day of testdata/replay/README.md: the options
// "monitor simulate --seed 1 --start 2026-06-01T00:00:00Z --duration 24h
// --rate 60s --bad-rate 0 --fault stiffness:D2:14h:0.3" give.
func replayDay(t *testing.T) (*simulate.Generator, *sensors.Map) {
	t.Helper()
	pair, err := instrumented.Load("../../testdata/footbridge/structure.yaml", "../../testdata/footbridge/sensors.yaml")
	if err != nil {
		t.Fatal(err)
	}
	st, sm := pair.Structure, pair.Sensors
	f, err := simulate.ParseFault("stiffness:D2:14h:0.3")
	if err != nil {
		t.Fatal(err)
	}
	opt := simulate.DefaultOptions()
	opt.Seed = 1
	opt.Start = time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	opt.Duration = 24 * time.Hour
	opt.Rate = time.Minute
	opt.BadRate = 0
	opt.Faults = []simulate.Fault{f}
	g, err := simulate.New(st, sm, opt)
	if err != nil {
		t.Fatal(err)
	}
	return g, sm
}

// TestReplayDay checks that testdata/replay/footbridge-day.csv.gz is what
// the generator gives (go test -run TestReplayDay -update rewrites it), that
// the project's CSV reader takes it whole, and that the D2 gauges show the
// stiffness loss at 14:00.
func TestReplayDay(t *testing.T) {
	g, sm := replayDay(t)
	cols := loggercsv.ColumnsOf(g.Channels())
	var want bytes.Buffer
	if _, err := loggercsv.WriteAll(&want, cols, 0, g.All()); err != nil {
		t.Fatal(err)
	}
	if *update {
		f, err := os.Create(replayFile)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := loggercsv.WriteGzip(f, cols, 0, g.All()); err != nil {
			t.Fatal(err)
		}
		if err := f.Close(); err != nil {
			t.Fatal(err)
		}
	}
	info, err := os.Stat(replayFile)
	if err != nil {
		t.Fatalf("%v; regenerate with go test ./internal/simulate/ -run TestReplayDay -update", err)
	}
	if info.Size() > 1_500_000 {
		t.Fatalf("%s is %d bytes, over the 1.5 MB budget", replayFile, info.Size())
	}
	f, err := os.Open(replayFile)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	got, err := io.ReadAll(zr)
	if err != nil {
		t.Fatal(err)
	}
	if line, ok := loggercsvtest.SameWithin(got, want.Bytes(), 1e-6); !ok {
		t.Fatalf("%s differs from the generator beyond rounding at line %d; regenerate with -update if the change is intended", replayFile, line)
	}

	// Read it back as the import does and follow D2's measured force.
	rows := map[time.Time]map[string]float64{}
	stats, err := csvimport.Read(bufio.NewReader(bytes.NewReader(got)), func(r csvimport.Record) error {
		if err := sm.Validate(r.Channel, r.Unit, r.Value); err != nil {
			return err
		}
		v, err := sm.Convert(r.Channel, r.Value)
		if err != nil {
			return err
		}
		if rows[r.Time] == nil {
			rows[r.Time] = map[string]float64{}
		}
		rows[r.Time][r.Channel] = v
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if stats.Rows != 1440 || stats.Channels != 46 || stats.Empty != 0 {
		t.Fatalf("read %+v, want 1440 rows of 46 channels, no empty cells", stats)
	}
	d2 := func(from, to string) (mean float64) {
		a, _ := time.Parse(time.RFC3339, from)
		b, _ := time.Parse(time.RFC3339, to)
		n := 0
		for ts, vals := range rows {
			if ts.Before(a) || !ts.Before(b) {
				continue
			}
			for _, m := range sm.Evaluate(vals).Members {
				if m.Member == "D2" {
					mean += m.ForceN
					n++
				}
			}
		}
		return mean / float64(n)
	}
	before := d2("2026-06-01T13:00:00Z", "2026-06-01T14:00:00Z")
	after := d2("2026-06-01T14:00:00Z", "2026-06-01T15:00:00Z")
	// D2 carries 64.2 kN of dead load in tension; its gauges, zeroed under
	// it, read N/(0.7 E A) after the loss: a jump of 64.2 (1/0.7 - 1) =
	// 27.5 kN plus the live load's share.
	if jump := after - before; math.Abs(jump-27.5e3) > 2e3 {
		t.Fatalf("D2 measured force %.0f N before 14:00 and %.0f N after: jump %.0f N, want about 27.5 kN", before, after, jump)
	}
	t.Logf("D2 measured force (mean over an hour) %.0f N before 14:00, %.0f N after; file %d bytes", before, after, info.Size())
}
