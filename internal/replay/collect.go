package replay

import (
	"fmt"
	"math"
	"sort"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/report"
	"trussmonitor/internal/sensors"
)

// collector is the pipeline sink of a replay: it hands every fitted
// epoch to the report's stream as it comes (epochs.csv row by row, the
// plots as bounded summaries) and keeps only what does not grow with the
// period's length: the alarm events (few), every member's running totals and which pattern columns were used.
// Nothing measured on the wall clock (Result.Took) is kept.
type collector struct {
	stream *report.Stream
	events []alerts.Event
	// raised indexes the raised events of identifying alarms by rule,
	// subject and time; adapted holds each one's carried hypotheses at
	// its latest epoch active.
	raised  map[alarmKey]int
	adapted map[int][]reconcile.RankedCause
	totals  memberTotals // every member's total state (members.go)
	// col maps a load pattern to its report column; scale is the column's
	// reference load (1: a bare factor); used marks the columns some
	// epoch gave an estimate (estimable or not) for.
	col   map[string]int
	scale []float64
	units []string
	used  []bool
	// members and loads are the row buffers handed to the stream.
	members []report.MemberResult
	loads   []report.LoadEstimate
	err     error
}

// reportPatterns is the report's pattern column order: the structure's
// unknown patterns, then (when missing loads are estimated) every measured
// pattern a load channel of the sensor map feeds, sorted; a measured
// pattern's columns stay in epochs.csv only if some epoch estimated it.
func reportPatterns(unknown []string, sm *sensors.Map, estimateMissing bool) []string {
	out := append([]string(nil), unknown...)
	if !estimateMissing {
		return out
	}
	seen := map[string]bool{}
	for _, p := range unknown {
		seen[p] = true
	}
	var extra []string
	for _, ch := range sm.Channels() {
		if ch.Kind == sensors.KindLoad && ch.Pattern != "" && !seen[ch.Pattern] {
			seen[ch.Pattern] = true
			extra = append(extra, ch.Pattern)
		}
	}
	sort.Strings(extra)
	return append(out, extra...)
}

// newCollector streams into s, whose head lists the columns; scale holds
// each pattern column's reference load (referenceUnits).
func newCollector(s *report.Stream, head *report.Report, scale []float64) *collector {
	c := &collector{stream: s, col: map[string]int{}, scale: scale,
		raised: map[alarmKey]int{}, adapted: map[int][]reconcile.RankedCause{}}
	for j, p := range head.Patterns {
		c.col[p.Name] = j
		c.units = append(c.units, p.Unit)
	}
	c.used = make([]bool, len(head.Patterns))
	c.members = make([]report.MemberResult, len(head.Members))
	c.loads = make([]report.LoadEstimate, len(head.Patterns))
	return c
}

// Epoch implements pipeline.Sink.
func (c *collector) Epoch(r *pipeline.Result) {
	for _, ev := range r.Events {
		if ev.Kind == alerts.Raised {
			c.raised[alarmKey{ev.Rule, ev.Subject, ev.Time.UnixNano()}] = len(c.events)
		}
		c.events = append(c.events, ev)
	}
	c.revise(r)
	if r.Outcome != reconcile.OutcomeAccepted && r.Outcome != reconcile.OutcomeRejected {
		return
	}
	c.totals.add(r)
	if c.err != nil {
		return
	}
	if len(r.Members) != len(c.members) {
		c.err = fmt.Errorf("epoch %s has %d member results for the report's %d gauged members", r.Time.UTC().Format("2006-01-02T15:04:05.999999999Z07:00"), len(r.Members), len(c.members))
		return
	}
	clear(c.members)
	for i, m := range r.Members {
		if !m.Available {
			continue
		}
		// Predicted includes the estimated unknown loads (FittedN), so
		// that Measured - Predicted is the adjusted residual e and the
		// acceptance band is Predicted +- k sqrt((Q_e)_ii).
		c.members[i] = report.MemberResult{
			Present: true, Measured: m.MeasuredN, Predicted: m.FittedN,
			SigmaResidual: m.SigmaAdjustedN, W: m.W, Checkable: m.Checkable,
		}
	}
	clear(c.loads)
	for _, l := range r.Loads {
		j, ok := c.col[l.Pattern]
		if !ok {
			c.err = fmt.Errorf("epoch %s estimates load pattern %q, which is neither an unknown pattern nor a measured pattern of the sensor map", r.Time.UTC().Format("2006-01-02T15:04:05.999999999Z07:00"), l.Pattern)
			return
		}
		c.used[j] = true
		if l.Estimable {
			c.loads[j] = report.LoadEstimate{Present: true, Value: l.Value * c.scale[j], StdDev: l.Std * c.scale[j]}
		}
	}
	c.err = c.stream.Add(report.Epoch{Time: r.Time, Members: c.members, Fit: report.Fit{ChiSquare: r.ChiSquare, DOF: r.DOF, PValue: r.PValue, Rejected: r.Rejected}, Loads: c.loads})
}

// alarmKey names an alarm by rule, subject and raise time.
type alarmKey struct {
	rule    alerts.RuleName
	subject string
	fired   int64
}

// revise gives the raised events of the alarms active after r their
// latest causes (estimated over the epochs since the fault began) and the
// hypotheses the fit carries.
func (c *collector) revise(r *pipeline.Result) {
	for _, a := range r.Active {
		if !a.Identifies {
			continue
		}
		i, ok := c.raised[alarmKey{a.Rule, a.Subject, a.FiredAt.UnixNano()}]
		if !ok {
			continue
		}
		ev := &c.events[i].Evidence
		ev.Causes, ev.CausesAt = append([]reconcile.RankedCause(nil), a.Causes...), a.CausesAt
		if r.Adapted != nil {
			c.adapted[i] = r.Adapted.Estimable()
		}
	}
}

// keep says which pattern columns stay: every unknown pattern (the first
// nUnknown) and the measured patterns some epoch estimated.
func (c *collector) keep(nUnknown int) []bool {
	out := append([]bool(nil), c.used...)
	for j := 0; j < nUnknown && j < len(out); j++ {
		out[j] = true
	}
	return out
}

// reportEvents turns the alarm events into report rows.
func (c *collector) reportEvents() []report.Event {
	var out []report.Event
	for i, ev := range c.events {
		row := c.event(ev)
		row.Adapted = c.adapted[i]
		out = append(out, row)
	}
	return out
}

// event turns an alarm event into a report row.
func (c *collector) event(e alerts.Event) report.Event {
	ev := e.Evidence
	out := report.Event{Time: e.Time, Rule: e.Rule, Subject: e.Subject, Kind: e.Kind, W: math.NaN(), Size: math.NaN()}
	if w, bias, ok := e.MemberFigures(); ok {
		out.W, out.Size, out.SizeUnit = w, bias, "N"
	}
	out.Message = alerts.Message(e)
	out.Causes = ev.Causes
	out.CausesAt = ev.CausesAt
	for _, l := range ev.LoadShifts {
		// In the report's unit of the pattern's column (its reference
		// load, or a bare factor).
		ls := report.LoadShift{Pattern: l.Pattern, Value: l.Value, Mean: l.Mean, StdDev: l.Std, Unit: "1", Z: l.Z}
		if j, ok := c.col[l.Pattern]; ok {
			ls.Value, ls.Mean, ls.StdDev, ls.Unit = l.Value*c.scale[j], l.Mean*c.scale[j], l.Std*c.scale[j], c.units[j]
		}
		out.LoadShifts = append(out.LoadShifts, ls)
	}
	return out
}
