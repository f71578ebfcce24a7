// Package blocks encodes the readings of one channel over a period (a
// block) into a compact byte string and back, losslessly: every time stamp
// and every float64 bit pattern comes back exactly.
//
// A block starts with its format version (Encode writes version 2; Decode
// reads versions 1 and 2, so blocks stored by an older release stay
// readable), the reading count, the time unit, the first time and the
// first interval.
//
// Time stamps (Unix nanoseconds, strictly increasing) are coded as in
// Pelkonen et al., "Gorilla: A Fast, Scalable, In-Memory Time Series
// Database", VLDB 2015, section 4.1.1: the first time and the first delta
// in the header, then each delta-of-delta in a prefix code ('0' for an
// unchanged interval, then 7, 9, 12 or 64 bits). The deltas are first
// divided by their greatest common divisor (the block's time unit), so a
// logger scanning every second or every 20 ms costs one bit per reading
// whatever the nanosecond scale. Version 2 writes the unit as a mantissa
// and a power of ten and the first time in units (a second: 2 bytes, the
// first time 5, where version 1 took 5 and 9).
//
// Values take one of two schemes, chosen per block:
//
//   - Decimal (after Afroozeh, Kuffo and Boncz, "ALP: Adaptive Lossless
//     floating-Point Compression", SIGMOD 2023): loggers send decimal
//     numbers with a few significant digits (1.4586925e-05, 811.03282,
//     1503). If one exponent e makes every value v of the block an integer
//     n = v * 10^e with |n| < 2^53 and float64(n) / 10^e reproduces v bit
//     for bit (it does for any decimal text parsed by a correctly rounding
//     parser, since n and 10^e, e <= 22, are exact in float64 and the
//     division rounds correctly), the block stores the integers: the first
//     in the header, then the differences, each at the value's own decimal
//     step in an adaptive Rice code (version 2, steps.go). Version 1 coded
//     the differences at the block's finest step, zigzag-coded and
//     bit-packed in frames of 8 at the frame's widest width (7 bits of
//     width per frame).
//   - XOR (Gorilla section 4.1.2): each value's bits XOR the previous
//     value's, '0' for a repeat, '10' and the meaningful bits inside the
//     previous window of leading and trailing zeros, or '11', 6 bits of
//     leading zeros, 6 bits of length and the meaningful bits. Used for
//     values that are not short decimals (NaN, full-precision floats).
//
// A negative zero is not a decimal (its integer is +0) and sends its block
// to the XOR scheme.
//
// What noise allows: a lossless code cannot beat the entropy of the
// readings. White Gaussian noise of standard deviation sigma read at
// resolution q has about log2(sigma / q * sqrt(2 pi e)) bits (Cover and
// Thomas, "Elements of Information Theory", 2nd ed., Theorem 8.3.1 and
// eq. 8.9); the differences the decimal scheme codes have sigma sqrt 2,
// half a bit more, and the Rice code adds about half a bit (TestNoiseBound:
// 7.3 bits at sigma = 10 q against 6.9 for the differences), and a regular
// clock one bit for the time.
package blocks

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
)

// Point is one reading of a channel: time in Unix nanoseconds and value.
type Point struct {
	Time  int64
	Value float64
}

const (
	// version is the format version Encode writes (the first byte of a
	// block). Decode reads every version: 1 (time unit and first time in
	// plain varints, decimal differences in frames at the block's finest
	// step) and 2 (compact unit and first time, decimal differences at
	// each value's step in an adaptive Rice code).
	version = 2

	schemeXOR     = 0
	schemeDecimal = 1

	// maxExponent is the largest decimal exponent tried: 10^22 is the
	// largest power of ten exact in float64.
	maxExponent = 22
	// frame is the number of decimal differences packed at one width
	// (version 1).
	frame = 8
)

// pow10 holds the exact powers of ten 10^0 .. 10^22.
var pow10 = func() [maxExponent + 1]float64 {
	var p [maxExponent + 1]float64
	p[0] = 1
	for i := 1; i <= maxExponent; i++ {
		p[i] = p[i-1] * 10
	}
	return p
}()

