// Package livestate keeps the latest reconciliation results of the
// monitored structures in memory, with a bounded history per gauged
// member, and serves them to the dashboard (it implements
// dashboard.Source). Older history and events come from the store when one
// is given.
package livestate

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"sort"
	"sync"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/dashboard"
	"trussmonitor/internal/model"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/store"
)

// EventStore reads stored alarm events (the store package).
type EventStore interface {
	Events(ctx context.Context, structure string, from, to time.Time) ([]store.Event, error)
}

// DefaultHistory is the number of epochs kept in memory per structure
// (a day at one epoch per 2 s).
const DefaultHistory = 43200

// Live is the in-memory state of every registered structure.
type Live struct {
	mu      sync.RWMutex
	order   []string
	structs map[string]*entry
	events  EventStore
	history int
}

type point struct {
	t    time.Time
	vals []dashboard.SeriesPoint // per gauged member
}

type entry struct {
	name, title, hash string
	geometry          dashboard.Geometry
	gauged            []string
	gaugedIndex       map[string]int
	unknown           []string
	patterns          map[string]model.Pattern // for the unknown loads' engineering unit
	design            *dashboard.Design
	critical          float64
	alpha             float64
	latest            *pipeline.Result
	ring              []point
	head              int
	full              bool
	recent            []dashboard.Event
}

// New returns an empty state keeping history epochs per structure (0 means
// DefaultHistory); events may be nil (then only events seen since start
// are listed).
func New(events EventStore, history int) *Live {
	if history <= 0 {
		history = DefaultHistory
	}
	return &Live{structs: map[string]*entry{}, events: events, history: history}
}

// Register adds a structure and returns the sink its pipeline feeds.
func (l *Live) Register(s *model.Structure, proc *reconcile.Processor, alphaGlobal float64) pipeline.Sink {
	e := &entry{name: s.Name, title: s.Title, hash: s.Hash, gauged: proc.Gauged(), unknown: proc.Unknown(),
		critical: proc.Critical(), alpha: alphaGlobal, gaugedIndex: map[string]int{}}
	for i, g := range e.gauged {
		e.gaugedIndex[g] = i
	}
	e.patterns, e.design = presentation(s)
	e.geometry.Dimension = s.Dim
	for _, n := range s.Nodes {
		e.geometry.Nodes = append(e.geometry.Nodes, dashboard.Node{ID: n.ID, X: n.X[0], Y: n.X[1], Z: n.X[2]})
	}
	tied := map[string]bool{}
	for _, id := range proc.GaugeOrStiffness() {
		tied[id] = true
	}
	for _, m := range s.Members {
		_, g := e.gaugedIndex[m.ID]
		e.geometry.Members = append(e.geometry.Members, dashboard.Member{ID: m.ID, Start: s.Nodes[m.I].ID, End: s.Nodes[m.J].ID, Gauged: g, GaugeOrStiffness: tied[m.ID]})
	}
	e.geometry.Supports, e.geometry.Loads = drawnSupportsAndLoads(s)
	l.mu.Lock()
	defer l.mu.Unlock()
	if _, dup := l.structs[s.Name]; !dup {
		l.order = append(l.order, s.Name)
	}
	l.structs[s.Name] = e
	return sink{l: l, name: s.Name}
}

type sink struct {
	l    *Live
	name string
}

// Epoch records one result.
func (s sink) Epoch(r *pipeline.Result) { s.l.add(s.name, r) }

func (l *Live) add(name string, r *pipeline.Result) {
	l.mu.Lock()
	defer l.mu.Unlock()
	e := l.structs[name]
	if e == nil {
		return
	}
	for _, ev := range r.Events {
		e.recent = append(e.recent, e.dashboardEvent(ev))
	}
	e.reviseRecent(r.Active)
	if len(e.recent) > 1000 {
		e.recent = append([]dashboard.Event(nil), e.recent[len(e.recent)-1000:]...)
	}
	if r.Outcome != reconcile.OutcomeAccepted && r.Outcome != reconcile.OutcomeRejected {
		// Not fitted: keep the last fitted state on screen, with the
		// alarms as they are now.
		if e.latest != nil {
			cp := *e.latest
			cp.Active = r.Active
			e.latest = &cp
		}
		return
	}
	e.latest = r
	alarm := alarmSet(r.Active)
	p := point{t: r.Time, vals: make([]dashboard.SeriesPoint, len(e.gauged))}
	for i, m := range r.Members {
		p.vals[i] = seriesPoint(r.Time, m, alarm[m.Member])
	}
	if len(e.ring) < l.history {
		e.ring = append(e.ring, p)
	} else {
		e.ring[e.head] = p
		e.head = (e.head + 1) % l.history
		e.full = true
	}
}

// alarmSet lists the members with an active member alarm: the short
// window's (MemberDiverging) or the hour's (MemberShifted).
func alarmSet(active []alerts.Alarm) map[string]bool {
	out := map[string]bool{}
	for _, a := range active {
		if a.Rule == alerts.RuleMemberDiverging || a.Rule == alerts.RuleMemberShifted {
			out[a.Subject] = true
		}
	}
	return out
}

