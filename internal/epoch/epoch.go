// Package epoch groups time-stamped readings of one structure into epochs:
// fixed windows of logger time in which each channel's readings are
// averaged, so that every epoch is one time-aligned snapshot of the
// structure for reconciliation.
//
// Every reading inside the window is averaged (a channel sampled at 50 Hz
// contributes 50 readings to a 1 s epoch). An epoch closes when every
// expected channel has delivered its expected number of readings
// (SamplesPerChannel, from the declared sampling rate; ExpectedSamples
// otherwise), or when the watermark passes its end: the watermark is the
// largest logger time seen minus MaxLateness. In live running an idle flush
// driven by an injected clock also closes epochs when readings stop
// arriving. Epochs are emitted in time order: a complete epoch waits for
// earlier open ones. A reading for an epoch already closed is late: counted
// and reported, not assembled (it is stored raw, so a replay sees it).
// Readings stamped far in the future or past of the clock are clock skew:
// counted and kept out of assembly, so a logger with a wrong clock cannot
// drag the watermark and close every epoch early.
//
// For the same readings in the same order (and, for the idle flush and the
// skew check, the same clock readings) the output is the same: replay
// depends on it.
package epoch

import (
	"errors"
	"fmt"
	"maps"
	"math"
	"slices"
	"sort"
	"time"
)

// Sample is one channel's value in engineering units (after the sensor
// map's calibration) at the logger's time.
type Sample struct {
	Channel string
	Time    time.Time
	Value   float64
}

// Config configures an Assembler.
type Config struct {
	// Structure names the structure (for reports and the observer).
	Structure string
	// Window is the epoch length, e.g. 1 s. Epoch boundaries are multiples
	// of Window since the Unix epoch.
	Window time.Duration
	// MaxLateness is how far behind the newest logger time a reading may
	// arrive and still join its epoch.
	MaxLateness time.Duration
	// Expected are the channels every epoch should have.
	Expected []string
	// ExpectedSamples is the number of readings per expected channel that
	// makes an epoch complete (e.g. 10 for 10 Hz gauges and a 1 s window).
	// Zero means 1.
	ExpectedSamples int
	// SamplesPerChannel gives, per expected channel, the number of readings
	// that completes an epoch (from the channel's declared sampling rate:
	// 50 for 50 Hz and a 1 s window); a channel not listed expects
	// ExpectedSamples. Every reading of the window is averaged, whatever the
	// count; the count only decides whether the epoch may close before the
	// watermark passes its end.
	SamplesPerChannel map[string]int
	// IdleFlush, with a clock, closes an epoch once the clock is this far
	// past its end even though no newer readings came (a silent logger).
	// Zero means Window + MaxLateness.
	IdleFlush time.Duration
	// MaxFuture and MaxPast bound how far a reading's time may lie ahead
	// of or behind the clock before it counts as clock skew. Zero
	// disables that check. Both need a clock.
	MaxFuture time.Duration
	MaxPast   time.Duration
}

// Close reasons.
const (
	ClosedComplete  = "complete"  // every expected channel reported
	ClosedWatermark = "watermark" // newer readings moved the watermark past it
	ClosedIdle      = "idle"      // the clock passed its end by IdleFlush
	ClosedFlush     = "flush"     // Flush at the end of a replay or on shutdown
)

// ChannelMean is one channel's mean over an epoch.
type ChannelMean struct {
	Channel string
	Mean    float64
	N       int // readings averaged
}

// Epoch is one closed window.
type Epoch struct {
	Structure string
	Start     time.Time // inclusive
	End       time.Time // exclusive
	// Channels are the channels that reported, sorted by name.
	Channels []ChannelMean
	// Missing are the expected channels with no reading, sorted.
	Missing []string
	// Short are expected channels with fewer readings than expected.
	Short []string
	// Reason is why it closed (ClosedComplete, ...).
	Reason string
}

// Mean returns the mean of channel in the epoch, and whether it reported.
func (e Epoch) Mean(channel string) (float64, bool) {
	i := sort.Search(len(e.Channels), func(i int) bool { return e.Channels[i].Channel >= channel })
	if i < len(e.Channels) && e.Channels[i].Channel == channel {
		return e.Channels[i].Mean, true
	}
	return 0, false
}

// Stats are the assembler's running counts.
type Stats struct {
	Readings   int64 // assembled into an epoch
	Late       int64 // for an epoch already closed
	Future     int64 // clock skew: more than MaxFuture ahead of the clock
	Past       int64 // clock skew: more than MaxPast behind the clock
	Unexpected int64 // channel not in Expected (ignored)
	NotFinite  int64 // NaN or Inf (ignored)
	Epochs     int64 // emitted
	Incomplete int64 // emitted with a missing or short channel
	// LateByChannel counts late readings per channel.
	LateByChannel map[string]int64
}

