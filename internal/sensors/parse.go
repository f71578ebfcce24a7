package sensors

import (
	"fmt"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/units"
	"trussmonitor/internal/yamlfile"
)

// standardGravity is g in m/s^2 (conventional value, 3rd CGPM 1901).
const standardGravity = 9.80665

// maxErrors bounds how many problems one Parse reports.
const maxErrors = 25

// LoadFile reads and validates the sensor map at path against st.
func LoadFile(path string, st Structure) (*Map, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("sensor map: %w", err)
	}
	return Parse(path, data, st)
}

// Parse reads and validates a sensor map. file names the source in errors.
// All problems found (up to 25) are returned as a yamlfile.ErrorList; each
// names file, line and field (channels[id].field for a channel's).
func Parse(file string, data []byte, st Structure) (*Map, error) {
	root, err := yamlfile.Decode(file, data, "sensor map", "a sensor map needs structure and channels")
	if err != nil {
		return nil, err
	}
	p := &parser{Reader: yamlfile.Reader{File: file, Max: maxErrors}, st: st}
	m := p.parse(root)
	if errs := p.Errors(); len(errs) > 0 {
		return nil, errs
	}
	return m, nil
}

// StructureNameOf returns the top-level "structure" field of sensor-map data
// without validating anything else, or "" when there is none. Callers use it
// to tell a mismatched pair of files apart before the full validation
// reports every reference the wrong structure lacks.
func StructureNameOf(data []byte) string {
	var top struct {
		Structure string `yaml:"structure"`
	}
	if err := yaml.Unmarshal(data, &top); err != nil {
		return ""
	}
	return top.Structure
}

type parser struct {
	yamlfile.Reader
	st Structure
}

// fieldPath is the path of field in a channel's block (channels[id].field),
// or field itself outside the channels.
func fieldPath(channel, field string) string {
	if channel == "" {
		return field
	}
	return yamlfile.Join("channels["+channel+"]", field)
}

// fail records a problem at line for field of channel ("" outside the
// channels).
func (p *parser) fail(line int, channel, field, format string, args ...any) {
	p.ErrorAt(line, fieldPath(channel, field), format, args...)
}

// fields returns the value nodes of mapping n (field of channel), reporting
// unknown and duplicate keys.
func (p *parser) fields(n *yaml.Node, channel, field string, allowed []string) (map[string]*yaml.Node, bool) {
	return p.Fields(n, fieldPath(channel, field), allowed...)
}

func (p *parser) str(n *yaml.Node, channel, field string) (string, bool) {
	return p.Str(n, fieldPath(channel, field))
}

func (p *parser) num(n *yaml.Node, channel, field string) (float64, bool) {
	return p.Number(n, fieldPath(channel, field))
}

func (p *parser) positive(n *yaml.Node, channel, field string) (float64, bool) {
	v, ok := p.num(n, channel, field)
	if ok && v <= 0 {
		p.fail(n.Line, channel, field, "must be positive, got %v", v)
		return 0, false
	}
	return v, ok
}

func (p *parser) quantity(n *yaml.Node, channel, field string, dims ...units.Dimension) (float64, units.Dimension, bool) {
	if n.Kind != yaml.ScalarNode || n.Tag == "!!null" {
		p.fail(n.Line, channel, field, "expected a number with a unit, got %s", yamlfile.KindName(n))
		return 0, 0, false
	}
	var firstErr error
	for _, d := range dims {
		v, err := units.Parse(n.Value, d, d.SI())
		if err == nil {
			if v <= 0 {
				p.fail(n.Line, channel, field, "must be positive, got %q", n.Value)
				return 0, 0, false
			}
			return v, d, true
		}
		if firstErr == nil {
			firstErr = err
		}
	}
	p.fail(n.Line, channel, field, "%v", firstErr)
	return 0, 0, false
}

func (p *parser) numList(n *yaml.Node, channel, field string) ([]float64, bool) {
	return readList(p, n, channel, field, "a list of numbers", p.num)
}

func (p *parser) strList(n *yaml.Node, channel, field string) ([]string, bool) {
	return readList(p, n, channel, field, "a list", p.str)
}

