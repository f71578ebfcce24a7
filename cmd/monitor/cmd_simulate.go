package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"golang.org/x/term"

	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/loggercsv"
	"trussmonitor/internal/simulate/publish"
)

// faultFlags collects repeated --fault flags.
type faultFlags []simulate.Fault

func (f *faultFlags) String() string {
	parts := make([]string, len(*f))
	for i, x := range *f {
		parts[i] = x.String()
	}
	return strings.Join(parts, ",")
}

func (f *faultFlags) Set(s string) error {
	x, err := simulate.ParseFault(s)
	if err != nil {
		return err
	}
	*f = append(*f, x)
	return nil
}

// runSimulate implements "monitor simulate": it generates a seeded logger
// scenario for a structure and its sensor map and publishes it to an MQTT
// broker (SenML packs, QoS 1) or writes it as a logger CSV file.
func runSimulate(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	def := simulate.DefaultOptions()
	fs := flag.NewFlagSet("monitor simulate", flag.ContinueOnError)
	fs.SetOutput(stderr)
	broker := fs.String("broker", "tcp://127.0.0.1:1883", "MQTT broker URL")
	username := fs.String("username", "", "MQTT user name")
	password := fs.String("password", "", "MQTT password (or set TRUSSMON_MQTT_PASSWORD)")
	clientID := fs.String("client-id", "", "MQTT client id (default sim-<structure>)")
	perChannel := fs.Bool("per-channel", false, "publish each reading on shm/<structure>/<channel> instead of one pack per step on shm/<structure>")
	structPath := fs.String("structure", "", "structure file (YAML)")
	sensorPath := fs.String("sensors", "", "sensor map of the structure (YAML)")
	seed := fs.Uint64("seed", def.Seed, "random seed; the same seed and flags give the same readings")
	start := fs.String("start", def.Start.Format(time.RFC3339), "time stamp of the first reading (RFC 3339)")
	duration := fs.Duration("duration", def.Duration, "simulated span")
	rate := fs.Duration("rate", def.Rate, "interval between readings of each channel")
	speed := fs.Float64("speed", 1, "simulated time per wall time (60 = a simulated minute per second, 0 = as fast as possible)")
	badRate := fs.Float64("bad-rate", def.BadRate, "probability per channel and step of a bad message (malformed, NaN, unknown channel, wrong unit)")
	csvPath := fs.String("csv", "", "write a logger CSV file (gzip when the name ends in .gz) instead of publishing")
	highRate := fs.Duration("high-rate", 0, "publish instead the high-rate record of the gauges with a fatigue block, sampled at this interval (20ms = 50 Hz; pedestrian groups and a service vehicle), one SenML pack per second")
	var faults faultFlags
	fs.Var(&faults, "fault", "inject a fault KIND:TARGET:AT[:SIZE], repeatable: stiffness:D2:10m:0.3, drift:B4_a:2h:50e-6/h (a channel), drift:B2:2h:5kN/d (a member's gauges, as force), stuck:T4_a:1h, settlement:L8:3h:0.005, spring:L8:3h:-0.5 (AT: duration from --start or RFC 3339 time)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor simulate --structure FILE --sensors FILE [--broker URL] [--seed N] [--start RFC3339] [--duration 24h] [--rate 1s] [--speed 1] [--fault KIND:TARGET:AT[:SIZE]] [--bad-rate 0.001] [--csv FILE]")
		fmt.Fprintln(stderr, "Simulates the site logger of a structure (demo data) and publishes its readings or writes them as CSV.")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "monitor simulate: unexpected argument %q\n", fs.Arg(0))
		fs.Usage()
		return 2
	}
	if *structPath == "" || *sensorPath == "" {
		fmt.Fprintln(stderr, "monitor simulate: --structure and --sensors are required")
		fs.Usage()
		return 2
	}
	t0, err := time.Parse(time.RFC3339Nano, *start)
	if err != nil {
		fmt.Fprintf(stderr, "monitor simulate: --start %q is not an RFC 3339 time (for example 2026-06-01T00:00:00Z)\n", *start)
		return 2
	}
	if *speed < 0 {
		fmt.Fprintf(stderr, "monitor simulate: --speed %g must be 0 (as fast as possible) or positive\n", *speed)
		return 2
	}
	if *password == "" {
		*password = os.Getenv("TRUSSMON_MQTT_PASSWORD")
	}

	pair, err := instrumented.Load(*structPath, *sensorPath)
	if err != nil {
		fmt.Fprintf(stderr, "monitor simulate: %v\n", err)
		return 1
	}
	st, sm := pair.Structure, pair.Sensors
	opt := def
	opt.Seed, opt.Start, opt.Duration, opt.Rate, opt.BadRate, opt.Faults = *seed, t0.UTC(), *duration, *rate, *badRate, faults
	gen, err := simulate.New(st, sm, opt)
	if err != nil {
		fmt.Fprintf(stderr, "monitor simulate: %v\n", err)
		return 1
	}
	for _, f := range faults {
		fmt.Fprintf(stderr, "monitor simulate: fault %s from %s\n", f, f.Time(opt.Start).UTC().Format(time.RFC3339))
	}

	if *highRate != 0 {
		if *csvPath != "" {
			fmt.Fprintln(stderr, "monitor simulate: --high-rate publishes to the broker; it does not write CSV")
			return 2
		}
		hr := simulate.DefaultHighRate()
		hr.Interval = *highRate
		stats, err := publish.RunHighRate(ctx, gen.HighRate(hr), publish.Options{
			Broker: *broker, Username: *username, Password: *password, ClientID: *clientID, Structure: st.Name, Speed: *speed})
		fmt.Fprintf(stdout, "published %d packs: %d high-rate readings, %d messages acknowledged\n", stats.Steps, stats.Readings, stats.Messages)
		if err != nil && !errors.Is(err, context.Canceled) {
			fmt.Fprintf(stderr, "monitor simulate: %v\n", err)
			return 1
		}
		return 0
	}
	if *csvPath != "" {
		if err := writeSimulatedCSV(ctx, *csvPath, gen); err != nil {
			fmt.Fprintf(stderr, "monitor simulate: %v\n", err)
			return 1
		}
		fmt.Fprintf(stdout, "wrote %d steps of %d channels to %s\n", gen.Steps(), len(gen.Channels()), *csvPath)
		return 0
	}
	popt := publish.Options{
		Broker: *broker, Username: *username, Password: *password, ClientID: *clientID,
		Structure: st.Name, PerChannel: *perChannel, Speed: *speed,
	}
	if f, ok := stderr.(*os.File); ok && term.IsTerminal(int(f.Fd())) {
		total := gen.Steps()
		popt.Progress = func(s publish.Stats, at time.Time) {
			fmt.Fprintf(stderr, "\rmonitor simulate: %d of %d steps, at %s, %d readings", s.Steps, total, at.UTC().Format(time.RFC3339), s.Readings)
		}
		defer fmt.Fprintln(stderr)
	}
	stats, err := publish.Run(ctx, gen.All(), popt)
	fmt.Fprintf(stdout, "published %d steps: %d readings, %d bad messages, %d messages acknowledged\n",
		stats.Steps, stats.Readings, stats.Bad, stats.Messages)
	if err != nil && !errors.Is(err, context.Canceled) {
		fmt.Fprintf(stderr, "monitor simulate: %v\n", err)
		return 1
	}
	return 0
}

// writeSimulatedCSV writes the scenario as a logger CSV file, gzip
// compressed when the name ends in .gz; a cancelled context stops it.
func writeSimulatedCSV(ctx context.Context, path string, gen *simulate.Generator) (err error) {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	defer func() {
		if cerr := f.Close(); err == nil && cerr != nil {
			err = cerr
		}
	}()
	steps := func(yield func(simulate.Step, error) bool) {
		for st, err := range gen.All() {
			if err == nil {
				err = ctx.Err()
			}
			if !yield(st, err) || err != nil {
				return
			}
		}
	}
	cols := loggercsv.ColumnsOf(gen.Channels())
	if strings.HasSuffix(path, ".gz") {
		_, err = loggercsv.WriteGzip(f, cols, 0, steps)
	} else {
		_, err = loggercsv.WriteAll(f, cols, 0, steps)
	}
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
}
