package sensors

import (
	"fmt"
	"math"
	"sort"

	"trussmonitor/internal/calib"
)

// kelvinOffset converts kelvin to degC: T[degC] = T[K] - 273.15.
const kelvinOffset = 273.15

// Validate checks one incoming reading of channel in SenML unit unit. An
// empty unit stands for the channel's declared unit (a per-channel pack may
// omit it). Errors are *ReadingError with Reason "unknown_channel",
// "unit_mismatch", "out_of_range" or "not_finite".
func (m *Map) Validate(channel, unit string, value float64) error {
	i, ok := m.index[channel]
	if !ok {
		return &ReadingError{reason: ReasonUnknownChannel, Channel: channel,
			Msg: fmt.Sprintf("not in the sensor map %s; add it there or fix the logger's channel name", m.file)}
	}
	ch := &m.channels[i]
	if unit != "" && unit != ch.Unit {
		return &ReadingError{reason: ReasonUnitMismatch, Channel: channel,
			Msg: fmt.Sprintf("reading in unit %q, but the sensor map declares %q for this %s channel", unit, ch.Unit, ch.Kind)}
	}
	if math.IsNaN(value) || math.IsInf(value, 0) {
		return &ReadingError{reason: ReasonNotFinite, Channel: channel, Msg: fmt.Sprintf("value %v is not finite", value)}
	}
	if value < ch.Range[0] || value > ch.Range[1] {
		return &ReadingError{reason: ReasonOutOfRange, Channel: channel,
			Msg: fmt.Sprintf("value %g %s is outside the plausible range [%g, %g]; check the sensor or set range in the sensor map", value, ch.Unit, ch.Range[0], ch.Range[1])}
	}
	return nil
}

// Convert turns a raw reading of channel (in its declared unit) into its
// engineering value: strain relative to the zero reading, before
// temperature compensation, for gauges; degC for temperatures; the pattern
// factor for load channels.
func (m *Map) Convert(channel string, raw float64) (float64, error) {
	i, ok := m.index[channel]
	if !ok {
		return 0, &ReadingError{reason: ReasonUnknownChannel, Channel: channel, Msg: "not in the sensor map " + m.file}
	}
	ch := &m.channels[i]
	if math.IsNaN(raw) || math.IsInf(raw, 0) {
		return 0, &ReadingError{reason: ReasonNotFinite, Channel: channel, Msg: fmt.Sprintf("value %v is not finite", raw)}
	}
	v := convert(ch, raw)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, &ReadingError{reason: ReasonOutOfRange, Channel: channel,
			Msg: fmt.Sprintf("reading %g %s is outside the domain of the %s equation", raw, ch.Unit, ch.Kind)}
	}
	return v, nil
}

func convert(ch *Channel, raw float64) float64 {
	switch ch.Kind {
	case KindStrain:
		return raw - ch.Zero
	case KindQuarterBridge, KindHalfBridgePoisson, KindFullBridgePoisson:
		return bridgeStrain(ch, ratio(ch, raw)) - bridgeStrain(ch, ratio(ch, ch.Zero))
	case KindVibratingWire:
		// Temperature term added in Evaluate: e = G (f^2 - f0^2).
		return calib.VibratingWireStrain(ch.GaugeConstant, raw, ch.Zero, 0, 0, 0, 0)
	case KindTemperature:
		if ch.Unit == "K" {
			return raw - kelvinOffset
		}
		return raw
	case KindLoad:
		return (raw - ch.Zero) * ch.Factor
	}
	return math.NaN()
}

// ratio is the bridge output ratio Vo/Vs of a raw bridge reading.
func ratio(ch *Channel, raw float64) float64 {
	if ch.Unit == "V" {
		return calib.RatioFromVolts(raw, ch.Excitation)
	}
	return raw
}

// bridgeStrain is the strain from a balanced bridge for output ratio r.
func bridgeStrain(ch *Channel, r float64) float64 {
	switch ch.Kind {
	case KindQuarterBridge:
		return calib.QuarterBridgeStrain(ch.GaugeFactor, r)
	case KindHalfBridgePoisson:
		return calib.HalfBridgePoissonStrain(ch.GaugeFactor, ch.Poisson, r)
	case KindFullBridgePoisson:
		return calib.FullBridgePoissonStrain(ch.GaugeFactor, ch.Poisson, r)
	}
	return math.NaN()
}