// readList reads the list n with read for every item; what says what was
// expected when n is no list.
func readList[T any](p *parser, n *yaml.Node, channel, field, what string, read func(*yaml.Node, string, string) (T, bool)) ([]T, bool) {
	if n.Kind != yaml.SequenceNode {
		p.fail(n.Line, channel, field, "expected %s, got %s", what, yamlfile.KindName(n))
		return nil, false
	}
	out := make([]T, 0, len(n.Content))
	ok := true
	for _, c := range n.Content {
		v, good := read(c, channel, field)
		ok = ok && good
		out = append(out, v)
	}
	return out, ok
}

// numMap reads a mapping of names to numbers, checking each name with valid.
func (p *parser) numMap(n *yaml.Node, channel, field string, valid func(string) bool, what string) (map[string]float64, bool) {
	if n.Kind != yaml.MappingNode {
		p.fail(n.Line, channel, field, "expected a mapping of %s names to numbers, got %s", what, yamlfile.KindName(n))
		return nil, false
	}
	out := map[string]float64{}
	ok := true
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		if !valid(k.Value) {
			p.fail(k.Line, channel, field, "%s %q is not in the structure file", what, k.Value)
			ok = false
			continue
		}
		if _, dup := out[k.Value]; dup {
			p.fail(k.Line, channel, field, "%s %q given twice", what, k.Value)
			ok = false
			continue
		}
		x, good := p.num(v, channel, field+"."+k.Value)
		ok = ok && good
		out[k.Value] = x
	}
	return out, ok
}

var topFields = []string{"structure", "title", "permanent_loads", "zero_states", "channels"}

func (p *parser) parse(root *yaml.Node) *Map {
	f, ok := p.fields(root, "", "", topFields)
	if !ok {
		return nil
	}
	m := &Map{file: p.File, index: map[string]int{}, permanent: map[string]float64{},
		zeroStates: map[string]ZeroState{}, props: map[string][3]float64{}}
	if n, ok := f["structure"]; ok {
		if s, ok := p.str(n, "", "structure"); ok {
			m.structure = s
		}
	} else {
		p.fail(root.Line, "", "structure", "missing; give the name of the structure this map belongs to")
	}
	if n, ok := f["permanent_loads"]; ok {
		if pl, ok := p.numMap(n, "", "permanent_loads", p.st.HasPattern, "pattern"); ok {
			m.permanent = pl
		}
	}
	if n, ok := f["zero_states"]; ok {
		p.zeroStates(n, m)
	}
	n, ok := f["channels"]
	if !ok {
		p.fail(root.Line, "", "channels", "missing; list the logger channels")
		return m
	}
	if n.Kind != yaml.SequenceNode {
		p.fail(n.Line, "", "channels", "expected a list of channels, got %s", yamlfile.KindName(n))
		return m
	}
	lines := map[string]int{}
	for _, c := range n.Content {
		ch, ok := p.channel(c, m)
		if !ok {
			continue
		}
		if l, dup := lines[ch.ID]; dup {
			p.fail(c.Line, ch.ID, "id", "channel id used twice (first at line %d)", l)
			continue
		}
		lines[ch.ID] = c.Line
		m.index[ch.ID] = len(m.channels)
		m.channels = append(m.channels, ch)
	}
	p.crossCheck(m)
	return m
}

var zeroStateFields = []string{"id", "loads", "temperatures", "note"}

func (p *parser) zeroStates(n *yaml.Node, m *Map) {
	if n.Kind != yaml.SequenceNode {
		p.fail(n.Line, "", "zero_states", "expected a list of zero states, got %s", yamlfile.KindName(n))
		return
	}
	for _, zn := range n.Content {
		f, ok := p.fields(zn, "", "zero_states", zeroStateFields)
		if !ok {
			continue
		}
		z := ZeroState{Line: zn.Line, Loads: map[string]float64{}, Temperatures: map[string]float64{}}
		idn, ok := f["id"]
		if !ok {
			p.fail(zn.Line, "", "zero_states.id", "missing; name the zero state")
			continue
		}
		if z.ID, ok = p.str(idn, "", "zero_states.id"); !ok {
			continue
		}
		if _, dup := m.zeroStates[z.ID]; dup {
			p.fail(idn.Line, "", "zero_states.id", "zero state %q declared twice", z.ID)
			continue
		}
		if ln, ok := f["loads"]; ok {
			if l, ok := p.numMap(ln, "", "zero_states.loads", p.st.HasPattern, "pattern"); ok {
				z.Loads = l
			}
		}
		if tn, ok := f["temperatures"]; ok {
			if t, ok := p.numMap(tn, "", "zero_states.temperatures", p.st.HasGroup, "member group"); ok {
				z.Temperatures = t
			}
		}
		if nn, ok := f["note"]; ok {
			z.Note, _ = p.str(nn, "", "zero_states.note")
		}
		m.zeroStates[z.ID] = z
	}
}

