package simulate

import (
	"fmt"
	"math"
)

// loggerDecimals is the number of decimals a site logger reports for a raw
// reading in each SenML unit: its resolution is 10^-decimals of the unit.
// Common practice (no single source; typical of the data sheets of strain,
// vibrating-wire and load loggers):
//
//   - "/" (strain reported directly, or a bridge ratio Vo/Vs): 1e-7, that is
//     0.1 microstrain, or 0.1 uV/V (0.0001 mV/V) for a bridge, which is
//     about 0.2 microstrain on a quarter bridge with gauge factor 2;
//   - "V" (bridge output at a few volts of excitation): 1 uV;
//   - "Hz" (vibrating-wire gauge): 0.001 Hz;
//   - "N" (weigh pad): 0.1 N;
//   - "Cel" (thermometer): 0.01 degC;
//   - "m" (snow depth): 1 mm;
//   - "count": whole numbers.
//
// Each is finer than the gauge noise of the example sensor maps (3
// microstrain, 20 N, 0.2 degC), as a logger is set up to be, so the
// quantised readings keep the noise's statistics.
var loggerDecimals = map[string]int{
	"/":     7,
	"V":     6,
	"Hz":    3,
	"N":     1,
	"Cel":   2,
	"m":     3,
	"count": 0,
}

// LoggerResolution returns the number of decimals a site logger reports for
// a reading in the SenML unit (see Options.Quantise), or ok false for a unit
// with no stated resolution.
func LoggerResolution(unit string) (decimals int, ok bool) {
	d, ok := loggerDecimals[unit]
	return d, ok
}

// Quantise rounds v to the nearest multiple of 10^-decimals and returns the
// float64 a correctly rounding parser gives for that decimal (n / 10^d with
// n and 10^d exact in float64, so the division rounds to the same nearest
// float64 as parsing the digits): what a logger printing that many
// decimals sends. A value that rounds to zero is +0: a logger prints
// "0.000", not a negative zero.
func Quantise(v float64, decimals int) float64 {
	p := math.Pow10(decimals)
	q := math.Round(v*p) / p
	if q == 0 {
		return 0
	}
	return q
}

// resolutionOf returns the decimals of a channel's unit for Options.Quantise.
func resolutionOf(channel, unit string) (int, error) {
	d, ok := LoggerResolution(unit)
	if !ok {
		return 0, fmt.Errorf("simulate: channel %s: unit %q has no logger resolution to quantise to; known units: /, V, Hz, N, Cel, m, count (or turn Quantise off)", channel, unit)
	}
	return d, nil
}
