// Package service assembles the running monitor from a configuration:
// store, optional embedded broker, MQTT ingest, one pipeline per structure,
// metrics, alarms and the HTTP server (metrics, health, JSON API and the
// dashboard). `monitor run` and `monitor demo` both start it.
package service

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"os"
	"sync"
	"sync/atomic"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/broker"
	"trussmonitor/internal/config"
	"trussmonitor/internal/dashboard"
	"trussmonitor/internal/ingest"
	"trussmonitor/internal/livestate"
	"trussmonitor/internal/metrics"
	"trussmonitor/internal/model"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
	"trussmonitor/internal/structfile"
)

// Monitored is one structure ready to monitor: its model and sensor map.
type Monitored struct {
	Structure *model.Structure
	Model     *model.Model
	Sensors   *sensors.Map
	// Content is the structure file's bytes (stored as a model version).
	Content []byte
}

// LoadStructure reads and checks one structure and its sensor map.
func LoadStructure(structurePath, sensorsPath string) (*Monitored, error) {
	content, err := os.ReadFile(structurePath)
	if err != nil {
		return nil, fmt.Errorf("structure file: %w", err)
	}
	st, err := structfile.Parse(structurePath, content)
	if err != nil {
		return nil, err
	}
	m, err := model.Analyze(st)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", structurePath, err)
	}
	sm, err := sensors.LoadFile(sensorsPath, st)
	if err != nil {
		return nil, err
	}
	if sm.StructureName() != st.Name {
		return nil, fmt.Errorf("%s: sensor map is for structure %q but %s declares %q; pair the files of one structure", sensorsPath, sm.StructureName(), structurePath, st.Name)
	}
	return &Monitored{Structure: st, Model: m, Sensors: sm, Content: content}, nil
}

// Service is the running monitor.
type Service struct {
	cfg       *config.Config
	log       *slog.Logger
	store     *store.Store
	reg       *prometheus.Registry
	met       *metrics.Metrics
	live      *livestate.Live
	pipes     map[string]*pipeline.Pipeline
	order     []string
	results   *resultSink
	ingester  *ingest.Ingester
	brk       *broker.Broker
	rejects   map[string]*atomic.Uint64
	obs       *observer
	httpLn    net.Listener
	httpSrv   *http.Server
	clock     func() time.Time
	rules     []alerts.Rule
	connected atomic.Bool
	httpIdle  time.Duration
}

// Options are the parts of a service that are not in the configuration.
type Options struct {
	// Logger receives the service's log; nil means slog.Default.
	Logger *slog.Logger
	// Clock is the receiver's clock; nil means time.Now.
	Clock func() time.Time
	// Structures, when set, are used instead of loading the configuration's
	// structure files (the demo passes its embedded examples).
	Structures []*Monitored
	// HTTPIdleTimeout closes idle keep-alive HTTP connections; zero means
	// DefaultHTTPIdleTimeout.
	HTTPIdleTimeout time.Duration
}

// New builds the service: it opens the store, loads every structure and
// prepares the pipelines, but starts nothing.
func New(cfg *config.Config, opt Options) (*Service, error) {
	s := &Service{cfg: cfg, log: opt.Logger, clock: opt.Clock, httpIdle: opt.HTTPIdleTimeout, pipes: map[string]*pipeline.Pipeline{}, rejects: map[string]*atomic.Uint64{}}
	if s.log == nil {
		s.log = slog.Default()
	}
	if s.clock == nil {
		s.clock = time.Now
	}
	mons := opt.Structures
	if mons == nil {
		for i, f := range cfg.Structures {
			mon, err := LoadStructure(f.Structure, f.Sensors)
			if err != nil {
				return nil, fmt.Errorf("%s: structures[%d]: %w", cfg.File, i, err)
			}
			mons = append(mons, mon)
		}
	}
	rules, err := alerts.DefaultRules()
	if err != nil {
		return nil, err
	}
	for i := range rules {
		switch rules[i].Name {
		case "ChannelSilent":
			rules[i].Raise = cfg.Alarms.SilentAfter.D().Seconds()
			rules[i].Clear = rules[i].Raise
		case "IngestRejects":
			per := rules[i].Window.Minutes()
			rules[i].Raise = cfg.Alarms.RejectRatePerMinute * per
			rules[i].Clear = min(rules[i].Clear, rules[i].Raise)
		}
	}
	s.rules = rules
	st, err := store.Open(cfg.Database, store.Options{})
	if err != nil {
		return nil, fmt.Errorf("%s: database: %w", cfg.File, err)
	}
	s.store = st
	s.reg = prometheus.NewRegistry()
	s.reg.MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	if s.met, err = metrics.New(s.reg); err != nil {
		st.Close()
		return nil, err
	}
	s.live = livestate.New(st, 0)
	s.results = &resultSink{store: st, log: s.log}
	s.obs = &observer{Metrics: s.met, rejects: s.rejects}
	for _, mon := range mons {
		if err := s.addStructure(mon); err != nil {
			st.Close()
			return nil, err
		}
	}
	return s, nil
}

