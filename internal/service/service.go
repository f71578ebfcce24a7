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
	"sync"
	"sync/atomic"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/broker"
	"trussmonitor/internal/config"
	"trussmonitor/internal/dashboard"
	"trussmonitor/internal/fatiguetrack"
	"trussmonitor/internal/ingest"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/livestate"
	"trussmonitor/internal/metrics"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/settings"
	"trussmonitor/internal/store"
)

// Service is the running monitor.
type Service struct {
	cfg       *config.Config
	log       *slog.Logger
	store     *store.Store
	reg       *prometheus.Registry
	met       *metrics.Metrics
	live      *livestate.Live
	pipes     map[string]*pipeline.Pipeline
	feeds     map[string]*feeder // the reconciliation queue of each pipeline
	order     []string
	results   *resultSink
	ingester  *ingest.Ingester
	ingPtr    atomic.Pointer[ingest.Ingester] // the ingester, for readers on other goroutines
	flowMu    sync.Mutex
	flows     map[string]*flow
	brk       *broker.Broker
	rejects   map[string]*atomic.Uint64
	obs       *observer
	httpLn    net.Listener
	httpSrv   *http.Server
	clock     func() time.Time
	clockNote string
	rules     []alerts.Rule
	set       settings.Settings
	connected atomic.Bool
	fatigue   *fatiguetrack.Tracker // nil when no gauge counts fatigue
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
	Structures []*instrumented.Structure
	// ClockNote, when set, is shown on the dashboard beside the epoch time
	// (the demo says its time is simulated and at what speed).
	ClockNote string
	// HTTPIdleTimeout closes idle keep-alive HTTP connections; zero means
	// DefaultHTTPIdleTimeout.
	HTTPIdleTimeout time.Duration
}

// New builds the service: it opens the store, loads every structure and
// prepares the pipelines, but starts nothing.
func New(cfg *config.Config, opt Options) (*Service, error) {
	s := &Service{cfg: cfg, log: opt.Logger, clock: opt.Clock, clockNote: opt.ClockNote, httpIdle: opt.HTTPIdleTimeout, pipes: map[string]*pipeline.Pipeline{}, feeds: map[string]*feeder{}, rejects: map[string]*atomic.Uint64{}}
	if s.log == nil {
		s.log = slog.Default()
	}
	if s.clock == nil {
		s.clock = time.Now
	}
	mons := opt.Structures
	if mons == nil {
		for i, f := range cfg.Structures {
			mon, err := instrumented.Load(f.Structure, f.Sensors)
			if err != nil {
				return nil, fmt.Errorf("%s: structures[%d]: %w", cfg.File, i, err)
			}
			mons = append(mons, mon)
		}
	}
	set, err := settings.FromConfig(cfg)
	if err != nil {
		return nil, err
	}
	s.set = set
	s.rules = set.Rules
	st, err := store.Open(cfg.Database, store.Options{MaxDeadLetters: cfg.Ingest.MaxDeadLetters})
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
	if err := s.addFatigue(mons); err != nil {
		st.Close()
		return nil, err
	}
	return s, nil
}

