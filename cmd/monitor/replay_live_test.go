package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/config"
	"trussmonitor/internal/csvimport"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/report"
	"trussmonitor/internal/settings"
	"trussmonitor/internal/store"
)

// eventCollector is a pipeline sink that keeps the alarm events.
type eventCollector struct{ events []string }

func (c *eventCollector) Epoch(r *pipeline.Result) {
	for _, e := range r.Events {
		c.events = append(c.events, eventKey(e.Time, string(e.Rule), e.Subject, string(e.Kind)))
	}
}

func eventKey(t time.Time, rule, subject, kind string) string {
	return fmt.Sprintf("%s %s %s %s", t.UTC().Format(time.RFC3339Nano), rule, subject, kind)
}

// TestReplayConfigMatchesLive checks that `monitor replay --config` raises
// and clears every alarm at the same logger times as the live pipeline,
// built with the same configuration, fed the same readings as they arrive.
//
// The recorded day (60 s epochs; the D2 fault at 14:00) gets a gap: gauge
// D7_a is silent from 08:00 to 08:20. The configuration's silence limit of
// 3 minutes differs from every built-in default, so a replay that applied
// other thresholds than the configuration's raises ChannelSilent at another
// time (before the settings builder, replay always used 120 s).
func TestReplayConfigMatchesLive(t *testing.T) {
	const silentChannel = "D7_a"
	gapFrom := time.Date(2026, 6, 1, 8, 0, 0, 0, time.UTC)
	gapTo := gapFrom.Add(20 * time.Minute)
	dir := t.TempDir()

	// The day with the gap, as a logger CSV file.
	rows, err := csv.NewReader(bytes.NewReader(gunzip(t, "../../testdata/replay/footbridge-day.csv.gz"))).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := -1
	for i, h := range rows[0] {
		if h == silentChannel {
			col = i
		}
	}
	if col < 0 {
		t.Fatalf("recorded day has no column %s", silentChannel)
	}
	blanked := 0
	for _, r := range rows[2:] {
		tm, err := time.Parse(time.RFC3339, r[0])
		if err != nil {
			t.Fatal(err)
		}
		if !tm.Before(gapFrom) && tm.Before(gapTo) {
			r[col] = ""
			blanked++
		}
	}
	if blanked != 20 {
		t.Fatalf("blanked %d cells, want 20", blanked)
	}
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	if err := w.WriteAll(rows); err != nil {
		t.Fatal(err)
	}
	csvPath := filepath.Join(dir, "day.csv")
	if err := os.WriteFile(csvPath, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}

	// The configuration.
	abs := func(p string) string {
		a, err := filepath.Abs(p)
		if err != nil {
			t.Fatal(err)
		}
		return a
	}
	structurePath, sensorsPath := abs("../../testdata/footbridge/structure.yaml"), abs("../../testdata/footbridge/sensors.yaml")
	cfgPath := filepath.Join(dir, "monitor.yaml")
	if err := os.WriteFile(cfgPath, []byte("database: monitor.db\n"+
		"epochs: {window: 60s, max_lateness: 5s, missing_load: skip}\n"+
		"alarms: {silent_after: 3m, reject_rate_per_minute: 30}\n"+
		"structures:\n  - {structure: "+structurePath+", sensors: "+sensorsPath+"}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	cfg, err := config.Load(cfgPath)
	if err != nil {
		t.Fatal(err)
	}
	set, err := settings.FromConfig(cfg)
	if err != nil {
		t.Fatal(err)
	}

	// Live: the pipeline as the service builds it, fed scan by scan on a
	// receiver clock two seconds behind the logger, ticked after each scan
	// as the service ticks every second.
	mon, err := instrumented.Load(structurePath, sensorsPath)
	if err != nil {
		t.Fatal(err)
	}
	var now time.Time
	p, err := pipeline.New(mon.Model, mon.Sensors, pipeline.Config{
		Window: set.Window, MaxLateness: set.MaxLateness,
		Clock: func() time.Time { return now }, MaxFuture: 10 * time.Minute, MaxPast: 7 * 24 * time.Hour,
		Processor: reconcile.ProcessorOptions{EstimateMissingLoads: set.EstimateMissingLoads},
		Rules:     set.Rules,
	})
	if err != nil {
		t.Fatal(err)
	}
	live := &eventCollector{}
	p.AddSink(live)
	f, err := os.Open(csvPath)
	if err != nil {
		t.Fatal(err)
	}
	var scan []store.Reading
	ctx := context.Background()
	feed := func() {
		if len(scan) == 0 {
			return
		}
		now = scan[0].Time.Add(2 * time.Second)
		p.Feed(ctx, scan)
		p.Tick(ctx)
		scan = nil
	}
	if _, err := csvimport.Read(f, func(r csvimport.Record) error {
		if len(scan) > 0 && !r.Time.Equal(scan[0].Time) {
			feed()
		}
		scan = append(scan, store.Reading{Channel: r.Channel, Time: r.Time, Value: r.Value})
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	f.Close()
	feed()
	p.Flush(ctx)

	// Replay: the same file through `monitor import` and `monitor replay
	// --config`.
	db := filepath.Join(dir, "monitor.db")
	var out, errb bytes.Buffer
	if code := runImport(ctx, []string{"--db", db, "--structure", structurePath, "--sensors", sensorsPath, csvPath}, &out, &errb); code != 0 {
		t.Fatalf("import: exit %d: %s", code, errb.String())
	}
	reportDir := filepath.Join(dir, "report")
	code, stdout, stderr := replayCmd("--db", db, "--from", "2026-06-01T00:00:00Z", "--to", "2026-06-02T00:00:00Z",
		"--sensors", sensorsPath, "--structure", structurePath, "--config", cfgPath, "--out", reportDir)
	if code != 0 {
		t.Fatalf("replay: exit %d: %s", code, stderr)
	}
	t.Log(stdout)
	evRows, err := csv.NewReader(mustOpen(t, filepath.Join(reportDir, report.EventsFile))).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	idx := map[string]int{}
	for i, h := range evRows[0] {
		idx[h] = i
	}
	var replayed []string
	for _, r := range evRows[1:] {
		tm, err := time.Parse(time.RFC3339Nano, r[idx["time"]])
		if err != nil {
			t.Fatal(err)
		}
		replayed = append(replayed, eventKey(tm, r[idx["rule"]], r[idx["subject"]], r[idx["kind"]]))
	}

	sort.Strings(live.events)
	sort.Strings(replayed)
	if strings.Join(live.events, "\n") != strings.Join(replayed, "\n") {
		t.Errorf("replay events differ from the live pipeline's\nlive:\n%s\nreplay:\n%s", strings.Join(live.events, "\n"), strings.Join(replayed, "\n"))
	}
	// The gap raised and cleared ChannelSilent at the configuration's
	// limit: the last reading before the gap is stamped 07:59, so the
	// silence exceeds 3 minutes in the epoch ending 08:03.
	var silentRaised, silentCleared bool
	for _, e := range replayed {
		silentRaised = silentRaised || strings.HasSuffix(e, string(alerts.RuleChannelSilent)+" "+silentChannel+" "+string(alerts.Raised))
		silentCleared = silentCleared || strings.HasSuffix(e, string(alerts.RuleChannelSilent)+" "+silentChannel+" "+string(alerts.Cleared))
	}
	if !silentRaised || !silentCleared {
		t.Errorf("ChannelSilent %s raised %v, cleared %v; want both", silentChannel, silentRaised, silentCleared)
	}
	for _, e := range replayed {
		if strings.Contains(e, string(alerts.RuleChannelSilent)) && strings.HasSuffix(e, string(alerts.Raised)) && !strings.HasPrefix(e, "2026-06-01T08:03:") && !strings.HasPrefix(e, "2026-06-01T08:04:") {
			t.Errorf("ChannelSilent raised at %s; want 08:03-08:04 (3 minutes after the last reading at 07:59, one epoch of 60 s)", e)
		}
	}
}

func mustOpen(t *testing.T, path string) *os.File {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { f.Close() })
	return f
}
