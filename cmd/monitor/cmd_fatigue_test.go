package main

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/broker"
	"trussmonitor/internal/fatiguetrack"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/store"
)

func fatigueCmd(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := runFatigue(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

// fatigueStore stores an hour of the footbridge's high-rate record, with the
// fatigue count in each commit, as the service does.
func fatigueStore(t *testing.T, start time.Time) (string, *sensors.Map) {
	t.Helper()
	pair, err := instrumented.Load("../../testdata/footbridge/structure.yaml", "../../testdata/footbridge/sensors.yaml")
	if err != nil {
		t.Fatal(err)
	}
	st, sm := pair.Structure, pair.Sensors
	opt := simulate.DefaultOptions()
	opt.Start, opt.Duration = start, time.Hour
	gen, err := simulate.New(st, sm, opt)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "monitor.db")
	db, err := store.Open(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	tr := fatiguetrack.New(nil)
	tr.Add(st.Name, sm, sm.FatigueGauges())
	hr := simulate.DefaultHighRate()
	hr.PackSpan = 10 * time.Second
	hr.Vehicle.CrossingsPerDay = 120 // a few crossings within the hour
	ctx := context.Background()
	for pk, err := range gen.HighRate(hr) {
		if err != nil {
			t.Fatal(err)
		}
		var rs []store.Reading
		for i, tm := range pk.Times {
			for k, ch := range pk.Channels {
				rs = append(rs, store.Reading{Channel: ch, Time: tm, Value: pk.Raw[i][k]})
			}
		}
		b := store.Batch{Groups: []store.Group{{Structure: st.Name, Readings: rs}}}
		var apply func()
		b.Fatigue = func(r store.CommitResult) ([]store.FatigueUpdate, error) {
			ups, a, err := tr.Stage(b.Groups, r)
			apply = a
			return ups, err
		}
		if _, err := db.Commit(ctx, b); err != nil {
			t.Fatal(err)
		}
		apply()
	}
	if _, err := db.PutModel(ctx, st.Name, mustRead(t, "../../testdata/footbridge/structure.yaml"), start); err != nil {
		t.Fatal(err)
	}
	return path, sm
}

func TestFatigueCommand(t *testing.T) {
	start := time.Date(2026, 6, 1, 7, 30, 0, 0, time.UTC)
	db, sm := fatigueStore(t, start)
	from, to := start.Format(time.RFC3339), start.Add(time.Hour).Format(time.RFC3339)
	// The stored model version stands in for --structure.
	code, stdout, stderr := fatigueCmd("--db", db, "--from", from, "--to", to, "--sensors", "../../testdata/footbridge/sensors.yaml")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	t.Log(stdout)
	// The printed figures are those of the stored histograms.
	s, err := store.Open(db, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	lives, err := fatiguetrack.Lives(context.Background(), s, sm.StructureName(), sm.FatigueGauges(), start, start.Add(time.Hour))
	s.Close()
	if err != nil {
		t.Fatal(err)
	}
	nonzero := 0
	for _, l := range lives {
		if l.Life.Total > 0 {
			nonzero++
		}
		for _, want := range []string{l.Gauge.Channel, fmt.Sprintf("%.4e", l.Life.Total), fmt.Sprintf("%.4e", l.Life.Accumulated)} {
			if !strings.Contains(stdout, want) {
				t.Errorf("output lacks %q", want)
			}
		}
	}
	if nonzero == 0 {
		t.Error("no gauge shows damage; the vehicle should have crossed")
	}
	for _, want := range []string{"CAUTION", "not a design check or an assessment", "licensed engineer", "2026-06-01  cycles", "first reading", "2026-01-01"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("output lacks %q", want)
		}
	}
	// The raw recount of the same period.
	code, stdout, stderr = fatigueCmd("--db", db, "--from", from, "--to", to, "--sensors", "../../testdata/footbridge/sensors.yaml",
		"--structure", "../../testdata/footbridge/structure.yaml", "--raw")
	if code != 0 || !strings.Contains(stdout, "raw readings of the period") || !strings.Contains(stdout, "D1_b") {
		t.Errorf("--raw: exit %d: %s %s", code, stdout, stderr)
	}
	// Usage errors.
	if code, _, stderr := fatigueCmd("--db", db); code != 2 || !strings.Contains(stderr, "missing --from, --sensors, --to") {
		t.Errorf("missing flags: exit %d: %s", code, stderr)
	}
	if code, _, stderr := fatigueCmd("--db", db, "--from", to, "--to", from, "--sensors", "x.yaml"); code != 2 || !strings.Contains(stderr, "is not after") {
		t.Errorf("reversed period: exit %d: %s", code, stderr)
	}
	if code, _, stderr := fatigueCmd("--db", db, "--from", from, "--to", to, "--sensors", "../../testdata/roof/sensors.yaml",
		"--structure", "../../testdata/roof/structure.yaml"); code != 1 || !strings.Contains(stderr, "no gauge a fatigue block") {
		t.Errorf("map without fatigue gauges: exit %d: %s", code, stderr)
	}
}

func mustRead(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestSimulateHighRate publishes ten simulated seconds of the footbridge's
// 50 Hz fatigue record to the embedded broker.
func TestSimulateHighRate(t *testing.T) {
	b, err := broker.Start(broker.Config{Address: "127.0.0.1:0", AllowAnonymous: true})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	var stdout, stderr bytes.Buffer
	code := runSimulate(context.Background(), []string{"--structure", "../../testdata/footbridge/structure.yaml", "--sensors", "../../testdata/footbridge/sensors.yaml",
		"--broker", "tcp://" + b.Addr(), "--high-rate", "20ms", "--duration", "10s", "--speed", "0"}, &stdout, &stderr)
	if code != 0 || !strings.Contains(stdout.String(), "published 10 packs: 2000 high-rate readings, 10 messages acknowledged") {
		t.Errorf("exit %d: %s %s", code, stdout.String(), stderr.String())
	}
	code = runSimulate(context.Background(), []string{"--structure", "../../testdata/footbridge/structure.yaml", "--sensors", "../../testdata/footbridge/sensors.yaml",
		"--high-rate", "20ms", "--csv", "x.csv"}, &stdout, &stderr)
	if code != 2 || !strings.Contains(stderr.String(), "does not write CSV") {
		t.Errorf("--high-rate with --csv: exit %d: %s", code, stderr.String())
	}
}

// TestImportCountsFatigue: "monitor import" counts the fatigue gauges in
// each commit like the live ingest; importing the same file again (every
// reading a duplicate) leaves the histograms as they were.
func TestImportCountsFatigue(t *testing.T) {
	db := importedDay(t)
	ctx := context.Background()
	hist := func() map[string][]store.FatigueHour {
		s, err := store.Open(db, store.Options{})
		if err != nil {
			t.Fatal(err)
		}
		defer s.Close()
		out := map[string][]store.FatigueHour{}
		chs, err := s.FatigueChannels(ctx, "alder-creek")
		if err != nil {
			t.Fatal(err)
		}
		for _, ch := range chs {
			out[ch], err = s.FatigueHours(ctx, "alder-creek", ch, time.Time{}, time.Date(2100, 1, 1, 0, 0, 0, 0, time.UTC))
			if err != nil {
				t.Fatal(err)
			}
		}
		return out
	}
	first := hist()
	if len(first) != 4 || len(first["D1_a"]) != 24 {
		t.Fatalf("fatigue histograms of %d gauges, %d hours of D1_a; want 4 gauges and 24 hours", len(first), len(first["D1_a"]))
	}
	data := gunzip(t, "../../testdata/replay/footbridge-day.csv.gz")
	csvPath := filepath.Join(t.TempDir(), "day.csv")
	if err := os.WriteFile(csvPath, data, 0o644); err != nil {
		t.Fatal(err)
	}
	var out, errb bytes.Buffer
	if code := runImport(ctx, []string{"--db", db, "--structure", "../../testdata/footbridge/structure.yaml",
		"--sensors", "../../testdata/footbridge/sensors.yaml", csvPath}, &out, &errb); code != 0 {
		t.Fatalf("second import: exit %d: %s", code, errb.String())
	}
	if again := hist(); !reflect.DeepEqual(again, first) {
		t.Error("importing the same readings again changed the fatigue histograms")
	}
	if code, stdout, stderr := fatigueCmd("--db", db, "--from", "2026-06-01T00:00:00Z", "--to", "2026-06-02T00:00:00Z",
		"--sensors", "../../testdata/footbridge/sensors.yaml", "--structure", "../../testdata/footbridge/structure.yaml"); code != 0 || !strings.Contains(stdout, "stored hourly") {
		t.Errorf("monitor fatigue on the imported day: exit %d: %s %s", code, stdout, stderr)
	}
}