func nan() float64 { return math.NaN() }

func seriesPoint(t time.Time, m reconcile.MemberResult, alarm bool) dashboard.SeriesPoint {
	sp := dashboard.SeriesPoint{Time: t, Measured: nan(), Predicted: nan(), SigmaResidual: nan(), W: nan(), Checkable: m.Checkable, Alarm: alarm}
	if m.Available {
		sp.Measured, sp.Predicted, sp.SigmaResidual, sp.W = m.MeasuredN, m.FittedN, m.SigmaAdjustedN, m.W
	}
	return sp
}

// reviseRecent gives the raised events of the active alarms their
// latest causes.
func (e *entry) reviseRecent(active []alerts.Alarm) {
	for _, a := range active {
		if a.CausesAt.IsZero() {
			continue
		}
		for i := len(e.recent) - 1; i >= 0; i-- {
			ev := &e.recent[i]
			if ev.Kind == alerts.Raised && ev.Rule == a.Rule && ev.Subject == a.Subject && ev.Time.Equal(a.FiredAt) {
				ev.Causes, ev.CausesAt = a.Causes, a.CausesAt
				break
			}
		}
	}
}

// loadShifts presents flagged unknown loads in their pattern's
// engineering unit (or as pattern factors).
func (e *entry) loadShifts(ls []reconcile.LoadShift) []dashboard.LoadShift {
	var out []dashboard.LoadShift
	for _, l := range ls {
		d := dashboard.LoadShift{Pattern: l.Pattern, Value: l.Value, Mean: l.Mean, StdDev: l.Std, Unit: "pattern factor", Z: l.Z}
		if p, ok := e.patterns[l.Pattern]; ok {
			if v, unit, ok := p.InReferenceUnit(l.Value); ok {
				d.Value, d.Unit = v, unit
				d.Mean, _, _ = p.InReferenceUnit(l.Mean)
				d.StdDev, _, _ = p.InReferenceUnit(l.Std)
			}
		}
		out = append(out, d)
	}
	return out
}

func (e *entry) dashboardEvent(ev alerts.Event) dashboard.Event {
	d := dashboard.Event{Time: ev.Time, Rule: ev.Rule, Subject: ev.Subject, Kind: ev.Kind, W: nan(), Size: nan()}
	// Only a member's event has a w and an estimated gauge bias; the others
	// show none (NaN is written as null).
	if w, bias, ok := ev.MemberFigures(); ok {
		d.W, d.Size, d.SizeUnit = w, bias, "N"
	}
	d.Message = alerts.Message(ev)
	d.Causes = ev.Evidence.Causes
	d.CausesAt = ev.Evidence.CausesAt
	d.LoadShifts = e.loadShifts(ev.Evidence.LoadShifts)
	return d
}

// Structures lists the registered structures in registration order.
func (l *Live) Structures() []string {
	l.mu.RLock()
	defer l.mu.RUnlock()
	return append([]string(nil), l.order...)
}

func (l *Live) entry(name string) (*entry, error) {
	e := l.structs[name]
	if e == nil {
		return nil, fmt.Errorf("structure %q: %w", name, dashboard.ErrNotFound)
	}
	return e, nil
}

// State returns the latest state of a structure.
func (l *Live) State(name string) (dashboard.State, error) {
	l.mu.RLock()
	defer l.mu.RUnlock()
	e, err := l.entry(name)
	if err != nil {
		return dashboard.State{}, err
	}
	st := dashboard.State{Structure: e.name, Title: e.title, ModelVersion: e.hash, Geometry: e.geometry, CriticalValue: e.critical}
	st.Fit.Alpha = e.alpha
	r := e.latest
	if r == nil {
		for _, g := range e.gauged {
			st.Gauged = append(st.Gauged, dashboard.MemberState{ID: g, Measured: nan(), Predicted: nan(), SigmaResidual: nan(), W: nan(), Redundancy: nan(), MDB: nan()})
		}
		return st, nil
	}
	st.Epoch = r.Time
	alarm := alarmSet(r.Active)
	for _, m := range r.Members {
		sp := seriesPoint(r.Time, m, alarm[m.Member])
		wn := nan()
		if r.Adapted != nil && m.Available {
			wn = m.WNominal
		}
		st.Gauged = append(st.Gauged, dashboard.MemberState{ID: m.Member, Measured: sp.Measured, Predicted: sp.Predicted,
			SigmaResidual: sp.SigmaResidual, W: sp.W, WNominal: wn, Redundancy: m.Redundancy, MDB: m.MDBN, Checkable: m.Checkable, Alarm: alarm[m.Member]})
	}
	for _, a := range r.Active {
		st.Alarms = append(st.Alarms, dashboard.ActiveAlarm{Rule: a.Rule, Subject: a.Subject, Since: a.Since, FiredAt: a.FiredAt,
			Causes: a.Causes, CausesAt: a.CausesAt, LoadShifts: e.loadShifts(a.LoadShifts)})
	}
	if ad := r.Adapted; ad != nil {
		st.Adapted = &dashboard.AdaptedFit{ChiSquare: ad.ChiSquare, DOF: ad.DOF, PValue: ad.PValue, Rejected: ad.Rejected}
		st.Adapted.Hypotheses = ad.Estimable()
	}
	st.Fit.ChiSquare, st.Fit.DOF, st.Fit.PValue, st.Fit.Rejected = r.ChiSquare, r.DOF, r.PValue, r.Rejected
	for _, ld := range r.Loads {
		st.Loads = append(st.Loads, loadEstimate(e.patterns, ld))
	}
	st.Members, st.Design = memberTotals(r.State), e.design
	return st, nil
}

