package main

import (
	"bytes"
	"context"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/store"
)

// TestImportGzipThenReplayWithoutStructure: monitor import reads the
// recorded day as shipped (.gz) and stores the model version it imported
// against, so monitor replay of that store needs no --structure (issue 10,
// defect 12).
func TestImportGzipThenReplayWithoutStructure(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "monitor.db")
	var out, errb bytes.Buffer
	if code := runImport(context.Background(), []string{"--db", db, "--structure", "../../testdata/footbridge/structure.yaml",
		"--sensors", "../../testdata/footbridge/sensors.yaml", "../../testdata/replay/footbridge-day.csv.gz"}, &out, &errb); code != 0 {
		t.Fatalf("import of the .gz: exit %d: %s", code, errb.String())
	}
	if !strings.Contains(out.String(), "read 66240, stored 66240") {
		t.Errorf("import summary %q; want all 66240 readings of the day stored", out.String())
	}
	code, stdout, stderr := replayCmd("--db", db, "--from", "2026-06-01T13:00:00Z", "--to", "2026-06-01T15:00:00Z",
		"--sensors", "../../testdata/footbridge/sensors.yaml", "--out", filepath.Join(dir, "report"), "--window", "60s")
	if code != 0 {
		t.Fatalf("replay without --structure: exit %d: %s", code, stderr)
	}
	for _, want := range []string{"structure:  alder-creek", "readings:   5520 of 5520", "MemberDiverging 1"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("replay output lacks %q:\n%s", want, stdout)
		}
	}
}

// TestDeadLettersCommand lists dead letters with time, topic, reason and
// excerpt, filtered by time and reason (issue 10, defect 12).
func TestDeadLettersCommand(t *testing.T) {
	db := filepath.Join(t.TempDir(), "monitor.db")
	st, err := store.Open(db, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	for i, d := range []store.DeadLetter{
		{Topic: "shm/alder-creek/B2_a", Received: t0, Reason: "malformed_json", Detail: "unexpected end of JSON", Payload: []byte(`[{"v":1.0,`)},
		{Topic: "shm/alder-creek/B2_a", Received: t0.Add(time.Second), Reason: "malformed_json", Detail: "unexpected end of JSON", Payload: []byte(`[{"v":1.0,`)},
		{Topic: "shm/forged/g00", Received: t0.Add(time.Hour), Reason: "unknown_structure", Detail: "structure \"forged\" is not configured", Payload: []byte(`[{"v":2}]`)},
	} {
		if err := st.DeadLetter(context.Background(), d); err != nil {
			t.Fatalf("dead letter %d: %v", i, err)
		}
	}
	st.Close()
	run := func(args ...string) (int, string, string) {
		var out, errb bytes.Buffer
		code := runDeadLetters(context.Background(), args, &out, &errb)
		return code, out.String(), errb.String()
	}
	code, out, errs := run("--db", db)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	for _, want := range []string{"2026-06-01T12:00:00Z", "shm/alder-creek/B2_a", "malformed_json", `[{\"v\":1.0,`, "x2", "unknown_structure", "2 dead letters (3 received)"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}
	_, out, _ = run("--db", db, "--reason", "unknown_structure")
	if strings.Contains(out, "malformed_json") || !strings.Contains(out, "shm/forged/g00") {
		t.Errorf("--reason unknown_structure:\n%s", out)
	}
	_, out, _ = run("--db", db, "--since", "2026-06-01T12:30:00Z")
	if strings.Contains(out, "malformed_json") || !strings.Contains(out, "unknown_structure") {
		t.Errorf("--since:\n%s", out)
	}
	if code, _, errs := run("--db", db, "--since", "yesterday"); code != 2 || !strings.Contains(errs, "--since") {
		t.Errorf("bad --since: exit %d, %q", code, errs)
	}
	if code, _, _ := run(); code != 2 {
		t.Errorf("no --db: exit %d, want 2", code)
	}
}
