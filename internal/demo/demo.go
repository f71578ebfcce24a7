// Package demo runs the self-contained demonstration: the embedded MQTT
// broker on loopback, the logger simulator of the invented Alder Creek
// footbridge (with a fault injected a few minutes in), the monitoring
// service with its dashboard, all in one process. Simulated time may run
// faster than real time; the service's clock follows simulated time so that
// epochs, alarms and their for-durations behave as they would on site.
//
// The demo data is invented. This tool is a monitoring aid, not a safety
// verdict; decisions rest with a licensed engineer under local codes.
package demo

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"sync"
	"time"

	"trussmonitor"
	"trussmonitor/internal/config"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/model"
	"trussmonitor/internal/service"
	"trussmonitor/internal/simulate"
	"trussmonitor/internal/simulate/publish"
)

// Options configure the demo.
type Options struct {
	// Listen is the dashboard's address (loopback); port 0 picks one.
	Listen string
	// BrokerListen is the embedded broker's address; port 0 picks one.
	BrokerListen string
	// Database is the SQLite file; empty means a temporary one removed at
	// the end.
	Database string
	// Speed is simulated seconds per real second (>= 1).
	Speed float64
	// Fault is the injected fault (simulate.ParseFault syntax), e.g.
	// "stiffness:C4:3m:0.3"; "none" for none.
	Fault string
	// Seed makes the simulated readings reproducible.
	Seed uint64
	// Roof also simulates and monitors the Harbour Hall roof.
	Roof bool
	// Logger receives the service's log; nil discards info messages.
	Logger *slog.Logger
}

// DefaultFault is the fault the demo injects: a 30 % loss of axial
// stiffness of the diagonal D2, three
// simulated minutes in.
const DefaultFault = "stiffness:D2:3m:0.3"

// Demo is a running demonstration.
type Demo struct {
	svc       *service.Service
	start     time.Time // simulated start
	wallStart time.Time
	speed     float64
	dir       string
	wg        sync.WaitGroup
	pubErr    error
	faults    []simulate.Fault
	mons      []*instrumented.Structure
	runErr    chan error
}

// Structure returns a monitored example structure by name (nil if none).
func (d *Demo) Structure(name string) *model.Structure {
	for _, m := range d.mons {
		if m.Structure.Name == name {
			return m.Structure
		}
	}
	return nil
}

// example reads one of the embedded example files.
func example(name string) ([]byte, error) {
	return fs.ReadFile(trussmonitor.Examples, "testdata/"+name)
}

// loadExample loads an embedded structure and its sensor map.
func loadExample(dir string) (*instrumented.Structure, error) {
	content, err := example(dir + "/structure.yaml")
	if err != nil {
		return nil, err
	}
	sdata, err := example(dir + "/sensors.yaml")
	if err != nil {
		return nil, err
	}
	return instrumented.Parse("(embedded) testdata/"+dir+"/structure.yaml", content, "(embedded) testdata/"+dir+"/sensors.yaml", sdata)
}

// ClockNote says that the demo's time is simulated and at what speed.
func ClockNote(speed float64) string {
	return fmt.Sprintf("simulated time (demo), %g x real time", speed)
}

// demoBadRate is the share of the simulated readings sent as bad messages
// on purpose.
const demoBadRate = 0.0005

