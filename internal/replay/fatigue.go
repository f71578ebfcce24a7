package replay

import (
	"context"
	"fmt"
	"time"

	"trussmonitor/internal/fatigue"
	"trussmonitor/internal/fatiguetrack"
	"trussmonitor/internal/report"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
)

// fatigueFigures computes the report's fatigue section: per fatigue gauge,
// from the hourly histograms stored by the live count when the period has
// any, else by recounting the raw readings of the period (the report says
// which, per gauge).
func fatigueFigures(ctx context.Context, db *store.Store, structure string, sm *sensors.Map, from, to time.Time) ([]report.FatigueGauge, error) {
	gauges := sm.FatigueGauges()
	if len(gauges) == 0 {
		return nil, nil
	}
	var stored, raw []sensors.FatigueGauge
	for _, g := range gauges {
		hs, err := db.FatigueHours(ctx, structure, g.Channel, from, to)
		if err != nil {
			return nil, err
		}
		if len(hs) > 0 {
			stored = append(stored, g)
		} else {
			raw = append(raw, g)
		}
	}
	lives, err := fatiguetrack.Lives(ctx, db, structure, stored, from, to)
	if err != nil {
		return nil, err
	}
	sources := make([]string, len(lives))
	for i := range sources {
		sources[i] = "from the hourly stress-range histograms stored by the live count"
	}
	if len(raw) > 0 {
		gr := gaugeReader{db: db}
		for _, g := range raw {
			gr.channels = append(gr.channels, g.Channel)
		}
		rl, err := fatiguetrack.LivesFromRaw(ctx, gr, structure, sm, raw, from, to)
		if err != nil {
			return nil, err
		}
		for _, l := range rl {
			lives = append(lives, l)
			sources = append(sources, "recounted from the raw readings of the period (the store holds no hourly histograms for it; damage before the period not included)")
		}
	}
	out := make([]report.FatigueGauge, len(lives))
	for i, l := range lives {
		c := l.Gauge.Fatigue.Curve
		sD := fatigue.ConstantAmplitudeLimit(c.DeltaSigmaC / c.GammaMf)
		fg := report.FatigueGauge{
			Gauge:  l.Gauge.Channel,
			Detail: fmt.Sprintf("detail category %g MPa (EN 1993-1-9), gamma_Ff %.2f, gamma_Mf %.2f", c.DeltaSigmaC/1e6, c.GammaFf, c.GammaMf),
			Source: sources[i],
			// The design limits in terms of measured ranges (divided by gamma_Ff).
			ConstantAmplitudeLimit: sD / c.GammaFf, CutOff: fatigue.CutOffLimit(sD) / c.GammaFf,
			Total: l.Life.Total, Accumulated: l.Life.Accumulated, RatePerDay: l.Life.RatePerDay,
			WindowDays: l.Life.WindowDays, RemainingYears: l.Life.RemainingYears,
		}
		for _, b := range l.Hist.Bins() {
			fg.Bins = append(fg.Bins, report.FatigueBin{Lo: float64(b.Index) * fatigue.BinWidth, Hi: float64(b.Index+1) * fatigue.BinWidth, Cycles: b.Cycles})
		}
		for _, d := range l.Life.Days {
			fg.Days = append(fg.Days, report.FatigueDay{Day: d.Day, Damage: d.Damage})
		}
		out[i] = fg
	}
	return out, nil
}

// gaugeReader reads the stored readings of the given channels only (the
// fatigue gauges recounted), in the store's order, so that the recount
// does not read every channel of the period a second time.
type gaugeReader struct {
	db       *store.Store
	channels []string
}

// ReadReadings calls fn for every reading of the reader's channels of
// structure in [from, to), as store.Store.ReadReadings orders them.
func (g gaugeReader) ReadReadings(ctx context.Context, structure string, from, to time.Time, fn func(store.Reading) error) error {
	return g.db.ReadChannelReadings(ctx, structure, g.channels, from, to, fn)
}
