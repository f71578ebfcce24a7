package metrics

import (
	"fmt"

	"github.com/prometheus/client_golang/prometheus"
)

// Adaptation metric names (DESIGN.md, Identification and adaptation):
// while an alarm is active the fit carries its identified causes as
// parameters; shm_member_w_statistic is then the adapted fit's w and these
// show the nominal w, the adapted fit and the unknown loads flagged as
// possibly absorbing the fault.
const (
	MemberWNominal     = "shm_member_w_nominal_statistic"
	AdaptedHypotheses  = "shm_adapted_hypotheses"
	AdaptedChiSquare   = "shm_adapted_fit_chi_square"
	AdaptedDOF         = "shm_adapted_fit_degrees_of_freedom"
	UnknownLoadShifted = "shm_unknown_load_shift_flagged"
	UnknownLoadShiftZ  = "shm_unknown_load_shift_z"
)

type adaptVecs struct {
	wNominal, hyps, chi2, dof, shifted, shiftZ *prometheus.GaugeVec
}

func newAdaptVecs() *adaptVecs {
	g := func(name, help string, labels ...string) *prometheus.GaugeVec {
		return prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: name, Help: help}, labels)
	}
	return &adaptVecs{
		wNominal: g(MemberWNominal, "Baarda's w statistic of the member in the nominal fit (without the carried hypotheses); equal to "+MemberW+" while no hypothesis is carried.", "structure", "member"),
		hyps:     g(AdaptedHypotheses, "Number of identified hypotheses the fit carries as parameters while statistical alarms are active (0: the nominal fit).", "structure"),
		chi2:     g(AdaptedChiSquare, "Global test statistic of the adapted fit (present only while hypotheses are carried).", "structure"),
		dof:      g(AdaptedDOF, "Degrees of freedom of the adapted fit's global test (present only while hypotheses are carried).", "structure"),
		shifted:  g(UnknownLoadShifted, "1 while an active alarm flags the unknown load's estimate as having left its recent distribution when the alarm rose (it may be absorbing the fault), else 0.", "structure", "pattern"),
		shiftZ:   g(UnknownLoadShiftZ, "Shift of the flagged unknown-load estimate from its recent mean, in combined standard deviations (present only while flagged).", "structure", "pattern"),
	}
}

func (v *adaptVecs) collectors() []prometheus.Collector {
	return []prometheus.Collector{v.wNominal, v.hyps, v.chi2, v.dof, v.shifted, v.shiftZ}
}

// AdaptationMetrics are the adaptation gauges of one structure.
type AdaptationMetrics struct {
	name     string
	patterns []string
	v        *adaptVecs
	wNominal []prometheus.Gauge
	hyps     prometheus.Gauge
	shifted  []prometheus.Gauge
	adapted  bool
	flagged  []bool
}

// Adaptation returns the adaptation gauges of structure name with its
// gauged members and unknown load patterns (the orders of Structure).
func (m *Metrics) Adaptation(name string, members, patterns []string) *AdaptationMetrics {
	a := &AdaptationMetrics{name: name, patterns: append([]string(nil), patterns...), v: m.adapt,
		hyps: m.adapt.hyps.WithLabelValues(name), flagged: make([]bool, len(patterns))}
	for _, mb := range members {
		a.wNominal = append(a.wNominal, m.adapt.wNominal.WithLabelValues(name, mb))
	}
	for _, p := range patterns {
		g := m.adapt.shifted.WithLabelValues(name, p)
		g.Set(0)
		a.shifted = append(a.shifted, g)
	}
	a.hyps.Set(0)
	return a
}

// SetNominalW sets gauged member i's w in the nominal fit.
func (a *AdaptationMetrics) SetNominalW(i int, w float64) error {
	if i < 0 || i >= len(a.wNominal) {
		return fmt.Errorf("metrics: member index %d out of range (%d gauged members)", i, len(a.wNominal))
	}
	a.wNominal[i].Set(w)
	return nil
}

// SetAdapted sets the number of carried hypotheses and, when there are
// any, the adapted fit's global test; with none, the adapted fit's series
// are removed (there is no adapted fit to report).
func (a *AdaptationMetrics) SetAdapted(hypotheses int, chiSquare float64, dof int) {
	a.hyps.Set(float64(hypotheses))
	if hypotheses == 0 {
		if a.adapted {
			a.v.chi2.DeleteLabelValues(a.name)
			a.v.dof.DeleteLabelValues(a.name)
			a.adapted = false
		}
		return
	}
	a.v.chi2.WithLabelValues(a.name).Set(chiSquare)
	a.v.dof.WithLabelValues(a.name).Set(float64(dof))
	a.adapted = true
}

// SetLoadShift sets whether pattern j is flagged by an active alarm, with
// its shift z (the z series exists only while flagged).
func (a *AdaptationMetrics) SetLoadShift(j int, flagged bool, z float64) error {
	if j < 0 || j >= len(a.shifted) {
		return fmt.Errorf("metrics: unknown load index %d out of range (%d patterns)", j, len(a.shifted))
	}
	if flagged {
		a.shifted[j].Set(1)
		a.v.shiftZ.WithLabelValues(a.name, a.patterns[j]).Set(z)
	} else {
		a.shifted[j].Set(0)
		if a.flagged[j] {
			a.v.shiftZ.DeleteLabelValues(a.name, a.patterns[j])
		}
	}
	a.flagged[j] = flagged
	return nil
}
