// Package fatiguetrack runs the fatigue count of every fatigue gauge as its
// readings are stored: raw reading -> local stress (the sensor map's
// conversion) -> streaming rainflow counter -> stress-range histogram of
// the hour, with the counter state and the histograms written in the same
// transaction as the readings (store.Batch.Fatigue), so that a restart
// continues exactly where the last commit left off.
package fatiguetrack

import (
	"context"
	"fmt"
	"sort"
	"sync"
	"time"

	"trussmonitor/internal/fatigue"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
)

// Stresser converts a raw reading of a gauge channel to the local stress
// (Pa). *sensors.Map implements it.
type Stresser interface {
	Stress(channel string, raw float64) (float64, error)
}

// Observer receives what each commit added (metrics). Called on the
// committing goroutine after the commit; must not block.
type Observer interface {
	// FatigueCounted reports the cycles one gauge counted in a commit and its
	// damage accumulated since its start (Miner's sum, ratio).
	FatigueCounted(structure, gauge string, cycles, damageTotal float64)
}

// StateStore is the part of the store the tracker reads at start.
type StateStore interface {
	FatigueStates(ctx context.Context, structure string) ([]store.FatigueState, error)
	FatigueHours(ctx context.Context, structure, channel string, from, to time.Time) ([]store.FatigueHour, error)
}

type key struct{ structure, channel string }

type gauge struct {
	key
	src     Stresser
	detail  sensors.Fatigue
	counter fatigue.Counter
	last    time.Time // time of the last sample counted
	damage  float64   // accumulated since the detail's start
	cycles  float64   // counted since the tracker started
	late    int64     // samples older than the last counted, left out
	invalid int64     // samples whose stress could not be computed
}

// Tracker holds the fatigue gauges of one or more structures. Stage is
// called from the one committing goroutine; Gauges may be called from any.
type Tracker struct {
	obs    Observer
	mu     sync.Mutex
	gauges map[key]*gauge
	order  []key
}

// New makes an empty Tracker; obs may be nil.
func New(obs Observer) *Tracker {
	return &Tracker{obs: obs, gauges: map[key]*gauge{}}
}

// Add registers the fatigue gauges of a structure's sensor map.
func (t *Tracker) Add(structure string, src Stresser, gauges []sensors.FatigueGauge) {
	t.mu.Lock()
	defer t.mu.Unlock()
	for _, g := range gauges {
		k := key{structure, g.Channel}
		if _, dup := t.gauges[k]; dup {
			continue
		}
		t.gauges[k] = &gauge{key: k, src: src, detail: g.Fatigue}
		t.order = append(t.order, k)
	}
}

// Len is the number of gauges tracked.
func (t *Tracker) Len() int {
	t.mu.Lock()
	defer t.mu.Unlock()
	return len(t.gauges)
}

// Load restores every gauge's counter state from the store and sums its
// stored damage since its start.
func (t *Tracker) Load(ctx context.Context, st StateStore) error {
	t.mu.Lock()
	defer t.mu.Unlock()
	byStructure := map[string]bool{}
	for _, k := range t.order {
		byStructure[k.structure] = true
	}
	for s := range byStructure {
		states, err := st.FatigueStates(ctx, s)
		if err != nil {
			return err
		}
		for _, fs := range states {
			g, ok := t.gauges[key{s, fs.Channel}]
			if !ok {
				continue // no longer a fatigue gauge in the sensor map
			}
			if fs.BinWidth != fatigue.BinWidth {
				return fmt.Errorf("fatiguetrack: %s/%s: stored histograms have bins of %g Pa, this build uses %g Pa", s, fs.Channel, fs.BinWidth, fatigue.BinWidth)
			}
			if err := g.counter.UnmarshalBinary(fs.State); err != nil {
				return fmt.Errorf("fatiguetrack: %s/%s: %w", s, fs.Channel, err)
			}
			g.last = fs.LastTime
		}
	}
	for _, k := range t.order {
		g := t.gauges[k]
		hours, err := st.FatigueHours(ctx, k.structure, k.channel, g.detail.Start, time.Unix(1<<40, 0))
		if err != nil {
			return err
		}
		g.damage = 0
		for _, h := range hours {
			g.damage += g.detail.Curve.HistogramDamage(HistogramOf(h.Bins))
		}
	}
	return nil
}

// HistogramOf turns stored bins into a histogram.
func HistogramOf(bins []store.FatigueBin) *fatigue.Histogram {
	var h fatigue.Histogram
	for _, b := range bins {
		_ = h.AddBin(b.Bin, b.Cycles)
	}
	return &h
}

type sample struct {
	t time.Time
	s float64
}

// staged is one gauge's result of a commit, applied once the commit holds.
type staged struct {
	g       *gauge
	counter fatigue.Counter
	last    time.Time
	cycles  float64
	damage  float64
	late    int64
	invalid int64
}

