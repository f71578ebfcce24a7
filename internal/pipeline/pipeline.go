// Package pipeline is the one path from raw readings to results, alarms and
// their consumers, shared by live running and replay (DESIGN.md, Data flow):
//
//	raw reading -> calibrate (sensor map) -> epoch assembler
//	  -> reconcile (Processor) -> alarm rules (alerts.Evaluator) -> sinks
//
// Live running feeds it from the ingest's commit callback and ticks it with
// the wall clock; replay feeds it the stored readings in time order and has
// no clock, so epochs close on the readings' own times and the alarm
// evaluator's clock is the epoch time: the same readings give the same
// results and the same alarm times.
package pipeline

import (
	"context"
	"fmt"
	"log/slog"
	"sync"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/epoch"
	"trussmonitor/internal/model"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
)

// Result is one epoch's reconciliation with what the pipeline added to it:
// the alarm events the epoch raised or cleared, the alarms firing after it,
// and what an alarm that rose asks for (the sliding-window ranking of the
// causes, the unknown loads that left their recent distribution).
type Result struct {
	*reconcile.EpochResult
	// Window is the sliding-window ranking of the causes
	// (Processor.WindowCauses), on epochs that raise an alarm.
	Window []reconcile.RankedCause
	// LoadShifts flags unknown-load estimates that left their recent
	// distribution when an alarm rose.
	LoadShifts []reconcile.LoadShift
	// Events are the alarm events this epoch raised or cleared, Active the
	// alarms firing after it.
	Events []alerts.Event
	Active []alerts.Alarm
	// SkewedReadings is the cumulative count of readings with a skewed
	// logger clock (live only).
	SkewedReadings uint64
	// Took is the processing time of the epoch (not part of replayed
	// output: it differs between runs).
	Took time.Duration
}

// Sink receives every epoch's result, with the alarm events it raised or
// cleared, in time order. Sinks are called synchronously from the feeding
// goroutine and must not block for long.
type Sink interface {
	Epoch(r *Result)
}

// Config configures a Pipeline.
type Config struct {
	// Window and MaxLateness configure the epoch assembler.
	Window, MaxLateness time.Duration
	// Clock is the receiver's clock for live running (idle flush, clock
	// skew, channel silence between epochs); nil for replay.
	Clock func() time.Time
	// MaxFuture and MaxPast bound the clock skew accepted (live only).
	MaxFuture, MaxPast time.Duration
	// Processor configures reconciliation; a zero CauseSpan becomes
	// alerts.DivergingFor, the for-duration of the statistical alarms.
	Processor reconcile.ProcessorOptions
	// Rules are the alarm rules; nil means alerts.DefaultRules.
	Rules []alerts.Rule
	// Events stores alarm events (nil: not stored).
	Events alerts.EventSink
	// RejectCount returns the cumulative count of rejected payloads of this
	// structure (live ingest); nil means none.
	RejectCount func() uint64
	// CommitFailures returns the cumulative count of failed store commits
	// and BrokerConnected whether ingest is connected now (live ingest);
	// nil (replay) gives those rules no value.
	CommitFailures  func() uint64
	BrokerConnected func() bool
	// ReconcileDropped returns the cumulative count of readings left out
	// of live reconciliation by the queue in front of Feed (live only);
	// nil: none.
	ReconcileDropped func() uint64
	// Observer receives late-reading counts; may be nil.
	Observer epoch.Observer
	// Logger logs conversion problems at a bounded rate; nil discards.
	Logger *slog.Logger
}

// Stats are a pipeline's running counts.
type Stats struct {
	Readings        int64 // raw readings fed
	ConvertErrors   int64 // readings the sensor map could not convert
	Epochs          int64
	ByOutcome       map[string]int64
	AlarmOutOfOrder int64 // epochs not evaluated by the alarm rules (older than the last evaluation)
	Assembler       epoch.Stats
}

