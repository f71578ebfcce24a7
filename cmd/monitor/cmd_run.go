package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"

	"trussmonitor/internal/config"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/service"
)

// runService is `monitor run --config FILE [--check-config]`.
func runService(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("monitor run", flag.ContinueOnError)
	fs.SetOutput(stderr)
	cfgPath := fs.String("config", "", "service configuration file (YAML; see deploy/monitor.yaml)")
	checkOnly := fs.Bool("check-config", false, "validate the configuration and the structure and sensor files it names, then exit")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: monitor run --config FILE [--check-config]")
		fmt.Fprintln(stderr, "Runs the monitoring service: MQTT ingest, reading store, reconciliation, alarms, metrics and dashboard.")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if *cfgPath == "" || fs.NArg() > 0 {
		fmt.Fprintln(stderr, "monitor run: give the configuration with --config FILE (and no other arguments)")
		return 2
	}
	cfg, err := config.Load(*cfgPath)
	if err != nil {
		fmt.Fprintf(stderr, "monitor run: %v\n", err)
		return 1
	}
	if *checkOnly {
		for i, s := range cfg.Structures {
			mon, err := instrumented.Load(s.Structure, s.Sensors)
			if err != nil {
				fmt.Fprintf(stderr, "monitor run: %s: structures[%d]: %v\n", cfg.File, i, err)
				return 1
			}
			fmt.Fprintf(stdout, "structure %s: %d nodes, %d members, %d channels: ok\n", mon.Structure.Name, len(mon.Structure.Nodes), len(mon.Structure.Members), len(mon.Sensors.Channels()))
		}
		fmt.Fprintf(stdout, "%s: configuration ok\n", cfg.File)
		return 0
	}
	log := slog.New(slog.NewTextHandler(stderr, &slog.HandlerOptions{Level: slog.LevelInfo}))
	svc, err := service.New(cfg, service.Options{Logger: log})
	if err != nil {
		fmt.Fprintf(stderr, "monitor run: %v\n", err)
		return 1
	}
	if err := svc.Start(ctx); err != nil {
		svc.Close()
		fmt.Fprintf(stderr, "monitor run: %v\n", err)
		return 1
	}
	log.Info("monitor running", "http", "http://"+svc.HTTPAddr()+"/", "database", cfg.Database,
		"caution", "monitoring aid, not a safety verdict; decisions rest with a licensed engineer under local codes")
	if err := svc.Run(ctx); err != nil {
		fmt.Fprintf(stderr, "monitor run: %v\n", err)
		return 1
	}
	log.Info("monitor stopped cleanly")
	return 0
}
