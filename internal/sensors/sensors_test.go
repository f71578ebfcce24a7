package sensors

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/yamlfile"
)

// testStructure is a small in-code structure: a few members of steel with
// E = 210 GPa and alpha = 12e-6 /K (EN 1993-1-1 clause 3.2.6).
type testStructure struct {
	members  map[string][3]float64
	patterns []string
	groups   []string
}

func (s testStructure) HasMember(id string) bool    { _, ok := s.members[id]; return ok }
func (s testStructure) HasPattern(name string) bool { return slices.Contains(s.patterns, name) }
func (s testStructure) HasGroup(name string) bool   { return slices.Contains(s.groups, name) }
func (s testStructure) MemberProperties(id string) (e, a, alpha float64, ok bool) {
	p, ok := s.members[id]
	return p[0], p[1], p[2], ok
}

func smallStructure() testStructure {
	return testStructure{
		members: map[string][3]float64{
			"B1": {210e9, 7.4e-3, 12e-6},
			"T1": {210e9, 7.4e-3, 12e-6},
			"D1": {210e9, 2.8e-3, 12e-6},
			"V1": {210e9, 2.8e-3, 12e-6},
		},
		patterns: []string{"dead", "panel_1", "snow", "crowd"},
		groups:   []string{"top", "bottom", "web"},
	}
}

const smallMap = `structure: test-truss
permanent_loads: {dead: 1.0}
zero_states:
  - id: z
    loads: {dead: 1.0}
    temperatures: {top: 15, bottom: 15, web: 15}
channels:
  - {id: B1_a, kind: quarter_bridge, member: B1, unit: "/", gauge_factor: 2, zero: 0, zero_state: z,
     noise_microstrain: 3, temperature_channel: t_bot, thermal_output_microstrain: [0, 2]}
  - {id: B1_b, kind: quarter_bridge, member: B1, unit: V, excitation: 5, gauge_factor: 2, zero: 1.0e-4, zero_state: z,
     noise_microstrain: 3}
  - {id: T1_a, kind: vibrating_wire, member: T1, unit: Hz, gauge_constant_microstrain: 3.52e-3,
     wire_alpha: 12.2e-6, zero: 800, zero_state: z, noise_microstrain: 2, temperature_channel: t_top}
  - {id: T1_b, kind: vibrating_wire, member: T1, unit: Hz, gauge_constant_microstrain: 3.52e-3,
     zero: 810, zero_state: z, noise_microstrain: 2}
  - {id: D1_a, kind: half_bridge_poisson, member: D1, unit: "/", gauge_factor: 2.1, poisson: 0.3, zero: 2.0e-5,
     zero_state: z, noise_microstrain: 3}
  - {id: D1_b, kind: full_bridge_poisson, member: D1, unit: "/", gauge_factor: 2.1, poisson: 0.3, zero: -1.0e-5,
     zero_state: z, noise_microstrain: 3}
  - {id: V1_a, kind: strain, member: V1, unit: "/", zero: 5.0e-6, zero_state: z, noise_microstrain: 4}
  - {id: pad, kind: load, pattern: panel_1, unit: N, pattern_unit: 1 kN, zero: 12, noise: 20}
  - {id: snow_depth, kind: load, pattern: snow, unit: m, mass_per_unit: 150 kg/m3, pattern_unit: 1 kPa, noise: 0.01}
  - {id: people, kind: load, pattern: crowd, unit: count, mass_per_unit: 75 kg, pattern_unit: 1 kN, noise: 0.5}
  - {id: t_top, kind: temperature, unit: Cel, groups: [top], noise: 0.2}
  - {id: t_bot, kind: temperature, unit: K, groups: [bottom, web], noise: 0.2}
`

func parseSmall(t *testing.T) *Map {
	t.Helper()
	m, err := Parse("small.yaml", []byte(smallMap), smallStructure())
	if err != nil {
		t.Fatalf("Parse: %v", err)
	}
	return m
}