// bridgeOutput is the inverse of bridgeStrain.
func bridgeOutput(ch *Channel, e float64) float64 {
	switch ch.Kind {
	case KindQuarterBridge:
		return calib.QuarterBridgeOutput(ch.GaugeFactor, e)
	case KindHalfBridgePoisson:
		return calib.HalfBridgePoissonOutput(ch.GaugeFactor, ch.Poisson, e)
	case KindFullBridgePoisson:
		return calib.FullBridgePoissonOutput(ch.GaugeFactor, ch.Poisson, e)
	}
	return math.NaN()
}

// Raw is the inverse of Convert, for the simulator: the raw reading that
// converts to the engineering value. For a gauge with a temperature
// channel, pass that channel's temperature (degC) as the optional third
// argument to get the reading whose temperature-compensated strain (as
// Evaluate computes it) is engineering; without it the reading carries no
// thermal output.
func (m *Map) Raw(channel string, engineering float64, temperature ...float64) (float64, error) {
	i, ok := m.index[channel]
	if !ok {
		return 0, &ReadingError{reason: ReasonUnknownChannel, Channel: channel, Msg: "not in the sensor map " + m.file}
	}
	ch := &m.channels[i]
	if len(temperature) > 1 {
		return 0, fmt.Errorf("channel %q: Raw takes at most one temperature, got %d", channel, len(temperature))
	}
	if math.IsNaN(engineering) || math.IsInf(engineering, 0) {
		return 0, &ReadingError{reason: ReasonNotFinite, Channel: channel, Msg: fmt.Sprintf("value %v is not finite", engineering)}
	}
	e := engineering
	if len(temperature) == 1 && ch.Kind.IsGauge() && ch.TemperatureChannel != "" {
		e = uncompensate(ch, e, temperature[0])
	}
	var raw float64
	switch ch.Kind {
	case KindStrain:
		raw = e + ch.Zero
	case KindQuarterBridge, KindHalfBridgePoisson, KindFullBridgePoisson:
		r := bridgeOutput(ch, e+bridgeStrain(ch, ratio(ch, ch.Zero)))
		raw = r
		if ch.Unit == "V" {
			raw = calib.VoltsFromRatio(r, ch.Excitation)
		}
	case KindVibratingWire:
		raw = calib.VibratingWireFrequency(ch.GaugeConstant, e, ch.Zero, 0, 0, 0, 0)
	case KindTemperature:
		raw = e
		if ch.Unit == "K" {
			raw = e + kelvinOffset
		}
	case KindLoad:
		raw = e/ch.Factor + ch.Zero
	}
	if math.IsNaN(raw) || math.IsInf(raw, 0) {
		return 0, &ReadingError{reason: ReasonOutOfRange, Channel: channel,
			Msg: fmt.Sprintf("no reading of this %s channel gives %g", ch.Kind, engineering)}
	}
	return raw, nil
}

// compensate applies the gauge's temperature correction to its converted
// strain e at temperature t (degC): the thermal output of a foil gauge, or
// the wire-minus-steel term of a vibrating-wire gauge.
func compensate(ch *Channel, e, t float64) float64 {
	if ch.Kind == KindVibratingWire {
		return e + (ch.WireAlpha-ch.SteelAlpha)*(t-ch.ZeroTemperature)
	}
	return calib.CompensateThermalOutput(e, ch.ThermalOutput, t, ch.ZeroTemperature)
}

// uncompensate is the inverse of compensate.
func uncompensate(ch *Channel, e, t float64) float64 {
	if ch.Kind == KindVibratingWire {
		return e - (ch.WireAlpha-ch.SteelAlpha)*(t-ch.ZeroTemperature)
	}
	return calib.AddThermalOutput(e, ch.ThermalOutput, t, ch.ZeroTemperature)
}

