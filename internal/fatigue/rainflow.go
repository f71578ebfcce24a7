// Package fatigue owns fatigue of steel details under recorded traffic: a
// streaming rainflow counter (ASTM E1049-85, three-point method on turning
// points), stress-range histograms, the EN 1993-1-9 S-N curves of the detail
// categories and Palmgren-Miner damage.
//
// The damage and remaining life it computes are a monitoring estimate, not a
// design check or an assessment; assessment rests with a licensed engineer
// under local codes (see Caution).
package fatigue

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
)

// Caution is the text that every screen and report showing fatigue damage or
// remaining life carries.
const Caution = "Fatigue damage and remaining life are a monitoring estimate from the recorded strains, " +
	"not a design check or an assessment of the structure; assessment rests with a licensed engineer under local codes."

// Recorder receives the cycles a Counter counts: a range (in the unit of the
// samples) and how many cycles of it (1 for a full cycle, 0.5 for a half).
type Recorder interface {
	Cycle(rng, count float64)
}

// Counter is a streaming rainflow counter per ASTM E1049-85, clause 5.4.4
// (rainflow counting, three-point method). Samples are reduced to turning
// points (peaks and valleys) as they arrive; each turning point goes onto the
// residue stack and the three-point rule closes cycles:
//
//	X = |s[n-1] - s[n-2]| (the latest range), Y = |s[n-2] - s[n-3]| (the previous one);
//	while X >= Y: if Y contains the starting point s[0], count Y as a half
//	cycle and discard s[0]; otherwise count Y as one cycle and discard both
//	points of Y.
//
// The stack that remains is the residue; it is part of the state, so a
// restored Counter continues exactly. Residue reports, on demand, what the end
// of the history would add (the last, provisional extreme processed by the rule,
// then every remaining range as a half cycle) without changing the state.
//
// Non-finite samples (NaN, ±Inf) are skipped and counted in Skipped. A Counter
// is not safe for concurrent use.
type Counter struct {
	started bool
	dir     int8    // +1 rising, -1 falling, 0 no direction yet (all samples equal so far)
	ext     float64 // the running extreme since the last turning point: the next turning point candidate
	stack   []float64
	skipped uint64
	samples uint64
}

// Samples is the number of finite samples the counter has taken.
func (c *Counter) Samples() uint64 { return c.samples }

// Skipped is the number of non-finite samples the counter has ignored.
func (c *Counter) Skipped() uint64 { return c.skipped }

// ResidueLen is the number of turning points on the residue stack.
func (c *Counter) ResidueLen() int { return len(c.stack) }

// Add feeds samples in time order and reports every cycle the three-point
// rule closes to r. It allocates only when the residue stack grows.
func (c *Counter) Add(xs []float64, r Recorder) {
	i := 0
	if !c.started {
		for ; i < len(xs); i++ {
			if x := xs[i]; x-x == 0 { // finite
				c.started, c.ext, c.dir = true, x, 0
				c.samples++
				i++
				break
			}
			c.skipped++
		}
	}
	dir, ext, st := c.dir, c.ext, c.stack
	n := uint64(0)
	for ; i < len(xs); i++ {
		x := xs[i]
		if dir > 0 {
			if x >= ext {
				if x-x != 0 {
					c.skipped++
					continue
				}
				ext = x
				n++
				continue
			}
		} else if dir < 0 {
			if x <= ext {
				if x-x != 0 {
					c.skipped++
					continue
				}
				ext = x
				n++
				continue
			}
		}
		if x-x != 0 {
			c.skipped++
			continue
		}
		n++
		if dir == 0 {
			if x == ext {
				continue
			}
			if x > ext {
				dir = 1
			} else {
				dir = -1
			}
		} else {
			dir = -dir
		}
		// ext was a turning point (the first sample, or x reverses the
		// direction): push it and apply the three-point rule, inline for
		// the common case where no cycle closes.
		st = append(st, ext)
		if k := len(st); k >= 3 && math.Abs(st[k-1]-st[k-2]) >= math.Abs(st[k-2]-st[k-3]) {
			st = closeCycles(st, r)
		}
		ext = x
	}
	c.dir, c.ext, c.stack = dir, ext, st
	c.samples += n
}

