package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/structfile"
)

// runRules writes the alarm rules of the named structures as a Prometheus
// alerting-rules file: monitor rules [--out FILE] STRUCTURE-FILE...
func runRules(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("monitor rules", flag.ContinueOnError)
	fs.SetOutput(stderr)
	out := fs.String("out", "", "write the rules to `FILE` (default: standard output)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor rules [--out FILE] STRUCTURE-FILE...")
		fmt.Fprintln(stderr, "Writes the monitor's alarm rules (same thresholds and for-durations as the service's")
		fmt.Fprintln(stderr, "in-process alarms) as a Prometheus alerting-rules file, one group per structure.")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if err == flag.ErrHelp {
			return 0
		}
		return 2
	}
	if fs.NArg() == 0 {
		fmt.Fprintln(stderr, "monitor rules: no structure file given; name at least one (for example testdata/footbridge/structure.yaml)")
		fs.Usage()
		return 2
	}
	var names []string
	for _, path := range fs.Args() {
		s, err := structfile.LoadFile(path)
		if err != nil {
			fmt.Fprintf(stderr, "monitor rules: %v\n", err)
			return 1
		}
		names = append(names, s.Name)
	}
	data, err := alerts.PrometheusRules(names)
	if err != nil {
		fmt.Fprintf(stderr, "monitor rules: %v\n", err)
		return 1
	}
	if *out == "" {
		if _, err := stdout.Write(data); err != nil {
			fmt.Fprintf(stderr, "monitor rules: writing standard output: %v\n", err)
			return 1
		}
		return 0
	}
	if err := writeFileAtomic(*out, data); err != nil {
		fmt.Fprintf(stderr, "monitor rules: %v\n", err)
		return 1
	}
	fmt.Fprintf(stderr, "monitor rules: wrote %s (%s)\n", *out, plural(len(names), "structure", "structures"))
	return 0
}

// writeFileAtomic writes data to a temporary file beside path and renames
// it into place, so Prometheus never reads a half-written rules file.
func writeFileAtomic(path string, data []byte) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*")
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		os.Remove(tmp.Name())
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := tmp.Close(); err != nil {
		os.Remove(tmp.Name())
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := os.Chmod(tmp.Name(), 0o644); err != nil {
		os.Remove(tmp.Name())
		return fmt.Errorf("writing %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		os.Remove(tmp.Name())
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}
