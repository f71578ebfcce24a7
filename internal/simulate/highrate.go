package simulate

import (
	"errors"
	"fmt"
	"iter"
	"math"
	"math/rand/v2"
	"time"

	"trussmonitor/internal/sensors"
)

// HighRate configures the high-rate record of the fatigue gauges: each load
// passage (pedestrian groups, a maintenance vehicle) seen sample by sample,
// as a logger sampling fast enough for fatigue delivers it.
type HighRate struct {
	// Interval is the sampling interval (20 ms = 50 Hz); a whole number of
	// microseconds, so that SenML times carry it exactly.
	Interval time.Duration
	// PackSpan is the span of one SenML pack (1 s: 50 samples per gauge at
	// 50 Hz).
	PackSpan time.Duration
	// Vehicle is the maintenance vehicle crossing the deck.
	Vehicle Vehicle
	// Channels are the gauges recorded; nil means every gauge with a
	// fatigue block in the sensor map.
	Channels []string
}

// Vehicle is a two-axle vehicle crossing the deck at a steady speed.
type Vehicle struct {
	// FrontAxle and RearAxle are the axle loads in N.
	FrontAxle, RearAxle float64
	// Wheelbase is the axle spacing in m.
	Wheelbase float64
	// Speed is the crossing speed in m/s.
	Speed float64
	// CrossingsPerDay is the mean number of crossings a day (a Poisson
	// process; each crossing goes in a random direction).
	CrossingsPerDay float64
}

// DefaultHighRate is 50 Hz in packs of one second, and a service vehicle of
// 120 kN (80 kN and 40 kN axles 3 m apart, after the service vehicle of
// EN 1991-2, 5.6.3, from memory) crossing at walking pace (2 m/s) about four
// times a day.
func DefaultHighRate() HighRate {
	return HighRate{
		Interval: 20 * time.Millisecond,
		PackSpan: time.Second,
		Vehicle:  Vehicle{FrontAxle: 80e3, RearAxle: 40e3, Wheelbase: 3, Speed: 2, CrossingsPerDay: 4},
	}
}

// HighRatePack is one pack's worth of the high-rate record.
type HighRatePack struct {
	// Times are the sample times.
	Times []time.Time
	// Channels are the gauges, in the order of the columns below.
	Channels []string
	// Units are the channels' SenML units.
	Units []string
	// Raw[i][k] is the raw reading of Channels[k] at Times[i], as the logger
	// sends it.
	Raw [][]float64
	// Stress[i][k] is the local stress (Pa) the generator put into that
	// reading: E of the member times the gauge's strain (load passages,
	// bending and gauge noise), the generator's own stress history.
	Stress [][]float64
}

// hrGauge is a recorded gauge with its strain per unit pattern factor of
// each deck panel.
type hrGauge struct {
	ch    sensors.Channel
	e     float64   // modulus of elasticity of the member, Pa
	perPF []float64 // strain at the gauge per unit factor of panel i (axial plus bending)
}

// HighRate yields the high-rate record from Options.Start over
// Options.Duration. Loads are the pedestrian traffic of Options.Traffic
// (its own random stream, so it is not the traffic of All) and the vehicle;
// each point load is shared between the deck panel patterns by linear
// interpolation between panel centres (down to zero at the deck ends), and
// member forces follow from the intact structure's influence matrix
// (quasi-static: no deck dynamics). Temperatures stay at the zero state and
// the gauges carry no thermal output. Each range restarts the record.
func (g *Generator) HighRate(hr HighRate) iter.Seq2[HighRatePack, error] {
	return func(yield func(HighRatePack, error) bool) {
		gs, err := g.highRateGauges(hr)
		if err != nil {
			yield(HighRatePack{}, err)
			return
		}
		if hr.Interval <= 0 || hr.Interval%time.Microsecond != 0 || hr.PackSpan < hr.Interval {
			yield(HighRatePack{}, fmt.Errorf("simulate: high rate: interval %s must be a positive whole number of microseconds and no longer than the pack span %s", hr.Interval, hr.PackSpan))
			return
		}
		v := hr.Vehicle
		if v.CrossingsPerDay > 0 && !(v.Speed > 0 && v.Wheelbase >= 0 && v.FrontAxle >= 0 && v.RearAxle >= 0) {
			yield(HighRatePack{}, fmt.Errorf("simulate: high rate: vehicle needs a positive speed and non-negative axle loads and wheelbase"))
			return
		}
		const streamHighRate = 101
		rng := rand.New(rand.NewPCG(g.opt.Seed, streamHighRate))
		noise := rand.New(rand.NewPCG(g.opt.Seed, streamHighRate+1))
		var flow *crowdFlow
		if len(g.panels) > 0 && g.opt.Traffic.PeakRate > 0 {
			flow = newCrowdFlow(g.opt.Traffic, g.deckLo, g.deckHi, g.opt.Start, rng)
		}
		vrng := rand.New(rand.NewPCG(g.opt.Seed, streamHighRate+2))
		nextVehicle := g.opt.Start.Add(vehicleGap(v, vrng))
		var vehicleAt time.Time // start of the crossing in progress
		vehicleDir := 1.0
		length := g.deckHi - g.deckLo

		names := make([]string, len(gs))
		units := make([]string, len(gs))
		for k, gg := range gs {
			names[k], units[k] = gg.ch.ID, gg.ch.Unit
		}
		per := int(hr.PackSpan / hr.Interval)
		n := int(g.opt.Duration / hr.Interval)
		f := make([]float64, len(g.panels))
		var peds []Pedestrian
		for k0 := 0; k0 < n; k0 += per {
			m := min(per, n-k0)
			p := HighRatePack{Channels: names, Units: units, Times: make([]time.Time, m), Raw: make([][]float64, m), Stress: make([][]float64, m)}
			for i := 0; i < m; i++ {
				t := g.opt.Start.Add(time.Duration(k0+i) * hr.Interval)
				p.Times[i] = t
				clear(f)
				if flow != nil {
					peds = flow.advance(t, peds)
					for _, pd := range peds {
						g.spreadLoad(f, pd.X, pd.Mass*StandardGravity())
					}
				}
				if v.CrossingsPerDay > 0 {
					if vehicleAt.IsZero() && !nextVehicle.After(t) {
						vehicleAt = nextVehicle
						vehicleDir = 1
						if vrng.IntN(2) == 1 {
							vehicleDir = -1
						}
					}
					if !vehicleAt.IsZero() {
						s := t.Sub(vehicleAt).Seconds() * v.Speed // front axle's distance from the entry end
						if s > length+v.Wheelbase {
							vehicleAt = time.Time{}
							nextVehicle = t.Add(vehicleGap(v, vrng))
						} else {
							for _, ax := range [2][2]float64{{s, v.FrontAxle}, {s - v.Wheelbase, v.RearAxle}} {
								if ax[0] < 0 || ax[0] > length {
									continue
								}
								x := g.deckLo + ax[0]
								if vehicleDir < 0 {
									x = g.deckHi - ax[0]
								}
								g.spreadLoad(f, x, ax[1])
							}
						}
					}
				}
				p.Raw[i] = make([]float64, len(gs))
				p.Stress[i] = make([]float64, len(gs))
				for k, gg := range gs {
					var e float64
					for j, c := range gg.perPF {
						e += c * f[j]
					}
					e += gg.ch.Noise * noise.NormFloat64()
					raw, err := g.sm.Raw(gg.ch.ID, e)
					if err != nil {
						yield(HighRatePack{}, fmt.Errorf("simulate: high rate at %s: %w", t.Format(time.RFC3339Nano), err))
						return
					}
					p.Raw[i][k] = raw
					p.Stress[i][k] = gg.e * e
				}
			}
			if !yield(p, nil) {
				return
			}
		}
	}
}