// Fields allowed per kind, besides the common ones.
var (
	commonFields  = []string{"id", "kind", "unit", "note", "range", "sample_rate"}
	gaugeFields   = []string{"member", "position", "zero", "zero_state", "noise_microstrain", "temperature_channel", "zero_temperature"}
	kindFieldsMap = map[Kind][]string{
		KindStrain:            {"thermal_output_microstrain"},
		KindQuarterBridge:     {"gauge_factor", "excitation", "thermal_output_microstrain"},
		KindHalfBridgePoisson: {"gauge_factor", "poisson", "excitation", "thermal_output_microstrain"},
		KindFullBridgePoisson: {"gauge_factor", "poisson", "excitation", "thermal_output_microstrain"},
		KindVibratingWire:     {"gauge_constant_microstrain", "wire_alpha", "steel_alpha"},
		KindLoad:              {"pattern", "zero", "noise", "factor", "mass_per_unit", "pattern_unit"},
		KindTemperature:       {"groups", "noise"},
	}
)

func allowedFields(k Kind) []string {
	out := append([]string(nil), commonFields...)
	if k.IsGauge() {
		out = append(out, gaugeFields...)
		out = append(out, fatigueGaugeFields...)
	}
	return append(out, kindFieldsMap[k]...)
}

// unitsFor lists the SenML units a channel of each kind may declare.
var unitsFor = map[Kind][]string{
	KindStrain:            {"/"},
	KindQuarterBridge:     {"/", "V"},
	KindHalfBridgePoisson: {"/", "V"},
	KindFullBridgePoisson: {"/", "V"},
	KindVibratingWire:     {"Hz"},
	KindLoad:              {"N", "kg", "m", "count", "Pa", "/"},
	KindTemperature:       {"Cel", "K"},
}

