package senml

import (
	"math"
	"strconv"
	"time"
)

// decodeFast decodes the common shape of a pack in one pass without
// reflection: a JSON array of objects whose labels are only bn, bt, bu, bv,
// n, u, v and t, each at most once per record, with string values free of
// escapes and numeric values that are JSON numbers. It returns ok == false
// for anything else (another label, an escape, null, a syntax error, a
// record the RFC or this receiver refuses, ...): the caller then runs
// decodeGeneral, which accepts or rejects the pack with its own messages.
// So decodeFast never decides an error, and on the packs it accepts its
// records equal decodeGeneral's (FuzzFastPath checks both).
//
// trimmed is the payload without surrounding white space, starting with '['.
func decodeFast(trimmed []byte, now time.Time) ([]Record, bool) {
	p := fastParser{b: trimmed, i: 1}
	// Records of a pack are objects of about 20 bytes or more.
	out := make([]Record, 0, len(trimmed)/20+1)
	p.ws()
	if p.peek() == ']' {
		p.i++
		return out, p.i == len(p.b)
	}
	var base baseState
	base.version = SupportedVersion
	for {
		p.ws()
		rec, ok := p.record(&base, now)
		if !ok {
			return nil, false
		}
		out = append(out, rec)
		p.ws()
		switch p.peek() {
		case ',':
			p.i++
		case ']':
			p.i++
			return out, p.i == len(p.b)
		default:
			return nil, false
		}
	}
}

// Labels decodeFast understands, one bit each (a repeated label is left to
// decodeGeneral, where the last one wins).
const (
	fastBN = 1 << iota
	fastBT
	fastBU
	fastBV
	fastN
	fastU
	fastV
	fastT
)

type fastParser struct {
	b []byte
	i int
}

func (p *fastParser) peek() byte {
	if p.i < len(p.b) {
		return p.b[p.i]
	}
	return 0
}

// ws skips JSON white space (RFC 8259 section 2).
func (p *fastParser) ws() {
	for p.i < len(p.b) {
		switch p.b[p.i] {
		case ' ', '\t', '\n', '\r':
			p.i++
		default:
			return
		}
	}
}

// str reads a JSON string without escapes and returns its bytes between
// the quotes (as stringField does for such strings).
func (p *fastParser) str() ([]byte, bool) {
	if p.peek() != '"' {
		return nil, false
	}
	p.i++
	start := p.i
	for p.i < len(p.b) {
		c := p.b[p.i]
		switch {
		case c == '"':
			s := p.b[start:p.i]
			p.i++
			return s, true
		case c == '\\' || c < 0x20:
			return nil, false
		}
		p.i++
	}
	return nil, false
}

// num reads a JSON number (RFC 8259 section 6 grammar) as numberField
// does: refused when out of the float64 range.
func (p *fastParser) num() (float64, bool) {
	start := p.i
	if p.peek() == '-' {
		p.i++
	}
	switch c := p.peek(); {
	case c == '0':
		p.i++
	case c >= '1' && c <= '9':
		p.digits()
	default:
		return 0, false
	}
	if p.peek() == '.' {
		p.i++
		if p.digits() == 0 {
			return 0, false
		}
	}
	if c := p.peek(); c == 'e' || c == 'E' {
		p.i++
		if c := p.peek(); c == '+' || c == '-' {
			p.i++
		}
		if p.digits() == 0 {
			return 0, false
		}
	}
	v, err := strconv.ParseFloat(string(p.b[start:p.i]), 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, false
	}
	return v, true
}

func (p *fastParser) digits() int {
	n := 0
	for p.i < len(p.b) && p.b[p.i] >= '0' && p.b[p.i] <= '9' {
		p.i++
		n++
	}
	return n
}

// record reads one object and resolves it against base (RFC 8428 section
// 4.1, as decodeRecord does).
func (p *fastParser) record(base *baseState, now time.Time) (Record, bool) {
	if p.peek() != '{' {
		return Record{}, false
	}
	p.i++
	var seen int
	var bn, bu, n, u []byte
	var bt, bv, v, t float64
	p.ws()
	if p.peek() == '}' {
		return Record{}, false // no value: decodeGeneral names the error
	}
	for {
		p.ws()
		key, ok := p.str()
		if !ok {
			return Record{}, false
		}
		p.ws()
		if p.peek() != ':' {
			return Record{}, false
		}
		p.i++
		p.ws()
		var bit int
		var sp *[]byte
		var fp *float64
		switch string(key) {
		case "bn":
			bit, sp = fastBN, &bn
		case "bu":
			bit, sp = fastBU, &bu
		case "n":
			bit, sp = fastN, &n
		case "u":
			bit, sp = fastU, &u
		case "bt":
			bit, fp = fastBT, &bt
		case "bv":
			bit, fp = fastBV, &bv
		case "v":
			bit, fp = fastV, &v
		case "t":
			bit, fp = fastT, &t
		default:
			return Record{}, false
		}
		if seen&bit != 0 {
			return Record{}, false
		}
		seen |= bit
		if sp != nil {
			if *sp, ok = p.str(); !ok {
				return Record{}, false
			}
		} else if *fp, ok = p.num(); !ok {
			return Record{}, false
		}
		p.ws()
		switch p.peek() {
		case ',':
			p.i++
			continue
		case '}':
			p.i++
		default:
			return Record{}, false
		}
		break
	}
	if seen&fastV == 0 {
		return Record{}, false
	}
	if seen&fastBN != 0 {
		base.name = string(bn)
	}
	if seen&fastBT != 0 {
		base.time = bt
	}
	if seen&fastBU != 0 {
		base.unit = string(bu)
	}
	if seen&fastBV != 0 {
		base.value = bv
	}
	var rec Record
	rec.Name = base.name
	if seen&fastN != 0 {
		rec.Name = base.name + string(n)
	}
	if checkName(0, rec.Name) != nil {
		return Record{}, false
	}
	rec.Unit = base.unit
	if seen&fastU != 0 {
		rec.Unit = string(u)
	}
	rec.Value = base.value + v
	if math.IsInf(rec.Value, 0) || math.IsNaN(rec.Value) {
		return Record{}, false
	}
	tm, err := resolveTime(0, base.time+t, now)
	if err != nil {
		return Record{}, false
	}
	rec.Time = tm
	return rec, true
}