// Encode codes points, whose times must be strictly increasing, into a
// block. An empty slice is an error: a block holds at least one reading.
func Encode(pts []Point) ([]byte, error) {
	if len(pts) == 0 {
		return nil, errors.New("blocks: no readings to encode")
	}
	for i := 1; i < len(pts); i++ {
		if pts[i].Time <= pts[i-1].Time || pts[i].Time-pts[i-1].Time <= 0 {
			return nil, fmt.Errorf("blocks: reading %d at %d ns is not after reading %d at %d ns; a block needs strictly increasing times", i, pts[i].Time, i-1, pts[i-1].Time)
		}
	}
	unit := timeUnit(pts)
	out := appendHeader(nil, pts, unit)
	ints, e, ok := decimals(pts)
	var w bitWriter
	encodeTimes(&w, pts, unit)
	if ok {
		sig := significant(ints)
		out = append(out, schemeDecimal, byte(e), byte(sig))
		out = binary.AppendVarint(out, ints[0])
		encodeDecimalSteps(&w, ints, sig)
	} else {
		out = append(out, schemeXOR)
		out = binary.BigEndian.AppendUint64(out, math.Float64bits(pts[0].Value))
		encodeXOR(&w, pts)
	}
	return append(out, w.buf...), nil
}

// appendHeader appends the version, the count, the time unit, the first
// time and the first interval of a block.
func appendHeader(out []byte, pts []Point, unit uint64) []byte {
	out = append(out, version)
	out = binary.AppendUvarint(out, uint64(len(pts)))
	out = appendUnit(out, unit)
	// The first time in units and a remainder: a logger's clock counts
	// whole units, so this takes 4 or 5 bytes where nanoseconds take 9.
	t0 := pts[0].Time
	q := t0 / int64(unit)
	if unit > math.MaxInt64 {
		q = 0 // a unit this large holds at most two readings
	} else if t0%int64(unit) != 0 && t0 < 0 {
		q--
	}
	out = binary.AppendVarint(out, q)
	out = binary.AppendUvarint(out, uint64(t0)-uint64(q)*unit)
	if len(pts) > 1 {
		out = binary.AppendUvarint(out, uint64(pts[1].Time-pts[0].Time)/unit)
	}
	return out
}

// pow10u holds the powers of ten 10^0 .. 10^19 that fit in a uint64.
var pow10u = func() [20]uint64 {
	var p [20]uint64
	p[0] = 1
	for i := 1; i < len(p); i++ {
		p[i] = p[i-1] * 10
	}
	return p
}()

// appendUnit appends the time unit as a mantissa (uvarint) and a power of
// ten (one byte): a second, 1e9 ns, takes 2 bytes.
func appendUnit(out []byte, unit uint64) []byte {
	x := 0
	for unit%10 == 0 && x < len(pow10u)-1 {
		unit /= 10
		x++
	}
	return append(binary.AppendUvarint(out, unit), byte(x))
}

// timeUnit is the greatest common divisor of the intervals; for a single
// reading, the largest power of ten up to 10^18 that divides its time (so
// that the header codes the time in few bytes).
func timeUnit(pts []Point) uint64 {
	var g uint64
	for i := 1; i < len(pts); i++ {
		g = gcd(g, uint64(pts[i].Time-pts[i-1].Time))
	}
	if g != 0 {
		return g
	}
	g = 1
	for t := pts[0].Time; t%int64(g*10) == 0 && g < 1e18; {
		g *= 10
	}
	return g
}

func gcd(a, b uint64) uint64 {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}

// encodeTimes writes the delta-of-deltas of readings 2.. in the Gorilla
// prefix code.
func encodeTimes(w *bitWriter, pts []Point, unit uint64) {
	for i := 2; i < len(pts); i++ {
		d := int64(uint64(pts[i].Time-pts[i-1].Time) / unit)
		prev := int64(uint64(pts[i-1].Time-pts[i-2].Time) / unit)
		z := zigzag(d - prev)
		switch {
		case z == 0:
			w.write(0b0, 1)
		case z < 1<<7:
			w.write(0b10, 2)
			w.write(z, 7)
		case z < 1<<9:
			w.write(0b110, 3)
			w.write(z, 9)
		case z < 1<<12:
			w.write(0b1110, 4)
			w.write(z, 12)
		default:
			w.write(0b1111, 4)
			w.write(z, 64)
		}
	}
}

// decimals returns the values as integers at the smallest exponent that
// reproduces every one of them exactly, or ok false.
func decimals(pts []Point) (ints []int64, e int, ok bool) {
	ints = make([]int64, len(pts))
	for e = 0; e <= maxExponent; e++ {
		if decimalsAt(pts, e, ints) {
			return ints, e, true
		}
	}
	return nil, 0, false
}

// decimalsAt fills ints with v * 10^e and reports whether every value is
// reproduced exactly by float64(n) / 10^e.
func decimalsAt(pts []Point, e int, ints []int64) bool {
	p := pow10[e]
	for i, pt := range pts {
		v := pt.Value
		s := math.Round(v * p)
		if math.IsNaN(s) || math.Abs(s) >= 1<<53 {
			return false
		}
		n := int64(s)
		if math.Float64bits(float64(n)/p) != math.Float64bits(v) {
			return false
		}
		ints[i] = n
	}
	return true
}

