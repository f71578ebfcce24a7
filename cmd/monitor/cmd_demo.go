package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"

	"trussmonitor/internal/demo"
)

// runDemo is `monitor demo`: embedded broker, simulator with a fault,
// service and dashboard in one process, until interrupted.
func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("monitor demo", flag.ContinueOnError)
	fs.SetOutput(stderr)
	listen := fs.String("listen", "127.0.0.1:9470", "dashboard address (loopback; port 0 picks a free one)")
	brokerListen := fs.String("broker-listen", "127.0.0.1:0", "embedded MQTT broker address (loopback; port 0 picks a free one)")
	db := fs.String("db", "", "SQLite file to keep (default: a temporary file removed at the end)")
	speed := fs.Float64("speed", 1, "simulated seconds per real second (e.g. 10 shows the fault's alarm within a minute)")
	fault := fs.String("fault", demo.DefaultFault, "injected fault KIND:TARGET:AT[:SIZE] (see monitor simulate), or none")
	seed := fs.Uint64("seed", 1, "seed of the simulated readings")
	roof := fs.Bool("roof", false, "also simulate and monitor the Harbour Hall roof (a space grid)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor demo [--speed 1] [--fault stiffness:D2:3m:0.3] [--listen 127.0.0.1:9470] [--db FILE] [--roof]")
		fmt.Fprintln(stderr, "Runs the self-contained demo on the invented Alder Creek footbridge until interrupted.")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "monitor demo: unexpected argument %q\n", fs.Arg(0))
		return 2
	}
	d, err := demo.Start(ctx, demo.Options{Listen: *listen, BrokerListen: *brokerListen, Database: *db, Speed: *speed, Fault: *fault, Seed: *seed, Roof: *roof})
	if err != nil {
		fmt.Fprintf(stderr, "monitor demo: %v\n", err)
		return 1
	}
	fmt.Fprintf(stdout, "trussmonitor demo (invented Alder Creek footbridge, demo data only)\n")
	fmt.Fprintf(stdout, "dashboard:  %s\n", d.URL())
	fmt.Fprintf(stdout, "metrics:    %smetrics\n", d.URL())
	fmt.Fprintf(stdout, "clock:      %s, from %s (times on the dashboard and in the log are simulated)\n", demo.ClockNote(*speed), d.Now().Format("15:04:05 MST"))
	fmt.Fprintln(stdout, "bad data:   the simulated logger sends a few bad messages on purpose; each is logged (INFO) before the service refuses it (WARN)")
	fmt.Fprintf(stdout, "broker:     tcp://%s (embedded, topics shm/<structure>/...)\n", d.Service().BrokerAddr())
	if !d.FaultTime().IsZero() {
		fmt.Fprintf(stdout, "fault:      %s at simulated %s (speed %gx)\n", *fault, d.FaultTime().Format("15:04:05 MST"), *speed)
	}
	fmt.Fprintln(stdout, "caution:    a monitoring aid, not a safety verdict; decisions rest with a licensed engineer under local codes")
	fmt.Fprintln(stdout, "press Ctrl-C to stop")
	if err := d.Wait(ctx); err != nil {
		fmt.Fprintf(stderr, "monitor demo: %v\n", err)
		return 1
	}
	return 0
}
