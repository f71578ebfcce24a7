package sensors

import (
	"fmt"
	"math"
	"time"

	"go.yaml.in/yaml/v3"

	"trussmonitor/internal/fatigue"
	"trussmonitor/internal/units"
)

// Fatigue is the fatigue block of a gauge channel: the EN 1993-1-9 detail
// at the gauge's location, its partial factors and when damage starts to
// accumulate.
type Fatigue struct {
	// Curve is the S-N curve of the detail category with gamma_Ff, gamma_Mf.
	Curve fatigue.Curve
	// Start is when accumulation starts (readings before it count no
	// damage); the zero time means from the first reading.
	Start time.Time
	// Line is the line of the block in the file.
	Line int
}

// FatigueGauge is a gauge channel with a fatigue block and the modulus of
// its member.
type FatigueGauge struct {
	Channel string
	Member  string
	// E is the modulus of elasticity of the member (Pa): the local stress is
	// E times the gauge's strain.
	E       float64
	Fatigue Fatigue
}

// fatigueGaugeFields are the gauge fields this file reads.
var fatigueGaugeFields = []string{"fatigue"}

var fatigueFields = []string{"detail_category", "gamma_Ff", "gamma_Mf", "start"}

// fatigueBlock reads a gauge's fatigue block:
//
//	fatigue:
//	  detail_category: 71 MPa   # EN 1993-1-9 Table 8.1, Delta sigma_C at 2e6 cycles
//	  gamma_Ff: 1.0
//	  gamma_Mf: 1.35
//	  start: 2026-01-01T00:00:00Z   # optional
func (p *parser) fatigueBlock(n *yaml.Node, ch *Channel) {
	f, ok := p.fields(n, ch.ID, "fatigue", fatigueFields)
	if !ok {
		return
	}
	need := func(name, hint string) (*yaml.Node, bool) {
		v, ok := f[name]
		if !ok {
			p.fail(n.Line, ch.ID, "fatigue."+name, "missing; %s", hint)
		}
		return v, ok
	}
	var cat, gFf, gMf float64
	good := true
	if cn, ok := need("detail_category", "give the EN 1993-1-9 detail category of the gauge's location as a stress with its unit (e.g. 71 MPa)"); ok {
		v, _, ok := p.quantity(cn, ch.ID, "fatigue.detail_category", units.Stress)
		good = good && ok
		cat = math.Round(v/1e5) / 10 // MPa to 0.1 MPa
		if ok && (!fatigue.IsCategory(cat) || math.Abs(cat*1e6-v) > 1) {
			p.fail(cn.Line, ch.ID, "fatigue.detail_category", "%s is not a detail category of EN 1993-1-9 Table 8.1; use one of %v MPa", cn.Value, fatigue.Categories)
			good = false
		}
	} else {
		good = false
	}
	for _, g := range []struct {
		name string
		dst  *float64
		hint string
	}{
		{"gamma_Ff", &gFf, "give the partial factor for fatigue loading (EN 1993-1-9 3(7) recommends 1.0)"},
		{"gamma_Mf", &gMf, "give the partial factor for fatigue strength (EN 1993-1-9 Table 3.1: 1.00 to 1.35)"},
	} {
		gn, ok := need(g.name, g.hint)
		if !ok {
			good = false
			continue
		}
		v, ok := p.num(gn, ch.ID, "fatigue."+g.name)
		if ok && !(v >= 1 && v <= 2) {
			p.fail(gn.Line, ch.ID, "fatigue."+g.name, "%v is outside 1 to 2; %s", v, g.hint)
			ok = false
		}
		good = good && ok
		*g.dst = v
	}
	var start time.Time
	if sn, ok := f["start"]; ok {
		if s, ok := p.str(sn, ch.ID, "fatigue.start"); ok {
			t, err := time.Parse(time.RFC3339, s)
			if err != nil {
				if d, err2 := time.Parse(time.DateOnly, s); err2 == nil {
					t, err = d, nil
				}
			}
			if err != nil {
				p.fail(sn.Line, ch.ID, "fatigue.start", "%q is not a date (2026-01-01) or an RFC 3339 time (2026-01-01T00:00:00Z)", s)
				good = false
			}
			start = t.UTC()
		} else {
			good = false
		}
	}
	if !good {
		return
	}
	c, err := fatigue.NewCurve(cat, gFf, gMf)
	if err != nil {
		p.fail(n.Line, ch.ID, "fatigue", "%v", err)
		return
	}
	ch.Fatigue = &Fatigue{Curve: c, Start: start, Line: n.Line}
}

// FatigueGauges lists the gauge channels that carry a fatigue block, in file
// order.
func (m *Map) FatigueGauges() []FatigueGauge {
	var out []FatigueGauge
	for _, ch := range m.channels {
		if ch.Fatigue == nil {
			continue
		}
		out = append(out, FatigueGauge{Channel: ch.ID, Member: ch.Member, E: m.props[ch.Member][0], Fatigue: *ch.Fatigue})
	}
	return out
}

// Stress is the local stress (Pa) at a gauge for a raw reading: E of the
// member times the gauge's strain from Convert (the change since the zero
// reading, at the gauge itself, bending included: fatigue acts at the detail,
// not on the member's mean). The gauge's thermal-output correction, which
// needs the temperature channel's reading of the same instant, is not
// applied: it drifts with the daily temperature and adds at most one slow
// cycle a day.
func (m *Map) Stress(channel string, raw float64) (float64, error) {
	e, err := m.Convert(channel, raw)
	if err != nil {
		return 0, err
	}
	ch := &m.channels[m.index[channel]]
	if !ch.Kind.IsGauge() {
		return 0, &ReadingError{reason: ReasonUnknownChannel, Channel: channel, Msg: fmt.Sprintf("a %s channel has no stress", ch.Kind)}
	}
	return m.props[ch.Member][0] * e, nil
}
