package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"maps"
	"os"
	"slices"
	"sort"
	"strings"
	"time"

	"golang.org/x/term"

	"trussmonitor/internal/config"
	"trussmonitor/internal/replay"
	"trussmonitor/internal/report"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/settings"
	"trussmonitor/internal/structfile"
)

// runReplay implements "monitor replay --db FILE --from TIME --to TIME
// --sensors FILE [--structure FILE] [--model FILE] [--out DIR] [--window D]
// [--max-lateness D] [--missing-load skip|estimate]": it feeds the stored
// readings of the period through the live pipeline at full speed and writes
// the report folder.
func runReplay(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("monitor replay", flag.ContinueOnError)
	fs.SetOutput(stderr)
	dbPath := fs.String("db", "", "reading store (SQLite file)")
	fromText := fs.String("from", "", "start of the period, RFC 3339 (e.g. 2026-06-01T00:00:00Z), included")
	toText := fs.String("to", "", "end of the period, RFC 3339, excluded")
	sensorPath := fs.String("sensors", "", "sensor map of the structure (YAML)")
	structPath := fs.String("structure", "", "structure file: names the structure, and is the model when the store holds no model version for the period")
	modelPath := fs.String("model", "", "structure file to replay against instead of the stored model version (what-if)")
	outDir := fs.String("out", "", "report folder (default replay-<structure>-<from>)")
	cfgPath := fs.String("config", "", "service configuration (`FILE`) whose epoch, statistics and alarm settings the replay applies, as `monitor run --config` does")
	def, err := settings.Defaults()
	if err != nil {
		fmt.Fprintf(stderr, "monitor replay: %v\n", err)
		return 1
	}
	window := fs.Duration("window", def.Window, "epoch window (not with --config)")
	lateness := fs.Duration("max-lateness", def.MaxLateness, "how far behind the newest reading a reading may arrive and still join its epoch (not with --config)")
	missingLoad := fs.String("missing-load", "skip", "an epoch with a load channel missing: skip it, or estimate the pattern (not with --config)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor replay --db FILE --from TIME --to TIME --sensors FILE [--config FILE] [--structure FILE] [--model FILE] [--out DIR]")
		fmt.Fprintln(stderr, "Replays the stored readings of a period through the monitoring pipeline and writes a report")
		fmt.Fprintln(stderr, "folder (index.html, epochs.csv, events.csv, members.csv). Times are RFC 3339, e.g. 2026-06-01T14:00:00Z.")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	from, to, problems := periodFlags(fs, map[string]string{"--db": *dbPath, "--from": *fromText, "--to": *toText, "--sensors": *sensorPath}, *fromText, *toText)
	if *window <= 0 {
		problems = append(problems, fmt.Sprintf("--window %v: give a positive duration such as 1s or 60s", *window))
	}
	if *lateness < 0 {
		problems = append(problems, fmt.Sprintf("--max-lateness %v: give a duration of 0 or more", *lateness))
	}
	if *missingLoad != "skip" && *missingLoad != "estimate" {
		problems = append(problems, fmt.Sprintf("--missing-load %q: want skip or estimate", *missingLoad))
	}
	set := def
	set.Window, set.MaxLateness, set.EstimateMissingLoads = *window, *lateness, *missingLoad == "estimate"
	if *cfgPath != "" {
		fs.Visit(func(f *flag.Flag) {
			switch f.Name {
			case "window", "max-lateness", "missing-load":
				problems = append(problems, fmt.Sprintf("--%s and --config both set the epoch settings; give one (the configuration's epochs section, or the flag)", f.Name))
			}
		})
		if cfg, err := config.Load(*cfgPath); err != nil {
			problems = append(problems, err.Error())
		} else if set, err = settings.FromConfig(cfg); err != nil {
			problems = append(problems, err.Error())
		}
	}
	if len(problems) > 0 {
		for _, p := range problems {
			fmt.Fprintf(stderr, "monitor replay: %s\n", p)
		}
		fs.Usage()
		return 2
	}
	opt := replay.Options{
		DB: *dbPath, From: from, To: to, SensorsFile: *sensorPath, StructureFile: *structPath,
		ModelFile: *modelPath, OutDir: *outDir, Window: set.Window, MaxLateness: set.MaxLateness,
		EstimateMissingLoads: set.EstimateMissingLoads, Rules: set.Rules,
	}
	if f, ok := stderr.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		opt.Progress = stderr
	}
	if opt.OutDir == "" {
		name, err := replayStructureName(*structPath, *sensorPath)
		if err != nil {
			fmt.Fprintf(stderr, "monitor replay: %v\n", err)
			return 1
		}
		opt.OutDir = "replay-" + name + "-" + from.UTC().Format("20060102T150405Z")
	}
	sum, err := replay.Run(ctx, opt)
	if err != nil {
		fmt.Fprintf(stderr, "monitor replay: %v\n", err)
		return 1
	}
	for _, w := range sum.Warnings {
		fmt.Fprintf(stderr, "monitor replay: note: %s\n", w)
	}
	printReplaySummary(stdout, sum)
	return 0
}