func TestConvertHandValues(t *testing.T) {
	m := parseSmall(t)
	tests := []struct {
		channel string
		raw     float64
		want    float64
		tol     float64
		source  string
	}{
		// Dally and Riley, Experimental Stress Analysis, quarter bridge at
		// GF 2 (from memory): 0.499500 mV/V is +1000 microstrain.
		{"B1_a", 0.4995e-3, 1000e-6, 5e-9, "Dally and Riley, from memory"},
		// Volts at 5 V excitation: 5 V x 0.4995 mV/V is 1000 microstrain
		// from a balanced bridge, less the strain of the 0.1 mV zero.
		{"B1_b", 5 * 0.4995e-3, 1000e-6 - QuarterZero(2, 1e-4/5), 5e-9, "same, read in volts"},
		// G (f^2 - f0^2) = 3.52e-9 (820^2 - 800^2) = 114.048 microstrain.
		{"T1_a", 820, 114.048e-6, 1e-12, "gauge equation"},
		{"V1_a", 105e-6, 100e-6, 1e-15, "zero subtracted"},
		// 1512 N - 12 N tare = 1.5 kN on a 1 kN pattern.
		{"pad", 1512, 1.5, 1e-12, "pattern unit 1 kN"},
		// 0.5 m x 150 kg/m3 x 9.80665 m/s2 / 1 kPa (density from memory).
		{"snow_depth", 0.5, 0.5 * 150 * 9.80665 / 1000, 1e-12, "snow load"},
		// 40 persons x 75 kg x 9.80665 / 1 kN.
		{"people", 40, 40 * 75 * 9.80665 / 1000, 1e-12, "pedestrian count"},
		{"t_bot", 288.15, 15, 1e-12, "kelvin to degC"},
		{"t_top", 21.5, 21.5, 0, "degC"},
	}
	for _, tc := range tests {
		got, err := m.Convert(tc.channel, tc.raw)
		if err != nil {
			t.Errorf("%s: %v", tc.channel, err)
			continue
		}
		if math.Abs(got-tc.want) > tc.tol {
			t.Errorf("%s (%s): Convert(%g) = %.10g, want %.10g", tc.channel, tc.source, tc.raw, got, tc.want)
		}
	}
}

// QuarterZero is the strain of a quarter bridge at output ratio r, for the
// expected value above (the zero reading's strain is subtracted).
func QuarterZero(gf, r float64) float64 { return 4 * r / (gf * (1 - 2*r)) }

func TestRawRoundTrip(t *testing.T) {
	m := parseSmall(t)
	for _, ch := range m.Channels() {
		for _, v := range []float64{-800e-6, -3e-6, 0, 2e-6, 650e-6} {
			eng := v
			switch ch.Kind {
			case KindLoad:
				eng = v * 1e4
			case KindTemperature:
				eng = v * 1e5
			}
			for _, temp := range [][]float64{nil, {31}} {
				raw, err := m.Raw(ch.ID, eng, temp...)
				if err != nil {
					t.Fatalf("%s: Raw(%g): %v", ch.ID, eng, err)
				}
				back, err := m.Convert(ch.ID, raw)
				if err != nil {
					t.Fatalf("%s: Convert(%g): %v", ch.ID, raw, err)
				}
				if len(temp) == 1 && ch.TemperatureChannel != "" {
					c := ch
					back = compensate(&c, back, temp[0])
				}
				if math.Abs(back-eng) > 1e-12*math.Max(1, math.Abs(eng)) {
					t.Errorf("%s: %g -> raw %g -> %g (temperature %v)", ch.ID, eng, raw, back, temp)
				}
			}
		}
	}
}