// Pipeline runs one structure's readings through calibration, epochs,
// reconciliation and alarms. It is safe for concurrent use.
type Pipeline struct {
	mu        sync.Mutex
	structure string
	sm        *sensors.Map
	proc      *reconcile.Processor
	asm       *epoch.Assembler
	eval      *alerts.Evaluator
	cfg       Config
	sinks     []Sink
	lastSeen  map[string]time.Time
	watched   time.Time // live: when watching began (Seed)
	channels  []string
	lastEval  time.Time
	lastEpoch time.Time
	lastFeed  time.Time // receiver clock at the last Feed (live only)
	stats     Stats
	logged    map[string]time.Time
	model     fitModel // which fit the members' w come from (alarms.go)
}

// New builds the pipeline of model m with sensor map sm.
func New(m *model.Model, sm *sensors.Map, cfg Config, sinks ...Sink) (*Pipeline, error) {
	name := m.Structure().Name
	if sm.StructureName() != name {
		return nil, fmt.Errorf("sensor map %s is for structure %q, the model is %q; pair the files of one structure", sm.File(), sm.StructureName(), name)
	}
	if cfg.Processor.CauseSpan <= 0 {
		cfg.Processor.CauseSpan = alerts.DivergingFor
	}
	proc, err := reconcile.NewProcessor(m, sm, cfg.Processor)
	if err != nil {
		return nil, err
	}
	var expected []string
	samples := map[string]int{}
	for _, ch := range sm.Channels() {
		expected = append(expected, ch.ID)
		if ch.SampleRate > 0 {
			samples[ch.ID] = ch.SamplesPer(cfg.Window)
		}
	}
	asm, err := epoch.New(epoch.Config{
		Structure: name, Window: cfg.Window, MaxLateness: cfg.MaxLateness, Expected: expected,
		SamplesPerChannel: samples, MaxFuture: cfg.MaxFuture, MaxPast: cfg.MaxPast,
	}, cfg.Clock, cfg.Observer)
	if err != nil {
		return nil, err
	}
	rules := cfg.Rules
	if rules == nil {
		if rules, err = alerts.DefaultRules(); err != nil {
			return nil, err
		}
	}
	eval, err := alerts.NewEvaluator(rules, cfg.Events)
	if err != nil {
		return nil, err
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.New(slog.DiscardHandler)
	}
	return &Pipeline{
		structure: name, sm: sm, proc: proc, asm: asm, eval: eval, cfg: cfg, sinks: sinks,
		lastSeen: map[string]time.Time{}, channels: expected,
		stats:  Stats{ByOutcome: map[string]int64{}},
		logged: map[string]time.Time{},
	}, nil
}

// Structure returns the name of the structure the pipeline reconciles.
func (p *Pipeline) Structure() string { return p.structure }

// Sensors returns the sensor map.
func (p *Pipeline) Sensors() *sensors.Map { return p.sm }

// Processor returns the reconciliation of this pipeline (read-only use).
func (p *Pipeline) Processor() *reconcile.Processor { return p.proc }

// AddSink adds a consumer of results.
func (p *Pipeline) AddSink(s Sink) {
	p.mu.Lock()
	p.sinks = append(p.sinks, s)
	p.mu.Unlock()
}

// Feed calibrates raw readings (as the logger sent them and the store
// keeps them), assembles them and processes every epoch they close.
func (p *Pipeline) Feed(ctx context.Context, rs []store.Reading) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.cfg.Clock != nil && len(rs) > 0 {
		p.lastFeed = p.cfg.Clock()
	}
	for _, r := range rs {
		p.stats.Readings++
		v, err := p.sm.Convert(r.Channel, r.Value)
		if err != nil {
			p.stats.ConvertErrors++
			p.logOnce("convert", "reading not converted", "structure", p.structure, "channel", r.Channel, "error", err)
			continue
		}
		if r.Time.After(p.lastSeen[r.Channel]) {
			p.lastSeen[r.Channel] = r.Time
		}
		for _, e := range p.asm.Add(epoch.Sample{Channel: r.Channel, Time: r.Time, Value: v}) {
			p.process(ctx, e)
		}
	}
}