func (s *Service) addStructure(mon *Monitored) error {
	name := mon.Structure.Name
	if _, dup := s.pipes[name]; dup {
		return fmt.Errorf("structure %q is configured twice", name)
	}
	ctx := context.Background()
	if _, err := s.store.PutModel(ctx, name, mon.Content, s.clock()); err != nil {
		return fmt.Errorf("structure %q: storing the model version: %w", name, err)
	}
	counter := &atomic.Uint64{}
	s.rejects[name] = counter
	cfg := pipeline.Config{
		Window: s.cfg.Epochs.Window.D(), MaxLateness: s.cfg.Epochs.MaxLateness.D(),
		Clock: s.clock, MaxFuture: 10 * time.Minute, MaxPast: 7 * 24 * time.Hour,
		Processor:   pipeline.ProcessorOptions{EstimateMissingLoads: s.cfg.Epochs.MissingLoad == "estimate"},
		Rules:       s.rules,
		Events:      eventSink{s.store},
		RejectCount: counter.Load,
		Observer:    s.met,
		Logger:      s.log,
	}
	p, err := pipeline.New(mon.Model, mon.Sensors, cfg)
	if err != nil {
		return fmt.Errorf("structure %q: %w", name, err)
	}
	proc := p.Processor()
	p.AddSink(s.live.Register(mon.Structure, proc, reconcile.DefaultAlphaGlobal))
	p.AddSink(&metricsSink{m: s.met, sm: s.met.Structure(name, proc.Gauged(), proc.Unknown()), name: name, rules: s.rules, last: map[string]int{}})
	p.AddSink(s.results)
	s.pipes[name] = p
	s.order = append(s.order, name)
	return nil
}

// Registry returns the Prometheus registry of the service.
func (s *Service) Registry() *prometheus.Registry { return s.reg }

// Store returns the service's store.
func (s *Service) Store() *store.Store { return s.store }

// Pipeline returns the pipeline of a structure.
func (s *Service) Pipeline(name string) *pipeline.Pipeline { return s.pipes[name] }

// HTTPAddr returns the address the HTTP server listens on (after Start).
func (s *Service) HTTPAddr() string {
	if s.httpLn == nil {
		return ""
	}
	return s.httpLn.Addr().String()
}

// BrokerAddr returns the embedded broker's address, if one runs.
func (s *Service) BrokerAddr() string {
	if s.brk == nil {
		return ""
	}
	return s.brk.Addr()
}

// Start starts the embedded broker (if configured), the HTTP server and
// the ingest. It returns once they listen.
func (s *Service) Start(ctx context.Context) error {
	if s.cfg.Broker.Embedded {
		users := map[string]string{}
		if s.cfg.Broker.Username != "" {
			users[s.cfg.Broker.Username] = s.cfg.Broker.Password
		}
		b, err := broker.Start(broker.Config{Address: s.cfg.Broker.Listen, Users: users, AllowAnonymous: len(users) == 0, Logger: s.log})
		if err != nil {
			return fmt.Errorf("%s: broker.listen: %w", s.cfg.File, err)
		}
		s.brk = b
	}
	ln, err := net.Listen("tcp", s.cfg.HTTP.Listen)
	if err != nil {
		return fmt.Errorf("%s: http.listen: %w", s.cfg.File, err)
	}
	s.httpLn = ln
	warnExposed(s.log, s.cfg.File, ln.Addr())
	mux := http.NewServeMux()
	mh := metrics.Handler(s.reg, s.ready)
	mux.Handle("/metrics", mh)
	mux.Handle("/healthz", mh)
	mux.Handle("/readyz", mh)
	mux.Handle("/", dashboard.New(s.live, dashboard.Options{Now: s.clock}))
	s.httpSrv = newHTTPServer(dashboard.Harden(mux), s.httpIdle)
	go func() {
		if err := s.httpSrv.Serve(ln); err != nil && !errors.Is(err, http.ErrServerClosed) {
			s.log.Error("http server stopped", "error", err)
		}
	}()
	url := s.cfg.Broker.URL
	if s.brk != nil {
		url = "tcp://" + s.brk.Addr()
	}
	regs := map[string]ingest.Registry{}
	for name, p := range s.pipes {
		regs[name] = p.Sensors()
	}
	deps := ingest.Deps{
		Store: s.store, Registries: regs, Observer: s.obs, Logger: s.log, Now: s.clock,
		OnCommitted: s.committed,
	}
	if s.brk != nil {
		deps.BrokerDrops = s.brk.Dropped
	}
	in, err := ingest.New(ingest.Config{
		Broker: url, ClientID: s.cfg.Broker.ClientID, Username: s.cfg.Broker.Username, Password: s.cfg.Broker.Password,
		CAFile: s.cfg.Broker.TLS.CAFile, CertFile: s.cfg.Broker.TLS.CertFile, KeyFile: s.cfg.Broker.TLS.KeyFile,
		MaxPayload: s.cfg.Broker.MaxPayloadBytes,
	}, deps)
	if err != nil {
		return fmt.Errorf("%s: broker: %w", s.cfg.File, err)
	}
	s.ingester = in
	return nil
}

