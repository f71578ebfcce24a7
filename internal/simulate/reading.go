package simulate

import "time"

// Defect is what is wrong with a bad message the simulated logger sends.
type Defect int

// The defects. DefectNone marks a good reading.
const (
	DefectNone Defect = iota
	// DefectMalformed: the message carrying the reading is cut short, so it
	// is not valid JSON. The channel's good reading is lost for the step.
	DefectMalformed
	// DefectNaN: the logger sends NaN as the value. The channel's good
	// reading is lost for the step.
	DefectNaN
	// DefectUnknownChannel: an extra reading for a channel the sensor map
	// does not know.
	DefectUnknownChannel
	// DefectWrongUnit: the channel's reading carries another channel kind's
	// unit. The channel's good reading is lost for the step.
	DefectWrongUnit
)

// String names the defect.
func (d Defect) String() string {
	switch d {
	case DefectNone:
		return "none"
	case DefectMalformed:
		return "malformed"
	case DefectNaN:
		return "nan"
	case DefectUnknownChannel:
		return "unknown-channel"
	case DefectWrongUnit:
		return "wrong-unit"
	}
	return "defect?"
}

// LoggerValue is one raw value as the logger sends it (the time is the
// Step's).
type LoggerValue struct {
	// Channel is the channel id from the sensor map (or an unknown id for
	// DefectUnknownChannel).
	Channel string
	// Value is the raw reading in Unit (mV/V, Hz, strain, degC, ...).
	Value float64
	// Unit is the unit symbol the logger sends with the value.
	Unit string
	// Defect is DefectNone for a good reading.
	Defect Defect
}

// Step is everything the logger sends at one time stamp, with the truth
// behind it.
type Step struct {
	// Time is the logger's time stamp of the readings.
	Time time.Time
	// Readings are the good readings, in the order of the sensor map's
	// channels; a channel whose reading went bad this step is missing here.
	Readings []LoggerValue
	// Bad are the bad messages of this step, one reading each; a publisher
	// sends each in a message of its own so that it spoils nothing else.
	Bad []LoggerValue
	// Truth is the state of the simulated structure at Time.
	Truth Truth
}

// Truth is the simulated state behind a step, for tests and reports.
type Truth struct {
	// Forces are the true axial forces of all members (structure order),
	// in N, tension positive, including the dead load.
	Forces []float64
	// Factors are the true load pattern factors (structure order of
	// Generator.Structure), including the permanent loads (dead load 1) and
	// any settlement fault's factor. Temperatures act through the member
	// groups the temperature channels feed (see Temperatures), so patterns
	// that carry only temperature changes stay 0 here.
	Factors []float64
	// Temperatures are the true member-group temperatures in degC, for
	// the groups fed by temperature channels; a group's thermal load is its
	// temperature minus its zero-state temperature.
	Temperatures map[string]float64
	// Engineering holds the noise-free engineering value of every channel
	// (sensor map order, same as Generator.Channels): strain for gauges
	// (relative to the zero reading, including any drift fault), degC for
	// temperatures, the pattern factor for load channels.
	Engineering []float64
	// Pedestrians are the people on the deck.
	Pedestrians []Pedestrian
	// Faults are the faults active at Time.
	Faults []Fault
}