// MemberMeasurement is the measured axial force of one gauged member in one
// epoch.
type MemberMeasurement struct {
	Member string
	// ForceN is E A times the mean compensated strain of the gauges that
	// reported, in newtons (tension positive), relative to the zero state.
	// 0 when no gauge reported (Gauges == 0). When Gauges < Expected the
	// bending of the member may no longer cancel in the mean: a consumer
	// that needs the axial force only should drop such members.
	ForceN float64
	// SigmaN is the standard deviation of ForceN from the gauges' noise:
	// E A sqrt(sum sigma_i^2) / n.
	SigmaN float64
	// Gauges is how many gauges contributed; Expected how many the member
	// carries.
	Gauges, Expected int
	// Missing lists the gauge channels that did not contribute (no reading,
	// or no reading of their temperature channel).
	Missing []string
	// ZeroLoads are the pattern factors of the gauges' zero state.
	ZeroLoads map[string]float64
	// ZeroTemperatures are the group temperatures (degC) of the zero state.
	ZeroTemperatures map[string]float64
}

// Snapshot is one epoch's engineering state derived from the channel
// values.
type Snapshot struct {
	Members []MemberMeasurement
	// Loads maps pattern -> current factor: the permanent loads plus the
	// sum of the load channels of each measured pattern.
	Loads map[string]float64
	// MissingLoads are measured patterns with at least one load channel
	// that did not report (they are left out of Loads).
	MissingLoads []string
	// Temperatures maps member group -> current degC (mean of the
	// temperature channels that feed the group and reported).
	Temperatures map[string]float64
	// MissingTemperatures are groups with a temperature channel none of
	// which reported.
	MissingTemperatures []string
}

// Evaluate turns epoch-mean engineering values per channel (Convert's
// output; missing channels absent) into member forces, load factors and
// group temperatures, applying the gauges' temperature compensation.
func (m *Map) Evaluate(values map[string]float64) *Snapshot {
	s := &Snapshot{Loads: copyMap(m.permanent), Temperatures: map[string]float64{}}

	// Temperatures per group.
	sum := map[string]float64{}
	cnt := map[string]int{}
	fed := map[string]bool{}
	for i := range m.channels {
		ch := &m.channels[i]
		if ch.Kind != KindTemperature {
			continue
		}
		v, ok := finite(values, ch.ID)
		for _, g := range ch.Groups {
			fed[g] = true
			if ok {
				sum[g] += v
				cnt[g]++
			}
		}
	}
	for g := range fed {
		if cnt[g] > 0 {
			s.Temperatures[g] = sum[g] / float64(cnt[g])
		} else {
			s.MissingTemperatures = append(s.MissingTemperatures, g)
		}
	}
	sort.Strings(s.MissingTemperatures)

	// Loads per pattern.
	measured := map[string]float64{}
	missing := map[string]bool{}
	for i := range m.channels {
		ch := &m.channels[i]
		if ch.Kind != KindLoad {
			continue
		}
		if v, ok := finite(values, ch.ID); ok {
			measured[ch.Pattern] += v
		} else {
			missing[ch.Pattern] = true
		}
	}
	for p, v := range measured {
		if !missing[p] {
			s.Loads[p] = v
		}
	}
	for p := range missing {
		s.MissingLoads = append(s.MissingLoads, p)
	}
	sort.Strings(s.MissingLoads)

	// Member forces.
	for _, mg := range m.members {
		props := m.props[mg.member]
		mm := MemberMeasurement{Member: mg.member, Expected: len(mg.channels)}
		z := m.zeroStates[mg.zero]
		mm.ZeroLoads = copyMap(z.Loads)
		mm.ZeroTemperatures = copyMap(z.Temperatures)
		var strains, sigmas []float64
		for _, ci := range mg.channels {
			ch := &m.channels[ci]
			e, ok := finite(values, ch.ID)
			if ok && ch.TemperatureChannel != "" {
				var t float64
				t, ok = finite(values, ch.TemperatureChannel)
				if ok {
					e = compensate(ch, e, t)
				}
			}
			if !ok {
				mm.Missing = append(mm.Missing, ch.ID)
				continue
			}
			strains = append(strains, e)
			sigmas = append(sigmas, ch.Noise)
		}
		mm.Gauges = len(strains)
		if mm.Gauges > 0 {
			mm.ForceN = calib.MemberForce(props[0], props[1], calib.MeanStrain(strains))
			mm.SigmaN = calib.MemberForceSigma(props[0], props[1], calib.MeanStrainSigma(sigmas))
		}
		s.Members = append(s.Members, mm)
	}
	return s
}

func finite(values map[string]float64, id string) (float64, bool) {
	v, ok := values[id]
	if !ok || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, false
	}
	return v, true
}