// parseReplayTime reads an RFC 3339 time; "" gives the zero time (reported
// as missing by the caller).
func parseReplayTime(flagName, s string) (time.Time, error) {
	if s == "" {
		return time.Time{}, nil
	}
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}, fmt.Errorf("%s %q is not an RFC 3339 time; write it like 2026-06-01T14:00:00Z (UTC) or 2026-06-01T16:00:00+02:00", flagName, s)
	}
	return t, nil
}

// replayStructureName names the structure for the default report folder:
// the structure file's name, else the one the sensor map names.
func replayStructureName(structPath, sensorPath string) (string, error) {
	data, err := os.ReadFile(sensorPath)
	if err != nil {
		return "", fmt.Errorf("sensor map: %w", err)
	}
	if name := sensors.StructureNameOf(data); name != "" {
		return name, nil
	}
	if structPath != "" {
		st, err := structfile.LoadFile(structPath)
		if err != nil {
			return "", err
		}
		return st.Name, nil
	}
	return "", fmt.Errorf("sensor map %s does not name its structure; give --structure FILE or --out DIR", sensorPath)
}

func printReplaySummary(w io.Writer, s *replay.Summary) {
	fmt.Fprintf(w, "structure:  %s\n", s.Structure)
	fmt.Fprintf(w, "model:      %s\n            from %s\n", s.ModelVersion, s.ModelSource)
	fmt.Fprintf(w, "period:     %s to %s\n", s.From.Format(time.RFC3339Nano), s.To.Format(time.RFC3339Nano))
	fmt.Fprintf(w, "readings:   %d of %d stored (%d not converted, %d late)\n", s.Readings, s.Total, s.ConvertErrors, s.Late)
	keys := make([]string, 0, len(s.ByOutcome))
	for k := range s.ByOutcome {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = fmt.Sprintf("%s %d", k, s.ByOutcome[k])
	}
	fmt.Fprintf(w, "epochs:     %d (%s)\n", s.Epochs, strings.Join(parts, ", "))
	rules := slices.Sorted(maps.Keys(s.Raised))
	raised := make([]string, len(rules))
	nRaised := 0
	for i, r := range rules {
		raised[i] = fmt.Sprintf("%s %d", r, s.Raised[r])
		nRaised += s.Raised[r]
	}
	if len(raised) == 0 {
		fmt.Fprintf(w, "alarms:     none raised (%s)\n", plural(s.Events, "event", "events"))
	} else {
		// events = raised + cleared, so the numbers add up.
		fmt.Fprintf(w, "alarms:     %d raised (%s), %d cleared: %s\n", nRaised, strings.Join(raised, ", "), s.Events-nRaised, plural(s.Events, "event", "events"))
	}
	if s.OutDir != "" {
		files := []string{report.HTMLFile, report.EpochsFile, report.EventsFile}
		if s.Report != nil && len(s.Report.MemberSummaries) > 0 {
			files = append(files, report.MembersFile)
		}
		fmt.Fprintf(w, "report:     %s (%s)\n", s.OutDir, strings.Join(files, ", "))
	}
	rate := 0.0
	if sec := s.Elapsed.Seconds(); sec > 0 {
		rate = float64(s.Readings) / sec
	}
	fmt.Fprintf(w, "took:       %s (%.0f readings/s)\n", s.Elapsed.Round(time.Millisecond), rate)
	fmt.Fprintln(w, report.Caution)
}