// committed feeds newly stored readings to their structure's pipeline.
func (s *Service) committed(structure string, rs []store.Reading) {
	p := s.pipes[structure]
	if p == nil {
		return
	}
	s.connected.Store(true)
	in := make([]pipeline.Reading, len(rs))
	for i, r := range rs {
		in[i] = pipeline.Reading{Channel: r.Channel, Time: r.Time, Value: r.Value}
	}
	p.Feed(context.Background(), in)
}

func (s *Service) ready() error {
	if s.ingester == nil {
		return errors.New("ingest not started")
	}
	if st := s.ingester.Stats(); st.Connects == 0 {
		return errors.New("not connected to the broker yet")
	} else if st.Subscribed == 0 {
		return errors.New("connected, not yet subscribed")
	}
	return nil
}

// WaitReady waits until the ingest is connected and subscribed (Run must be
// running), or ctx ends.
func (s *Service) WaitReady(ctx context.Context) error {
	for {
		err := s.ready()
		if err == nil {
			return nil
		}
		select {
		case <-ctx.Done():
			return fmt.Errorf("service not ready: %v: %w", err, ctx.Err())
		case <-time.After(20 * time.Millisecond):
		}
	}
}

// Run runs ingest until ctx is cancelled, ticking the pipelines every
// second and applying retention hourly; then it shuts down gracefully: stop
// consuming, commit and acknowledge what was received, flush the epochs,
// close the HTTP server, the broker and the store.
func (s *Service) Run(ctx context.Context) error {
	if s.ingester == nil {
		if err := s.Start(ctx); err != nil {
			return err
		}
	}
	var wg sync.WaitGroup
	var ingestErr error
	ingCtx, stopIngest := context.WithCancel(context.Background())
	wg.Add(1)
	go func() { defer wg.Done(); ingestErr = s.ingester.Run(ingCtx) }()
	tick := time.NewTicker(time.Second)
	defer tick.Stop()
	lastRetention := time.Time{}
loop:
	for {
		select {
		case <-ctx.Done():
			break loop
		case <-tick.C:
			for _, name := range s.order {
				s.pipes[name].Tick(ctx)
			}
			s.results.flush()
			if now := s.clock(); now.Sub(lastRetention) > time.Hour {
				lastRetention = now
				s.applyRetention(now)
			}
		}
	}
	s.log.Info("shutting down: stopping ingest, committing and acknowledging received messages")
	stopIngest()
	wg.Wait()
	for _, name := range s.order {
		s.pipes[name].Flush(context.Background())
	}
	s.results.flush()
	return errors.Join(ingestErr, s.Close())
}

func (s *Service) applyRetention(now time.Time) {
	r := store.Retention{Readings: s.cfg.Retention.Readings.D(), Results: s.cfg.Retention.Results.D(), DeadLetters: s.cfg.Retention.DeadLetters.D()}
	if _, err := s.store.ApplyRetention(context.Background(), now, r); err != nil {
		s.log.Warn("retention", "error", err)
	}
}

// Close stops the HTTP server and the broker and closes the store.
func (s *Service) Close() error {
	var errs []error
	if s.httpSrv != nil {
		sctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		errs = append(errs, s.httpSrv.Shutdown(sctx))
		cancel()
	}
	if s.brk != nil {
		errs = append(errs, s.brk.Close())
	}
	if s.store != nil {
		errs = append(errs, s.store.Close())
		s.store = nil
	}
	return errors.Join(errs...)
}

// observer forwards ingest observations to the metrics and counts
// rejections per structure for the IngestRejects rule.
type observer struct {
	*metrics.Metrics
	rejects map[string]*atomic.Uint64
}

// Rejected counts a rejection.
func (o *observer) Rejected(structure, reason string) {
	o.Metrics.Rejected(structure, reason)
	if c := o.rejects[structure]; c != nil {
		c.Add(1)
	}
}

// eventSink stores alarm events in the store.
type eventSink struct{ st *store.Store }

// PutEvent stores one event with its evidence as JSON.
func (e eventSink) PutEvent(ctx context.Context, ev alerts.Event) error {
	evidence, err := json.Marshal(ev.Evidence)
	if err != nil {
		return err
	}
	return e.st.PutEvent(ctx, store.Event{Structure: ev.Structure, Rule: ev.Rule, Subject: ev.Subject, Kind: ev.Kind, Time: ev.Time, Evidence: evidence})
}
