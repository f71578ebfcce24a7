package metrics

import (
	"fmt"
	"math"
	"sync"

	"github.com/prometheus/client_golang/prometheus"
)

// Fatigue metric names.
const (
	FatigueDamage = "shm_fatigue_damage_ratio"
	FatigueCycles = "shm_fatigue_stress_range_cycles_total"
)

// Fatigue holds the fatigue collectors: per gauge, Miner's damage sum since
// the detail's start (a monitoring estimate, not an assessment) and the
// rainflow cycles counted. Its methods are safe for concurrent use.
type Fatigue struct {
	damage *prometheus.GaugeVec
	cycles *prometheus.CounterVec
	mu     sync.Mutex
	kids   map[[2]string][2]prometheus.Metric
}

// NewFatigue creates the fatigue collectors and registers them on reg.
func NewFatigue(reg prometheus.Registerer) (*Fatigue, error) {
	if reg == nil {
		return nil, fmt.Errorf("metrics: no registry given for the fatigue metrics")
	}
	labels := []string{"structure", "gauge"}
	f := &Fatigue{
		damage: prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: FatigueDamage,
			Help: "Palmgren-Miner damage sum at the gauge's detail since its start (EN 1993-1-9 S-N curve of the detail category); a monitoring estimate, not a design check or an assessment."}, labels),
		cycles: prometheus.NewCounterVec(prometheus.CounterOpts{Name: FatigueCycles,
			Help: "Stress-range cycles counted at the gauge by the rainflow counter (ASTM E1049-85; half cycles count 0.5)."}, labels),
		kids: map[[2]string][2]prometheus.Metric{},
	}
	for _, c := range []prometheus.Collector{f.damage, f.cycles} {
		if err := reg.Register(c); err != nil {
			return nil, fmt.Errorf("metrics: registering the fatigue metrics: %w", err)
		}
	}
	return f, nil
}

// FatigueCounted records the cycles a gauge counted and its damage so far
// (fatiguetrack.Observer).
func (f *Fatigue) FatigueCounted(structure, gauge string, cycles, damageTotal float64) {
	k := [2]string{structure, gauge}
	f.mu.Lock()
	kid, ok := f.kids[k]
	if !ok {
		kid = [2]prometheus.Metric{f.damage.WithLabelValues(structure, gauge), f.cycles.WithLabelValues(structure, gauge)}
		f.kids[k] = kid
	}
	f.mu.Unlock()
	if !math.IsNaN(damageTotal) && !math.IsInf(damageTotal, 0) {
		kid[0].(prometheus.Gauge).Set(damageTotal)
	}
	if cycles > 0 && !math.IsInf(cycles, 0) {
		kid[1].(prometheus.Counter).Add(cycles)
	}
}