// Seed sets the channels' last-reading times known from the store at
// start and the time watching began (live running): a channel with no
// reading since is silent from its last stored reading, and one with none
// at all from since.
func (p *Pipeline) Seed(last map[string]time.Time, since time.Time) {
	p.mu.Lock()
	defer p.mu.Unlock()
	for ch, t := range last {
		if t.After(p.lastSeen[ch]) {
			p.lastSeen[ch] = t
		}
	}
	p.watched = since
}

// Tick closes epochs whose idle time passed on the live clock and, when no
// epoch closed for a while, evaluates the alarm rules at the clock time so
// that a logger that fell silent raises its alarm.
func (p *Pipeline) Tick(ctx context.Context) {
	p.mu.Lock()
	defer p.mu.Unlock()
	for _, e := range p.asm.Tick() {
		p.process(ctx, e)
	}
	// Events the store refused (a full disk) are retried every tick until
	// stored, also while no epoch closes.
	if p.eval.Unstored() > 0 {
		if err := p.eval.Retry(ctx); err != nil {
			p.logOnce("alarm", "alarm events not stored yet; retrying", "structure", p.structure, "error", err)
		}
	}
	if p.cfg.Clock == nil {
		return
	}
	// A heartbeat only when nothing arrived for a while on the receiver's
	// clock: while readings flow (including a backlog after an outage) the
	// epochs themselves drive the rules.
	now := p.cfg.Clock()
	quiet := 2 * (p.cfg.Window + p.cfg.MaxLateness)
	t := now.Add(-p.cfg.Window - p.cfg.MaxLateness).UTC()
	if !t.After(p.lastEval) || now.Sub(p.lastFeed) < quiet || t.Sub(p.lastEpoch) < quiet || p.asm.Open() > 0 {
		return
	}
	obs := p.observation(t, nil)
	evs, err := p.eval.Observe(ctx, obs)
	if err != nil {
		p.logOnce("alarm", "alarm evaluation", "structure", p.structure, "error", err)
	}
	p.lastEval = t
	if len(evs) > 0 {
		res := &Result{
			EpochResult: &reconcile.EpochResult{Structure: p.structure, Time: t, Outcome: reconcile.OutcomeSkipped, Reason: "no epoch: every channel silent"},
			Events:      evs, Active: p.eval.Active(p.structure),
		}
		for _, s := range p.sinks {
			s.Epoch(res)
		}
	}
}

// Flush closes every open epoch (end of a replay, or shutdown).
func (p *Pipeline) Flush(ctx context.Context) {
	p.mu.Lock()
	defer p.mu.Unlock()
	for _, e := range p.asm.Flush() {
		p.process(ctx, e)
	}
}

// Stats returns the running counts.
func (p *Pipeline) Stats() Stats {
	p.mu.Lock()
	defer p.mu.Unlock()
	s := p.stats
	s.ByOutcome = make(map[string]int64, len(p.stats.ByOutcome))
	for k, v := range p.stats.ByOutcome {
		s.ByOutcome[k] = v
	}
	s.Assembler = p.asm.Stats()
	return s
}

