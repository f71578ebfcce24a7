package config

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func writeFiles(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	for _, f := range []string{"s.yaml", "m.yaml"} {
		if err := os.WriteFile(filepath.Join(dir, f), []byte("x"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

func TestParseValid(t *testing.T) {
	dir := writeFiles(t)
	file := filepath.Join(dir, "monitor.yaml")
	c, err := Parse(file, []byte(`
database: data.db
retention: {readings: 400d, results: 1d12h}
broker: {url: "tcp://127.0.0.1:1883", client_id: site1}
epochs: {window: 2s, max_lateness: 10s, missing_load: estimate}
ingest: {max_ahead: 2m, max_behind: 7d, max_dead_letters: 1000}
structures:
  - {structure: s.yaml, sensors: m.yaml}
`))
	if err != nil {
		t.Fatal(err)
	}
	if c.Database != filepath.Join(dir, "data.db") {
		t.Errorf("database = %q, want it relative to the file's folder", c.Database)
	}
	if c.Retention.Readings.D() != 400*24*time.Hour || c.Retention.Results.D() != 36*time.Hour {
		t.Errorf("retention = %v", c.Retention)
	}
	if c.Epochs.Window.D() != 2*time.Second || c.Epochs.MissingLoad != "estimate" {
		t.Errorf("epochs = %+v", c.Epochs)
	}
	if c.Ingest.MaxAhead.D() != 2*time.Minute || c.Ingest.MaxBehind.D() != 7*24*time.Hour || c.Ingest.MaxDeadLetters != 1000 {
		t.Errorf("ingest = %+v", c.Ingest)
	}
	if c.HTTP.Listen != "127.0.0.1:9470" {
		t.Errorf("default http.listen = %q", c.HTTP.Listen)
	}
}

func TestParseErrorsNameTheField(t *testing.T) {
	dir := writeFiles(t)
	file := filepath.Join(dir, "monitor.yaml")
	tests := []struct {
		name, yaml string
		want       []string
	}{
		{"unknown field", "databse: x\nstructures: [{structure: s.yaml, sensors: m.yaml}]\n", []string{"line 1", "databse"}},
		{"bad duration", "epochs: {window: fast}\nstructures: [{structure: s.yaml, sensors: m.yaml}]\n", []string{"line 1", "fast"}},
		{"bad missing_load", "epochs: {missing_load: guess}\nstructures: [{structure: s.yaml, sensors: m.yaml}]\n", []string{"epochs.missing_load", "guess"}},
		{"no structures", "database: x\n", []string{"structures", "empty"}},
		{"missing structure file", "structures: [{structure: nope.yaml, sensors: m.yaml}]\n", []string{"structures[0].structure", "nope.yaml"}},
		{"bad scheme", "broker: {url: \"http://h:1\"}\nstructures: [{structure: s.yaml, sensors: m.yaml}]\n", []string{"broker.url", "http"}},
		{"half tls", "broker: {tls: {cert_file: c.pem}}\nstructures: [{structure: s.yaml, sensors: m.yaml}]\n", []string{"broker.tls", "key_file"}},
		{"negative dead-letter cap", "ingest: {max_dead_letters: -1}\nstructures: [{structure: s.yaml, sensors: m.yaml}]\n", []string{"ingest.max_dead_letters"}},
		{"negative reconciliation queue", "epochs: {queue_readings: -1}\nstructures: [{structure: s.yaml, sensors: m.yaml}]\n", []string{"epochs.queue_readings", "negative"}},
		{"bad listen", "http: {listen: nowhere}\nstructures: [{structure: s.yaml, sensors: m.yaml}]\n", []string{"http.listen", "nowhere"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Parse(file, []byte(tc.yaml))
			if err == nil {
				t.Fatal("no error")
			}
			msg := err.Error()
			if !strings.Contains(msg, file) {
				t.Errorf("error %q does not name the file", msg)
			}
			for _, w := range tc.want {
				if !strings.Contains(msg, w) {
					t.Errorf("error %q does not contain %q", msg, w)
				}
			}
		})
	}
}