// encodeXOR writes values 1.. in the Gorilla XOR code.
func encodeXOR(w *bitWriter, pts []Point) {
	prev := math.Float64bits(pts[0].Value)
	lead, trail := uint(65), uint(0) // no window yet
	for _, pt := range pts[1:] {
		cur := math.Float64bits(pt.Value)
		x := cur ^ prev
		prev = cur
		if x == 0 {
			w.write(0b0, 1)
			continue
		}
		l, t := leadingZeros(x), trailingZeros(x)
		if lead <= 64 && l >= lead && t >= trail {
			w.write(0b10, 2)
			w.write(x>>trail, 64-lead-trail)
			continue
		}
		lead, trail = l, t
		w.write(0b11, 2)
		w.write(uint64(lead), 6)
		w.write(uint64(64-lead-trail-1), 6)
		w.write(x>>trail, 64-lead-trail)
	}
}

func leadingZeros(x uint64) uint { return 64 - bitLen(x) }

func trailingZeros(x uint64) uint {
	n := uint(0)
	for x&1 == 0 && n < 64 {
		x >>= 1
		n++
	}
	return n
}

// Decode returns the points of a block.
func Decode(b []byte) ([]Point, error) { return DecodeAppend(nil, b) }

// DecodeAppend appends the points of a block to dst. A corrupt or
// truncated block is an error, never a panic.
func DecodeAppend(dst []Point, b []byte) ([]Point, error) {
	bad := func(what string) ([]Point, error) {
		return dst, fmt.Errorf("blocks: corrupt block (%d bytes): %s", len(b), what)
	}
	if len(b) < 1 || b[0] < 1 || b[0] > version {
		return bad("unknown format version")
	}
	ver := b[0]
	pos := 1
	uvar := func() (uint64, bool) {
		v, n := binary.Uvarint(b[pos:])
		if n <= 0 {
			return 0, false
		}
		pos += n
		return v, true
	}
	count, ok := uvar()
	// Every reading after the first two costs at least one bit of time.
	if !ok || count == 0 || count > 8*uint64(len(b))+2 {
		return bad("reading count")
	}
	var t0 int64
	var unit uint64
	if ver == 1 {
		var n int
		if t0, n = binary.Varint(b[pos:]); n <= 0 {
			return bad("first time")
		}
		pos += n
		if unit, ok = uvar(); !ok || unit == 0 {
			return bad("time unit")
		}
	} else {
		mant, ok := uvar()
		if !ok || pos >= len(b) || b[pos] >= uint8(len(pow10u)) {
			return bad("time unit")
		}
		unit = mant * pow10u[b[pos]]
		pos++
		if unit == 0 {
			return bad("time unit")
		}
		q, n := binary.Varint(b[pos:])
		if n <= 0 {
			return bad("first time")
		}
		pos += n
		rem, ok := uvar()
		if !ok {
			return bad("first time")
		}
		// Wrapping arithmetic: exact for any time Encode wrote.
		t0 = int64(uint64(q)*unit + rem)
	}
	var delta uint64
	if count > 1 {
		if delta, ok = uvar(); !ok || delta == 0 {
			return bad("first interval")
		}
	}
	if pos >= len(b) {
		return bad("value scheme")
	}
	scheme := b[pos]
	pos++
	start := len(dst)
	dst = append(dst, make([]Point, count)...)
	pts := dst[start:]
	var r bitReader
	switch scheme {
	case schemeDecimal:
		if pos >= len(b) || b[pos] > maxExponent {
			return bad("decimal exponent")
		}
		e := int(b[pos])
		pos++
		sig := 0
		if ver >= 2 {
			// Significant digits: at most 16 (integers below 2^53).
			if pos >= len(b) || b[pos] > 16 {
				return bad("significant digits")
			}
			sig = int(b[pos])
			pos++
		}
		n0, n := binary.Varint(b[pos:])
		if n <= 0 {
			return bad("first value")
		}
		pos += n
		r = bitReader{buf: b[pos:]}
		if err := decodeTimes(&r, pts, t0, unit, delta); err != nil {
			return bad(err.Error())
		}
		var err error
		if ver == 1 {
			err = decodeDecimals(&r, pts, n0, pow10[e])
		} else {
			err = decodeDecimalSteps(&r, pts, n0, pow10[e], sig)
		}
		if err != nil {
			return bad(err.Error())
		}
	case schemeXOR:
		if len(b)-pos < 8 {
			return bad("first value")
		}
		v0 := binary.BigEndian.Uint64(b[pos:])
		pos += 8
		r = bitReader{buf: b[pos:]}
		if err := decodeTimes(&r, pts, t0, unit, delta); err != nil {
			return bad(err.Error())
		}
		if err := decodeXOR(&r, pts, v0); err != nil {
			return bad(err.Error())
		}
	default:
		return bad("unknown value scheme")
	}
	return dst, nil
}