func TestEvaluate(t *testing.T) {
	m := parseSmall(t)
	// Member strains to recover: axial plus bending of opposite sign on the
	// two faces (faces a and b), at 27 degC top and 300.15 K bottom.
	axial := map[string]float64{"B1": 120e-6, "T1": -85e-6, "D1": 40e-6, "V1": -15e-6}
	bending := 30e-6
	temps := map[string]float64{"t_top": 27, "t_bot": 27}
	values := map[string]float64{"t_top": 27, "t_bot": 27}
	for _, ch := range m.Channels() {
		if !ch.Kind.IsGauge() {
			continue
		}
		e := axial[ch.Member]
		if ch.Member != "V1" && ch.Kind != KindFullBridgePoisson && ch.Kind != KindHalfBridgePoisson {
			if strings.HasSuffix(ch.ID, "_a") {
				e += bending
			} else {
				e -= bending
			}
		}
		var raw float64
		var err error
		if ch.TemperatureChannel != "" {
			raw, err = m.Raw(ch.ID, e, temps[ch.TemperatureChannel])
		} else {
			raw, err = m.Raw(ch.ID, e)
		}
		if err != nil {
			t.Fatal(err)
		}
		if values[ch.ID], err = m.Convert(ch.ID, raw); err != nil {
			t.Fatal(err)
		}
	}
	values["pad"] = 0.75
	values["snow_depth"] = 0.2
	// "people" missing: crowd is reported missing.
	s := m.Evaluate(values)
	if len(s.Members) != 4 {
		t.Fatalf("%d members", len(s.Members))
	}
	st := smallStructure()
	for _, mm := range s.Members {
		e, a, _, _ := st.MemberProperties(mm.Member)
		want := e * a * axial[mm.Member] // N = E A e
		if math.Abs(mm.ForceN-want) > 1e-6*math.Abs(want)+1e-6 {
			t.Errorf("%s: N = %.3f N, want %.3f", mm.Member, mm.ForceN, want)
		}
		if mm.Gauges != mm.Expected || len(mm.Missing) != 0 {
			t.Errorf("%s: %d of %d gauges, missing %v", mm.Member, mm.Gauges, mm.Expected, mm.Missing)
		}
		if mm.ZeroLoads["dead"] != 1 || mm.ZeroTemperatures["top"] != 15 {
			t.Errorf("%s: zero state %v %v", mm.Member, mm.ZeroLoads, mm.ZeroTemperatures)
		}
	}
	// sigma_N = E A sqrt(3^2 + 3^2) / 2 microstrain for B1.
	if b := s.Members[0]; math.Abs(b.SigmaN-210e9*7.4e-3*math.Sqrt(18)/2*1e-6) > 1e-6 {
		t.Errorf("B1 sigma %g", b.SigmaN)
	}
	if s.Loads["dead"] != 1 || s.Loads["panel_1"] != 0.75 || s.Loads["snow"] != 0.2 {
		t.Errorf("loads %v", s.Loads)
	}
	if _, ok := s.Loads["crowd"]; ok || len(s.MissingLoads) != 1 || s.MissingLoads[0] != "crowd" {
		t.Errorf("missing loads %v, loads %v", s.MissingLoads, s.Loads)
	}
	if s.Temperatures["top"] != 27 || s.Temperatures["web"] != 27 || len(s.MissingTemperatures) != 0 {
		t.Errorf("temperatures %v missing %v", s.Temperatures, s.MissingTemperatures)
	}

	// Without the bottom thermometer, B1_a cannot be compensated and B1
	// falls back to one gauge; web and bottom temperatures are missing.
	delete(values, "t_bot")
	delete(values, "V1_a")
	s = m.Evaluate(values)
	b := s.Members[0]
	if b.Gauges != 1 || len(b.Missing) != 1 || b.Missing[0] != "B1_a" {
		t.Errorf("B1 without thermometer: %+v", b)
	}
	if v := s.Members[3]; v.Gauges != 0 || v.ForceN != 0 || v.Missing[0] != "V1_a" {
		t.Errorf("V1 without gauge: %+v", v)
	}
	if strings.Join(s.MissingTemperatures, ",") != "bottom,web" {
		t.Errorf("missing temperatures %v", s.MissingTemperatures)
	}
}

func TestValidate(t *testing.T) {
	m := parseSmall(t)
	tests := []struct {
		channel, unit string
		value         float64
		reason        string
	}{
		{"B1_a", "/", 1e-3, ""},
		{"B1_a", "", 1e-3, ""},
		{"T1_a", "Hz", 812.5, ""},
		{"nope", "/", 1, ReasonUnknownChannel},
		{"B1_a", "V", 1e-3, ReasonUnitMismatch},
		{"T1_a", "Cel", 800, ReasonUnitMismatch},
		{"B1_a", "/", 0.3, ReasonOutOfRange},
		{"T1_a", "Hz", -5, ReasonOutOfRange},
		{"t_top", "Cel", 400, ReasonOutOfRange},
		{"V1_a", "/", math.NaN(), ReasonNotFinite},
		{"pad", "N", math.Inf(1), ReasonNotFinite},
	}
	for _, tc := range tests {
		err := m.Validate(tc.channel, tc.unit, tc.value)
		if tc.reason == "" {
			if err != nil {
				t.Errorf("%s %q %g: %v", tc.channel, tc.unit, tc.value, err)
			}
			continue
		}
		var re interface{ Reason() string }
		if !errors.As(err, &re) || re.Reason() != tc.reason {
			t.Errorf("%s %q %g: got %v, want reason %s", tc.channel, tc.unit, tc.value, err, tc.reason)
		}
	}
}

