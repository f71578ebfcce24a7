package pipeline

import (
	"math"
	"strings"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/reconcile"
)

// adaptAfter starts and ends adaptation from the alarms of an epoch: a
// raised statistical alarm (MemberDiverging, FitRejected, MemberShifted)
// makes the fit carry the causes of its first group and
// flags the unknown loads that left their recent distribution; when no
// statistical alarm is active any more the fit returns to the nominal
// model.
func adaptAfter(p *reconcile.Processor, res *Result) {
	for _, ev := range res.Events {
		if ev.Kind != alerts.Raised || !adapting(ev.Rule) {
			continue
		}
		if shifts := p.LoadShifts(res.EpochResult); len(shifts) > 0 {
			res.LoadShifts = shifts
		}
		keep := ""
		if ev.Rule == alerts.RuleMemberDiverging || ev.Rule == alerts.RuleMemberShifted {
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
			// A drift is tested over an alarm's epochs only (its gauge's
			// bias is the per-epoch candidate carried).
			if c.Group == 1 && c.Kind != reconcile.ChannelBias && c.Kind != reconcile.GaugeDrift {
				p.Adapt(c.Label, keep)
			}
		}
	}
	active := false
	for _, a := range res.Active {
		if adapting(a.Rule) {
			active = true
		}
	}
	if !active && len(p.Adapted()) > 0 {
		p.Unadapt()
	}
}

// adapting reports whether an alarm of the rule makes the fit carry its
// causes: the statistical rules.
func adapting(rule alerts.RuleName) bool {
	return rule == alerts.RuleMemberDiverging || rule == alerts.RuleFitRejected || rule == alerts.RuleMemberShifted
}

// fitModel follows which fit the members' w come from: the carried
// hypotheses of the epoch's fit. When they change (adaptation began,
// changed or ended), the w of every member not kept nominal tests another
// model from then on, and the mean rules restart its window
// (alerts.Member.Restart): otherwise the window alarm's hour of w from the
// fit before adaptation raised on every member the fault had moved, one
// fault showing as several alarms.
type fitModel struct{ carried string }

// mark sets Restart on the observation's members when the carried
// hypotheses of this epoch's fit (p.Adapted after Process) differ from
// the previous epoch's.
func (f *fitModel) mark(o *alerts.Observation, p *reconcile.Processor, res *reconcile.EpochResult) {
	carried := strings.Join(p.Adapted(), "\x00")
	if carried == f.carried {
		return
	}
	f.carried = carried
	kept := map[string]bool{}
	if res.Adapted != nil {
		for _, m := range res.Adapted.Kept {
			kept[m] = true
		}
	}
	for i := range o.Members {
		if !kept[o.Members[i].Member] {
			o.Members[i].Restart = true
		}
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
