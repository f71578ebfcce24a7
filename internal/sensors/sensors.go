// Package sensors reads the sensor map, the YAML companion of a structure
// file that says what every logger channel measures, and converts raw
// readings to engineering values: gauge strain (with the zero reading, the
// bridge equations and thermal-output compensation), member temperatures,
// and load-pattern factors; then the member axial forces N = E A mean(strain)
// with their standard deviations.
//
// The file format is described in docs/sensor-map.md. The formulas are in
// package calib.
package sensors

import (
	"fmt"
	"math"
	"time"
)

// Structure is what the sensor map needs to know of the structure it
// belongs to. *model.Structure implements it.
type Structure interface {
	HasMember(id string) bool
	HasPattern(name string) bool
	HasGroup(name string) bool
	// MemberProperties returns E (Pa), A (m^2) and alpha (1/K).
	MemberProperties(id string) (e, a, alpha float64, ok bool)
}

// Kind is what a channel measures and how its reading converts.
type Kind string

// The channel kinds.
const (
	// KindStrain reports strain directly (SenML unit "/", ratio m/m).
	KindStrain Kind = "strain"
	// KindQuarterBridge is one foil gauge in a quarter bridge, read as
	// bridge output: unit "/" (the ratio Vo/Vs in V/V) or "V" (output
	// volts, with the channel's excitation voltage).
	KindQuarterBridge Kind = "quarter_bridge"
	// KindHalfBridgePoisson is an axial gauge and a transverse (Poisson)
	// gauge in adjacent arms of a half bridge; units as KindQuarterBridge.
	KindHalfBridgePoisson Kind = "half_bridge_poisson"
	// KindFullBridgePoisson is two axial and two transverse gauges in a
	// full bridge; units as KindQuarterBridge.
	KindFullBridgePoisson Kind = "full_bridge_poisson"
	// KindVibratingWire is a vibrating-wire gauge read as frequency ("Hz").
	KindVibratingWire Kind = "vibrating_wire"
	// KindLoad maps a reading (load cell or weigh pad "N", snow depth "m",
	// pedestrian count "count", mass "kg") to a load-pattern factor.
	KindLoad Kind = "load"
	// KindTemperature is a temperature ("Cel", or "K").
	KindTemperature Kind = "temperature"
)

var kinds = []Kind{KindStrain, KindQuarterBridge, KindHalfBridgePoisson, KindFullBridgePoisson,
	KindVibratingWire, KindLoad, KindTemperature}

// IsGauge reports whether the kind measures member strain.
func (k Kind) IsGauge() bool {
	switch k {
	case KindStrain, KindQuarterBridge, KindHalfBridgePoisson, KindFullBridgePoisson, KindVibratingWire:
		return true
	}
	return false
}

// isBridge reports whether the kind is a foil-gauge bridge read as output.
func (k Kind) isBridge() bool {
	return k == KindQuarterBridge || k == KindHalfBridgePoisson || k == KindFullBridgePoisson
}

// Channel is one logger channel of the sensor map, with its constants in the
// units the package works in (strain as a ratio, temperatures in degC,
// coefficients in 1/K). Fields that do not apply to the channel's kind are
// zero.
type Channel struct {
	// ID is the channel id, also the MQTT topic suffix and SenML name.
	ID string
	// Kind says what the channel measures.
	Kind Kind
	// Unit is the SenML unit of the logger's readings.
	Unit string
	// Line is the line of the channel in the sensor map file.
	Line int
	// Note is free text from the file.
	Note string

	// Member is the member a gauge is on.
	Member string
	// Position says where on the section the gauge sits (free text, e.g.
	// "top face"); gauges of one member are averaged.
	Position string
	// GaugeFactor of a foil-gauge bridge.
	GaugeFactor float64
	// Poisson is the Poisson ratio of the member's steel for the Poisson
	// bridge arrangements.
	Poisson float64
	// Excitation is the bridge excitation voltage (V) when Unit is "V".
	Excitation float64
	// GaugeConstant of a vibrating-wire gauge in strain per Hz^2.
	GaugeConstant float64
	// WireAlpha and SteelAlpha are the thermal coefficients (1/K) of a
	// vibrating-wire gauge's wire and of the member it is on.
	WireAlpha, SteelAlpha float64
	// ThermalOutput is the foil gauge's apparent strain as a polynomial in
	// degC (coefficients in strain, lowest order first), or nil.
	ThermalOutput []float64
	// TemperatureChannel is the temperature channel that compensates this
	// gauge (thermal output or the vibrating-wire term), or "".
	TemperatureChannel string
	// ZeroTemperature is the temperature (degC) of TemperatureChannel when
	// the zero reading was taken.
	ZeroTemperature float64

	// Zero is the zero reading in the channel's raw unit: a gauge's reading
	// in its zero state, a load channel's tare reading.
	Zero float64
	// ZeroState names the state a gauge was zeroed under.
	ZeroState string
	// Noise is the standard deviation of one reading in engineering units:
	// strain for gauges, degC for temperatures, pattern factor for loads.
	// It is also the standard deviation of an epoch's mean of several
	// readings: not divided by sqrt(n), since the readings of one window
	// are not independent errors (drift, zero shift, thermal output; see
	// docs/sensor-map.md).
	Noise float64
	// Range is the plausible span of raw readings; readings outside it are
	// rejected as out of range.
	Range [2]float64
	// SampleRate is the logger's declared sampling rate of the channel in
	// Hz (field sample_rate, e.g. "50 Hz"), or 0 when not declared. It
	// gives the number of readings an epoch expects (SamplesPer).
	SampleRate float64

	// Pattern is the load pattern a load channel feeds.
	Pattern string
	// Factor is the pattern factor per unit of (reading - zero).
	Factor float64

	// Groups are the member groups whose temperature a temperature channel
	// gives.
	Groups []string

	// Fatigue is a gauge's fatigue block, or nil.
	Fatigue *Fatigue
}

