package main

import (
	"bytes"
	"compress/gzip"
	"context"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trussmonitor/internal/simulate/loggercsv/loggercsvtest"
)

func gunzip(t *testing.T, path string) []byte {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	b, err := io.ReadAll(zr)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestSimulateReplayCommand runs the exact command of
// testdata/replay/README.md and compares its output with the recorded day.
func TestSimulateReplayCommand(t *testing.T) {
	out := filepath.Join(t.TempDir(), "day.csv.gz")
	args := []string{
		"--structure", "../../testdata/footbridge/structure.yaml",
		"--sensors", "../../testdata/footbridge/sensors.yaml",
		"--seed", "1", "--start", "2026-06-01T00:00:00Z", "--duration", "24h", "--rate", "60s",
		"--bad-rate", "0", "--fault", "stiffness:D2:14h:0.3", "--csv", out,
	}
	var stdout, stderr bytes.Buffer
	if code := runSimulate(context.Background(), args, &stdout, &stderr); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	if line, ok := loggercsvtest.SameWithin(gunzip(t, out), gunzip(t, "../../testdata/replay/footbridge-day.csv.gz"), 1e-6); !ok {
		t.Fatalf("line %d: "+"the README command no longer reproduces testdata/replay/footbridge-day.csv.gz; regenerate with go test ./internal/simulate/ -run TestReplayDay -update and update the README", line)
	}
	if !strings.Contains(stdout.String(), "1440 steps of 46 channels") {
		t.Fatalf("stdout %q", stdout.String())
	}
}

func TestSimulateFlagErrors(t *testing.T) {
	for _, tc := range []struct {
		args []string
		code int
		want string
	}{
		{[]string{}, 2, "--structure and --sensors are required"},
		{[]string{"--structure", "x", "--sensors", "y", "--fault", "crack:D2:1h"}, 2, `unknown kind "crack"`},
		{[]string{"--structure", "x", "--sensors", "y", "--start", "noon"}, 2, "not an RFC 3339 time"},
		{[]string{"--structure", "../../testdata/footbridge/structure.yaml", "--sensors", "../../testdata/roof/sensors.yaml"}, 1, ""},
		{[]string{"--structure", "../../testdata/footbridge/structure.yaml", "--sensors", "../../testdata/footbridge/sensors.yaml", "--fault", "stiffness:Z9:1h"}, 1, `member "Z9"`},
	} {
		var stdout, stderr bytes.Buffer
		code := runSimulate(context.Background(), tc.args, &stdout, &stderr)
		if code != tc.code || !strings.Contains(stderr.String(), tc.want) {
			t.Errorf("%v: exit %d, stderr %q; want exit %d mentioning %q", tc.args, code, stderr.String(), tc.code, tc.want)
		}
	}
}