// Observer receives late-reading counts (outcome "late"); it is a subset of
// ingest.Observer, so the same metrics object serves both.
type Observer interface {
	ReadingsHandled(structure, outcome string, n int)
}

// acc is an open epoch: per expected channel (by its place in name order)
// the sum and count of its readings.
type acc struct {
	index int64
	sum   []float64
	n     []int
	full  int // expected channels with their expected number of readings
}

// Assembler assembles the epochs of one structure. It is not safe for
// concurrent use; feed it from one goroutine.
type Assembler struct {
	cfg      Config
	clock    func() time.Time
	obs      Observer
	expected map[string]bool
	need     map[string]int // readings per epoch that complete each expected channel
	window   int64          // ns
	// The expected channels in name order, their places in it, and the
	// readings that complete each.
	names  []string
	place  map[string]int
	needAt []int
	spare  []*acc // closed epochs' accumulators, for reuse

	open       []*acc // by index, ascending
	closedUpTo int64  // every epoch with index <= closedUpTo is closed
	maxEvent   int64  // ns, largest logger time assembled
	seen       bool
	stats      Stats
}

// New checks cfg and returns an Assembler. clock is the receiver's clock
// for the idle flush and the skew check; nil (replay) disables both. obs may
// be nil.
func New(cfg Config, clock func() time.Time, obs Observer) (*Assembler, error) {
	if cfg.Window <= 0 {
		return nil, fmt.Errorf("epoch: structure %q: window %v must be positive (e.g. 1s)", cfg.Structure, cfg.Window)
	}
	if cfg.MaxLateness < 0 {
		return nil, fmt.Errorf("epoch: structure %q: max lateness %v is negative", cfg.Structure, cfg.MaxLateness)
	}
	if len(cfg.Expected) == 0 {
		return nil, fmt.Errorf("epoch: structure %q: no expected channels", cfg.Structure)
	}
	if cfg.ExpectedSamples <= 0 {
		cfg.ExpectedSamples = 1
	}
	if cfg.IdleFlush <= 0 {
		cfg.IdleFlush = cfg.Window + cfg.MaxLateness
	}
	if cfg.MaxFuture < 0 || cfg.MaxPast < 0 {
		return nil, errors.New("epoch: max future and max past must not be negative")
	}
	a := &Assembler{cfg: cfg, clock: clock, obs: obs, expected: map[string]bool{}, window: cfg.Window.Nanoseconds(), closedUpTo: math.MinInt64}
	for _, c := range cfg.Expected {
		if a.expected[c] {
			return nil, fmt.Errorf("epoch: structure %q: channel %q listed twice in expected channels", cfg.Structure, c)
		}
		a.expected[c] = true
	}
	a.need = make(map[string]int, len(cfg.Expected))
	for _, c := range cfg.Expected {
		a.need[c] = cfg.ExpectedSamples
	}
	for c, n := range cfg.SamplesPerChannel {
		if !a.expected[c] {
			return nil, fmt.Errorf("epoch: structure %q: samples per epoch given for channel %q, which is not an expected channel", cfg.Structure, c)
		}
		if n < 1 {
			return nil, fmt.Errorf("epoch: structure %q: channel %q: %d samples per epoch; give at least 1", cfg.Structure, c, n)
		}
		a.need[c] = n
	}
	a.names = slices.Sorted(maps.Keys(a.expected))
	a.place = make(map[string]int, len(a.names))
	a.needAt = make([]int, len(a.names))
	for i, c := range a.names {
		a.place[c] = i
		a.needAt[i] = a.need[c]
	}
	a.stats.LateByChannel = map[string]int64{}
	return a, nil
}

// floorDiv is integer division rounding toward minus infinity.
func floorDiv(a, b int64) int64 {
	q := a / b
	if (a%b != 0) && ((a < 0) != (b < 0)) {
		q--
	}
	return q
}

// Add assembles one reading and returns the epochs it closed, oldest first.
func (a *Assembler) Add(r Sample) []Epoch {
	if math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
		a.stats.NotFinite++
		return nil
	}
	ch, ok := a.place[r.Channel]
	if !ok {
		a.stats.Unexpected++
		return nil
	}
	if a.clock != nil {
		now := a.clock()
		if a.cfg.MaxFuture > 0 && r.Time.Sub(now) > a.cfg.MaxFuture {
			a.stats.Future++
			return nil
		}
		if a.cfg.MaxPast > 0 && now.Sub(r.Time) > a.cfg.MaxPast {
			a.stats.Past++
			return nil
		}
	}
	ts := r.Time.UnixNano()
	k := floorDiv(ts, a.window)
	if k <= a.closedUpTo {
		a.stats.Late++
		a.stats.LateByChannel[r.Channel]++
		if a.obs != nil {
			a.obs.ReadingsHandled(a.cfg.Structure, "late", 1)
		}
		return nil
	}
	e := a.epochAt(k)
	if e.n[ch]+1 == a.needAt[ch] {
		e.full++
	}
	e.sum[ch] += r.Value
	e.n[ch]++
	a.stats.Readings++
	if !a.seen || ts > a.maxEvent {
		a.maxEvent, a.seen = ts, true
	}
	// Watermark: every epoch ending at or before it closes.
	wm := a.maxEvent - a.cfg.MaxLateness.Nanoseconds()
	out := a.closeThrough(floorDiv(wm, a.window)-1, ClosedWatermark)
	return append(out, a.closeCompleteHead()...)
}

