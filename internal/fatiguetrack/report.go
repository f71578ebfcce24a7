package fatiguetrack

import (
	"context"
	"time"

	"trussmonitor/internal/fatigue"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
)

// GaugeLife is what the stored histograms say of one fatigue gauge over a
// period: damage per day, accumulated damage, rate and projection, and the
// period's histogram. It is a monitoring estimate (fatigue.Caution).
type GaugeLife struct {
	Gauge sensors.FatigueGauge
	Life  fatigue.Life
	// Hist is the histogram of the hours in the period (from the later of
	// the period's start and the gauge's start).
	Hist *fatigue.Histogram
}

// Lives recomputes, from the stored hourly histograms, each gauge's damage
// over [from, to), accumulated since its start, and the projection.
func Lives(ctx context.Context, st StateStore, structure string, gauges []sensors.FatigueGauge, from, to time.Time) ([]GaugeLife, error) {
	var out []GaugeLife
	for _, g := range gauges {
		start := g.Fatigue.Start
		stored, err := st.FatigueHours(ctx, structure, g.Channel, start, to)
		if err != nil {
			return nil, err
		}
		hours := make([]fatigue.HourHistogram, len(stored))
		var period fatigue.Histogram
		begin := from
		if start.After(begin) {
			begin = start
		}
		for i, h := range stored {
			hours[i] = fatigue.HourHistogram{Hour: h.Hour, Hist: HistogramOf(h.Bins)}
			if !h.Hour.Before(begin) && h.Hour.Before(to) {
				period.Merge(hours[i].Hist)
			}
		}
		out = append(out, GaugeLife{Gauge: g, Life: fatigue.Summarise(g.Fatigue.Curve, hours, start, from, to), Hist: &period})
	}
	return out, nil
}

// RawReader reads stored raw readings in time order (*store.Store
// implements it).
type RawReader interface {
	ReadReadings(ctx context.Context, structure string, from, to time.Time, fn func(store.Reading) error) error
}

// LivesFromRaw recounts the gauges from the raw readings stored for
// [from, to) (while the raw record is kept): a fresh counter per gauge from
// the period's first reading, the residue counted as half cycles at the
// end (ASTM E1049-85). Damage before the period is not included.
func LivesFromRaw(ctx context.Context, rr RawReader, structure string, src Stresser, gauges []sensors.FatigueGauge, from, to time.Time) ([]GaugeLife, error) {
	type acc struct {
		c     fatigue.Counter
		hours []fatigue.HourHistogram
		buf   []float64
		hour  time.Time
		cur   *fatigue.Histogram
	}
	idx := map[string]*acc{}
	for _, g := range gauges {
		idx[g.Channel] = &acc{}
	}
	flush := func(a *acc) {
		if len(a.buf) > 0 {
			a.c.Add(a.buf, a.cur)
			a.buf = a.buf[:0]
		}
	}
	err := rr.ReadReadings(ctx, structure, from, to, func(r store.Reading) error {
		a, ok := idx[r.Channel]
		if !ok {
			return nil
		}
		s, err := src.Stress(r.Channel, r.Value)
		if err != nil {
			return nil // a reading without a stress is left out, as in the live count
		}
		h := r.Time.UTC().Truncate(time.Hour)
		if a.cur == nil || !h.Equal(a.hour) {
			flush(a)
			a.hour, a.cur = h, &fatigue.Histogram{}
			a.hours = append(a.hours, fatigue.HourHistogram{Hour: h, Hist: a.cur})
		}
		a.buf = append(a.buf, s)
		if len(a.buf) == cap(a.buf) && len(a.buf) >= 4096 {
			flush(a)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	var out []GaugeLife
	for _, g := range gauges {
		a := idx[g.Channel]
		if a.cur != nil {
			flush(a)
			a.c.Residue(a.cur) // the end of the record closes the residue as half cycles
		}
		var period fatigue.Histogram
		for _, h := range a.hours {
			if !h.Hour.Before(g.Fatigue.Start) {
				period.Merge(h.Hist)
			}
		}
		out = append(out, GaugeLife{Gauge: g, Life: fatigue.Summarise(g.Fatigue.Curve, a.hours, g.Fatigue.Start, from, to), Hist: &period})
	}
	return out, nil
}
