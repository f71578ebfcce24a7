// Package blocks encodes the readings of one channel over a period (a
// block) into a compact byte string and back, losslessly: every time stamp
// and every float64 bit pattern comes back exactly.
//
// Time stamps (Unix nanoseconds, strictly increasing) are coded as in
// Pelkonen et al., "Gorilla: A Fast, Scalable, In-Memory Time Series
// Database", VLDB 2015, section 4.1.1: the first time and the first delta
// in the header, then each delta-of-delta in a prefix code ('0' for an
// unchanged interval, then 7, 9, 12 or 64 bits). The deltas are first
// divided by their greatest common divisor (the block's time unit), so a
// logger scanning every second or every 20 ms costs one bit per reading
// whatever the nanosecond scale.
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
//     in the header, then the differences, zigzag-coded and bit-packed in
//     frames of 8 at the frame's widest width (6 bits of width per frame).
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
// differences. For white noise of standard deviation sigma printed at
// resolution q = 10^-e the differences have sigma_delta = sigma sqrt 2 and
// entropy log2(sigma_delta sqrt(2 pi e) / q) bits; the frames add about one
// bit and a regular clock one bit more, so a channel costs about
// log2(sigma / q) + 4.5 bits a reading (measured in TestNoiseBound): 14.5
// bits when the noise is a thousand times the printed resolution, 24.5 bits
// when it is a million times.
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
	version = 1

	schemeXOR     = 0
	schemeDecimal = 1

	// maxExponent is the largest decimal exponent tried: 10^22 is the
	// largest power of ten exact in float64.
	maxExponent = 22
	// frame is the number of decimal differences packed at one width.
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
	out := []byte{version}
	out = binary.AppendUvarint(out, uint64(len(pts)))
	out = binary.AppendVarint(out, pts[0].Time)
	unit := timeUnit(pts)
	out = binary.AppendUvarint(out, unit)
	if len(pts) > 1 {
		out = binary.AppendUvarint(out, uint64(pts[1].Time-pts[0].Time)/unit)
	}
	ints, e, ok := decimals(pts)
	var w bitWriter
	encodeTimes(&w, pts, unit)
	if ok {
		out = append(out, schemeDecimal, byte(e))
		out = binary.AppendVarint(out, ints[0])
		encodeDecimals(&w, ints)
	} else {
		out = append(out, schemeXOR)
		out = binary.BigEndian.AppendUint64(out, math.Float64bits(pts[0].Value))
		encodeXOR(&w, pts)
	}
	return append(out, w.buf...), nil
}

// timeUnit is the greatest common divisor of the intervals (1 for a single
// reading).
func timeUnit(pts []Point) uint64 {
	var g uint64
	for i := 1; i < len(pts); i++ {
		g = gcd(g, uint64(pts[i].Time-pts[i-1].Time))
	}
	if g == 0 {
		return 1
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

// encodeDecimals bit-packs the zigzag differences of ints[1:] in frames.
func encodeDecimals(w *bitWriter, ints []int64) {
	diffs := make([]uint64, 0, frame)
	for i := 1; i < len(ints); i += frame {
		diffs = diffs[:0]
		width := uint(0)
		for j := i; j < min(i+frame, len(ints)); j++ {
			z := zigzag(ints[j] - ints[j-1])
			diffs = append(diffs, z)
			width = max(width, bitLen(z))
		}
		w.write(uint64(width), 7)
		for _, z := range diffs {
			w.write(z, width)
		}
	}
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
	if len(b) < 1 || b[0] != version {
		return bad("unknown format version")
	}
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
	t0, n := binary.Varint(b[pos:])
	if n <= 0 {
		return bad("first time")
	}
	pos += n
	unit, ok := uvar()
	if !ok || unit == 0 {
		return bad("time unit")
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
		n0, n := binary.Varint(b[pos:])
		if n <= 0 {
			return bad("first value")
		}
		pos += n
		r = bitReader{buf: b[pos:]}
		if err := decodeTimes(&r, pts, t0, unit, delta); err != nil {
			return bad(err.Error())
		}
		if err := decodeDecimals(&r, pts, n0, pow10[e]); err != nil {
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
	d := int64(delta)
	pts[1].Time = t0 + d*int64(unit)
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
		pts[i].Time = pts[i-1].Time + d*int64(unit)
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

// decodeDecimals fills the values of pts from the packed differences.
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