func (s *Service) addStructure(mon *instrumented.Structure) error {
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
		Window: s.set.Window, MaxLateness: s.set.MaxLateness,
		Clock: s.clock, MaxFuture: 10 * time.Minute, MaxPast: 7 * 24 * time.Hour,
		Processor:      reconcile.ProcessorOptions{EstimateMissingLoads: s.set.EstimateMissingLoads},
		Rules:          s.rules,
		Events:         eventSink{s.store},
		RejectCount:    counter.Load,
		CommitFailures: s.obs.commitFailures.Load,
		BrokerConnected: func() bool {
			in := s.ingesterNow()
			return in != nil && in.Health().Live
		},
		// The feeder is made below, before any goroutine runs.
		ReconcileDropped: func() uint64 { return s.feeds[name].droppedTotal() },
		Observer:         s.met,
		Logger:           s.log,
	}
	p, err := pipeline.New(mon.Model, mon.Sensors, cfg)
	if err != nil {
		return fmt.Errorf("structure %q: %w", name, err)
	}
	// Silence survives a restart: the last stored reading of each channel
	// (one query), and watching begins now for channels with none.
	// Readings beyond the window ahead (stored by an earlier version) are
	// left out: they would hold the silence alarm off for ever.
	start := s.clock()
	ahead := s.cfg.Ingest.MaxAhead.D()
	if ahead <= 0 {
		ahead = ingest.DefaultMaxAhead
	}
	last, err := s.store.LastReadings(ctx, name, start.Add(ahead))
	if err != nil {
		return fmt.Errorf("structure %q: %w", name, err)
	}
	p.Seed(last, start)
	s.met.IngestOf(name)
	for _, ch := range mon.Sensors.Channels() {
		s.met.WatchedSince(name, ch.ID, start)
		if t, ok := last[ch.ID]; ok {
			s.met.LastReading(name, ch.ID, t)
		}
	}
	proc := p.Processor()
	p.AddSink(s.live.Register(mon.Structure, proc, s.set.AlphaGlobal))
	loads, err := s.met.UnknownLoads(name, proc.Unknown(), loadReferences(mon.Structure, proc.Unknown()))
	if err != nil {
		return fmt.Errorf("structure %q: %w", name, err)
	}
	p.AddSink(&metricsSink{m: s.met, sm: s.met.Structure(name, proc.Gauged(), proc.Unknown()), name: name, rules: s.rules, last: map[alerts.RuleName]int{},
		state: s.met.MemberState(name, proc.Members()), loads: loads, adapt: s.met.Adaptation(name, proc.Gauged(), proc.Unknown()), unknown: proc.Unknown()})
	p.AddSink(s.results)
	s.pipes[name] = p
	limit := s.cfg.Epochs.QueueReadings
	if limit <= 0 {
		limit = config.DefaultQueueReadings
	}
	s.feeds[name] = newFeeder(p, s.store, limit, start, s.log, s.met)
	s.order = append(s.order, name)
	return nil
}

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
// the ingest. It returns once they listen; ctx bounds the start (the
// listener's set-up), not the running service (see Run).
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
		if err := metrics.RegisterEmbeddedBroker(s.reg, b.Clients); err != nil {
			return err
		}
	}
	ln, err := new(net.ListenConfig).Listen(ctx, "tcp", s.cfg.HTTP.Listen)
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
	dopts := dashboard.Options{Now: s.clock, ClockNote: s.clockNote, DeadLetters: deadLetterSource{s.store}}
	if s.fatigue != nil {
		dopts.Fatigue = fatigueSource{tr: s.fatigue, st: s.store, clock: s.clock}
	}
	mux.Handle("/", dashboard.New(s.live, dopts))
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
	if s.fatigue != nil {
		deps.Fatigue = s.fatigue
	}
	if s.brk != nil {
		deps.BrokerDrops = s.brk.Dropped
	}
	in, err := ingest.New(ingest.Config{
		Broker: url, ClientID: s.cfg.Broker.ClientID, Username: s.cfg.Broker.Username, Password: s.cfg.Broker.Password,
		CAFile: s.cfg.Broker.TLS.CAFile, CertFile: s.cfg.Broker.TLS.CertFile, KeyFile: s.cfg.Broker.TLS.KeyFile,
		MaxPayload: s.cfg.Broker.MaxPayloadBytes,
		MaxAhead:   s.cfg.Ingest.MaxAhead.D(), MaxBehind: s.cfg.Ingest.MaxBehind.D(),
		SubscribeAll: s.cfg.Ingest.Subscribe != "configured",
	}, deps)
	if err != nil {
		return fmt.Errorf("%s: broker: %w", s.cfg.File, err)
	}
	s.ingester = in
	s.ingPtr.Store(in)
	return nil
}

func (s *Service) ingesterNow() *ingest.Ingester { return s.ingPtr.Load() }

// flow is what readiness knows of one structure's pipeline: when its
// count of fed readings and of epochs last grew (receiver clock).
type flow struct {
	readings, epochs     int64
	readingsAt, epochsAt time.Time
}

