package blocks

import (
	"encoding/binary"
	"errors"
	"math/bits"
)

// errShort is returned when a block ends before its declared content.
var errShort = errors.New("block is truncated")

// bitWriter appends bits, most significant first, to a byte slice.
type bitWriter struct {
	buf  []byte
	used uint // bits used in the last byte (0 when the last byte is full or buf is empty)
}

// write appends the n (0..64) low bits of v, most significant first.
func (w *bitWriter) write(v uint64, n uint) {
	for n > 0 {
		if w.used == 0 {
			w.buf = append(w.buf, 0)
			w.used = 0
		}
		free := 8 - w.used
		take := min(free, n)
		chunk := byte((v >> (n - take)) & (1<<take - 1))
		w.buf[len(w.buf)-1] |= chunk << (free - take)
		w.used = (w.used + take) % 8
		n -= take
	}
}

// bitReader reads bits written by bitWriter.
type bitReader struct {
	buf []byte
	pos uint // bit position
}

// read returns the next n (0..64) bits.
func (r *bitReader) read(n uint) (uint64, error) {
	if uint(len(r.buf))*8-r.pos < n {
		return 0, errShort
	}
	if i := r.pos / 8; n > 0 && n <= 56 && i+8 <= uint(len(r.buf)) {
		// Fast path: the bits lie in the 8 bytes from the current one.
		v := binary.BigEndian.Uint64(r.buf[i:]) << (r.pos % 8) >> (64 - n)
		r.pos += n
		return v, nil
	}
	var v uint64
	for n > 0 {
		b := r.buf[r.pos/8]
		off := r.pos % 8
		free := 8 - off
		take := min(free, n)
		chunk := uint64(b>>(free-take)) & (1<<take - 1)
		v = v<<take | chunk
		r.pos += take
		n -= take
	}
	return v, nil
}

// unary reads a run of '1' bits ended by a '0' and returns its length; a
// run reaching limit ends there without a '0' (the Rice code's escape).
// It takes up to a byte at a time.
func (r *bitReader) unary(limit uint64) (uint64, error) {
	var q uint64
	for q < limit {
		if r.pos >= uint(len(r.buf))*8 {
			return 0, errShort
		}
		off := r.pos % 8
		// Leading ones of the byte's unread bits: the shifted-in low bits
		// are 0, so the count stops at the end of the byte.
		ones := uint(bits.LeadingZeros8(^(r.buf[r.pos/8] << off)))
		if uint64(ones) >= limit-q {
			r.pos += uint(limit - q)
			return limit, nil
		}
		q += uint64(ones)
		r.pos += ones
		if ones < 8-off {
			r.pos++ // the ending '0'
			return q, nil
		}
	}
	return q, nil
}

// bit reads one bit.
func (r *bitReader) bit() (bool, error) {
	v, err := r.read(1)
	return v == 1, err
}

// zigzag maps a signed integer to an unsigned one with small magnitudes
// small: 0, -1, 1, -2, 2 -> 0, 1, 2, 3, 4.
func zigzag(v int64) uint64 { return uint64(v<<1) ^ uint64(v>>63) }

// unzigzag inverts zigzag.
func unzigzag(u uint64) int64 { return int64(u>>1) ^ -int64(u&1) }

// bitLen is the number of bits needed for u (0 for 0).
func bitLen(u uint64) uint {
	n := uint(0)
	for u != 0 {
		n++
		u >>= 1
	}
	return n
}
