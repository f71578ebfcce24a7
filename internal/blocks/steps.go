package blocks

import "fmt"

// The decimal scheme of format version 2 keeps the block's exponent e (the
// finest resolution any of its values needs) but codes each value at its
// own decimal step and each residual in an adaptive Rice code.
//
// Steps. A logger printing a fixed number of significant digits (8 in a
// CSV file) prints a strain of 1.2345678e-05 at a step of 1e-12 and one of
// 9.8765432e-07 at 1e-14: a block crossing zero needs e = 14 or more, and
// version 1 coded every value at that finest step, log2(100) = 6.6 bits a
// value more than the value's own digits carry. Version 2 writes s, the
// most significant digits any integer n = v 10^e of the block has; the
// step of a nonzero n is 10^k with k = max(0, digits(|n|) - s), and n is a
// multiple of it. When every step is 1 (a logger printing a fixed number of
// decimals), s is written as 0 and nothing more is spent on steps. Else
// each value starts with its step against the one predicted from the
// previous integer (its own step; the previous step after a zero): '0' the
// same, '10' one finer, '110' one coarser, '111' and k in 4 bits. On the
// bridge day at 8 significant digits 28 % of the strains change step (they
// cross a power of ten near zero), nearly all by one: 1.5 bits a value
// where a flag and 4 bits took 2.1. The residual of n_j at step m = 10^k is
// n_j / m - floor(n_{j-1} / m): floor division puts the previous integer on
// the step in a way the decoder repeats exactly.
//
// Rice code (Rice, "Some practical universal noiseless coding techniques",
// JPL Publication 79-22, 1979), parameter adapted as in LOCO-I (Weinberger,
// Seroussi and Sapiro, IEEE Trans. Image Processing 9(8), 2000, section
// IV.B): the zigzag residual z is written as z >> r in unary ('1's and a
// '0') and its r low bits, with r the bit length of A / (N m), where A sums
// the recent |z| m (in units of step 1, saturating) and N counts them, both
// halved when N reaches ricePeriod. All in integers, so encoder and decoder
// agree on every platform. A quotient of riceEscape or more is written as
// riceEscape '1's, 6 bits of bit length and z itself, so a pedestrian's
// step costs at most 30 bits more than its own length. The first residual
// is written that way without the '1's: it sets the statistics, so a short
// block does not pay for the parameter growing from 0.

// pow10i holds the integer powers of ten 10^0 .. 10^18.
var pow10i = func() [19]int64 {
	var p [19]int64
	p[0] = 1
	for i := 1; i < len(p); i++ {
		p[i] = p[i-1] * 10
	}
	return p
}()

const (
	// maxStep is the largest decimal step exponent: integers of a decimal
	// block are below 2^53 < 10^16 in magnitude.
	maxStep = 15
	// ricePeriod is the count at which the Rice statistics are halved, so
	// that the parameter follows the noise of the last few dozen readings.
	ricePeriod = 16
	// riceEscape is the unary quotient at which a residual is written in
	// full instead.
	riceEscape = 24
	// riceSaturate caps the sum of recent residuals.
	riceSaturate = uint64(1) << 62
)

// digitsOf returns the number of decimal digits of |n| (0 for 0) and the
// number of its trailing decimal zeros.
func digitsOf(n int64) (digits, zeros int) {
	if n < 0 {
		n = -n
	}
	if n == 0 {
		return 0, 0
	}
	for n%10 == 0 {
		n /= 10
		zeros++
		digits++
	}
	for n != 0 {
		n /= 10
		digits++
	}
	return digits, zeros
}

// stepOf returns the step exponent of a nonzero integer with at most sig
// significant digits.
func stepOf(n int64, sig int) uint64 {
	d, _ := digitsOf(n)
	return uint64(min(max(0, d-sig), maxStep))
}

// floorDiv returns floor(a / m) for m > 0.
func floorDiv(a, m int64) int64 {
	q := a / m
	if a%m != 0 && a < 0 {
		q--
	}
	return q
}

// rice holds the adaptive Rice parameter's statistics.
type rice struct{ a, n uint64 }