// process reconciles one epoch, evaluates the alarms and hands the result
// to the sinks. The epoch's time is its end: the instant by which all its
// readings were taken.
func (p *Pipeline) process(ctx context.Context, e epoch.Epoch) {
	started := time.Now()
	values := make(map[string]float64, len(e.Channels))
	for _, c := range e.Channels {
		values[c.Channel] = c.Mean
	}
	t := e.End.UTC()
	res := &Result{EpochResult: p.proc.Process(t, p.sm.Evaluate(values), e.Missing)}
	p.stats.Epochs++
	p.stats.ByOutcome[res.Outcome]++
	p.lastEpoch = t
	if t.Before(p.lastEval) {
		p.stats.AlarmOutOfOrder++
	} else {
		obs := p.observation(t, res.EpochResult)
		if res.Outcome == reconcile.OutcomeAccepted || res.Outcome == reconcile.OutcomeRejected {
			p.model.mark(&obs, p.proc, res.EpochResult)
			// An alarm rising now carries the unknown loads that left
			// their recent distribution (they may absorb the fault).
			obs.LoadShifts = p.proc.LoadShifts(res.EpochResult)
		}
		evs, err := p.eval.Observe(ctx, obs)
		if err != nil {
			p.logOnce("alarm", "alarm evaluation", "structure", p.structure, "error", err)
		}
		p.lastEval = t
		res.Events = evs
		for _, ev := range evs {
			if ev.Kind == alerts.Raised {
				res.Window = p.proc.WindowCauses()
				break
			}
		}
		if err := p.reviseAlarms(ctx, res); err != nil {
			p.logOnce("alarm", "alarm causes not stored yet; retrying", "structure", p.structure, "error", err)
		}
	}
	res.Active = p.eval.Active(p.structure)
	adaptAfter(p.proc, res)
	st := p.asm.Stats()
	res.SkewedReadings = uint64(st.Future + st.Past)
	res.Took = time.Since(started)
	for _, s := range p.sinks {
		s.Epoch(res)
	}
}

// observation builds the alarm evaluator's input for an epoch (res may be
// nil for a heartbeat between epochs).
func (p *Pipeline) observation(t time.Time, res *reconcile.EpochResult) alerts.Observation {
	st := p.asm.Stats()
	o := alerts.Observation{Time: t, Structure: p.structure, SkewCount: uint64(st.Future + st.Past)}
	if p.cfg.RejectCount != nil {
		o.RejectCount = p.cfg.RejectCount()
	}
	if p.cfg.CommitFailures != nil {
		o.CommitFailures = p.cfg.CommitFailures()
	}
	if p.cfg.ReconcileDropped != nil {
		o.ReconcileDropped = p.cfg.ReconcileDropped()
	}
	if p.cfg.BrokerConnected != nil {
		c := p.cfg.BrokerConnected()
		o.BrokerConnected = &c
	}
	for _, ch := range p.channels {
		o.Channels = append(o.Channels, alerts.Channel{Channel: ch, LastReading: p.lastSeen[ch], WatchedSince: p.watched})
	}
	fitObservation(&o, res)
	return o
}

// fitObservation adds a fitted epoch's global test, members and causes to
// an alarm observation (nothing for nil or an epoch that was not fitted).
func fitObservation(o *alerts.Observation, res *reconcile.EpochResult) {
	if res == nil || (res.Outcome != reconcile.OutcomeAccepted && res.Outcome != reconcile.OutcomeRejected) {
		return
	}
	o.Fit = &alerts.Fit{ChiSquare: res.ChiSquare, DOF: res.DOF, PValue: res.PValue}
	// The evidence carries this epoch's ranking: its sizes are those of the
	// fault as it is now, where a window that only began to fill would
	// dilute them.
	// The first group is kept whole (its causes carry no order), then
	// further causes up to three.
	causes := res.Causes
	o.Causes = append(o.Causes, alerts.ShownCauses(causes)...)
	for _, m := range res.Members {
		if !m.Available {
			continue
		}
		bias := 0.0
		if m.Redundancy > 0 {
			bias = m.AdjustedN / m.Redundancy
		}
		o.Members = append(o.Members, alerts.Member{Member: m.Member, W: m.W, Checkable: m.Checkable, EstimatedBias: bias})
	}
	o.Utilisation = utilisationObservations(res.State)
}

// logOnce logs a problem at most once a minute per kind.
func (p *Pipeline) logOnce(kind, msg string, args ...any) {
	now := time.Now()
	if last, ok := p.logged[kind]; ok && now.Sub(last) < time.Minute {
		return
	}
	p.logged[kind] = now
	p.cfg.Logger.Warn(msg, args...)
}
