package simulate

import (
	"math"
	"math/rand/v2"
	"time"
)

// Weather describes the daily temperature cycle of the steel: the air
// temperature follows a cosine with its minimum before dawn and its maximum
// in the afternoon, plus a slow random wander; members in the sun (the top
// chord of a footbridge, the top layer of a roof) gain extra heat by day,
// dimmed by passing cloud; shaded members lag the air slightly.
type Weather struct {
	// MeanC is the daily mean air temperature in degC.
	MeanC float64
	// AmplitudeC is half the daily range of the air temperature in K.
	AmplitudeC float64
	// PeakHour is the hour of the day of the warmest air (about 15).
	PeakHour float64
	// SunGainK is the extra temperature of sunlit members at solar noon
	// under a clear sky, in K.
	SunGainK float64
	// WanderK and WanderTau are the standard deviation and correlation time
	// of the slow random part of the air temperature.
	WanderK   float64
	WanderTau time.Duration
	// CloudTau is the correlation time of the cloud cover.
	CloudTau time.Duration
	// ShadeLag is how far shaded members lag the air temperature.
	ShadeLag time.Duration
	// Location is the time zone of the hours; nil means UTC.
	Location *time.Location
}

// DefaultWeather returns a mild day: 12 degC mean, 5 K amplitude, 8 K of sun
// on the exposed members.
func DefaultWeather() Weather {
	return Weather{
		MeanC: 12, AmplitudeC: 5, PeakHour: 15, SunGainK: 8,
		WanderK: 0.8, WanderTau: 3 * time.Hour,
		CloudTau: 40 * time.Minute, ShadeLag: 40 * time.Minute,
	}
}

// Exposure says how a temperature group sits in the weather.
type Exposure int

// The exposures.
const (
	// Sunlit members take the air temperature plus the sun's gain.
	Sunlit Exposure = iota + 1
	// Shaded members take the air temperature, lagged.
	Shaded
)

// climate evolves the weather's random parts step by step.
type climate struct {
	cfg    Weather
	wander ouProcess
	cloud  ouProcess
}

func newClimate(cfg Weather, rng *rand.Rand) *climate {
	if cfg.Location == nil {
		cfg.Location = time.UTC
	}
	return &climate{
		cfg:    cfg,
		wander: newOU(0, cfg.WanderK, cfg.WanderTau, rng),
		cloud:  newOU(0, 1, cfg.CloudTau, rng),
	}
}

// step advances the random parts by dt.
func (c *climate) step(dt time.Duration) {
	c.wander.step(dt)
	c.cloud.step(dt)
}

// air returns the air temperature in degC at time t (without the wander).
func (c *climate) air(t time.Time) float64 {
	h := hourOfDay(t, c.cfg.Location)
	return c.cfg.MeanC + c.cfg.AmplitudeC*math.Cos(2*math.Pi*(h-c.cfg.PeakHour)/24)
}

// sun returns the relative solar heating (0..1) at time t: a half sine from
// 06:00 to 18:00, dimmed by cloud (a logistic of the cloud process).
func (c *climate) sun(t time.Time) float64 {
	h := hourOfDay(t, c.cfg.Location)
	if h <= 6 || h >= 18 {
		return 0
	}
	clear := 1 / (1 + math.Exp(-2*(c.cloud.x+0.8)))
	return math.Sin(math.Pi*(h-6)/12) * clear
}

// temperature returns the temperature in degC of a group with the given
// exposure at time t.
func (c *climate) temperature(t time.Time, e Exposure) float64 {
	switch e {
	case Sunlit:
		return c.air(t) + c.wander.x + c.cfg.SunGainK*c.sun(t)
	default:
		return c.air(t.Add(-c.cfg.ShadeLag)) + c.wander.x
	}
}

// ouProcess is an Ornstein-Uhlenbeck process sampled exactly at each step:
// x(t+dt) = mean + (x(t) - mean) e^(-dt/tau) + sd sqrt(1 - e^(-2 dt/tau)) xi,
// with xi standard normal (Gillespie, Phys. Rev. E 54, 2084, 1996).
type ouProcess struct {
	mean, sd float64
	tau      time.Duration
	x        float64
	rng      *rand.Rand
}

// newOU starts the process in its stationary distribution.
func newOU(mean, sd float64, tau time.Duration, rng *rand.Rand) ouProcess {
	return ouProcess{mean: mean, sd: sd, tau: tau, x: mean + sd*rng.NormFloat64(), rng: rng}
}

func (p *ouProcess) step(dt time.Duration) {
	if p.tau <= 0 {
		p.x = p.mean + p.sd*p.rng.NormFloat64()
		return
	}
	a := math.Exp(-dt.Seconds() / p.tau.Seconds())
	p.x = p.mean + (p.x-p.mean)*a + p.sd*math.Sqrt(1-a*a)*p.rng.NormFloat64()
}
