package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestRulesCommand(t *testing.T) {
	out := filepath.Join(t.TempDir(), "rules.yml")
	var stdout, stderr bytes.Buffer
	code := runRules(context.Background(), []string{"--out", out,
		"../../testdata/footbridge/structure.yaml", "../../testdata/roof/structure.yaml"}, &stdout, &stderr)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr.String())
	}
	got, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	want, err := os.ReadFile("../../deploy/prometheus/rules/trussmonitor.rules.yml")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, want) {
		t.Error("monitor rules output differs from deploy/prometheus/rules/trussmonitor.rules.yml")
	}
	stderr.Reset()
	if code := runRules(context.Background(), nil, &stdout, &stderr); code != 2 || !strings.Contains(stderr.String(), "no structure file") {
		t.Errorf("no arguments: exit %d, %q", code, stderr.String())
	}
	stderr.Reset()
	if code := runRules(context.Background(), []string{"missing.yaml"}, &stdout, &stderr); code != 1 || !strings.Contains(stderr.String(), "missing.yaml") {
		t.Errorf("missing file: exit %d, %q", code, stderr.String())
	}
}