// Series returns a gauged member's history in [from, to).
func (l *Live) Series(name, member string, from, to time.Time) (dashboard.Series, error) {
	l.mu.RLock()
	defer l.mu.RUnlock()
	e, err := l.entry(name)
	if err != nil {
		return dashboard.Series{}, err
	}
	i, ok := e.gaugedIndex[member]
	if !ok {
		return dashboard.Series{}, fmt.Errorf("structure %q: member %q is not gauged: %w", name, member, dashboard.ErrNotFound)
	}
	s := dashboard.Series{Structure: name, Member: member, CriticalValue: e.critical}
	n := len(e.ring)
	for k := 0; k < n; k++ {
		idx := k
		if e.full {
			idx = (e.head + k) % n
		}
		p := e.ring[idx]
		if p.t.Before(from) || !p.t.Before(to) {
			continue
		}
		s.Points = append(s.Points, p.vals[i])
	}
	return s, nil
}

// Events returns the alarm events in [from, to): from the store when one
// is configured, else those seen since start.
func (l *Live) Events(ctx context.Context, name string, from, to time.Time) ([]dashboard.Event, error) {
	l.mu.RLock()
	e, err := l.entry(name)
	var recent []dashboard.Event
	if err == nil {
		recent = append(recent, e.recent...)
	}
	l.mu.RUnlock()
	if err != nil {
		return nil, err
	}
	if l.events != nil {
		stored, err := l.events.Events(ctx, name, from, to)
		if err != nil {
			return nil, fmt.Errorf("structure %q: reading events: %w", name, err)
		}
		out := make([]dashboard.Event, 0, len(stored))
		for _, se := range stored {
			var ev alerts.Evidence
			if err := json.Unmarshal(se.Evidence, &ev); err != nil {
				return nil, fmt.Errorf("structure %q: event %s/%s at %s: evidence: %w", name, se.Rule, se.Subject, se.Time, err)
			}
			out = append(out, e.dashboardEvent(alerts.Event{Structure: se.Structure, Rule: alerts.RuleName(se.Rule), Subject: se.Subject, Kind: alerts.EventKind(se.Kind), Time: se.Time, Evidence: ev}))
		}
		// The store holds a revision at most a minute old; the active
		// alarms in memory hold this epoch's.
		l.mu.RLock()
		if e.latest != nil {
			tmp := entry{recent: out}
			tmp.reviseRecent(e.latest.Active)
		}
		l.mu.RUnlock()
		return out, nil
	}
	var out []dashboard.Event
	for _, ev := range recent {
		if !ev.Time.Before(from) && ev.Time.Before(to) {
			out = append(out, ev)
		}
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].Time.Before(out[j].Time) })
	return out, nil
}

// drawnSupportsAndLoads lists the supports and, per pattern and node, the
// direction of the pattern's resultant nodal force, for the drawing.
func drawnSupportsAndLoads(s *model.Structure) ([]dashboard.Support, []dashboard.NodalLoad) {
	var sups []dashboard.Support
	for _, sp := range s.Supports {
		d := dashboard.Support{Node: s.Nodes[sp.Node].ID, Fixed: sp.Fixed, Inclined: sp.Normal != nil}
		for k := range sp.Spring {
			d.Spring[k] = sp.Spring[k] != 0
		}
		sups = append(sups, d)
	}
	var loads []dashboard.NodalLoad
	for _, p := range s.Patterns {
		sum := map[int][3]float64{}
		var order []int
		for _, f := range p.Forces {
			v, seen := sum[f.Node]
			if !seen {
				order = append(order, f.Node)
			}
			for k := range v {
				v[k] += f.F[k]
			}
			sum[f.Node] = v
		}
		for _, n := range order {
			v := sum[n]
			l := math.Sqrt(v[0]*v[0] + v[1]*v[1] + v[2]*v[2])
			if l == 0 || math.IsNaN(l) || math.IsInf(l, 0) {
				continue
			}
			loads = append(loads, dashboard.NodalLoad{Node: s.Nodes[n].ID, Pattern: p.Name, Direction: [3]float64{v[0] / l, v[1] / l, v[2] / l}, Unknown: p.Unknown})
		}
	}
	return sups, loads
}
