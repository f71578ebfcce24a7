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
// The queue between them is bounded in readings held in memory. When a
// message's readings do not fit, the queue keeps only their logger time
// range (a gap), and every later message joins that gap until the feeding
// goroutine reaches it: the readings are durable in the store already, so
// it reads the gap back from there (store.ReadReadings, in time order) and
// feeds it, then goes on with what was queued after. Memory stays bounded,
// nothing is left out of live reconciliation, and the acknowledgement never
// waits; the price of a full queue is one read of those readings back from
// SQLite. Readings that found the queue full are counted
// (shm_reconcile_queue_overflow_readings_total), the depth (readings in
// memory and in gaps) is shm_reconcile_queue_readings.
//
// Exactly once: the feeding goroutine knows each channel's latest time fed.
// A gap's read-back skips readings of a channel at or before that time
// (fed already, from an entry before the gap), and an entry after a gap
// skips readings at or before the latest time the read-back fed of their
// channel (the store had them already). A reading that arrives out of
// order for its channel across a gap is thereby left to replay.
//
// Only if the read-back fails (the store unreadable) are the gap's
// readings left out of live reconciliation: counted in
// shm_reconcile_queue_dropped_readings_total (the ReconcileDropping rule
// fires) and logged with their time range, which `monitor replay`
// recomputes once the store is readable. Their channels' last times still
// reach the pipeline (Pipeline.Seed), so that does not look like silence.
type feeder struct {
	p     *pipeline.Pipeline
	src   readingSource
	name  string
	limit int       // readings the queue holds in memory
	since time.Time // when watching began (for Pipeline.Seed)
	log   *slog.Logger
	met   feedMetrics

	mu      sync.Mutex
	items   []feedEntry
	pending int  // readings in memory (in items)
	gapped  int  // readings in gaps not yet fed
	open    *gap // the last entry's gap, while later offers join it
	tick    bool // a tick is due
	closed  bool
	logged  time.Time // last log line about a full queue

	// Owned by the feeding goroutine: each channel's latest time fed, and
	// the latest time a gap's read-back fed.
	lastFed  map[string]time.Time
	readBack map[string]time.Time

	dropped atomic.Uint64 // readings left out of live reconciliation since the start

	wake chan struct{} // capacity 1: something to do
	done chan struct{} // closed when run returns
}

// feedEntry is one committed message's readings, or a gap.
type feedEntry struct {
	rs  []store.Reading
	gap *gap
}

// gap is the readings of the messages that found the queue full: only
// their logger time range (inclusive) and count; they are in the store.
type gap struct {
	from, to time.Time
	n        int
	last     map[string]time.Time // each channel's latest time, for Seed if the read-back fails
}

// readingSource reads stored readings back in time order (*store.Store).
type readingSource interface {
	ReadReadings(ctx context.Context, structure string, from, to time.Time, fn func(store.Reading) error) error
}

// feedMetrics receives the queue's depth, overflows and drops (the
// metrics).
type feedMetrics interface {
	ReconcileQueue(structure string, n int)
	ReconcileOverflow(structure string, n int)
	ReconcileDropped(structure string, n int)
}

// fullLogEvery is the least time between two log lines about a full queue
// of one structure.
const fullLogEvery = time.Minute

// readBackChunk is the number of read-back readings fed at a time.
const readBackChunk = 4096

func newFeeder(p *pipeline.Pipeline, src readingSource, limit int, since time.Time, log *slog.Logger, met feedMetrics) *feeder {
	return &feeder{p: p, src: src, name: p.Structure(), limit: limit, since: since, log: log, met: met,
		lastFed: map[string]time.Time{}, readBack: map[string]time.Time{},
		wake: make(chan struct{}, 1), done: make(chan struct{})}
}

// signal wakes the feeding goroutine (never blocks).
func (f *feeder) signal() {
	select {
	case f.wake <- struct{}{}:
	default:
	}
}

