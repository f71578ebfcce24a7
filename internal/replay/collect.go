package replay

import (
	"math"
	"sort"
	"strings"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/report"
)

// collector is the pipeline sink of a replay: it keeps every fitted
// epoch and every alarm event, in the pipeline's order, for the report.
// Nothing measured on the wall clock (Result.Took) is kept.
type collector struct {
	epochs   []epochRow
	events   []alerts.Event
	subjects map[string]string // cause label -> subject, from the pipeline's causes
	totals   memberTotals      // every member's total state (members.go)
}

// epochRow is one fitted epoch before the report's columns are fixed.
type epochRow struct {
	time    time.Time
	members []report.MemberResult
	fit     report.Fit
	loads   []pipeline.LoadEstimate
}

func newCollector() *collector {
	return &collector{subjects: map[string]string{}}
}

// Epoch implements pipeline.Sink.
func (c *collector) Epoch(r *pipeline.Result) {
	for _, cs := range [][]pipeline.Cause{r.Causes, r.Window} {
		for _, k := range cs {
			if k.Subject != "" {
				c.subjects[k.Label] = k.Subject
			}
		}
	}
	c.events = append(c.events, r.Events...)
	if r.Outcome != pipeline.OutcomeAccepted && r.Outcome != pipeline.OutcomeRejected {
		return
	}
	c.totals.add(r)
	row := epochRow{
		time:    r.Time,
		members: make([]report.MemberResult, len(r.Members)),
		fit:     report.Fit{ChiSquare: r.ChiSquare, DOF: r.DOF, PValue: r.PValue, Rejected: r.Rejected},
		loads:   append([]pipeline.LoadEstimate(nil), r.Loads...),
	}
	for i, m := range r.Members {
		if !m.Available {
			continue
		}
		// Predicted includes the estimated unknown loads (FittedN), so
		// that Measured - Predicted is the adjusted residual e and the
		// acceptance band is Predicted +- k sqrt((Q_e)_ii).
		row.members[i] = report.MemberResult{
			Present: true, Measured: m.MeasuredN, Predicted: m.FittedN,
			SigmaResidual: m.SigmaAdjustedN, W: m.W, Checkable: m.Checkable,
		}
	}
	c.epochs = append(c.epochs, row)
}

// report builds the report's tables: members in the processor's row
// order, patterns the structure's unknown patterns followed by any measured
// pattern estimated in some epoch (a missing load channel), sorted.
func (c *collector) report(members, unknown []string) *report.Report {
	patterns := append([]string(nil), unknown...)
	seen := map[string]bool{}
	for _, p := range unknown {
		seen[p] = true
	}
	var extra []string
	for _, e := range c.epochs {
		for _, l := range e.loads {
			if !seen[l.Pattern] {
				seen[l.Pattern] = true
				extra = append(extra, l.Pattern)
			}
		}
	}
	sort.Strings(extra)
	patterns = append(patterns, extra...)
	col := make(map[string]int, len(patterns))
	rep := &report.Report{Members: append([]string(nil), members...)}
	for i, p := range patterns {
		col[p] = i
		rep.Patterns = append(rep.Patterns, report.Pattern{Name: p, Unit: "1"})
	}
	rep.Epochs = make([]report.Epoch, len(c.epochs))
	for i, e := range c.epochs {
		loads := make([]report.LoadEstimate, len(patterns))
		for _, l := range e.loads {
			if l.Estimable {
				loads[col[l.Pattern]] = report.LoadEstimate{Present: true, Value: l.Value, StdDev: l.Std}
			}
		}
		rep.Epochs[i] = report.Epoch{Time: e.time, Members: e.members, Fit: e.fit, Loads: loads}
	}
	for _, ev := range c.events {
		rep.Events = append(rep.Events, c.event(ev))
	}
	return rep
}

// event turns an alarm event into a report row.
func (c *collector) event(e alerts.Event) report.Event {
	ev := e.Evidence
	out := report.Event{Time: e.Time, Rule: e.Rule, Subject: e.Subject, Kind: e.Kind, W: math.NaN(), Size: math.NaN()}
	if ev.Signal == "abs_w" {
		out.W = ev.W
		out.Size, out.SizeUnit = ev.Bias, "N"
	}
	out.Message = alerts.Message(e)
	for _, k := range ev.Causes {
		out.Causes = append(out.Causes, report.Cause{Kind: k.Kind, Subject: c.subject(k.Label), T: k.T, Size: k.Size, Std: k.Std, Unit: k.Unit, Group: k.Group, Implausible: k.Implausible})
	}
	return out
}

// subject returns the item a cause concerns: the pipeline's subject for its
// label, or the label without its kind prefix.
func (c *collector) subject(label string) string {
	if s, ok := c.subjects[label]; ok {
		return s
	}
	for _, p := range []string{"E A of ", "gauge ", "settlement ", "load at "} {
		if strings.HasPrefix(label, p) {
			return strings.TrimPrefix(label, p)
		}
	}
	return label
}