// trackFlows notes the pipelines' progress (each second, on a goroutine
// of its own: a pipeline busy with a long epoch delays it, never Run's
// loop nor readiness, which reads the flows under flowMu only).
func (s *Service) trackFlows(now time.Time) {
	stats := make([]pipeline.Stats, len(s.order))
	for i, name := range s.order {
		stats[i] = s.pipes[name].Stats()
	}
	s.flowMu.Lock()
	defer s.flowMu.Unlock()
	if s.flows == nil {
		s.flows = map[string]*flow{}
	}
	for i, name := range s.order {
		st := stats[i]
		f := s.flows[name]
		if f == nil {
			f = &flow{readingsAt: now, epochsAt: now}
			s.flows[name] = f
		}
		if st.Readings != f.readings {
			f.readings, f.readingsAt = st.Readings, now
		}
		if st.Epochs != f.epochs {
			f.epochs, f.epochsAt = st.Epochs, now
		}
	}
}

// epochStall is how long readings may flow into a pipeline without an
// epoch closing before the service is not ready: an epoch closes at the
// latest one window plus the maximum lateness after its first reading
// (idle flush), so four times that, and at least 30 s, is a stall.
func (s *Service) epochStall() time.Duration {
	return max(4*(s.cfg.Epochs.Window.D()+s.cfg.Epochs.MaxLateness.D()), 30*time.Second)
}

// committed hands newly stored readings to their structure's
// reconciliation queue. It runs on the ingest's commit goroutine after the
// commit, with the messages' acknowledgements already queued, and never
// waits for reconciliation (see feeder).
func (s *Service) committed(structure string, rs []store.Reading) {
	f := s.feeds[structure]
	if f == nil {
		return
	}
	s.connected.Store(true)
	f.offer(rs)
}

// ready is the readiness of the present moment: ingest connected to the
// broker and subscribed now, the latest store commit succeeded, and every
// pipeline that receives readings closes epochs. It names every condition
// that fails.
func (s *Service) ready() error {
	in := s.ingesterNow()
	if in == nil {
		return errors.New("ingest not started")
	}
	var errs []error
	h := in.Health()
	if !h.Live {
		if st := in.Stats(); st.Connects == 0 {
			errs = append(errs, fmt.Errorf("not connected to the broker %s yet (see the log for the connection error)", s.brokerURL()))
		} else {
			errs = append(errs, fmt.Errorf("not connected and subscribed to the broker %s now (reconnecting; see the log)", s.brokerURL()))
		}
	}
	if h.CommitFailing {
		errs = append(errs, fmt.Errorf("store commits failing since %s: %v", h.FailingSince.UTC().Format(time.RFC3339), h.Err))
	}
	now := s.clock()
	stall := s.epochStall()
	s.flowMu.Lock()
	for _, name := range s.order {
		if f := s.flows[name]; f != nil && now.Sub(f.readingsAt) < stall && f.readingsAt.Sub(f.epochsAt) > stall {
			errs = append(errs, fmt.Errorf("structure %s: readings arrive but no epoch closed since %s", name, f.epochsAt.UTC().Format(time.RFC3339)))
		}
	}
	s.flowMu.Unlock()
	return errors.Join(errs...)
}

// brokerURL is the broker ingest connects to.
func (s *Service) brokerURL() string {
	if s.brk != nil {
		return "tcp://" + s.brk.Addr()
	}
	return s.cfg.Broker.URL
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
	// The feeders outlive ctx: on shutdown they feed what ingest committed.
	feedCtx := context.WithoutCancel(ctx)
	for _, name := range s.order {
		go s.feeds[name].run(feedCtx)
	}
	ingCtx, stopIngest := context.WithCancel(context.Background())
	wg.Add(1)
	go func() { defer wg.Done(); ingestErr = s.ingester.Run(ingCtx) }()
	flowsDone := make(chan struct{})
	go func() {
		defer close(flowsDone)
		t := time.NewTicker(time.Second)
		defer t.Stop()
		for {
			select {
			case <-ctx.Done():
				return
			case <-t.C:
				s.trackFlows(s.clock())
			}
		}
	}()
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
				s.feeds[name].ticked()
			}
			s.results.flush()
			if now := s.clock(); now.Sub(lastRetention) > time.Hour {
				lastRetention = now
				s.applyRetention(ctx, now)
			}
		}
	}
	s.log.Info("shutting down: stopping ingest, committing and acknowledging received messages")
	stopIngest()
	wg.Wait()
	for _, name := range s.order {
		s.feeds[name].close() // feeds what was committed
		s.pipes[name].Flush(feedCtx)
	}
	<-flowsDone
	s.results.flush()
	return errors.Join(ingestErr, s.Close())
}

