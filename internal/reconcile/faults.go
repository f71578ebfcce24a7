package reconcile

// The sizes of an active alarm's causes (DESIGN.md, Identification and
// adaptation: "the event carries the size estimated over the epochs since
// the fault began and updates it while the alarm is active"). When an
// alarm of a statistical rule rises, the caller starts a FaultRanker for
// it (TrackFault) from the epochs of the cause span; every later fitted
// epoch adds its nominal cause statistics (those of the fit without the
// carried hypotheses, which still see the whole fault), and FaultCauses
// returns the sums, grouped, while the alarm is active.

// TrackFault starts summing the causes of the alarm named key from the
// epochs of the cause span; it reports false when key was already tracked.
func (p *Processor) TrackFault(key string) bool {
	if _, ok := p.faults[key]; ok {
		return false
	}
	if p.faults == nil {
		p.faults = map[string]*FaultRanker{}
	}
	p.faults[key] = p.recent.Fault()
	return true
}

// FaultCauses returns the causes of the alarm named key summed over the
// epochs since the fault began, grouped by the latest epoch's
// separability (nil when key is not tracked).
func (p *Processor) FaultCauses(key string) []RankedCause {
	f := p.faults[key]
	if f == nil || p.lastID == nil {
		return nil
	}
	return convertGroups(p.lastID.Groups(f.Causes()), p.subjects, p.opt.MaxCauses)
}

// DropFaults forgets the trackers of the alarms not in keep.
func (p *Processor) DropFaults(keep map[string]bool) {
	for k := range p.faults {
		if !keep[k] {
			delete(p.faults, k)
		}
	}
}