func TestParseErrors(t *testing.T) {
	head := "structure: x\nzero_states:\n  - {id: z, temperatures: {top: 15}}\nchannels:\n"
	tests := []struct {
		name, body string
		want       []string // substrings of the error
	}{
		{"unknown field", "  - {id: V1_a, kind: strain, member: V1, unit: \"/\", zero: 0, zero_state: z, noise_microstrain: 2, gain: 3}\n",
			[]string{"small.yaml:5:", "channels[V1_a].gain: ", "unknown field"}},
		{"field of another kind", "  - {id: V1_a, kind: strain, member: V1, unit: \"/\", zero: 0, zero_state: z, noise_microstrain: 2, gauge_factor: 2}\n",
			[]string{"channels[V1_a].gauge_factor: ", "unknown field"}},
		{"bad id", "  - {id: \"V1/a\", kind: strain, member: V1, unit: \"/\", zero: 0, zero_state: z, noise_microstrain: 2}\n",
			[]string{"].id: ", "A-Z a-z 0-9"}},
		{"unknown member", "  - {id: X_a, kind: strain, member: X9, unit: \"/\", zero: 0, zero_state: z, noise_microstrain: 2}\n",
			[]string{"].member: ", `"X9" is not in the structure`}},
		{"wrong unit", "  - {id: V1_a, kind: strain, member: V1, unit: Hz, zero: 0, zero_state: z, noise_microstrain: 2}\n",
			[]string{"].unit: ", `"Hz" is not accepted`}},
		{"missing zero", "  - {id: V1_a, kind: strain, member: V1, unit: \"/\", zero_state: z, noise_microstrain: 2}\n",
			[]string{"].zero: ", "missing"}},
		{"number as text", "  - {id: V1_a, kind: strain, member: V1, unit: \"/\", zero: abc, zero_state: z, noise_microstrain: 2}\n",
			[]string{"].zero: ", "expected a plain number"}},
		{"undeclared zero state", "  - {id: V1_a, kind: strain, member: V1, unit: \"/\", zero: 0, zero_state: q, noise_microstrain: 2}\n",
			[]string{"].zero_state: ", `"q" is not declared`}},
		{"two zero states on one member", "  - {id: V1_a, kind: strain, member: V1, unit: \"/\", zero: 0, zero_state: z, noise_microstrain: 2}\n" +
			"  - {id: V1_b, kind: strain, member: V1, unit: \"/\", zero: 0, zero_state: z2, noise_microstrain: 2}\n",
			[]string{"channels[V1_b].zero_state: ", "share one zero state"}},
		{"thermal output without thermometer", "  - {id: V1_a, kind: strain, member: V1, unit: \"/\", zero: 0, zero_state: z, noise_microstrain: 2, thermal_output_microstrain: [0, 1]}\n",
			[]string{"].temperature_channel: ", "missing"}},
		{"thermometer without thermal output", "  - {id: V1_a, kind: strain, member: V1, unit: \"/\", zero: 0, zero_state: z, noise_microstrain: 2, temperature_channel: t}\n" +
			"  - {id: t, kind: temperature, unit: Cel, groups: [top], noise: 0.1}\n",
			[]string{"].temperature_channel: ", "no effect"}},
		{"wire alpha without thermometer", "  - {id: T1_a, kind: vibrating_wire, member: T1, unit: Hz, gauge_constant_microstrain: 3.5e-3, wire_alpha: 12e-6, zero: 800, zero_state: z, noise_microstrain: 2}\n",
			[]string{"].wire_alpha: ", "no effect"}},
		{"volts without excitation", "  - {id: B1_a, kind: quarter_bridge, member: B1, unit: V, gauge_factor: 2, zero: 0, zero_state: z, noise_microstrain: 2}\n",
			[]string{"].excitation: ", "missing"}},
		{"unknown pattern", "  - {id: p, kind: load, pattern: wind, unit: N, factor: 0.001, noise: 1}\n",
			[]string{"].pattern: ", `"wind" is not in the structure`}},
		{"density with wrong unit", "  - {id: s, kind: load, pattern: snow, unit: m, mass_per_unit: 150 kg, pattern_unit: 1 kPa, noise: 1}\n",
			[]string{"].mass_per_unit: ", "mass"}},
		{"thermometer group", "  - {id: t, kind: temperature, unit: Cel, groups: [roofs], noise: 0.1}\n",
			[]string{"].groups: ", `"roofs" is not in the structure`}},
		{"duplicate id", "  - {id: t, kind: temperature, unit: Cel, groups: [top], noise: 0.1}\n  - {id: t, kind: temperature, unit: Cel, groups: [top], noise: 0.1}\n",
			[]string{"small.yaml:6:", "used twice"}},
		{"unknown kind", "  - {id: t, kind: laser, unit: m}\n", []string{"].kind: ", `unknown kind "laser"`}},
		{"sample rate in a length unit", "  - {id: t, kind: temperature, unit: Cel, groups: [top], noise: 0.1, sample_rate: 5 m}\n",
			[]string{"].sample_rate: ", "frequency"}},
		{"sample rate zero", "  - {id: t, kind: temperature, unit: Cel, groups: [top], noise: 0.1, sample_rate: 0 Hz}\n",
			[]string{"].sample_rate: ", "must be positive"}},
		{"sample rate implausible", "  - {id: t, kind: temperature, unit: Cel, groups: [top], noise: 0.1, sample_rate: 50 kHz}\n",
			[]string{"].sample_rate: ", "above 10000 Hz"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			body := head
			if strings.Contains(tc.body, "z2") {
				body = strings.Replace(head, "zero_states:\n", "zero_states:\n  - {id: z2}\n", 1)
			}
			_, err := Parse("small.yaml", []byte(body+tc.body), smallStructure())
			if err == nil {
				t.Fatal("accepted")
			}
			for _, w := range tc.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q lacks %q", err, w)
				}
			}
			var fe *yamlfile.Error
			if !errors.As(err, &fe) {
				t.Errorf("no *yamlfile.Error in %v", err)
			}
		})
	}
}

