package simulate

import (
	"fmt"
	"math"
	"math/rand/v2"
	"time"

	"trussmonitor/internal/sensors"
)

// run is one pass over a scenario: the state of every random process.
type run struct {
	g        *Generator
	flow     *crowdFlow
	clim     *climate
	slow     []*ouProcess // by pattern index, nil when not slow
	crews    *crewVisits
	noise    *rand.Rand
	bad      *rand.Rand
	lastRaw  []float64
	haveRaw  []bool
	stuckRaw []float64
	stuckSet []bool
	peds     []Pedestrian
}

func (g *Generator) newRun() *run {
	r := &run{
		g:        g,
		clim:     newClimate(g.opt.Weather, g.rng(streamWeather)),
		slow:     make([]*ouProcess, len(g.st.Patterns)),
		noise:    g.rng(streamNoise),
		bad:      g.rng(streamBad),
		lastRaw:  make([]float64, len(g.chans)),
		haveRaw:  make([]bool, len(g.chans)),
		stuckRaw: make([]float64, len(g.chans)),
		stuckSet: make([]bool, len(g.chans)),
	}
	if len(g.panels) > 0 {
		r.flow = newCrowdFlow(g.opt.Traffic, g.deckLo, g.deckHi, g.opt.Start, g.rng(streamTraffic))
	}
	loads := g.rng(streamLoads)
	for p := range g.st.Patterns {
		if s, ok := g.slow[p]; ok {
			ou := newOU(s.Mean, s.SD, s.Tau, loads)
			r.slow[p] = &ou
		}
	}
	if len(g.count) > 0 {
		r.crews = newCrewVisits(g.opt.Crews, g.opt.Start, g.rng(streamCrews))
	}
	return r
}

// step computes step k.
func (r *run) step(k int) (Step, error) {
	g := r.g
	t := g.opt.Start.Add(time.Duration(k) * g.opt.Rate)
	if k > 0 {
		r.clim.step(g.opt.Rate)
		for _, ou := range r.slow {
			if ou != nil {
				ou.step(g.opt.Rate)
			}
		}
	}
	st := Step{Time: t}

	// Loads and temperatures: the input factors f.
	f := make([]float64, len(g.inputs))
	for p, d := range g.drivers {
		switch d {
		case drivePermanent:
			f[p] = g.permanent[p]
		case driveSlow:
			f[p] = math.Max(0, r.slow[p].x)
		case driveCount:
			f[p] = float64(r.crews.advance(t)) * g.count[p]
		}
	}
	if r.flow != nil {
		r.peds = r.flow.advance(t, r.peds)
		st.Truth.Pedestrians = append([]Pedestrian(nil), r.peds...)
		for _, pd := range r.peds {
			i := g.panelAt(pd.X)
			pn := g.panels[i]
			f[pn.pattern] += pd.Mass * StandardGravity() / pn.weight
		}
	}
	state := 0
	for _, ft := range g.opt.Faults {
		if ft.Time(g.opt.Start).After(t) {
			continue
		}
		st.Truth.Faults = append(st.Truth.Faults, ft)
		if ft.Kind == FaultSettlement {
			p := g.settleNode[ft.Target]
			f[p] += ft.Size * g.settle[p]
		}
	}
	for _, at := range g.faultAt {
		if !at.After(t) {
			state++
		}
	}
	temps := make([]float64, len(g.chans))
	for i, c := range g.chans {
		if c.ch.Kind != sensors.KindTemperature {
			continue
		}
		temps[i] = r.clim.temperature(t, c.exposure)
	}
	st.Truth.Temperatures = make(map[string]float64, len(g.groups))
	for kg, gr := range g.groups {
		f[g.nPat+kg] = temps[g.groupCh[kg]] - g.groupRef[kg]
		st.Truth.Temperatures[gr] = temps[g.groupCh[kg]]
	}

	// Member forces N = H f of the current state.
	s := g.states[state]
	rows, _ := s.h.Dims()
	forces := make([]float64, rows)
	for m := 0; m < rows; m++ {
		var sum float64
		for j, v := range f {
			if v != 0 {
				sum += s.h.At(m, j) * v
			}
		}
		forces[m] = sum
	}
	st.Truth.Forces = forces
	st.Truth.Factors = append([]float64(nil), f[:g.nPat]...)

	// Channels.
	eng := make([]float64, len(g.chans))
	intact := g.states[0]
	for i, c := range g.chans {
		var e float64
		switch {
		case c.member >= 0:
			n := forces[c.member]
			axial := n/s.ea[c.member] - c.zeroN/intact.ea[c.member]
			e = axial + c.bendSign*g.opt.BendingRatio*(n-c.zeroN)/intact.ea[c.member]
		case c.pattern >= 0:
			e = f[c.pattern] / float64(g.loadChannels[c.pattern])
		case c.ch.Kind == sensors.KindTemperature:
			e = temps[i]
		}
		for _, d := range c.drift {
			if at := d.Time(g.opt.Start); t.After(at) {
				e += d.Size * t.Sub(at).Seconds()
			}
		}
		eng[i] = e
	}
	st.Truth.Engineering = eng

	// Raw readings with noise, stuck channels and bad messages.
	st.Readings = make([]LoggerValue, 0, len(g.chans))
	for i, c := range g.chans {
		noisy := eng[i] + c.ch.Noise*r.noise.NormFloat64()
		var raw float64
		var err error
		if c.tempCh >= 0 {
			raw, err = g.sm.Raw(c.ch.ID, noisy, temps[c.tempCh])
		} else {
			raw, err = g.sm.Raw(c.ch.ID, noisy)
		}
		if err != nil {
			return st, fmt.Errorf("simulate: step %s: %w", t.Format(time.RFC3339), err)
		}
		if c.ch.Unit == "count" {
			// A counter reports whole, non-negative numbers: its noise is
			// miscounting, not a Gaussian offset below zero.
			raw = math.Max(0, math.Round(raw))
		}
		if g.opt.Quantise {
			raw = Quantise(raw, c.decimals)
		}
		if !c.stuckAt.IsZero() && !t.Before(c.stuckAt) {
			if !r.stuckSet[i] {
				r.stuckRaw[i], r.stuckSet[i] = raw, true
				if r.haveRaw[i] {
					r.stuckRaw[i] = r.lastRaw[i]
				}
			}
			raw = r.stuckRaw[i]
		}
		r.lastRaw[i], r.haveRaw[i] = raw, true
		rd := LoggerValue{Channel: c.ch.ID, Value: raw, Unit: c.ch.Unit}
		if g.opt.BadRate > 0 && r.bad.Float64() < g.opt.BadRate {
			d := Defect(1 + r.bad.IntN(4))
			bad := rd
			bad.Defect = d
			switch d {
			case DefectNaN:
				bad.Value = math.NaN()
			case DefectUnknownChannel:
				bad.Channel = fmt.Sprintf("ghost_%d", 1+r.bad.IntN(9))
				st.Readings = append(st.Readings, rd)
			case DefectWrongUnit:
				bad.Unit = wrongUnit(rd.Unit)
			}
			st.Bad = append(st.Bad, bad)
			continue
		}
		st.Readings = append(st.Readings, rd)
	}
	return st, nil
}