// epochAt returns the open epoch k, opening it when needed.
func (a *Assembler) epochAt(k int64) *acc {
	i := sort.Search(len(a.open), func(i int) bool { return a.open[i].index >= k })
	if i < len(a.open) && a.open[i].index == k {
		return a.open[i]
	}
	var e *acc
	if last := len(a.spare) - 1; last >= 0 {
		e = a.spare[last]
		a.spare = a.spare[:last]
		clear(e.sum)
		clear(e.n)
		e.index, e.full = k, 0
	} else {
		e = &acc{index: k, sum: make([]float64, len(a.names)), n: make([]int, len(a.names))}
	}
	a.open = slices.Insert(a.open, i, e)
	return e
}

// closeThrough closes every open epoch with index <= k.
func (a *Assembler) closeThrough(k int64, reason string) []Epoch {
	var out []Epoch
	for len(a.open) > 0 && a.open[0].index <= k {
		out = append(out, a.emit(a.open[0], reason))
		a.open = a.open[1:]
	}
	if k > a.closedUpTo {
		a.closedUpTo = k
	}
	return out
}

// closeCompleteHead closes complete epochs at the head of the open list
// (a complete epoch behind an open incomplete one waits, keeping order).
func (a *Assembler) closeCompleteHead() []Epoch {
	var out []Epoch
	for len(a.open) > 0 && a.open[0].full == len(a.expected) {
		e := a.open[0]
		out = append(out, a.emit(e, ClosedComplete))
		a.open = a.open[1:]
		if e.index > a.closedUpTo {
			a.closedUpTo = e.index
		}
	}
	return out
}

// Tick closes, by the clock, epochs whose end lies IdleFlush or more in the
// past (a logger gone silent). Without a clock it does nothing.
func (a *Assembler) Tick() []Epoch {
	if a.clock == nil {
		return nil
	}
	limit := a.clock().Add(-a.cfg.IdleFlush).UnixNano()
	k := floorDiv(limit, a.window) - 1
	// Close only the epochs that are open. The closed mark moves to the last
	// epoch closed, not to the clock: readings older than the clock but newer
	// than every closed epoch (a logger's backlog delivered after an outage)
	// still form epochs instead of counting as late.
	var out []Epoch
	for len(a.open) > 0 && a.open[0].index <= k {
		e := a.open[0]
		out = append(out, a.emit(e, ClosedIdle))
		a.open = a.open[1:]
		if e.index > a.closedUpTo {
			a.closedUpTo = e.index
		}
	}
	return out
}

// Flush closes every open epoch (end of a replay, or shutdown).
func (a *Assembler) Flush() []Epoch {
	if len(a.open) == 0 {
		return nil
	}
	return a.closeThrough(a.open[len(a.open)-1].index, ClosedFlush)
}

// Open returns the number of epochs still open.
func (a *Assembler) Open() int { return len(a.open) }

// Stats returns a copy of the running counts.
func (a *Assembler) Stats() Stats {
	s := a.stats
	s.LateByChannel = make(map[string]int64, len(a.stats.LateByChannel))
	for k, v := range a.stats.LateByChannel {
		s.LateByChannel[k] = v
	}
	return s
}

// emit builds the closed epoch of e (channels, missing and short ones in
// name order) and keeps e for reuse.
func (a *Assembler) emit(e *acc, reason string) Epoch {
	start := time.Unix(0, e.index*a.window).UTC()
	ep := Epoch{Structure: a.cfg.Structure, Start: start, End: start.Add(a.cfg.Window), Reason: reason}
	reported := 0
	for _, n := range e.n {
		if n > 0 {
			reported++
		}
	}
	if reported > 0 {
		ep.Channels = make([]ChannelMean, 0, reported)
	}
	for i, c := range a.names {
		switch n := e.n[i]; {
		case n == 0:
			ep.Missing = append(ep.Missing, c)
		default:
			ep.Channels = append(ep.Channels, ChannelMean{Channel: c, Mean: e.sum[i] / float64(n), N: n})
			if n < a.needAt[i] {
				ep.Short = append(ep.Short, c)
			}
		}
	}
	a.spare = append(a.spare, e)
	a.stats.Epochs++
	if len(ep.Missing) > 0 || len(ep.Short) > 0 {
		a.stats.Incomplete++
	}
	return ep
}
