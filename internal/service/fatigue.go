package service

import (
	"context"
	"fmt"
	"time"

	"trussmonitor/internal/dashboard"
	"trussmonitor/internal/fatigue"
	"trussmonitor/internal/fatiguetrack"
	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/metrics"
)

// addFatigue sets up the fatigue count of every gauge with a fatigue block
// and restores the counters from the store.
func (s *Service) addFatigue(mons []*instrumented.Structure) error {
	n := 0
	for _, mon := range mons {
		n += len(mon.Sensors.FatigueGauges())
	}
	if n == 0 {
		return nil
	}
	fm, err := metrics.NewFatigue(s.reg)
	if err != nil {
		return err
	}
	tr := fatiguetrack.New(fm)
	for _, mon := range mons {
		if gs := mon.Sensors.FatigueGauges(); len(gs) > 0 {
			tr.Add(mon.Structure.Name, mon.Sensors, gs)
		}
	}
	if err := tr.Load(context.Background(), s.store); err != nil {
		return fmt.Errorf("%s: restoring the fatigue counters: %w", s.cfg.File, err)
	}
	for _, g := range tr.Gauges() {
		fm.FatigueCounted(g.Structure, g.Channel, 0, g.DamageTotal)
	}
	s.fatigue = tr
	return nil
}

// Fatigue returns the service's fatigue tracker, or nil.
func (s *Service) Fatigue() *fatiguetrack.Tracker { return s.fatigue }

// fatigueSource serves the dashboard's fatigue panel from the tracker (live
// damage) and the stored hourly histograms (days, rate, projection).
type fatigueSource struct {
	tr    *fatiguetrack.Tracker
	st    fatiguetrack.StateStore
	clock func() time.Time
}

// fatigueDays is how many days of damage the panel shows.
const fatigueDays = 30

// Fatigue lists the fatigue gauges of a structure.
func (f fatigueSource) Fatigue(ctx context.Context, structure string) ([]dashboard.FatigueGauge, error) {
	now := f.clock()
	to := now.UTC().Truncate(time.Hour).Add(time.Hour) // include the hour in progress
	from := to.AddDate(0, 0, -fatigueDays)
	var out []dashboard.FatigueGauge
	for _, g := range f.tr.Gauges() {
		if g.Structure != structure {
			continue
		}
		stored, err := f.st.FatigueHours(ctx, structure, g.Channel, from, to)
		if err != nil {
			return nil, err
		}
		hours := make([]fatigue.HourHistogram, len(stored))
		for i, h := range stored {
			hours[i] = fatigue.HourHistogram{Hour: h.Hour, Hist: fatiguetrack.HistogramOf(h.Bins)}
		}
		l := fatigue.Summarise(g.Detail.Curve, hours, g.Detail.Start, from, to)
		fg := dashboard.FatigueGauge{
			Gauge: g.Channel, CategoryMPa: g.Detail.Curve.DeltaSigmaC / 1e6, GammaFf: g.Detail.Curve.GammaFf, GammaMf: g.Detail.Curve.GammaMf,
			Start: g.Detail.Start, DamageTotal: g.DamageTotal, RatePerDay: l.RatePerDay, WindowDays: l.WindowDays,
			RemainingYears: fatigue.RemainingYears(g.DamageTotal, l.RatePerDay), LastSample: g.LastTime,
		}
		for _, d := range l.Days {
			fg.Days = append(fg.Days, dashboard.FatigueDay{Day: d.Day, Cycles: d.Cycles, Damage: d.Damage})
		}
		out = append(out, fg)
	}
	return out, nil
}
