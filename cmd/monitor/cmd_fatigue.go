package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"text/tabwriter"
	"time"

	"trussmonitor/internal/fatigue"
	"trussmonitor/internal/fatiguetrack"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
	"trussmonitor/internal/structfile"
)

// runFatigue implements "monitor fatigue --db FILE --from TIME --to TIME
// --sensors FILE [--structure FILE] [--raw]": per fatigue gauge, the damage
// of the period, accumulated since the gauge's start, the recent daily rate
// and the projected remaining life, recomputed from the stored hourly
// histograms (or, with --raw, recounted from the raw readings still kept).
func runFatigue(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("monitor fatigue", flag.ContinueOnError)
	fs.SetOutput(stderr)
	dbPath := fs.String("db", "", "reading store (SQLite file)")
	fromText := fs.String("from", "", "start of the period, RFC 3339 (e.g. 2026-06-01T00:00:00Z), included")
	toText := fs.String("to", "", "end of the period, RFC 3339, excluded")
	sensorPath := fs.String("sensors", "", "sensor map of the structure (YAML): which gauges count fatigue, their detail categories and partial factors")
	structPath := fs.String("structure", "", "structure file (default: the model version stored for the end of the period)")
	raw := fs.Bool("raw", false, "recount from the raw readings of the period (while they are kept) instead of the stored hourly histograms")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor fatigue --db FILE --from TIME --to TIME --sensors FILE [--structure FILE] [--raw]")
		fmt.Fprintln(stderr, "Prints, per fatigue gauge, the Miner damage per day and of the period, the damage accumulated since")
		fmt.Fprintln(stderr, "the gauge's start, the daily rate of the last 7 days and the projected remaining life.")
		fmt.Fprintln(stderr, fatigue.Caution)
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	from, to, problems := periodFlags(fs, map[string]string{"--db": *dbPath, "--from": *fromText, "--to": *toText, "--sensors": *sensorPath}, *fromText, *toText)
	if len(problems) > 0 {
		for _, p := range problems {
			fmt.Fprintf(stderr, "monitor fatigue: %s\n", p)
		}
		fs.Usage()
		return 2
	}
	if _, err := os.Stat(*dbPath); err != nil {
		fmt.Fprintf(stderr, "monitor fatigue: --db: %v\n", err)
		return 1
	}
	db, err := store.Open(*dbPath, store.Options{})
	if err != nil {
		fmt.Fprintf(stderr, "monitor fatigue: %v\n", err)
		return 1
	}
	defer db.Close()
	sm, err := fatigueSensorMap(ctx, db, *sensorPath, *structPath, to)
	if err != nil {
		fmt.Fprintf(stderr, "monitor fatigue: %v\n", err)
		return 1
	}
	gauges := sm.FatigueGauges()
	if len(gauges) == 0 {
		fmt.Fprintf(stderr, "monitor fatigue: the sensor map %s gives no gauge a fatigue block; add one (docs/sensor-map.md)\n", *sensorPath)
		return 1
	}
	var lives []fatiguetrack.GaugeLife
	source := "stored hourly stress-range histograms"
	if *raw {
		source = "raw readings of the period (counter started at the period's first reading)"
		lives, err = fatiguetrack.LivesFromRaw(ctx, db, sm.StructureName(), sm, gauges, from, to)
	} else {
		lives, err = fatiguetrack.Lives(ctx, db, sm.StructureName(), gauges, from, to)
	}
	if err != nil {
		fmt.Fprintf(stderr, "monitor fatigue: %v\n", err)
		return 1
	}
	printFatigue(stdout, sm.StructureName(), from, to, source, lives)
	return 0
}

// fatigueSensorMap loads the sensor map against the structure file, or the
// model version stored for the end of the period.
func fatigueSensorMap(ctx context.Context, db *store.Store, sensorPath, structPath string, to time.Time) (*sensors.Map, error) {
	data, err := os.ReadFile(sensorPath)
	if err != nil {
		return nil, fmt.Errorf("sensor map: %w", err)
	}
	var st *model.Structure
	source := structPath
	if structPath != "" {
		if st, err = structfile.LoadFile(structPath); err != nil {
			return nil, err
		}
	} else {
		name := sensors.StructureNameOf(data)
		if name == "" {
			return nil, fmt.Errorf("sensor map %s does not name its structure; give --structure FILE", sensorPath)
		}
		mv, err := db.ModelAt(ctx, name, to.Add(-time.Nanosecond))
		if err != nil {
			return nil, fmt.Errorf("no model version of %q stored for %s (%v); give --structure FILE", name, to.Format(time.RFC3339), err)
		}
		source = "stored model of " + name
		if st, err = structfile.Parse(source, mv.Content); err != nil {
			return nil, err
		}
	}
	return instrumented.SensorsFor(sensorPath, data, st, source)
}

// printFatigue writes the per-gauge table, the damage per day and the caution.
func printFatigue(w io.Writer, structure string, from, to time.Time, source string, lives []fatiguetrack.GaugeLife) {
	fmt.Fprintf(w, "structure: %s\n", structure)
	fmt.Fprintf(w, "period:    %s to %s\n", from.UTC().Format(time.RFC3339), to.UTC().Format(time.RFC3339))
	fmt.Fprintf(w, "source:    %s; EN 1993-1-9 S-N curves, Palmgren-Miner sum, bins of %g MPa\n", source, fatigue.BinWidth/1e6)
	fmt.Fprintf(w, "CAUTION:   %s\n\n", fatigue.Caution)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "gauge\tmember\tdetail\tgamma_Ff\tgamma_Mf\tstart\tcycles\tdamage in period\tdamage since start\tdaily rate\trate window\tremaining life\t")
	for _, l := range lives {
		g := l.Gauge
		start := "first reading"
		if !g.Fatigue.Start.IsZero() {
			start = g.Fatigue.Start.Format("2006-01-02")
		}
		fmt.Fprintf(tw, "%s\t%s\t%g MPa\t%.2f\t%.2f\t%s\t%.1f\t%.4e\t%.4e\t%.4e /d\t%.2f d\t%s\t\n",
			g.Channel, g.Member, g.Fatigue.Curve.DeltaSigmaC/1e6, g.Fatigue.Curve.GammaFf, g.Fatigue.Curve.GammaMf, start,
			l.Life.Cycles, l.Life.Total, l.Life.Accumulated, l.Life.RatePerDay, l.Life.WindowDays, yearsText(l.Life.RemainingYears))
	}
	tw.Flush()
	for _, l := range lives {
		fmt.Fprintf(w, "\n%s: damage per day (UTC)\n", l.Gauge.Channel)
		for _, d := range l.Life.Days {
			fmt.Fprintf(w, "  %s  cycles %10.1f  damage %.4e\n", d.Day.Format("2006-01-02"), d.Cycles, d.Damage)
		}
	}
}

func yearsText(y float64) string {
	switch {
	case math.IsInf(y, 1):
		return "no damage at the recent rate"
	case y > 1e6:
		return "> 1e6 years"
	}
	return fmt.Sprintf("%.1f years", y)
}
