package simulate

import (
	"math"
	"math/rand/v2"
	"time"
)

// Traffic describes pedestrians crossing a deck: groups arrive at either end
// as a non-homogeneous Poisson process whose rate follows a daily profile, and
// walk across at a steady speed. Each pedestrian is a moving point weight
// m*g shared between the two bottom nodes of the deck panel it is on, so the
// panel's weigh pad sees the whole weight.
type Traffic struct {
	// PeakRate is the arrival rate of groups at the profile's peak, per
	// second (both ends together).
	PeakRate float64
	// Profile gives the relative arrival rate (0..1) at an hour of the day
	// (0 <= h < 24, in Location). Nil means DailyProfile.
	Profile func(hour float64) float64
	// Location is the time zone of the profile's hours; nil means UTC.
	Location *time.Location
	// MeanSpeed and SpeedSD are the walking speed's mean and standard
	// deviation in m/s (about 1.3 m/s, common practice for pedestrian
	// loading).
	MeanSpeed, SpeedSD float64
	// MeanMass and MassSD are the pedestrian mass's mean and standard
	// deviation in kg (about 75 kg, common practice).
	MeanMass, MassSD float64
	// GroupSize holds the probabilities of groups of 1, 2, 3, ... people.
	GroupSize []float64
	// Spacing is the distance in metres between members of a group.
	Spacing float64
}

// DefaultTraffic returns the footbridge's default pedestrian traffic: at most
// 3 groups a minute, 1.3 m/s, 75 kg, mostly people walking alone.
func DefaultTraffic() Traffic {
	return Traffic{
		PeakRate:  3.0 / 60,
		MeanSpeed: 1.3, SpeedSD: 0.15,
		MeanMass: 75, MassSD: 12,
		GroupSize: []float64{0.65, 0.22, 0.09, 0.04},
		Spacing:   0.8,
	}
}

// DailyProfile is a relative arrival rate with morning and evening peaks, a
// smaller one at midday and very little traffic at night.
func DailyProfile(hour float64) float64 {
	bump := func(centre, width, height float64) float64 {
		d := hour - centre
		return height * math.Exp(-0.5*d*d/(width*width))
	}
	v := 0.02 + bump(8, 1, 1) + bump(12.5, 1.2, 0.5) + bump(17.5, 1.3, 0.9) + bump(20.5, 1.5, 0.2)
	return math.Min(v, 1)
}

// Pedestrian is one person on the deck at a time step.
type Pedestrian struct {
	// X is the position along the deck axis in metres.
	X float64
	// Mass is in kg.
	Mass float64
}

// walker is a pedestrian from arrival to leaving the deck.
type walker struct {
	enter time.Time
	start float64 // deck coordinate where the walker enters
	dir   float64 // +1 or -1
	speed float64 // m/s
	mass  float64 // kg
	lag   float64 // metres behind the group's leader
}

// position returns the deck coordinate at time t.
func (w walker) position(t time.Time) float64 {
	s := t.Sub(w.enter).Seconds()*w.speed - w.lag
	return w.start + w.dir*s
}

// crowdFlow runs the arrival process and tracks walkers on a deck from lo to
// hi (metres along the deck axis).
type crowdFlow struct {
	cfg     Traffic
	lo, hi  float64
	rng     *rand.Rand
	next    time.Time // next candidate arrival of the homogeneous process
	walkers []walker
}

func newCrowdFlow(cfg Traffic, lo, hi float64, start time.Time, rng *rand.Rand) *crowdFlow {
	if cfg.Profile == nil {
		cfg.Profile = DailyProfile
	}
	if cfg.Location == nil {
		cfg.Location = time.UTC
	}
	c := &crowdFlow{cfg: cfg, lo: lo, hi: hi, rng: rng}
	c.next = start.Add(c.gap())
	return c
}

// gap draws the time to the next candidate arrival (exponential at the peak
// rate; thinning by the profile makes the process non-homogeneous, the
// method of Lewis and Shedler, 1979).
func (c *crowdFlow) gap() time.Duration {
	if c.cfg.PeakRate <= 0 {
		return time.Duration(math.MaxInt64 / 2)
	}
	return time.Duration(c.rng.ExpFloat64() / c.cfg.PeakRate * float64(time.Second))
}

func hourOfDay(t time.Time, loc *time.Location) float64 {
	l := t.In(loc)
	return float64(l.Hour()) + float64(l.Minute())/60 + float64(l.Second())/3600 + float64(l.Nanosecond())/3.6e12
}

// advance brings the flow to time t and returns the pedestrians on the deck.
func (c *crowdFlow) advance(t time.Time, out []Pedestrian) []Pedestrian {
	for !c.next.After(t) {
		at := c.next
		c.next = c.next.Add(c.gap())
		if c.rng.Float64() < c.cfg.Profile(hourOfDay(at, c.cfg.Location)) {
			c.spawn(at)
		}
	}
	out = out[:0]
	kept := c.walkers[:0]
	for _, w := range c.walkers {
		x := w.position(t)
		switch {
		case w.dir > 0 && x > c.hi, w.dir < 0 && x < c.lo:
			continue // has left the deck
		case w.dir > 0 && x < c.lo, w.dir < 0 && x > c.hi:
			kept = append(kept, w) // not yet on the deck
		default:
			kept = append(kept, w)
			out = append(out, Pedestrian{X: x, Mass: w.mass})
		}
	}
	c.walkers = kept
	return out
}

// spawn adds a group arriving at time at.
func (c *crowdFlow) spawn(at time.Time) {
	n := 1
	u := c.rng.Float64()
	for i, p := range c.cfg.GroupSize {
		if u < p {
			n = i + 1
			break
		}
		u -= p
		n = i + 2
	}
	if len(c.cfg.GroupSize) > 0 && n > len(c.cfg.GroupSize) {
		n = len(c.cfg.GroupSize)
	}
	start, dir := c.lo, 1.0
	if c.rng.IntN(2) == 1 {
		start, dir = c.hi, -1.0
	}
	speed := clamp(c.cfg.MeanSpeed+c.cfg.SpeedSD*c.rng.NormFloat64(), 0.5*c.cfg.MeanSpeed, 1.5*c.cfg.MeanSpeed)
	for k := 0; k < n; k++ {
		mass := clamp(c.cfg.MeanMass+c.cfg.MassSD*c.rng.NormFloat64(), 0.4*c.cfg.MeanMass, 2*c.cfg.MeanMass)
		c.walkers = append(c.walkers, walker{enter: at, start: start, dir: dir, speed: speed, mass: mass, lag: float64(k) * c.cfg.Spacing})
	}
}

func clamp(v, lo, hi float64) float64 {
	return math.Max(lo, math.Min(hi, v))
}