// applyRetention deletes what the retention settings let go and compacts
// closed hours into blocks; ctx (Run's) ends them at shutdown.
func (s *Service) applyRetention(ctx context.Context, now time.Time) {
	r := store.Retention{Readings: s.cfg.Retention.Readings.D(), Results: s.cfg.Retention.Results.D(), DeadLetters: s.cfg.Retention.DeadLetters.D()}
	if _, err := s.store.ApplyRetention(ctx, now, r); err != nil {
		s.log.Warn("retention", "error", err)
	}
	if cs, err := s.store.Compact(ctx, now.Add(-store.CompactAfter)); err != nil {
		s.log.Warn("compacting readings into blocks; they stay as rows until the next try", "error", err)
	} else if cs.Blocks > 0 {
		s.log.Info("compacted readings into blocks", "blocks", cs.Blocks, "readings", cs.Readings)
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
// rejections per structure for the IngestRejects rule and failed commits
// for the CommitsFailing rule.
type observer struct {
	*metrics.Metrics
	rejects        map[string]*atomic.Uint64
	commitFailures atomic.Uint64
}

// CommitFailed counts a failed commit, for every structure (one ingest
// serves them all).
func (o *observer) CommitFailed() {
	for name := range o.rejects {
		o.Metrics.CommitFailed(name)
	}
	o.commitFailures.Add(1)
}

// BrokerConnection records the connection state for every structure.
func (o *observer) BrokerConnection(connected, reconnect bool) {
	for name := range o.rejects {
		o.Metrics.BrokerConnection(name, connected, reconnect)
	}
}

// Rejected counts a rejection.
func (o *observer) Rejected(structure, reason string) {
	o.Metrics.Rejected(structure, reason)
	if c := o.rejects[structure]; c != nil {
		c.Add(1)
	}
}

// deadLetterSource lists the store's dead letters for the dashboard API.
type deadLetterSource struct{ st *store.Store }

// DeadLetters lists dead letters first received in [from, to).
func (d deadLetterSource) DeadLetters(ctx context.Context, from, to time.Time, reason string, limit int) ([]dashboard.DeadLetter, error) {
	ds, err := d.st.ListDeadLetters(ctx, store.DeadLetterFilter{From: from, To: to, Reason: reason, Limit: limit})
	if err != nil {
		return nil, err
	}
	out := make([]dashboard.DeadLetter, len(ds))
	for i, x := range ds {
		out[i] = dashboard.DeadLetter{Received: x.Received, LastReceived: x.LastReceived, Repeats: x.Repeats, Topic: x.Topic,
			Reason: x.Reason, Detail: x.Detail, Size: x.Size, Excerpt: x.Payload}
	}
	return out, nil
}

// eventSink stores alarm events in the store.
type eventSink struct{ st *store.Store }

// PutEvent stores one event with its evidence as JSON.
func (e eventSink) PutEvent(ctx context.Context, ev alerts.Event) error {
	evidence, err := json.Marshal(ev.Evidence)
	if err != nil {
		return err
	}
	return e.st.PutEvent(ctx, store.Event{Structure: ev.Structure, Rule: string(ev.Rule), Subject: ev.Subject, Kind: string(ev.Kind), Time: ev.Time, Evidence: evidence})
}

// ReviseEvent replaces the evidence of a stored raised event (its causes
// revised while the alarm is active); a row removed by retention is left
// alone.
func (e eventSink) ReviseEvent(ctx context.Context, ev alerts.Event) error {
	evidence, err := json.Marshal(ev.Evidence)
	if err != nil {
		return err
	}
	_, err = e.st.ReviseEvent(ctx, store.Event{Structure: ev.Structure, Rule: string(ev.Rule), Subject: ev.Subject, Kind: string(ev.Kind), Time: ev.Time, Evidence: evidence})
	return err
}
