package pipeline

import (
	"context"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/reconcile"
)

// ReviseInterval is the least epoch time between two revisions of an
// active alarm's causes: summing a fault's epochs costs little
// (FaultRanker.Add in every epoch), grouping its causes more (measured
// with BenchmarkProcess/*/revised: an epoch with a revision took 2.3 times
// a nominal epoch on the footbridge, 10 times on the roof), and sizes over
// many epochs change little from one epoch to the next. At 10 s sampling
// and slower every epoch revises.
const ReviseInterval = 10 * time.Second

// faultKey names an alarm's fault tracker in the Processor.
func faultKey(rule alerts.RuleName, subject string) string { return string(rule) + "\x00" + subject }

// reviseAlarms tracks the faults of the active statistical alarms
// (reconcile.Processor.TrackFault) and, on a fitted epoch at least
// ReviseInterval after an alarm's last revision (or raise), revises it
// with its causes summed over the fault's epochs (alerts.Evaluator.Revise). It returns the first error of storing
// a revision.
func (p *Pipeline) reviseAlarms(ctx context.Context, res *Result) error {
	fitted := res.Outcome == reconcile.OutcomeAccepted || res.Outcome == reconcile.OutcomeRejected
	keep := map[string]bool{}
	var first error
	for _, a := range p.eval.Active(p.structure) {
		if !a.Identifies {
			continue
		}
		key := faultKey(a.Rule, a.Subject)
		keep[key] = true
		if p.proc.TrackFault(key) || !fitted || res.Time.Sub(a.CausesAt) < ReviseInterval {
			continue
		}
		causes := p.proc.FaultCauses(key)
		if len(causes) == 0 {
			continue
		}
		if _, err := p.eval.Revise(ctx, p.structure, a.Rule, a.Subject, append([]reconcile.RankedCause(nil), causes...), res.Time); err != nil && first == nil {
			first = err
		}
	}
	p.proc.DropFaults(keep)
	return first
}
