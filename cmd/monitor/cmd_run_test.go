package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestRunCheckConfig: --check-config validates the configuration and the
// files it names, and reports the field of a bad one.
func TestRunCheckConfig(t *testing.T) {
	var out, errb bytes.Buffer
	if code := dispatch(context.Background(), []string{"run", "--config", "../../testdata/service/monitor.yaml", "--check-config"}, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	if !strings.Contains(out.String(), "structure alder-creek: 18 nodes, 35 members") || !strings.Contains(out.String(), "configuration ok") {
		t.Errorf("output: %q", out.String())
	}
	bad := filepath.Join(t.TempDir(), "bad.yaml")
	if err := os.WriteFile(bad, []byte("epochs: {missing_load: guess}\nstructures: []\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	out.Reset()
	errb.Reset()
	if code := dispatch(context.Background(), []string{"run", "--config", bad, "--check-config"}, &out, &errb); code != 1 {
		t.Fatalf("bad config: exit %d, want 1", code)
	}
	for _, want := range []string{bad, "epochs.missing_load", "structures"} {
		if !strings.Contains(errb.String(), want) {
			t.Errorf("error %q lacks %q", errb.String(), want)
		}
	}
	if code := dispatch(context.Background(), []string{"run"}, &out, &errb); code != 2 {
		t.Errorf("no --config: exit %d, want 2", code)
	}
}
