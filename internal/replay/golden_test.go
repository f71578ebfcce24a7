package replay_test

import (
	"context"
	"crypto/sha256"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/replay"
	"trussmonitor/internal/report"
	"trussmonitor/internal/store"
)

var updateGolden = flag.Bool("update", false, "rewrite the replay's golden files in testdata/")

// TestRecordedDayGolden replays the recorded day (testdata/replay) and
// compares epochs.csv and events.csv byte for byte with the files the
// replay wrote before it streamed the report: their SHA-256 and size,
// captured from the in-memory report at commit 70a9e38 (amd64), are in
// testdata/recorded-day.sha256 (the files themselves are 1.6 MB gzipped). Two
// cases: the day as recorded, and the day with weigh pad pad_3 silent from
// 10:00 to 11:00 and missing loads estimated, so that a measured pattern
// (panel_3) becomes an extra column of epochs.csv only known once the
// replay has seen it. Regenerate with -update only when the report's
// format is meant to change.
func TestRecordedDayGolden(t *testing.T) {
	cases := []struct {
		name     string
		estimate bool
		drop     func(store.Reading) bool
	}{
		{name: "day"},
		{name: "pad3-silent", estimate: true, drop: func(r store.Reading) bool {
			return r.Channel == "pad_3" && !r.Time.Before(dayStart.Add(10*time.Hour)) && r.Time.Before(dayStart.Add(11*time.Hour))
		}},
	}
	want := readGolden(t)
	got := map[string]string{}
	defer func() {
		if *updateGolden && !t.Failed() {
			writeGolden(t, got)
		}
	}()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			path := importDayWithout(t, true, c.drop)
			out := t.TempDir()
			opt := replay.Options{DB: path, From: dayStart, To: dayEnd, SensorsFile: sensorsFile,
				OutDir: out, Window: time.Minute, EstimateMissingLoads: c.estimate}
			if _, err := replay.Run(context.Background(), opt); err != nil {
				t.Fatal(err)
			}
			for _, name := range []string{report.EpochsFile, report.EventsFile} {
				data, err := os.ReadFile(filepath.Join(out, name))
				if err != nil {
					t.Fatal(err)
				}
				sum := sha256.Sum256(data)
				key := c.name + "/" + name
				got[key] = fmt.Sprintf("%x %d", sum, len(data))
				if want, ok := want[key]; !ok && !*updateGolden {
					t.Errorf("%s has no line in %s (regenerate with -update)", key, goldenFile)
				} else if ok && want != got[key] && !*updateGolden {
					t.Errorf("%s differs from the output captured before: sha256 and size %s, want %s", key, got[key], want)
				}
			}
		})
	}
}

// goldenFile holds "case/file sha256 size" per line.
const goldenFile = "testdata/recorded-day.sha256"

func readGolden(t *testing.T) map[string]string {
	t.Helper()
	out := map[string]string{}
	data, err := os.ReadFile(goldenFile)
	if err != nil {
		if *updateGolden {
			return out
		}
		t.Fatalf("golden file: %v (regenerate with -update)", err)
	}
	for i, line := range strings.Split(strings.TrimSpace(string(data)), "\n") {
		f := strings.Fields(line)
		if len(f) != 3 {
			t.Fatalf("%s line %d: %q; want \"case/file sha256 size\"", goldenFile, i+1, line)
		}
		out[f[0]] = f[1] + " " + f[2]
	}
	return out
}

func writeGolden(t *testing.T, got map[string]string) {
	t.Helper()
	keys := make([]string, 0, len(got))
	for k := range got {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var sb strings.Builder
	for _, k := range keys {
		sb.WriteString(k + " " + got[k] + "\n")
	}
	if err := os.WriteFile(goldenFile, []byte(sb.String()), 0o644); err != nil {
		t.Fatal(err)
	}
}