// Stage computes the fatigue updates of a commit's new readings (res says
// which are new) without changing the tracker; apply makes them the
// tracker's state and must be called once the transaction has committed.
// It fits store.Batch.Fatigue.
func (t *Tracker) Stage(groups []store.Group, res store.CommitResult) (ups []store.FatigueUpdate, apply func(), err error) {
	per := map[*gauge][]sample{}
	t.mu.Lock()
	for gi, grp := range groups {
		for i, r := range grp.Readings {
			if gi < len(res.New) && i < len(res.New[gi]) && !res.New[gi][i] {
				continue // a redelivery: counted when it was first stored
			}
			g, ok := t.gauges[key{grp.Structure, r.Channel}]
			if !ok {
				continue
			}
			per[g] = append(per[g], sample{r.Time, r.Value})
		}
	}
	t.mu.Unlock()
	if len(per) == 0 {
		return nil, func() {}, nil
	}
	gs := make([]*gauge, 0, len(per))
	for g := range per {
		gs = append(gs, g)
	}
	sort.Slice(gs, func(i, j int) bool {
		if gs[i].structure != gs[j].structure {
			return gs[i].structure < gs[j].structure
		}
		return gs[i].channel < gs[j].channel
	})
	var done []staged
	for _, g := range gs {
		ss := per[g]
		sort.SliceStable(ss, func(i, j int) bool { return ss[i].t.Before(ss[j].t) })
		st := staged{g: g, counter: g.counter.Clone(), last: g.last}
		up := store.FatigueUpdate{Structure: g.structure, Channel: g.channel, BinWidth: fatigue.BinWidth}
		var hist fatigue.Histogram
		var hour time.Time
		var buf []float64
		flush := func() {
			if len(buf) == 0 {
				return
			}
			st.counter.Add(buf, &hist)
			buf = buf[:0]
			if hist.Empty() {
				return
			}
			fh := store.FatigueHour{Hour: hour}
			for _, b := range hist.Bins() {
				fh.Bins = append(fh.Bins, store.FatigueBin{Bin: b.Index, Cycles: b.Cycles})
			}
			up.Hours = append(up.Hours, fh)
			st.cycles += hist.Cycles()
			if !hour.Before(g.detail.Start) {
				st.damage += g.detail.Curve.HistogramDamage(&hist)
			}
			hist.Reset()
		}
		for _, s := range ss {
			if !st.last.IsZero() && !s.t.After(st.last) {
				st.late++
				continue
			}
			stress, err := g.src.Stress(g.channel, s.s)
			if err != nil {
				st.invalid++
				continue
			}
			h := s.t.UTC().Truncate(time.Hour)
			if !h.Equal(hour) {
				flush()
				hour = h
			}
			buf = append(buf, stress)
			st.last = s.t
		}
		flush()
		if st.last.Equal(g.last) && len(up.Hours) == 0 {
			done = append(done, st) // only late or invalid samples: nothing to write
			continue
		}
		b, err := st.counter.MarshalBinary()
		if err != nil {
			return nil, nil, err
		}
		up.State, up.LastTime = b, st.last
		ups = append(ups, up)
		done = append(done, st)
	}
	apply = func() {
		t.mu.Lock()
		for _, st := range done {
			g := st.g
			g.counter, g.last = st.counter, st.last
			g.cycles += st.cycles
			g.damage += st.damage
			g.late += st.late
			g.invalid += st.invalid
		}
		t.mu.Unlock()
		if t.obs != nil {
			for _, st := range done {
				t.obs.FatigueCounted(st.g.structure, st.g.channel, st.cycles, st.g.damage)
			}
		}
	}
	return ups, apply, nil
}

// GaugeStatus is the live fatigue state of one gauge.
type GaugeStatus struct {
	Structure, Channel string
	// DamageTotal is Miner's sum since the detail's start (including what
	// was stored before this process started).
	DamageTotal float64
	// Cycles counted since this process started.
	Cycles float64
	// LastTime is the time of the last sample counted.
	LastTime time.Time
	// Late and Invalid count samples left out: older than the last counted,
	// or without a stress.
	Late, Invalid int64
	// Residue is the number of turning points in the counter's residue.
	Residue int
	Detail  sensors.Fatigue
}

// Gauges lists the gauges' live state in the order they were added.
func (t *Tracker) Gauges() []GaugeStatus {
	t.mu.Lock()
	defer t.mu.Unlock()
	out := make([]GaugeStatus, 0, len(t.order))
	for _, k := range t.order {
		g := t.gauges[k]
		out = append(out, GaugeStatus{Structure: k.structure, Channel: k.channel, DamageTotal: g.damage, Cycles: g.cycles,
			LastTime: g.last, Late: g.late, Invalid: g.invalid, Residue: g.counter.ResidueLen(), Detail: g.detail})
	}
	return out
}
