package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/store"
)

// replayCmd runs "monitor replay" with args.
func replayCmd(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := runReplay(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

// importedDay imports the recorded day of testdata/replay with "monitor
// import" into a new store and returns its path.
func importedDay(t *testing.T) string {
	t.Helper()
	data := gunzip(t, "../../testdata/replay/footbridge-day.csv.gz")
	dir := t.TempDir()
	csvPath := filepath.Join(dir, "day.csv")
	if err := os.WriteFile(csvPath, data, 0o644); err != nil {
		t.Fatal(err)
	}
	db := filepath.Join(dir, "monitor.db")
	var out, errb bytes.Buffer
	if code := runImport(context.Background(), []string{"--db", db, "--structure", "../../testdata/footbridge/structure.yaml",
		"--sensors", "../../testdata/footbridge/sensors.yaml", csvPath}, &out, &errb); code != 0 {
		t.Fatalf("import: exit %d: %s", code, errb.String())
	}
	return db
}

// TestReplayCommand imports the recorded day and replays the afternoon of
// the fault against the structure file given (the same as the model version
// the import stored).
func TestReplayCommand(t *testing.T) {
	db := importedDay(t)
	out := filepath.Join(t.TempDir(), "report")
	code, stdout, stderr := replayCmd("--db", db, "--from", "2026-06-01T13:00:00Z", "--to", "2026-06-01T15:00:00Z",
		"--sensors", "../../testdata/footbridge/sensors.yaml", "--structure", "../../testdata/footbridge/structure.yaml",
		"--out", out, "--window", "60s")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	t.Log(stdout)
	for _, want := range []string{"structure:  alder-creek", "readings:   5520 of 5520", "epochs:     120", "MemberDiverging 1", "not a safety verdict"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("output lacks %q", want)
		}
	}
	if stderr != "" {
		t.Errorf("stderr not empty on a pipe (no progress expected): %q", stderr)
	}
	for _, f := range []string{"index.html", "epochs.csv", "events.csv"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Error(err)
		}
	}
}

// TestReplayFlagErrors checks the command's errors for missing and bad
// flags and for an empty period.
func TestReplayFlagErrors(t *testing.T) {
	db := importedDay(t)
	sens := "../../testdata/footbridge/sensors.yaml"
	cases := []struct {
		name string
		args []string
		code int
		want []string
	}{
		{"nothing", nil, 2, []string{"missing --db, --from, --sensors, --to"}},
		{"bad from", []string{"--db", db, "--from", "2026-06-01 13:00", "--to", "2026-06-02T00:00:00Z", "--sensors", sens}, 2,
			[]string{`--from "2026-06-01 13:00" is not an RFC 3339 time`, "2026-06-01T14:00:00Z"}},
		{"date only", []string{"--db", db, "--from", "2026-06-01", "--to", "2026-06-02T00:00:00Z", "--sensors", sens}, 2,
			[]string{"not an RFC 3339 time"}},
		{"reversed", []string{"--db", db, "--from", "2026-06-02T00:00:00Z", "--to", "2026-06-01T00:00:00Z", "--sensors", sens}, 2,
			[]string{"is not after --from"}},
		{"bad window", []string{"--db", db, "--from", "2026-06-01T00:00:00Z", "--to", "2026-06-02T00:00:00Z", "--sensors", sens, "--window", "0s"}, 2,
			[]string{"--window 0s"}},
		{"bad missing-load", []string{"--db", db, "--from", "2026-06-01T00:00:00Z", "--to", "2026-06-02T00:00:00Z", "--sensors", sens, "--missing-load", "guess"}, 2,
			[]string{"want skip or estimate"}},
		{"stray argument", []string{"--db", db, "--from", "2026-06-01T00:00:00Z", "--to", "2026-06-02T00:00:00Z", "--sensors", sens, "extra"}, 2,
			[]string{`unexpected argument "extra"`}},
		{"no store", []string{"--db", filepath.Join(t.TempDir(), "none.db"), "--from", "2026-06-01T00:00:00Z", "--to", "2026-06-02T00:00:00Z", "--sensors", sens}, 1,
			[]string{"none.db", "monitor import"}},
		{"no model", []string{"--db", noModelStore(t), "--from", "2026-06-01T00:00:00Z", "--to", "2026-06-02T00:00:00Z", "--sensors", sens}, 1,
			[]string{"no model version", "--structure FILE"}},
		{"empty period", []string{"--db", db, "--from", "2026-06-03T00:00:00Z", "--to", "2026-06-04T00:00:00Z", "--sensors", sens,
			"--structure", "../../testdata/footbridge/structure.yaml", "--out", t.TempDir()}, 1,
			[]string{"no readings of structure \"alder-creek\" in [2026-06-03T00:00:00Z, 2026-06-04T00:00:00Z)", "66240 readings", "from 2026-06-01T00:00:00Z to 2026-06-01T23:59:00Z"}},
		{"sensor map of another structure", []string{"--db", db, "--from", "2026-06-01T00:00:00Z", "--to", "2026-06-02T00:00:00Z",
			"--sensors", "../../testdata/roof/sensors.yaml", "--structure", "../../testdata/footbridge/structure.yaml", "--out", t.TempDir()}, 1,
			[]string{"give the sensor map of the same structure"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			code, _, stderr := replayCmd(c.args...)
			if code != c.code {
				t.Errorf("exit %d, want %d; stderr %s", code, c.code, stderr)
			}
			for _, w := range c.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr %q lacks %q", stderr, w)
				}
			}
		})
	}
}

// noModelStore is a store holding one reading of the footbridge and no
// model version (as written by the service before it stored models).
func noModelStore(t *testing.T) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "no-model.db")
	st, err := store.Open(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if _, err := st.InsertReadings(context.Background(), "alder-creek", []store.Reading{{Channel: "B2_a", Time: time.Date(2026, 6, 1, 1, 0, 0, 0, time.UTC), Value: 1e-5}}); err != nil {
		t.Fatal(err)
	}
	return path
}