// decodeTimes fills the times of pts.
func decodeTimes(r *bitReader, pts []Point, t0 int64, unit, delta uint64) error {
	pts[0].Time = t0
	if len(pts) == 1 {
		return nil
	}
	// next is the time one interval of d units after prev, or false when
	// the interval or the time leaves int64 (no block Encode writes).
	next := func(prev int64, d uint64) (int64, bool) {
		if d == 0 || d > math.MaxInt64/unit {
			return 0, false
		}
		t := prev + int64(d*unit)
		return t, t > prev
	}
	var ok bool
	if pts[1].Time, ok = next(t0, delta); !ok {
		return errors.New("first interval leaves the time range")
	}
	d := int64(delta)
	for i := 2; i < len(pts); i++ {
		width, err := timeWidth(r)
		if err != nil {
			return fmt.Errorf("time of reading %d: %w", i, err)
		}
		z, err := r.read(width)
		if err != nil {
			return fmt.Errorf("time of reading %d: %w", i, err)
		}
		d += unzigzag(z)
		if d <= 0 {
			return fmt.Errorf("time of reading %d does not increase", i)
		}
		if pts[i].Time, ok = next(pts[i-1].Time, uint64(d)); !ok {
			return fmt.Errorf("time of reading %d leaves the time range", i)
		}
	}
	return nil
}

// timeWidth reads the prefix of a delta-of-delta: '0' (width 0, the
// interval is unchanged), '10' 7 bits, '110' 9 bits, '1110' 12 bits,
// '1111' 64 bits.
func timeWidth(r *bitReader) (uint, error) {
	for _, w := range [...]uint{0, 7, 9, 12} {
		b, err := r.bit()
		if err != nil {
			return 0, err
		}
		if !b {
			return w, nil
		}
	}
	return 64, nil
}

// decodeDecimals fills the values of pts from the packed differences of
// format version 1.
func decodeDecimals(r *bitReader, pts []Point, n0 int64, p float64) error {
	n := n0
	pts[0].Value = float64(n) / p
	for i := 1; i < len(pts); i += frame {
		width, err := r.read(7)
		if err != nil {
			return fmt.Errorf("value frame at reading %d: %w", i, err)
		}
		if width > 64 {
			return fmt.Errorf("value frame at reading %d: width %d", i, width)
		}
		for j := i; j < min(i+frame, len(pts)); j++ {
			z, err := r.read(uint(width))
			if err != nil {
				return fmt.Errorf("value of reading %d: %w", j, err)
			}
			n += unzigzag(z)
			pts[j].Value = float64(n) / p
		}
	}
	return nil
}

// decodeXOR fills the values of pts from the XOR code.
func decodeXOR(r *bitReader, pts []Point, v0 uint64) error {
	prev := v0
	pts[0].Value = math.Float64frombits(prev)
	var lead, trail uint
	window := false
	for i := 1; i < len(pts); i++ {
		b, err := r.bit()
		if err != nil {
			return fmt.Errorf("value of reading %d: %w", i, err)
		}
		if !b {
			pts[i].Value = math.Float64frombits(prev)
			continue
		}
		if b, err = r.bit(); err != nil {
			return fmt.Errorf("value of reading %d: %w", i, err)
		}
		if b {
			l, err := r.read(6)
			if err != nil {
				return fmt.Errorf("value of reading %d: %w", i, err)
			}
			m, err := r.read(6)
			if err != nil {
				return fmt.Errorf("value of reading %d: %w", i, err)
			}
			lead, window = uint(l), true
			if lead+uint(m)+1 > 64 {
				return fmt.Errorf("value of reading %d: window of %d leading zeros and %d bits", i, lead, m+1)
			}
			trail = 64 - lead - uint(m) - 1
		} else if !window {
			return fmt.Errorf("value of reading %d reuses a window before any was set", i)
		}
		x, err := r.read(64 - lead - trail)
		if err != nil {
			return fmt.Errorf("value of reading %d: %w", i, err)
		}
		prev ^= x << trail
		pts[i].Value = math.Float64frombits(prev)
	}
	return nil
}
