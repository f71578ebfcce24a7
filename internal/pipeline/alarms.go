package pipeline

import (
	"math"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/reconcile"
)

// adaptAfter starts and ends adaptation from the alarms of an epoch: a
// raised statistical alarm (MemberDiverging, FitRejected) makes the fit
// carry the causes of its first group and
// flags the unknown loads that left their recent distribution; when no
// statistical alarm is active any more the fit returns to the nominal
// model.
func adaptAfter(p *reconcile.Processor, res *Result) {
	for _, ev := range res.Events {
		if ev.Kind != alerts.Raised || (ev.Rule != alerts.RuleMemberDiverging && ev.Rule != alerts.RuleFitRejected) {
			continue
		}
		if shifts := p.LoadShifts(res.EpochResult, reconcile.LoadShiftK); len(shifts) > 0 {
			res.LoadShifts = shifts
		}
		keep := ""
		if ev.Rule == alerts.RuleMemberDiverging {
			keep = ev.Subject
		}
		// The whole first group: its causes are (nearly) one direction in
		// the residual space, and carrying only one of them would leave
		// the rest of the others' signatures in the other members' w. A
		// channel's bias is its member's gauge-group bias, carried once.
		causes := res.Causes
		if len(causes) == 0 {
			// A member alarm in an epoch the global test accepted: the
			// causes summed over the alarm's epochs.
			causes = p.RecentCauses()
		}
		for _, c := range causes {
			if c.Group == 1 && c.Kind != reconcile.ChannelBias {
				p.Adapt(c.Label, keep)
			}
		}
	}
	active := false
	for _, a := range res.Active {
		if a.Rule == alerts.RuleMemberDiverging || a.Rule == alerts.RuleFitRejected {
			active = true
		}
	}
	if !active && len(p.Adapted()) > 0 {
		p.Unadapt()
	}
}

// utilisationObservations lists the members' utilisations for the alarm
// evaluator (none without a design basis).
func utilisationObservations(state []reconcile.MemberState) []alerts.Utilisation {
	var out []alerts.Utilisation
	for _, s := range state {
		if !math.IsNaN(s.Utilisation) {
			out = append(out, alerts.Utilisation{Member: s.Member, Value: s.Utilisation})
		}
	}
	return out
}
