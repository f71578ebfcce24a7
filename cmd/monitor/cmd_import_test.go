package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/store"
)

// TestImportCSV imports a small Alder Creek logger file twice into a real
// SQLite store: the first run stores the valid readings and rejects the bad
// ones by reason, the second finds only duplicates.
func TestImportCSV(t *testing.T) {
	dir := t.TempDir()
	csvPath := filepath.Join(dir, "logger.csv")
	csv := "# Alder Creek export\n" +
		"time,B2_a,T3_a,pad_1,temp_top,nope\n" +
		"unit,/,Hz,N,Cel,/\n" +
		"2026-12-02T01:00:00Z,1.25e-4,812.4,1503,14.9,1\n" + // nope: unknown_channel
		"1796173201,1.26e-4,-3,1498,NaN,\n" + // T3_a out_of_range, temp_top not_finite
		"1796173202,,812.6,,15.0,\n"
	if err := os.WriteFile(csvPath, []byte(csv), 0o600); err != nil {
		t.Fatal(err)
	}
	db := filepath.Join(dir, "monitor.db")
	args := []string{"--db", db,
		"--structure", filepath.Join("..", "..", "testdata", "footbridge", "structure.yaml"),
		"--sensors", filepath.Join("..", "..", "testdata", "footbridge", "sensors.yaml"),
		"--batch", "3", csvPath}

	var out, errb bytes.Buffer
	if code := runImport(context.Background(), args, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	want := "read 11, stored 8, duplicates 0, rejected 3 (not_finite 1, out_of_range 1, unknown_channel 1)"
	if !strings.Contains(out.String(), want) {
		t.Errorf("summary %q lacks %q", out.String(), want)
	}
	// import stores the model version too: replay needs no --structure.
	if s := out.String(); !strings.Contains(s, "needs no --structure") || !strings.Contains(s, "monitor replay --db "+db) || strings.Contains(s, "--structure ../") {
		t.Errorf("summary %q does not say how to replay", s)
	}
	if errb.Len() != 0 {
		t.Errorf("stderr not empty (not a terminal, no progress bar expected): %q", errb.String())
	}

	out.Reset()
	if code := runImport(context.Background(), args, &out, &errb); code != 0 {
		t.Fatalf("second run exit %d: %s", code, errb.String())
	}
	if !strings.Contains(out.String(), "read 11, stored 0, duplicates 8, rejected 3") {
		t.Errorf("second summary %q", out.String())
	}

	s, err := store.Open(db, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	n, err := s.CountReadings(context.Background(), "alder-creek", time.Unix(1796173200, 0), time.Unix(1796173300, 0))
	if err != nil || n != 8 {
		t.Errorf("store holds %d readings (%v), want 8", n, err)
	}
	dl, err := s.CountDeadLetters(context.Background())
	if err != nil || dl["unknown_channel"] != 2 || dl["out_of_range"] != 2 {
		t.Errorf("dead letters %v (%v), want 2 per reason after two runs", dl, err)
	}
}

func TestImportErrors(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.csv")
	os.WriteFile(bad, []byte("time,B2_a\n1796173200,1e-4\n1796173201,x\n"), 0o600)
	base := []string{"--db", filepath.Join(dir, "m.db"),
		"--structure", filepath.Join("..", "..", "testdata", "footbridge", "structure.yaml"),
		"--sensors", filepath.Join("..", "..", "testdata", "footbridge", "sensors.yaml")}
	tests := []struct {
		name string
		args []string
		code int
		msg  string
	}{
		{"no files", base, 2, "no CSV file given"},
		{"no db", []string{"--structure", "x", "--sensors", "y", bad}, 2, "missing --db"},
		{"wrong pair", []string{"--db", filepath.Join(dir, "m.db"),
			"--structure", filepath.Join("..", "..", "testdata", "footbridge", "structure.yaml"),
			"--sensors", filepath.Join("..", "..", "testdata", "roof", "sensors.yaml"), bad}, 1, "harbour-hall"},
		{"bad row", append(append([]string{}, base...), bad), 1, "line 3, column 2 (B2_a)"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var out, errb bytes.Buffer
			code := runImport(context.Background(), tc.args, &out, &errb)
			if code != tc.code || !strings.Contains(errb.String(), tc.msg) {
				t.Errorf("exit %d, stderr %q; want %d with %q", code, errb.String(), tc.code, tc.msg)
			}
		})
	}
}

// TestImportInterrupted cancels the context before the import: the first
// batch is still committed, and the command reports the interruption.
func TestImportInterrupted(t *testing.T) {
	dir := t.TempDir()
	csvPath := filepath.Join(dir, "logger.csv")
	var sb strings.Builder
	sb.WriteString("time,temp_top\n")
	for i := 0; i < 20; i++ {
		sb.WriteString(strconv.Itoa(1796173200+i) + ",15\n")
	}
	os.WriteFile(csvPath, []byte(sb.String()), 0o600)
	db := filepath.Join(dir, "m.db")
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	var out, errb bytes.Buffer
	code := runImport(ctx, []string{"--db", db,
		"--structure", filepath.Join("..", "..", "testdata", "footbridge", "structure.yaml"),
		"--sensors", filepath.Join("..", "..", "testdata", "footbridge", "sensors.yaml"),
		"--batch", "5", csvPath}, &out, &errb)
	if code != 1 || !strings.Contains(errb.String(), "interrupted") {
		t.Fatalf("exit %d, stderr %q", code, errb.String())
	}
	if !strings.Contains(out.String(), "read 5, stored 5") {
		t.Errorf("summary %q: the batch read before the interrupt must be stored", out.String())
	}
}

// TestImportTimeOutsideTheStore: a time the store cannot keep is a dead
// letter bad_time, the same decision (ingest.Admit against
// store.StorableRange) for an RFC 3339 time and for Unix seconds; before,
// the seconds form had a range of its own (about 1685 to 2255) and stopped
// the file as a parse error.
func TestImportTimeOutsideTheStore(t *testing.T) {
	dir := t.TempDir()
	csvPath := filepath.Join(dir, "logger.csv")
	csv := "time,B2_a\n" +
		"9999-01-01T00:00:00Z,1e-4\n" +
		"99999999999,1e-4\n" +
		"1796173200,1e-4\n"
	if err := os.WriteFile(csvPath, []byte(csv), 0o600); err != nil {
		t.Fatal(err)
	}
	args := []string{"--db", filepath.Join(dir, "m.db"),
		"--structure", filepath.Join("..", "..", "testdata", "footbridge", "structure.yaml"),
		"--sensors", filepath.Join("..", "..", "testdata", "footbridge", "sensors.yaml"),
		csvPath}
	var out, errb bytes.Buffer
	if code := runImport(context.Background(), args, &out, &errb); code != 0 {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	if want := "read 3, stored 1, duplicates 0, rejected 2 (bad_time 2)"; !strings.Contains(out.String(), want) {
		t.Errorf("summary %q lacks %q", out.String(), want)
	}
}
