package service

import (
	"context"
	"log/slog"
	"sync"
	"sync/atomic"
	"time"

	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/store"
)

// feeder carries one structure's committed readings from the ingest's
// commit goroutine to its pipeline, which it feeds and ticks on a goroutine
// of its own: the commit goroutine commits, has the messages acknowledged
// and hands the new readings over (offer) without waiting for
// reconciliation (epoch processing, alarm evaluation, the store writes of
// events).
//
// The queue between them is bounded in readings. When a message's readings
// do not fit, they are left out of live reconciliation: they are already
// durable in the store (and acknowledged), so nothing is lost, but their
// epochs are not reconciled live. They are counted
// (shm_reconcile_queue_dropped_readings_total, which the ReconcileDropping
// alarm watches) and logged with their logger time range, which
// `monitor replay` recomputes from the store. Their channels' last-reading
// times still reach the pipeline (Pipeline.Seed), so a drop does not look
// like a silent channel. The acknowledgement never waits: a slow
// reconciliation costs live results, never the broker's session.
type feeder struct {
	p     *pipeline.Pipeline
	name  string
	limit int       // readings the queue holds
	since time.Time // when watching began (for Pipeline.Seed)
	log   *slog.Logger
	met   feedMetrics

	mu      sync.Mutex
	items   [][]pipeline.Reading
	pending int  // readings in items
	tick    bool // a tick is due
	closed  bool
	// Readings dropped since the last log line: how many, their logger
	// time range, and each channel's latest time.
	drop     dropRange
	lastSeen map[string]time.Time // latest time per channel of dropped readings, not yet seeded
	logged   time.Time
	total    atomic.Uint64 // readings dropped since the start

	wake chan struct{} // capacity 1: something to do
	done chan struct{} // closed when run returns
}

// dropRange counts readings left out of live reconciliation and spans
// their logger times.
type dropRange struct {
	n        int
	from, to time.Time
}

// feedMetrics receives the queue's depth and drops (the metrics).
type feedMetrics interface {
	ReconcileQueue(structure string, n int)
	ReconcileDropped(structure string, n int)
}

// dropLogEvery is the least time between two log lines about drops of one
// structure; the line counts what was dropped since the last.
const dropLogEvery = time.Minute

func newFeeder(p *pipeline.Pipeline, limit int, since time.Time, log *slog.Logger, met feedMetrics) *feeder {
	return &feeder{p: p, name: p.Structure(), limit: limit, since: since, log: log, met: met,
		lastSeen: map[string]time.Time{}, wake: make(chan struct{}, 1), done: make(chan struct{})}
}

// signal wakes the feeding goroutine (never blocks).
func (f *feeder) signal() {
	select {
	case f.wake <- struct{}{}:
	default:
	}
}

// offer queues newly committed readings for reconciliation, or drops them
// when the queue is full. It never blocks on reconciliation (it runs on the
// ingest's commit goroutine). A message larger than the whole queue is
// taken when the queue is empty, so the bound is the larger of the limit
// and one message.
func (f *feeder) offer(rs []store.Reading) {
	in := make([]pipeline.Reading, len(rs))
	for i, r := range rs {
		in[i] = pipeline.Reading{Channel: r.Channel, Time: r.Time, Value: r.Value}
	}
	f.mu.Lock()
	if f.closed || (f.pending > 0 && f.pending+len(in) > f.limit) {
		f.dropLocked(in)
		f.mu.Unlock()
		f.met.ReconcileDropped(f.name, len(in))
		f.signal()
		return
	}
	f.items = append(f.items, in)
	f.pending += len(in)
	n := f.pending
	f.mu.Unlock()
	f.met.ReconcileQueue(f.name, n)
	f.signal()
}

// dropLocked notes dropped readings and logs them at most once per
// dropLogEvery. f.mu is held.
func (f *feeder) dropLocked(rs []pipeline.Reading) {
	f.total.Add(uint64(len(rs)))
	for _, r := range rs {
		if f.drop.n == 0 || r.Time.Before(f.drop.from) {
			f.drop.from = r.Time
		}
		if f.drop.n == 0 || r.Time.After(f.drop.to) {
			f.drop.to = r.Time
		}
		f.drop.n++
		if r.Time.After(f.lastSeen[r.Channel]) {
			f.lastSeen[r.Channel] = r.Time
		}
	}
	now := time.Now()
	if now.Sub(f.logged) < dropLogEvery {
		return
	}
	f.logged = now
	d := f.drop
	f.drop = dropRange{}
	f.log.Warn("reconciliation queue full: committed readings left out of live reconciliation (they are stored and acknowledged); "+
		"recompute their epochs with monitor replay over the time range, and raise epochs.queue_readings if this recurs",
		"structure", f.name, "readings", d.n, "from", d.from.UTC().Format(time.RFC3339Nano), "to", d.to.UTC().Format(time.RFC3339Nano),
		"queue_readings", f.limit, "dropped_total", f.total.Load())
}

// dropped returns the number of readings dropped since the start (for the
// ReconcileDropping rule).
func (f *feeder) dropped() uint64 { return f.total.Load() }

// ticked asks for a tick of the pipeline after what is queued now.
func (f *feeder) ticked() {
	f.mu.Lock()
	f.tick = true
	f.mu.Unlock()
	f.signal()
}

// run feeds the pipeline until close, then feeds what is left and returns.
func (f *feeder) run(ctx context.Context) {
	defer close(f.done)
	for {
		<-f.wake
		f.mu.Lock()
		items, tick, closed := f.items, f.tick, f.closed
		f.items, f.tick = nil, false
		var seen map[string]time.Time
		if len(f.lastSeen) > 0 {
			seen, f.lastSeen = f.lastSeen, map[string]time.Time{}
		}
		f.mu.Unlock()
		if seen != nil {
			f.p.Seed(seen, f.since)
		}
		for _, rs := range items {
			f.p.Feed(ctx, rs)
			f.mu.Lock()
			f.pending -= len(rs)
			n := f.pending
			f.mu.Unlock()
			f.met.ReconcileQueue(f.name, n)
		}
		if tick {
			f.p.Tick(ctx)
		}
		if closed {
			return
		}
	}
}

// close makes run feed what is queued and return, and waits for it. Later
// offers are dropped (none come: ingest has stopped before).
func (f *feeder) close() {
	f.mu.Lock()
	f.closed = true
	f.mu.Unlock()
	f.signal()
	<-f.done
}