// vehicleGap draws the time to the next crossing.
func vehicleGap(v Vehicle, rng *rand.Rand) time.Duration {
	if v.CrossingsPerDay <= 0 {
		return time.Duration(math.MaxInt64 / 2)
	}
	return time.Duration(rng.ExpFloat64() / v.CrossingsPerDay * float64(24*time.Hour))
}

// spreadLoad adds a point load w (N, along gravity) at deck coordinate x to
// the panel pattern factors f, interpolating linearly between panel centres
// and down to zero at the deck ends (the end supports take it).
func (g *Generator) spreadLoad(f []float64, x, w float64) {
	np := len(g.panels)
	if np == 0 || x < g.deckLo || x > g.deckHi {
		return
	}
	centre := func(i int) float64 { return (g.panels[i].lo + g.panels[i].hi) / 2 }
	switch {
	case x <= centre(0):
		f[0] += w * (x - g.deckLo) / (centre(0) - g.deckLo) / g.panels[0].weight
	case x >= centre(np-1):
		f[np-1] += w * (g.deckHi - x) / (g.deckHi - centre(np-1)) / g.panels[np-1].weight
	default:
		i := 0
		for i+1 < np && centre(i+1) < x {
			i++
		}
		xi := (x - centre(i)) / (centre(i+1) - centre(i))
		f[i] += w * (1 - xi) / g.panels[i].weight
		f[i+1] += w * xi / g.panels[i+1].weight
	}
}

// highRateGauges resolves the recorded gauges and their strain per unit
// panel factor (bending as in All: BendingRatio of the axial strain change
// with the gauge's sign).
func (g *Generator) highRateGauges(hr HighRate) ([]hrGauge, error) {
	ids := hr.Channels
	if ids == nil {
		for _, fg := range g.sm.FatigueGauges() {
			ids = append(ids, fg.Channel)
		}
	}
	if len(ids) == 0 {
		return nil, errors.New("simulate: high rate: no gauges to record; give channels or add a fatigue block to gauges of the sensor map")
	}
	if len(g.panels) == 0 {
		return nil, errors.New("simulate: high rate: the structure has no deck panel patterns for the passages to load")
	}
	s := g.states[0]
	var out []hrGauge
	for _, id := range ids {
		var c *channelInfo
		for i := range g.chans {
			if g.chans[i].ch.ID == id {
				c = &g.chans[i]
			}
		}
		if c == nil || c.member < 0 || !c.ch.Kind.IsGauge() {
			return nil, fmt.Errorf("simulate: high rate: %q is not a gauge of the sensor map", id)
		}
		gg := hrGauge{ch: c.ch, e: g.st.Members[c.member].E, perPF: make([]float64, len(g.panels))}
		for j, pn := range g.panels {
			axial := s.h.At(c.member, pn.pattern) / s.ea[c.member]
			gg.perPF[j] = axial * (1 + c.bendSign*g.opt.BendingRatio)
		}
		out = append(out, gg)
	}
	return out, nil
}
