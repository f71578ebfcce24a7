package pipeline

import (
	"context"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/reconcile"
)

// The sizes of an active alarm's causes (DESIGN.md, Identification and
// adaptation: "the event carries the size estimated over the epochs since
// the fault began and updates it while the alarm is active"). When an
// alarm of a statistical rule rises, the Processor starts a
// reconcile.FaultRanker for it from the epochs of its cause span; every
// later fitted epoch adds its nominal cause statistics (those of the fit
// without the carried hypotheses, which still see the whole fault), and
// the Pipeline revises the alarm's causes with the sums at every fitted
// epoch while it is active (alerts.Evaluator.Revise).

// faultKey names an alarm's fault tracker.
func faultKey(rule, subject string) string { return rule + "\x00" + subject }

// trackFault starts summing the causes of the alarm of rule on subject
// from the epochs of the cause span; it reports false when it was
// already tracked.
func (p *Processor) trackFault(rule, subject string) bool {
	key := faultKey(rule, subject)
	if _, ok := p.faults[key]; ok {
		return false
	}
	if p.faults == nil {
		p.faults = map[string]*reconcile.FaultRanker{}
	}
	p.faults[key] = p.recent.Fault()
	return true
}

// faultCauses returns the causes of the alarm of rule on subject summed
// over the epochs since the fault began, grouped by the latest epoch's
// separability (nil when not tracked).
func (p *Processor) faultCauses(rule, subject string) []Cause {
	f := p.faults[faultKey(rule, subject)]
	if f == nil || p.lastID == nil {
		return nil
	}
	return convertGroups(p.lastID.Groups(f.Causes()), p.subjects, p.opt.MaxCauses)
}

// dropFaults forgets the trackers of alarms not in keep.
func (p *Processor) dropFaults(keep map[string]bool) {
	for k := range p.faults {
		if !keep[k] {
			delete(p.faults, k)
		}
	}
}

// reviseAlarms tracks the faults of the active statistical alarms and, on
// a fitted epoch, revises each alarm raised before this epoch with its
// causes over the fault's epochs. It returns the first error of storing
// a revision.
func (p *Pipeline) reviseAlarms(ctx context.Context, res *Result) error {
	fitted := res.Outcome == OutcomeAccepted || res.Outcome == OutcomeRejected
	keep := map[string]bool{}
	var first error
	for _, a := range p.eval.Active(p.structure) {
		if !a.Identifies {
			continue
		}
		keep[faultKey(a.Rule, a.Subject)] = true
		if p.proc.trackFault(a.Rule, a.Subject) || !fitted {
			continue
		}
		causes := p.proc.faultCauses(a.Rule, a.Subject)
		if len(causes) == 0 {
			continue
		}
		if _, err := p.eval.Revise(ctx, p.structure, a.Rule, a.Subject, alertCauses(causes), res.Time); err != nil && first == nil {
			first = err
		}
	}
	p.proc.dropFaults(keep)
	return first
}

// alertCauses converts causes to alarm evidence.
func alertCauses(cs []Cause) []alerts.Cause {
	out := make([]alerts.Cause, len(cs))
	for i, c := range cs {
		out[i] = alerts.Cause{Label: c.Label, Kind: c.Kind, T: c.T, Size: c.Size, Unit: c.Unit,
			Std: c.Std, MDS: c.MDS, Group: c.Group, Implausible: c.Implausible}
	}
	return out
}

// alertLoadShifts converts load shifts to alarm evidence.
func alertLoadShifts(ls []LoadShift) []alerts.LoadShift {
	if len(ls) == 0 {
		return nil
	}
	out := make([]alerts.LoadShift, len(ls))
	for i, l := range ls {
		out[i] = alerts.LoadShift(l)
	}
	return out
}