// param returns the Rice parameter for a residual at step m.
func (s *rice) param(m int64) uint {
	return min(bitLen(s.a/(s.n*uint64(m))), 55)
}

// update adds a residual z at step m.
func (s *rice) update(z uint64, m int64) {
	add := riceSaturate
	if z == 0 || uint64(m) <= riceSaturate/z {
		add = z * uint64(m)
	}
	if add >= riceSaturate-s.a {
		s.a = riceSaturate
	} else {
		s.a += add
	}
	s.n++
	if s.n == ricePeriod {
		s.a >>= 1
		s.n >>= 1
	}
}

// significant returns the most significant digits of any integer, or 0 when
// every integer's step is 1 (then no steps are written).
func significant(ints []int64) int {
	sig := 1
	for _, n := range ints {
		d, z := digitsOf(n)
		sig = max(sig, d-z)
	}
	for _, n := range ints {
		if n != 0 && stepOf(n, sig) != 0 {
			return sig
		}
	}
	return 0
}

// encodeDecimalSteps writes ints[1:] at their steps in the adaptive Rice
// code; sig is significant(ints).
func encodeDecimalSteps(w *bitWriter, ints []int64, sig int) {
	st := rice{n: 1}
	var k uint64
	for j := 1; j < len(ints); j++ {
		if sig > 0 {
			pred := k
			if ints[j-1] != 0 {
				pred = stepOf(ints[j-1], sig)
			}
			k = pred
			if ints[j] != 0 {
				k = stepOf(ints[j], sig)
			}
			switch {
			case k == pred:
				w.write(0b0, 1)
			case k+1 == pred:
				w.write(0b10, 2)
			case k == pred+1:
				w.write(0b110, 3)
			default:
				w.write(0b111, 3)
				w.write(k, 4)
			}
		}
		m := pow10i[k]
		z := zigzag(ints[j]/m - floorDiv(ints[j-1], m))
		r := st.param(m)
		if q := z >> r; j > 1 && q < riceEscape {
			w.write(1<<(q+1)-2, uint(q)+1) // q ones and a zero
			w.write(z, r)
		} else {
			if j > 1 {
				w.write(1<<riceEscape-1, riceEscape)
			}
			w.write(uint64(bitLen(z)), 6)
			w.write(z, bitLen(z))
		}
		st.update(z, m)
	}
}

// decodeDecimalSteps fills the values of pts from the code written by
// encodeDecimalSteps.
func decodeDecimalSteps(r *bitReader, pts []Point, n0 int64, p float64, sig int) error {
	n := n0
	pts[0].Value = float64(n) / p
	st := rice{n: 1}
	var k uint64
	for j := 1; j < len(pts); j++ {
		if sig > 0 {
			if n != 0 {
				k = stepOf(n, sig)
			}
			ones, err := r.unary(3)
			if err != nil {
				return fmt.Errorf("step of reading %d: %w", j, err)
			}
			switch ones {
			case 1:
				k-- // a wrap below 0 is caught below
			case 2:
				k++
			case 3:
				if k, err = r.read(4); err != nil {
					return fmt.Errorf("step of reading %d: %w", j, err)
				}
			}
			if k > maxStep {
				return fmt.Errorf("step of reading %d: 10^%d", j, int64(k))
			}
		}
		m := pow10i[k]
		rp := st.param(m)
		q := uint64(riceEscape) // the first residual is written in full
		if j > 1 {
			var err error
			if q, err = r.unary(riceEscape); err != nil {
				return fmt.Errorf("value of reading %d: %w", j, err)
			}
		}
		var z uint64
		if q < riceEscape {
			low, err := r.read(rp)
			if err != nil {
				return fmt.Errorf("value of reading %d: %w", j, err)
			}
			z = q<<rp | low
		} else {
			width, err := r.read(6)
			if err != nil {
				return fmt.Errorf("value of reading %d: %w", j, err)
			}
			if z, err = r.read(uint(width)); err != nil {
				return fmt.Errorf("value of reading %d: %w", j, err)
			}
		}
		st.update(z, m)
		n = (floorDiv(n, m) + unzigzag(z)) * m
		pts[j].Value = float64(n) / p
	}
	return nil
}