// panelAt returns the index of the deck panel at deck coordinate x.
func (g *Generator) panelAt(x float64) int {
	for i, p := range g.panels {
		if x < p.hi {
			return i
		}
	}
	return len(g.panels) - 1
}

// wrongUnit returns a unit symbol other than u.
func wrongUnit(u string) string {
	if u == "Hz" {
		return "V"
	}
	return "Hz"
}

// StandardGravity is g in m/s^2 (the conventional value fixed by the 3rd
// CGPM, 1901), used for the pedestrians' weight.
func StandardGravity() float64 { return 9.80665 }

// crewVisits counts people on a walkway: visits arrive in working hours
// (07:00 to 17:00) as a Poisson process and stay an exponential time.
type crewVisits struct {
	cfg    Crews
	rng    *rand.Rand
	next   time.Time
	visits []visit
}

type visit struct {
	until  time.Time
	people int
}

func newCrewVisits(cfg Crews, start time.Time, rng *rand.Rand) *crewVisits {
	c := &crewVisits{cfg: cfg, rng: rng}
	c.next = start.Add(c.gap())
	return c
}

// gap draws the time to the next candidate visit at the working-hours rate.
func (c *crewVisits) gap() time.Duration {
	if c.cfg.VisitsPerDay <= 0 {
		return time.Duration(math.MaxInt64 / 2)
	}
	rate := c.cfg.VisitsPerDay / (10 * 3600) // per second within the 10 working hours
	return time.Duration(c.rng.ExpFloat64() / rate * float64(time.Second))
}

// advance brings the process to t and returns the people present.
func (c *crewVisits) advance(t time.Time) int {
	for !c.next.After(t) {
		at := c.next
		c.next = c.next.Add(c.gap())
		h := hourOfDay(at, time.UTC)
		if h < 7 || h >= 17 {
			continue
		}
		people := 1
		if c.cfg.MaxPeople > 1 {
			people = 1 + c.rng.IntN(c.cfg.MaxPeople)
		}
		stay := time.Duration(c.rng.ExpFloat64() * float64(c.cfg.MeanStay))
		c.visits = append(c.visits, visit{until: at.Add(stay), people: people})
	}
	n := 0
	kept := c.visits[:0]
	for _, v := range c.visits {
		if v.until.After(t) {
			kept = append(kept, v)
			n += v.people
		}
	}
	c.visits = kept
	return n
}