// Start starts the broker, the service and the simulator, and returns once
// the dashboard listens.
func Start(ctx context.Context, opt Options) (*Demo, error) {
	if opt.Speed < 1 {
		return nil, fmt.Errorf("demo: speed %g; want at least 1 (simulated seconds per real second)", opt.Speed)
	}
	if opt.Listen == "" {
		opt.Listen = "127.0.0.1:9470"
	}
	if opt.BrokerListen == "" {
		opt.BrokerListen = "127.0.0.1:0"
	}
	if opt.Fault == "" {
		opt.Fault = DefaultFault
	}
	if opt.Logger == nil {
		opt.Logger = slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelInfo}))
	}
	d := &Demo{speed: opt.Speed, wallStart: time.Now()}
	d.start = d.wallStart.UTC().Truncate(time.Second)
	db := opt.Database
	if db == "" {
		dir, err := os.MkdirTemp("", "trussmonitor-demo-")
		if err != nil {
			return nil, err
		}
		d.dir = dir
		db = filepath.Join(dir, "demo.db")
	}
	var faults []simulate.Fault
	if opt.Fault != "none" {
		f, err := simulate.ParseFault(opt.Fault)
		if err != nil {
			return nil, fmt.Errorf("demo: --fault: %w", err)
		}
		faults = append(faults, f)
	}
	d.faults = faults
	dirs := []string{"footbridge"}
	if opt.Roof {
		dirs = append(dirs, "roof")
	}
	var mons []*instrumented.Structure
	for _, dir := range dirs {
		mon, err := loadExample(dir)
		if err != nil {
			d.cleanup()
			return nil, fmt.Errorf("demo: example %s: %w", dir, err)
		}
		mons = append(mons, mon)
	}
	cfg := config.Defaults()
	cfg.File = "(demo)"
	cfg.Database = db
	cfg.HTTP.Listen = opt.Listen
	cfg.Broker.Embedded = true
	cfg.Broker.Listen = opt.BrokerListen
	cfg.Broker.ClientID = "trussmonitor-demo"
	svc, err := service.New(&cfg, service.Options{Logger: opt.Logger, Clock: d.Now, Structures: mons, ClockNote: ClockNote(opt.Speed)})
	if err != nil {
		d.cleanup()
		return nil, err
	}
	if err := svc.Start(ctx); err != nil {
		svc.Close()
		d.cleanup()
		return nil, err
	}
	d.svc = svc
	d.mons = mons
	d.runErr = make(chan error, 1)
	go func() { d.runErr <- svc.Run(ctx) }()
	readyCtx, cancelReady := context.WithTimeout(ctx, 30*time.Second)
	err = svc.WaitReady(readyCtx)
	cancelReady()
	if err != nil {
		return nil, fmt.Errorf("demo: %w", err)
	}
	opt.Logger.Info(fmt.Sprintf("demo: the simulated loggers send bad messages on purpose (rate %g per reading: malformed JSON, NaN, unknown channel, wrong unit) to show that the service refuses them; each is announced by an INFO line before the service's WARN 'ingest: message rejected'", demoBadRate))
	for i, mon := range mons {
		sopt := simulate.DefaultOptions()
		sopt.Seed = opt.Seed + uint64(i)
		sopt.Start = d.start
		sopt.Duration = 30 * 24 * time.Hour
		sopt.Rate = time.Second
		sopt.BadRate = demoBadRate
		if i == 0 {
			sopt.Faults = faults
		}
		gen, err := simulate.New(mon.Structure, mon.Sensors, sopt)
		if err != nil {
			svc.Close()
			d.cleanup()
			return nil, fmt.Errorf("demo: simulator: %w", err)
		}
		popt := publish.Options{Broker: "tcp://" + svc.BrokerAddr(), ClientID: "demo-logger-" + mon.Structure.Name, Structure: mon.Structure.Name, Speed: opt.Speed,
			OnBad: func(defect simulate.Defect, channel, topic string, at time.Time) {
				opt.Logger.Info("demo: deliberate bad message from the simulated logger; the service should refuse it as a dead letter (the WARN line that follows)",
					"defect", defect.String(), "channel", channel, "topic", topic, "simulated_time", at.UTC().Format(time.RFC3339))
			}}
		d.wg.Add(1)
		go func() {
			defer d.wg.Done()
			if _, err := publish.Run(ctx, gen.All(), popt); err != nil && !errors.Is(err, context.Canceled) {
				d.pubErr = err
				opt.Logger.Error("demo simulator stopped", "error", err)
			}
		}()
	}
	return d, nil
}

// Now is the demo's clock: simulated time, running Speed times faster than
// the wall clock from the start.
func (d *Demo) Now() time.Time {
	return d.start.Add(time.Duration(float64(time.Since(d.wallStart)) * d.speed))
}

// URL is the dashboard's address.
func (d *Demo) URL() string { return "http://" + d.svc.HTTPAddr() + "/" }

// Service is the running service.
func (d *Demo) Service() *service.Service { return d.svc }

// FaultTime returns when the first injected fault starts (simulated time).
func (d *Demo) FaultTime() time.Time {
	if len(d.faults) == 0 {
		return time.Time{}
	}
	return d.faults[0].Time(d.start)
}

// Wait waits until ctx (the one given to Start) is cancelled, then for the
// service's graceful shutdown and the simulators.
func (d *Demo) Wait(ctx context.Context) error {
	<-ctx.Done()
	err := <-d.runErr
	d.wg.Wait()
	d.cleanup()
	return err
}

func (d *Demo) cleanup() {
	if d.dir != "" {
		os.RemoveAll(d.dir)
	}
}