func TestParseTopLevel(t *testing.T) {
	for _, bad := range []string{"", "[1, 2]", "structure: x\n", "structure: x\nchannels: 3\n", "structure: x\nchannel: []\n", ":\n  - ["} {
		if _, err := Parse("f.yaml", []byte(bad), smallStructure()); err == nil {
			t.Errorf("accepted %q", bad)
		}
	}
}

func TestValidID(t *testing.T) {
	for id, want := range map[string]bool{"B2_a": true, "pad_1": true, "0x": true, "a-b:c.d": true,
		"": false, "_a": false, "-a": false, "a/b": false, "a b": false, "a+": false, "é": false} {
		if ValidID(id) != want {
			t.Errorf("ValidID(%q) = %v", id, !want)
		}
	}
}

func FuzzParse(f *testing.F) {
	f.Add([]byte(smallMap))
	f.Add([]byte("structure: x\nchannels:\n  - {id: a, kind: strain}\n"))
	st := smallStructure()
	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := Parse("f.yaml", data, st)
		if err != nil {
			return
		}
		for _, ch := range m.Channels() {
			if !ValidID(ch.ID) {
				t.Fatalf("invalid id %q accepted", ch.ID)
			}
			m.Evaluate(map[string]float64{ch.ID: 1e-4})
		}
	})
}

func TestStructureNameOf(t *testing.T) {
	if got := StructureNameOf([]byte(smallMap)); got != "test-truss" {
		t.Errorf("got %q", got)
	}
	if got := StructureNameOf([]byte("[")); got != "" {
		t.Errorf("got %q from broken YAML", got)
	}
}

func ExampleMap_Evaluate() {
	st := smallStructure()
	m, err := Parse("example.yaml", []byte(`structure: demo
permanent_loads: {dead: 1.0}
zero_states:
  - {id: z, loads: {dead: 1.0}}
channels:
  - {id: B1_a, kind: strain, member: B1, position: top face, unit: "/", zero: 0, zero_state: z, noise_microstrain: 3}
  - {id: B1_b, kind: strain, member: B1, position: bottom face, unit: "/", zero: 0, zero_state: z, noise_microstrain: 3}
`), st)
	if err != nil {
		fmt.Println(err)
		return
	}
	// 130 and 70 microstrain on opposite faces: 100 axial, 30 bending.
	a, _ := m.Convert("B1_a", 130e-6)
	b, _ := m.Convert("B1_b", 70e-6)
	s := m.Evaluate(map[string]float64{"B1_a": a, "B1_b": b})
	mm := s.Members[0]
	fmt.Printf("%s: N = %.1f kN +- %.2f kN from %d of %d gauges\n", mm.Member, mm.ForceN/1e3, mm.SigmaN/1e3, mm.Gauges, mm.Expected)
	// Output: B1: N = 155.4 kN +- 3.30 kN from 2 of 2 gauges
}