// closeCycles applies the three-point rule to a stack whose last element was
// just pushed, and returns the shortened stack.
func closeCycles(s []float64, r Recorder) []float64 {
	for n := len(s); n >= 3; n = len(s) {
		x := math.Abs(s[n-1] - s[n-2])
		y := math.Abs(s[n-2] - s[n-3])
		if x < y {
			break
		}
		if n == 3 {
			// Y contains the starting point: half a cycle, discard the
			// starting point; the next point becomes the start.
			r.Cycle(y, 0.5)
			s[0], s[1] = s[1], s[2]
			s = s[:2]
			continue
		}
		r.Cycle(y, 1)
		s[n-3] = s[n-1]
		s = s[:n-2]
	}
	return s
}

// Residue reports to r what ending the history now would add: the last
// extreme taken as the final turning point (which may close cycles by the
// three-point rule), then each range left on the stack as a half cycle
// (ASTM E1049-85 5.4.4, step 6). The counter's state is not changed.
func (c *Counter) Residue(r Recorder) {
	if !c.started {
		return
	}
	s := make([]float64, len(c.stack), len(c.stack)+1)
	copy(s, c.stack)
	s = append(s, c.ext) // never on the stack yet: pushed extremes are replaced by the next sample
	s = closeCycles(s, r)
	for i := 1; i < len(s); i++ {
		r.Cycle(math.Abs(s[i]-s[i-1]), 0.5)
	}
}

// stateVersion tags the serialised form of a Counter.
const stateVersion = 1

// MarshalBinary serialises the counter's state (version byte, flags, the
// running extreme, counts and the residue stack; little-endian IEEE 754), so
// that a restored counter continues exactly.
func (c *Counter) MarshalBinary() ([]byte, error) {
	b := make([]byte, 0, 2+8*4+8*len(c.stack))
	b = append(b, stateVersion)
	var flags byte
	if c.started {
		flags |= 1
	}
	switch c.dir {
	case 1:
		flags |= 2
	case -1:
		flags |= 4
	}
	b = append(b, flags)
	b = binary.LittleEndian.AppendUint64(b, math.Float64bits(c.ext))
	b = binary.LittleEndian.AppendUint64(b, c.samples)
	b = binary.LittleEndian.AppendUint64(b, c.skipped)
	b = binary.LittleEndian.AppendUint64(b, uint64(len(c.stack)))
	for _, v := range c.stack {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
	}
	return b, nil
}

// ErrState is wrapped by UnmarshalBinary's errors.
var ErrState = errors.New("fatigue: bad rainflow counter state")

// UnmarshalBinary restores a state written by MarshalBinary.
func (c *Counter) UnmarshalBinary(b []byte) error {
	if len(b) < 2+8*4 {
		return fmt.Errorf("%w: %d bytes, want at least %d", ErrState, len(b), 2+8*4)
	}
	if b[0] != stateVersion {
		return fmt.Errorf("%w: version %d, this build reads version %d", ErrState, b[0], stateVersion)
	}
	flags := b[1]
	if flags&^7 != 0 || flags&6 == 6 {
		return fmt.Errorf("%w: flags %#x", ErrState, flags)
	}
	var nc Counter
	nc.started = flags&1 != 0
	switch {
	case flags&2 != 0:
		nc.dir = 1
	case flags&4 != 0:
		nc.dir = -1
	}
	p := b[2:]
	nc.ext = math.Float64frombits(binary.LittleEndian.Uint64(p))
	nc.samples = binary.LittleEndian.Uint64(p[8:])
	nc.skipped = binary.LittleEndian.Uint64(p[16:])
	n := binary.LittleEndian.Uint64(p[24:])
	p = p[32:]
	if uint64(len(p)) != 8*n || n > 1<<24 {
		return fmt.Errorf("%w: residue of %d points in %d bytes", ErrState, n, len(p))
	}
	if n > 0 {
		nc.stack = make([]float64, n)
	}
	for i := range nc.stack {
		nc.stack[i] = math.Float64frombits(binary.LittleEndian.Uint64(p[8*i:]))
		if v := nc.stack[i]; v-v != 0 {
			return fmt.Errorf("%w: residue point %d is not finite", ErrState, i)
		}
	}
	if nc.started && nc.ext-nc.ext != 0 {
		return fmt.Errorf("%w: running extreme is not finite", ErrState)
	}
	*c = nc
	return nil
}

// Clone returns an independent copy of the counter.
func (c *Counter) Clone() Counter {
	d := *c
	d.stack = append([]float64(nil), c.stack...)
	return d
}
