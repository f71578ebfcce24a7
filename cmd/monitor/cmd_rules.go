package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/config"
	"trussmonitor/internal/settings"
	"trussmonitor/internal/structfile"
)

// runRules writes the alarm rules of the named structures as a Prometheus
// alerting-rules file: monitor rules [--config FILE] [--out FILE]
// [STRUCTURE-FILE...]. With --config the structures and the thresholds are
// the configuration's (the same settings.FromConfig as `monitor run`);
// without it, the thresholds are those of the default configuration.
func runRules(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("monitor rules", flag.ContinueOnError)
	fs.SetOutput(stderr)
	out := fs.String("out", "", "write the rules to `FILE` (default: standard output)")
	cfgPath := fs.String("config", "", "service configuration (`FILE`): its structures and its alarm limits")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor rules [--config FILE] [--out FILE] [STRUCTURE-FILE...]")
		fmt.Fprintln(stderr, "Writes the monitor's alarm rules as a Prometheus alerting-rules file, one group per structure,")
		fmt.Fprintln(stderr, "with the thresholds and for-durations that `monitor run --config FILE` applies in-process")
		fmt.Fprintln(stderr, "(without --config: those of a configuration that leaves the alarms section out).")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if err == flag.ErrHelp {
			return 0
		}
		return 2
	}
	files := fs.Args()
	set, err := settings.Defaults()
	if *cfgPath != "" {
		var cfg *config.Config
		if cfg, err = config.Load(*cfgPath); err == nil {
			set, err = settings.FromConfig(cfg)
			for _, s := range cfg.Structures {
				files = append(files, s.Structure)
			}
		}
	}
	if err != nil {
		fmt.Fprintf(stderr, "monitor rules: %v\n", err)
		return 1
	}
	if len(files) == 0 {
		fmt.Fprintln(stderr, "monitor rules: no structure file given; name at least one (for example testdata/footbridge/structure.yaml) or give --config")
		fs.Usage()
		return 2
	}
	var names []string
	for _, path := range files {
		s, err := structfile.LoadFile(path)
		if err != nil {
			fmt.Fprintf(stderr, "monitor rules: %v\n", err)
			return 1
		}
		names = append(names, s.Name)
	}
	data, err := alerts.PrometheusRulesFor(set.Rules, names)
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