// MaxSampleRate bounds a declared sample_rate (Hz): a higher value is
// refused as a likely unit mistake (common practice: data loggers of
// strain gauges on bridges sample at most a few kHz).
const MaxSampleRate = 10000.0

// SamplesPer returns the number of readings the channel delivers in one
// epoch of length window at its declared sampling rate: rate x window
// rounded up (a window that holds 1.5 sampling periods holds 1 or 2
// readings, and the epoch waits for the larger count), at least 1. Without
// a declared rate it is 1: the epoch may close once the channel has
// reported once, and further readings of that window count as late.
func (c Channel) SamplesPer(window time.Duration) int {
	if !(c.SampleRate > 0) || window <= 0 {
		return 1
	}
	// The small tolerance keeps 50 Hz x 1 s at 50 despite rounding.
	n := int(math.Ceil(c.SampleRate*window.Seconds() - 1e-9))
	return max(n, 1)
}

// ZeroState is a state of the structure under which gauges were zeroed: the
// pattern factors acting and the member-group temperatures.
type ZeroState struct {
	ID           string
	Loads        map[string]float64
	Temperatures map[string]float64
	Note         string
	Line         int
}

// Map is a validated sensor map. It is not changed after Parse, so its
// methods are safe for concurrent use.
type Map struct {
	file       string
	structure  string
	channels   []Channel
	index      map[string]int
	permanent  map[string]float64
	zeroStates map[string]ZeroState
	members    []memberGauges
	props      map[string][3]float64 // member -> E, A, alpha
}

type memberGauges struct {
	member   string
	channels []int
	zero     string
}

// StructureName is the name of the structure the map belongs to.
func (m *Map) StructureName() string { return m.structure }

// File is the path the map was read from.
func (m *Map) File() string { return m.file }

// Channels returns the channels in file order (a copy).
func (m *Map) Channels() []Channel {
	out := make([]Channel, len(m.channels))
	copy(out, m.channels)
	for i := range out {
		out[i].ThermalOutput = append([]float64(nil), out[i].ThermalOutput...)
		out[i].Groups = append([]string(nil), out[i].Groups...)
		if f := out[i].Fatigue; f != nil {
			fc := *f
			out[i].Fatigue = &fc
		}
	}
	return out
}

// Channel returns the channel with the given id.
func (m *Map) Channel(id string) (Channel, bool) {
	i, ok := m.index[id]
	if !ok {
		return Channel{}, false
	}
	return m.channels[i], true
}

// PermanentLoads returns the loads always present (pattern -> factor).
func (m *Map) PermanentLoads() map[string]float64 { return copyMap(m.permanent) }

// ZeroStates returns the declared zero states by id.
func (m *Map) ZeroStates() map[string]ZeroState {
	out := make(map[string]ZeroState, len(m.zeroStates))
	for k, z := range m.zeroStates {
		z.Loads = copyMap(z.Loads)
		z.Temperatures = copyMap(z.Temperatures)
		out[k] = z
	}
	return out
}

// GaugedMembers returns the ids of the members carrying gauges, in the order
// of their first gauge in the file.
func (m *Map) GaugedMembers() []string {
	out := make([]string, len(m.members))
	for i, g := range m.members {
		out[i] = g.member
	}
	return out
}

func copyMap(in map[string]float64) map[string]float64 {
	out := make(map[string]float64, len(in))
	for k, v := range in {
		out[k] = v
	}
	return out
}

// Reasons returned by (*ReadingError).Reason.
const (
	ReasonUnknownChannel = "unknown_channel"
	ReasonUnitMismatch   = "unit_mismatch"
	ReasonOutOfRange     = "out_of_range"
	ReasonNotFinite      = "not_finite"
)

// ReadingError is why a reading was refused by Validate or Convert.
type ReadingError struct {
	reason  string
	Channel string
	Msg     string
}

// Error formats the error with the channel.
func (e *ReadingError) Error() string {
	return fmt.Sprintf("channel %q: %s", e.Channel, e.Msg)
}

// Reason returns one of "unknown_channel", "unit_mismatch", "out_of_range",
// "not_finite".
func (e *ReadingError) Reason() string { return e.reason }