// ValidID reports whether id is a valid channel id: characters A-Z a-z 0-9
// - : . _ only, starting with a letter or digit (a SenML name without "/",
// so that it is one MQTT topic level).
func ValidID(id string) bool {
	if id == "" || len(id) > 128 {
		return false
	}
	for i := 0; i < len(id); i++ {
		c := id[i]
		alnum := (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9')
		if alnum || (i > 0 && (c == '-' || c == ':' || c == '.' || c == '_')) {
			continue
		}
		return false
	}
	return true
}

func (p *parser) channel(n *yaml.Node, m *Map) (Channel, bool) {
	if n.Kind != yaml.MappingNode {
		p.fail(n.Line, "", "channels", "expected a channel mapping, got %s", yamlfile.KindName(n))
		return Channel{}, false
	}
	ch := Channel{Line: n.Line}
	// Read id and kind first so the remaining errors can name them.
	var kindNode *yaml.Node
	for i := 0; i+1 < len(n.Content); i += 2 {
		switch n.Content[i].Value {
		case "id":
			if s, ok := p.str(n.Content[i+1], "", "id"); ok {
				if !ValidID(s) {
					p.fail(n.Content[i+1].Line, s, "id", "channel id may use only A-Z a-z 0-9 - : . _ and must start with a letter or digit")
					return Channel{}, false
				}
				ch.ID = s
			}
		case "kind":
			kindNode = n.Content[i+1]
		}
	}
	if ch.ID == "" {
		p.fail(n.Line, "", "id", "missing channel id")
		return Channel{}, false
	}
	if kindNode == nil {
		p.fail(n.Line, ch.ID, "kind", "missing; one of %s", kindList())
		return Channel{}, false
	}
	k, _ := p.str(kindNode, ch.ID, "kind")
	ch.Kind = Kind(k)
	if _, ok := kindFieldsMap[ch.Kind]; !ok {
		p.fail(kindNode.Line, ch.ID, "kind", "unknown kind %q; one of %s", k, kindList())
		return Channel{}, false
	}
	errsBefore := len(p.Errors())
	f, _ := p.fields(n, ch.ID, "", allowedFields(ch.Kind))
	get := func(name string) (*yaml.Node, bool) { v, ok := f[name]; return v, ok }
	need := func(name, hint string) (*yaml.Node, bool) {
		v, ok := f[name]
		if !ok {
			p.fail(n.Line, ch.ID, name, "missing; %s", hint)
		}
		return v, ok
	}

	if un, ok := need("unit", "give the SenML unit the logger sends ("+strings.Join(quoteAll(unitsFor[ch.Kind]), ", ")+")"); ok {
		if u, ok := p.str(un, ch.ID, "unit"); ok {
			if !slices.Contains(unitsFor[ch.Kind], u) {
				p.fail(un.Line, ch.ID, "unit", "unit %q is not accepted for a %s channel; use one of %s", u, ch.Kind, strings.Join(quoteAll(unitsFor[ch.Kind]), ", "))
			}
			ch.Unit = u
		}
	}
	if nn, ok := get("note"); ok {
		ch.Note, _ = p.str(nn, ch.ID, "note")
	}
	if rn, ok := get("sample_rate"); ok {
		if v, _, ok := p.quantity(rn, ch.ID, "sample_rate", units.Frequency); ok {
			if v > MaxSampleRate {
				p.fail(rn.Line, ch.ID, "sample_rate", "%g Hz is above %g Hz, more than a data logger of static and fatigue gauges delivers; check the unit (Hz, kHz, 1/min)", v, MaxSampleRate)
			} else {
				ch.SampleRate = v
			}
		}
	}

	if ch.Kind.IsGauge() {
		p.gauge(n, &ch, get, need)
	}
	switch {
	case ch.Kind.isBridge():
		if gn, ok := need("gauge_factor", "give the gauge factor from the gauge's data sheet (about 2)"); ok {
			ch.GaugeFactor, _ = p.positive(gn, ch.ID, "gauge_factor")
		}
		if ch.Kind != KindQuarterBridge {
			if pn, ok := need("poisson", "give the Poisson ratio of the member's steel (0.3 for structural steel)"); ok {
				if v, ok := p.num(pn, ch.ID, "poisson"); ok {
					if v <= 0 || v >= 0.5 {
						p.fail(pn.Line, ch.ID, "poisson", "Poisson ratio %v is outside (0, 0.5)", v)
					}
					ch.Poisson = v
				}
			}
		}
		if en, ok := get("excitation"); ok {
			ch.Excitation, _ = p.positive(en, ch.ID, "excitation")
			if ch.Unit != "V" {
				p.fail(en.Line, ch.ID, "excitation", "only used with unit \"V\"; with unit \"/\" the logger already divides by the excitation")
			}
		} else if ch.Unit == "V" {
			p.fail(n.Line, ch.ID, "excitation", "missing; a bridge read in volts needs its excitation voltage")
		}
		if tn, ok := get("thermal_output_microstrain"); ok {
			if c, ok := p.numList(tn, ch.ID, "thermal_output_microstrain"); ok {
				ch.ThermalOutput = scale(c, 1e-6)
			}
		}
	case ch.Kind == KindStrain:
		if tn, ok := get("thermal_output_microstrain"); ok {
			if c, ok := p.numList(tn, ch.ID, "thermal_output_microstrain"); ok {
				ch.ThermalOutput = scale(c, 1e-6)
			}
		}
	case ch.Kind == KindVibratingWire:
		if gn, ok := need("gauge_constant_microstrain", "give the gauge constant in microstrain per Hz^2 (about 3.5e-3 for a 150 mm gauge)"); ok {
			if v, ok := p.positive(gn, ch.ID, "gauge_constant_microstrain"); ok {
				ch.GaugeConstant = v * 1e-6
			}
		}
		if wn, ok := get("wire_alpha"); ok {
			ch.WireAlpha, _ = p.positive(wn, ch.ID, "wire_alpha")
		}
		if sn, ok := get("steel_alpha"); ok {
			ch.SteelAlpha, _ = p.positive(sn, ch.ID, "steel_alpha")
		} else if _, _, alpha, ok := p.st.MemberProperties(ch.Member); ok {
			ch.SteelAlpha = alpha
		}
		if ch.TemperatureChannel != "" {
			if _, ok := get("wire_alpha"); !ok {
				p.fail(n.Line, ch.ID, "wire_alpha", "missing; the temperature term needs the wire's thermal coefficient (1/K)")
			}
		} else {
			for _, k := range []string{"wire_alpha", "steel_alpha"} {
				if kn, ok := get(k); ok {
					p.fail(kn.Line, ch.ID, k, "has no effect without temperature_channel; give the temperature channel or remove it")
				}
			}
		}
	case ch.Kind == KindLoad:
		p.load(n, &ch, get, need)
	case ch.Kind == KindTemperature:
		if gn, ok := need("groups", "list the member groups this temperature applies to"); ok {
			if gs, ok := p.strList(gn, ch.ID, "groups"); ok {
				for _, g := range gs {
					if !p.st.HasGroup(g) {
						p.fail(gn.Line, ch.ID, "groups", "member group %q is not in the structure file", g)
					}
				}
				ch.Groups = gs
			}
		}
		if nn, ok := need("noise", "give the standard deviation of one reading in degC"); ok {
			if v, ok := p.positive(nn, ch.ID, "noise"); ok {
				ch.Noise = v
			}
		}
	}
	ch.Range = defaultRange(ch)
	if rn, ok := get("range"); ok {
		if r, ok := p.numList(rn, ch.ID, "range"); ok {
			if len(r) != 2 || !(r[0] < r[1]) {
				p.fail(rn.Line, ch.ID, "range", "expected [min, max] with min < max, in the channel's unit")
			} else {
				ch.Range = [2]float64{r[0], r[1]}
			}
		}
	}
	return ch, len(p.Errors()) == errsBefore
}

func (p *parser) gauge(n *yaml.Node, ch *Channel, get func(string) (*yaml.Node, bool), need func(string, string) (*yaml.Node, bool)) {
	if mn, ok := need("member", "name the member the gauge is on"); ok {
		if s, ok := p.str(mn, ch.ID, "member"); ok {
			if !p.st.HasMember(s) {
				p.fail(mn.Line, ch.ID, "member", "member %q is not in the structure file", s)
			} else if e, a, _, _ := p.st.MemberProperties(s); !(e > 0) || !(a > 0) {
				p.fail(mn.Line, ch.ID, "member", "member %q has no positive E and A in the structure file", s)
			}
			ch.Member = s
		}
	}
	if pn, ok := get("position"); ok {
		ch.Position, _ = p.str(pn, ch.ID, "position")
	}
	if zn, ok := need("zero", "give the zero reading in the channel's unit"); ok {
		ch.Zero, _ = p.num(zn, ch.ID, "zero")
	}
	if zn, ok := need("zero_state", "name the zero state (from zero_states) the gauge was zeroed under"); ok {
		ch.ZeroState, _ = p.str(zn, ch.ID, "zero_state")
	}
	if nn, ok := need("noise_microstrain", "give the standard deviation of one reading in microstrain"); ok {
		if v, ok := p.positive(nn, ch.ID, "noise_microstrain"); ok {
			ch.Noise = v * 1e-6
		}
	}
	if tn, ok := get("temperature_channel"); ok {
		ch.TemperatureChannel, _ = p.str(tn, ch.ID, "temperature_channel")
	}
	if tn, ok := get("zero_temperature"); ok {
		ch.ZeroTemperature, _ = p.num(tn, ch.ID, "zero_temperature")
		if ch.TemperatureChannel == "" {
			p.fail(tn.Line, ch.ID, "zero_temperature", "only used with temperature_channel")
		}
	} else {
		ch.ZeroTemperature = math.NaN() // resolved from the zero state in crossCheck
	}
	if fn, ok := get("fatigue"); ok {
		p.fatigueBlock(fn, ch)
	}
}

func (p *parser) load(n *yaml.Node, ch *Channel, get func(string) (*yaml.Node, bool), need func(string, string) (*yaml.Node, bool)) {
	if pn, ok := need("pattern", "name the load pattern this channel measures"); ok {
		if s, ok := p.str(pn, ch.ID, "pattern"); ok {
			if !p.st.HasPattern(s) {
				p.fail(pn.Line, ch.ID, "pattern", "load pattern %q is not in the structure file", s)
			}
			ch.Pattern = s
		}
	}
	if zn, ok := get("zero"); ok {
		ch.Zero, _ = p.num(zn, ch.ID, "zero")
	}
	fn, hasFactor := get("factor")
	un, hasPU := get("pattern_unit")
	mn, hasMass := get("mass_per_unit")
	switch {
	case hasFactor && (hasPU || hasMass):
		p.fail(fn.Line, ch.ID, "factor", "give either factor or pattern_unit (with mass_per_unit), not both")
		return
	case hasFactor:
		if v, ok := p.num(fn, ch.ID, "factor"); ok {
			if v == 0 {
				p.fail(fn.Line, ch.ID, "factor", "factor must not be zero")
			}
			ch.Factor = v
		}
	case hasPU:
		// factor = (weight per unit of reading) / (load of the pattern at
		// factor 1).
		var weight float64
		var wantDim units.Dimension
		switch ch.Unit {
		case "N":
			weight, wantDim = 1, units.Force
		case "kg":
			weight, wantDim = standardGravity, units.Force
		case "Pa":
			weight, wantDim = 1, units.Pressure
		case "m":
			wantDim = units.Pressure
			if !hasMass {
				p.fail(n.Line, ch.ID, "mass_per_unit", "missing; a depth reading needs the density (e.g. 150 kg/m3 for snow)")
				return
			}
			d, _, ok := p.quantity(mn, ch.ID, "mass_per_unit", units.Density)
			if !ok {
				return
			}
			weight = d * standardGravity
		case "count":
			wantDim = units.Force
			if !hasMass {
				p.fail(n.Line, ch.ID, "mass_per_unit", "missing; a count needs the mass per person or item (e.g. 75 kg)")
				return
			}
			d, _, ok := p.quantity(mn, ch.ID, "mass_per_unit", units.Mass)
			if !ok {
				return
			}
			weight = d * standardGravity
		default:
			p.fail(un.Line, ch.ID, "pattern_unit", "not usable with unit %q; give factor instead", ch.Unit)
			return
		}
		if hasMass && ch.Unit != "m" && ch.Unit != "count" {
			p.fail(mn.Line, ch.ID, "mass_per_unit", "only used with unit \"m\" (density) or \"count\" (mass per item)")
			return
		}
		pu, _, ok := p.quantity(un, ch.ID, "pattern_unit", wantDim)
		if !ok {
			return
		}
		ch.Factor = weight / pu
	default:
		p.fail(n.Line, ch.ID, "factor", "missing; give factor (pattern factor per unit of reading) or pattern_unit (the load of the pattern at factor 1, e.g. 1 kN)")
		return
	}
	if nn, ok := need("noise", "give the standard deviation of one reading in the channel's unit"); ok {
		if v, ok := p.positive(nn, ch.ID, "noise"); ok {
			ch.Noise = v * math.Abs(ch.Factor)
		}
	}
}

// crossCheck validates references between channels: temperature channels of
// gauges, zero states and their temperatures, one zero state per member, no
// pattern both permanent and measured.
func (p *parser) crossCheck(m *Map) {
	tempFeeds := map[string][]string{} // group -> temperature channels
	for i := range m.channels {
		ch := &m.channels[i]
		if ch.Kind == KindTemperature {
			for _, g := range ch.Groups {
				tempFeeds[g] = append(tempFeeds[g], ch.ID)
			}
		}
	}
	memberIdx := map[string]int{}
	for i := range m.channels {
		ch := &m.channels[i]
		if ch.Kind == KindLoad {
			if _, ok := m.permanent[ch.Pattern]; ok {
				p.fail(ch.Line, ch.ID, "pattern", "pattern %q is also in permanent_loads; a measured pattern cannot be permanent", ch.Pattern)
			}
			continue
		}
		if !ch.Kind.IsGauge() {
			continue
		}
		z, ok := m.zeroStates[ch.ZeroState]
		if !ok && ch.ZeroState != "" {
			p.fail(ch.Line, ch.ID, "zero_state", "zero state %q is not declared in zero_states", ch.ZeroState)
		}
		if ch.TemperatureChannel != "" && ch.Kind != KindVibratingWire && len(ch.ThermalOutput) == 0 {
			p.fail(ch.Line, ch.ID, "temperature_channel", "has no effect without thermal_output_microstrain; give the gauge's thermal output or remove it")
		}
		if ch.TemperatureChannel != "" {
			i, ok := m.index[ch.TemperatureChannel]
			switch {
			case !ok:
				p.fail(ch.Line, ch.ID, "temperature_channel", "channel %q is not in the map", ch.TemperatureChannel)
			case m.channels[i].Kind != KindTemperature:
				p.fail(ch.Line, ch.ID, "temperature_channel", "channel %q is a %s channel, not a temperature", ch.TemperatureChannel, m.channels[i].Kind)
			case math.IsNaN(ch.ZeroTemperature):
				t, err := zeroTemperatureOf(z, m.channels[i].Groups)
				if err != "" {
					p.fail(ch.Line, ch.ID, "zero_temperature", "%s; give zero_temperature", err)
				}
				ch.ZeroTemperature = t
			}
		} else {
			ch.ZeroTemperature = 0
			if len(ch.ThermalOutput) > 0 {
				p.fail(ch.Line, ch.ID, "temperature_channel", "missing; thermal_output_microstrain needs the temperature channel that compensates it")
			}
		}
		if ch.Member == "" {
			continue
		}
		j, seen := memberIdx[ch.Member]
		if !seen {
			j = len(m.members)
			memberIdx[ch.Member] = j
			m.members = append(m.members, memberGauges{member: ch.Member, zero: ch.ZeroState})
			if e, a, alpha, ok := p.st.MemberProperties(ch.Member); ok {
				m.props[ch.Member] = [3]float64{e, a, alpha}
			}
		} else if m.members[j].zero != ch.ZeroState {
			p.fail(ch.Line, ch.ID, "zero_state", "member %s has gauges zeroed under %q and %q; all gauges on one member share one zero state (re-zero them together)",
				ch.Member, m.members[j].zero, ch.ZeroState)
		}
		m.members[j].channels = append(m.members[j].channels, i)
	}
}

// zeroTemperatureOf is the zero-state temperature of the groups a
// temperature channel feeds; they must agree.
func zeroTemperatureOf(z ZeroState, groups []string) (float64, string) {
	t := math.NaN()
	for _, g := range groups {
		v, ok := z.Temperatures[g]
		if !ok {
			return 0, fmt.Sprintf("zero state %q gives no temperature for group %q", z.ID, g)
		}
		if !math.IsNaN(t) && v != t {
			return 0, fmt.Sprintf("zero state %q gives different temperatures for the groups of the temperature channel", z.ID)
		}
		t = v
	}
	if math.IsNaN(t) {
		return 0, "the temperature channel feeds no group"
	}
	return t, ""
}

// defaultRange is the plausible span of raw readings per kind and unit
// (common practice): strains beyond 1 %, bridge outputs beyond 20 mV/V,
// frequencies outside 1 Hz to 20 kHz, temperatures outside -80 to 120 degC.
func defaultRange(ch Channel) [2]float64 {
	switch {
	case ch.Kind == KindStrain:
		return [2]float64{-0.01, 0.01}
	case ch.Kind.isBridge() && ch.Unit == "V":
		return [2]float64{-0.02 * ch.Excitation, 0.02 * ch.Excitation}
	case ch.Kind.isBridge():
		return [2]float64{-0.02, 0.02}
	case ch.Kind == KindVibratingWire:
		return [2]float64{1, 20000}
	case ch.Kind == KindTemperature && ch.Unit == "K":
		return [2]float64{-80 + 273.15, 120 + 273.15}
	case ch.Kind == KindTemperature:
		return [2]float64{-80, 120}
	}
	switch ch.Unit {
	case "m":
		return [2]float64{-0.1, 20}
	case "count":
		return [2]float64{0, 1e6}
	}
	return [2]float64{-1e9, 1e9}
}

func scale(c []float64, f float64) []float64 {
	out := make([]float64, len(c))
	for i, v := range c {
		out[i] = v * f
	}
	return out
}

func kindList() string {
	s := make([]string, len(kinds))
	for i, k := range kinds {
		s[i] = string(k)
	}
	return strings.Join(s, ", ")
}

func quoteAll(s []string) []string {
	out := make([]string, len(s))
	for i, v := range s {
		out[i] = strconv.Quote(v)
	}
	return out
}