// BenchmarkEvaluate converts and evaluates one epoch of the small map.
func BenchmarkEvaluate(b *testing.B) {
	m, err := Parse("small.yaml", []byte(smallMap), smallStructure())
	if err != nil {
		b.Fatal(err)
	}
	values := map[string]float64{}
	for _, ch := range m.Channels() {
		raw, err := m.Raw(ch.ID, 1e-5)
		if err != nil {
			b.Fatal(err)
		}
		values[ch.ID], _ = m.Convert(ch.ID, raw)
	}
	for b.Loop() {
		m.Evaluate(values)
	}
}

// TestConcurrentUse runs Convert, Validate and Evaluate from several
// goroutines; run with -race.
func TestConcurrentUse(t *testing.T) {
	m := parseSmall(t)
	done := make(chan struct{})
	for g := 0; g < 4; g++ {
		go func() {
			defer func() { done <- struct{}{} }()
			for i := 0; i < 200; i++ {
				v, _ := m.Convert("V1_a", float64(i)*1e-6)
				_ = m.Validate("V1_a", "/", v)
				m.Evaluate(map[string]float64{"V1_a": v, "t_top": 20})
			}
		}()
	}
	for g := 0; g < 4; g++ {
		<-done
	}
}

// TestSampleRate: the declared sampling rate with its unit and the number
// of readings it gives per epoch (rate x window, rounded up, at least 1).
func TestSampleRate(t *testing.T) {
	head := "structure: x\nchannels:\n"
	for _, tc := range []struct {
		field  string
		hz     float64
		window time.Duration
		want   int
	}{
		{"", 0, time.Second, 1},
		{", sample_rate: 50 Hz", 50, time.Second, 50},
		{", sample_rate: 50", 50, time.Second, 50}, // a bare number is in Hz
		{", sample_rate: 10 Hz", 10, time.Second, 10},
		{", sample_rate: 1 Hz", 1, time.Second, 1},
		{", sample_rate: 0.2 kHz", 200, 500 * time.Millisecond, 100},
		{", sample_rate: 3 Hz", 3, 500 * time.Millisecond, 2},
		{", sample_rate: 6 1/min", 0.1, time.Second, 1},
	} {
		body := "  - {id: t, kind: temperature, unit: Cel, groups: [top], noise: 0.1" + tc.field + "}\n"
		m, err := Parse("rate.yaml", []byte(head+body), smallStructure())
		if err != nil {
			t.Fatalf("%q: %v", tc.field, err)
		}
		ch, _ := m.Channel("t")
		if math.Abs(ch.SampleRate-tc.hz) > 1e-12*tc.hz {
			t.Errorf("%q: rate %v Hz, want %v", tc.field, ch.SampleRate, tc.hz)
		}
		if got := ch.SamplesPer(tc.window); got != tc.want {
			t.Errorf("%q: %d readings per %v, want %d", tc.field, got, tc.window, tc.want)
		}
	}
}

// TestParseYAMLSyntaxLine: a YAML syntax error is reported at the 1-based
// line of the enclosing list, as for structure files (yamlfile.Decode);
// the sensor map's own decoding had reported the YAML parser's 0-based line
// (2 for both cases here), one line above the list.
func TestParseYAMLSyntaxLine(t *testing.T) {
	for _, c := range []struct{ name, doc, want string }{
		{"indentation", "structure: x\nchannels:\n  - id: a\n    kind: strain\n   unit: /\n", "m.yaml:3: YAML syntax: did not find expected '-' indicator"},
		{"unclosed flow mapping", "structure: x\nchannels:\n  - {id: a, kind: strain\n  - b\n", "m.yaml:3: YAML syntax: did not find expected ',' or '}'"},
		{"second document", "structure: x\nchannels: []\n---\nstructure: y\n", "m.yaml:3: YAML syntax: a second YAML document (---) follows; a sensor map holds one"},
		{"empty", "", "m.yaml: file is empty; a sensor map needs structure and channels"},
	} {
		_, err := Parse("m.yaml", []byte(c.doc), smallStructure())
		var fe *yamlfile.Error
		if err == nil || !strings.HasPrefix(err.Error(), c.want) || !errors.As(err, &fe) {
			t.Errorf("%s: error %v, want it to start with %q", c.name, err, c.want)
		}
	}
}