// offer queues newly committed readings for reconciliation, or adds them
// to a gap when the queue is full. It never waits for reconciliation (it
// runs on the ingest's commit goroutine). A message larger than the whole
// queue is taken when the queue is empty, so the bound is the larger of
// the limit and one message.
func (f *feeder) offer(rs []store.Reading) {
	if len(rs) == 0 {
		return
	}
	in := append([]store.Reading(nil), rs...)
	f.mu.Lock()
	if f.open == nil && (f.pending == 0 || f.pending+len(in) <= f.limit) {
		f.items = append(f.items, feedEntry{rs: in})
		f.pending += len(in)
		depth := f.pending + f.gapped
		f.mu.Unlock()
		f.met.ReconcileQueue(f.name, depth)
		f.signal()
		return
	}
	g := f.open
	if g == nil {
		g = &gap{from: rs[0].Time, to: rs[0].Time, last: map[string]time.Time{}}
		f.open = g
		f.items = append(f.items, feedEntry{gap: g})
	}
	for _, r := range rs {
		if r.Time.Before(g.from) {
			g.from = r.Time
		}
		if r.Time.After(g.to) {
			g.to = r.Time
		}
		if r.Time.After(g.last[r.Channel]) {
			g.last[r.Channel] = r.Time
		}
	}
	g.n += len(rs)
	f.gapped += len(rs)
	depth, from := f.pending+f.gapped, g.from
	logNow := time.Since(f.logged) >= fullLogEvery
	if logNow {
		f.logged = time.Now()
	}
	f.mu.Unlock()
	f.met.ReconcileOverflow(f.name, len(rs))
	f.met.ReconcileQueue(f.name, depth)
	if logNow {
		f.log.Warn("reconciliation queue full: later readings are read back from the store when reconciliation reaches them (they are stored and acknowledged); raise epochs.queue_readings if reconciliation is often this far behind",
			"structure", f.name, "queue_readings", f.limit, "from", from.UTC().Format(time.RFC3339Nano))
	}
	f.signal()
}

// droppedTotal returns the number of readings left out of live
// reconciliation since the start (for the ReconcileDropping rule).
func (f *feeder) droppedTotal() uint64 { return f.dropped.Load() }

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
		for {
			f.mu.Lock()
			if len(f.items) == 0 {
				break // with f.mu held
			}
			e := f.items[0]
			f.items[0] = feedEntry{}
			f.items = f.items[1:]
			if e.gap != nil && e.gap == f.open {
				f.open = nil // later offers queue after it
			}
			f.mu.Unlock()
			if e.gap != nil {
				f.feedGap(ctx, e.gap)
				f.mu.Lock()
				f.gapped -= e.gap.n
			} else {
				f.feedEntry(ctx, e.rs)
				f.mu.Lock()
				f.pending -= len(e.rs)
			}
			depth := f.pending + f.gapped
			f.mu.Unlock()
			f.met.ReconcileQueue(f.name, depth)
		}
		tick, closed := f.tick, f.closed
		f.tick = false
		f.mu.Unlock()
		if tick {
			f.p.Tick(ctx)
		}
		if closed {
			return
		}
	}
}

// feedEntry feeds one message's readings, less those a gap's read-back
// already fed.
func (f *feeder) feedEntry(ctx context.Context, rs []store.Reading) {
	if len(f.readBack) > 0 {
		kept := rs[:0]
		for _, r := range rs {
			if t, ok := f.readBack[r.Channel]; ok && !r.Time.After(t) {
				continue
			}
			kept = append(kept, r)
		}
		rs = kept
	}
	f.feed(ctx, rs)
}

// feed feeds readings and notes each channel's latest time fed.
func (f *feeder) feed(ctx context.Context, rs []store.Reading) {
	if len(rs) == 0 {
		return
	}
	f.p.Feed(ctx, rs)
	for _, r := range rs {
		if r.Time.After(f.lastFed[r.Channel]) {
			f.lastFed[r.Channel] = r.Time
		}
	}
}

// feedGap reads a gap's readings back from the store and feeds them.
func (f *feeder) feedGap(ctx context.Context, g *gap) {
	buf := make([]store.Reading, 0, min(g.n, readBackChunk))
	fed := 0
	flush := func() {
		f.feed(ctx, buf)
		fed += len(buf)
		buf = buf[:0]
	}
	// The store keeps times to the microsecond: [from, to + 1 us) holds
	// every reading of the gap.
	err := f.src.ReadReadings(ctx, f.name, g.from, g.to.Add(time.Microsecond), func(r store.Reading) error {
		if t, ok := f.lastFed[r.Channel]; ok && !r.Time.After(t) {
			return nil // fed from an entry before the gap
		}
		buf = append(buf, r)
		if t := f.readBack[r.Channel]; r.Time.After(t) {
			f.readBack[r.Channel] = r.Time
		}
		if len(buf) == cap(buf) {
			flush()
		}
		return nil
	})
	flush()
	if err == nil {
		return
	}
	lost := max(g.n-fed, 0)
	f.dropped.Add(uint64(lost))
	f.met.ReconcileDropped(f.name, lost)
	f.p.Seed(g.last, f.since)
	f.log.Error("reconciliation: reading back readings that found the queue full failed; they are stored but left out of live reconciliation: recompute their epochs with monitor replay over the time range",
		"structure", f.name, "readings", lost, "from", g.from.UTC().Format(time.RFC3339Nano), "to", g.to.UTC().Format(time.RFC3339Nano), "error", err)
}

// close makes run feed what is queued and return, and waits for it.
// Ingest has stopped before: no offer comes later.
func (f *feeder) close() {
	f.mu.Lock()
	f.closed = true
	f.mu.Unlock()
	f.signal()
	<-f.done
}
