package fatigue

import (
	"math"
	"math/rand/v2"
	"reflect"
	"sort"
	"testing"
)

// tally is a Recorder that adds the cycles up per range.
type tally map[float64]float64

func (t tally) Cycle(rng, count float64) { t[rng] += count }

// total counts everything a history gives: the closed cycles and the residue.
func total(xs []float64) tally {
	t := tally{}
	var c Counter
	c.Add(xs, t)
	c.Residue(t)
	return t
}

// TestASTMExample is the rainflow counting example of ASTM E1049-85, 5.4.4
// (loading -2, 1, -3, 5, -1, 3, -4, 4, -2), counts from memory: range 3: 0.5,
// 4: 1.5, 6: 0.5, 8: 1.0, 9: 0.5.
func TestASTMExample(t *testing.T) {
	got := total([]float64{-2, 1, -3, 5, -1, 3, -4, 4, -2})
	want := tally{3: 0.5, 4: 1.5, 6: 0.5, 8: 1.0, 9: 0.5}
	if !reflect.DeepEqual(got, want) {
		t.Fatalf("ASTM E1049-85 example: got %v, want %v", got, want)
	}
	// The same history sampled densely (straight lines between the turning
	// points, plateaus included) gives the same counts: only turning points matter.
	var dense []float64
	pts := []float64{-2, 1, -3, 5, -1, 3, -4, 4, -2}
	for i := 1; i < len(pts); i++ {
		for k := 0; k < 8; k++ {
			dense = append(dense, pts[i-1]+(pts[i]-pts[i-1])*float64(k)/8)
		}
		dense = append(dense, pts[i], pts[i]) // a plateau at the turning point
	}
	if got := total(dense); !reflect.DeepEqual(got, want) {
		t.Fatalf("densely sampled ASTM example: got %v, want %v", got, want)
	}
}

// TestClosedCyclesOnly checks what is closed before the residue: in the ASTM
// example the full cycle of range 4 (points -1, 3) and the half cycles that
// remove the starting point are closed while streaming.
func TestClosedCyclesOnly(t *testing.T) {
	closed := tally{}
	var c Counter
	c.Add([]float64{-2, 1, -3, 5, -1, 3, -4, 4, -2}, closed)
	// Hand-worked by the three-point rule of ASTM E1049-85 5.4.4: -2,1,-3 gives a
	// half cycle of 3; 1,-3,5 a half of 4; -1,3,-4 a full cycle of 4;
	// -3,5,-4 a half of 8; 5,-4,4 closes nothing; the last extreme -2 is
	// still provisional.
	want := tally{3: 0.5, 4: 1.5, 8: 0.5}
	if !reflect.DeepEqual(closed, want) {
		t.Fatalf("closed cycles: got %v, want %v", closed, want)
	}
	if c.ResidueLen() != 3 { // 5, -4, 4 on the stack; -2 is the running extreme
		t.Fatalf("residue has %d points, want 3", c.ResidueLen())
	}
}

// referenceRainflow is an independent, batch reading of ASTM E1049-85 5.4.4 on
// a whole history: reduce to peaks and valleys, then read them one by one
// with the three-point rule over an explicit list, then count the rest as
// halves.
func referenceRainflow(xs []float64) tally {
	var pv []float64
	for _, x := range xs {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			continue
		}
		if len(pv) > 0 && x == pv[len(pv)-1] {
			continue
		}
		if len(pv) >= 2 {
			a, b := pv[len(pv)-2], pv[len(pv)-1]
			if (b-a)*(x-b) > 0 { // same direction: b was not a turning point
				pv[len(pv)-1] = x
				continue
			}
		}
		pv = append(pv, x)
	}
	t := tally{}
	var list []float64
	for _, p := range pv {
		list = append(list, p)
		for len(list) >= 3 {
			n := len(list)
			x := math.Abs(list[n-1] - list[n-2])
			y := math.Abs(list[n-2] - list[n-3])
			if x < y {
				break
			}
			if n == 3 {
				t[y] += 0.5
				list = list[1:]
			} else {
				t[y]++
				list = append(list[:n-3], list[n-1])
			}
		}
	}
	for i := 1; i < len(list); i++ {
		t[math.Abs(list[i]-list[i-1])] += 0.5
	}
	return t
}

// randomHistory draws a history with plateaus, repeated values and a few
// non-finite samples, on a coarse grid so equal ranges recur.
func randomHistory(rng *rand.Rand, n int) []float64 {
	xs := make([]float64, n)
	for i := range xs {
		switch k := rng.IntN(40); {
		case k == 0:
			xs[i] = math.NaN()
		case k == 1:
			xs[i] = math.Inf(1 - 2*rng.IntN(2))
		case k < 8 && i > 0:
			xs[i] = xs[i-1]
		default:
			xs[i] = float64(rng.IntN(41)-20) * 0.25
		}
	}
	return xs
}

// TestStreamingEqualsOnePass: streaming in arbitrary chunks, with the state
// serialised and restored between chunks, gives exactly the counts of one
// pass, and both match the batch reference (seeded property test).
func TestStreamingEqualsOnePass(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 1049))
	for trial := 0; trial < 300; trial++ {
		xs := randomHistory(rng, 1+rng.IntN(400))
		one := total(xs)
		if ref := referenceRainflow(xs); !reflect.DeepEqual(one, ref) {
			t.Fatalf("trial %d: one pass %v, batch reference %v (history %v)", trial, one, ref, xs)
		}
		got := tally{}
		var c Counter
		for rest := xs; len(rest) > 0; {
			k := rng.IntN(len(rest) + 1)
			c.Add(rest[:k], got)
			rest = rest[k:]
			if rng.IntN(2) == 0 {
				b, err := c.MarshalBinary()
				if err != nil {
					t.Fatal(err)
				}
				var d Counter
				if err := d.UnmarshalBinary(b); err != nil {
					t.Fatalf("trial %d: restore: %v", trial, err)
				}
				c = d
			}
		}
		c.Residue(got)
		if !reflect.DeepEqual(got, one) {
			t.Fatalf("trial %d: chunked %v, one pass %v", trial, got, one)
		}
		finite := uint64(0)
		for _, x := range xs {
			if x-x == 0 {
				finite++
			}
		}
		if c.Samples() != finite || c.Samples()+c.Skipped() != uint64(len(xs)) {
			t.Fatalf("trial %d: samples %d skipped %d, want %d finite of %d", trial, c.Samples(), c.Skipped(), finite, len(xs))
		}
	}
}

// TestCycleBalance: every turning point but the first and last appears in two
// ranges, so for a history of turning points the total counted "range time
// cycles" obeys sum(count) = (points-1)/2 (each range counted as half cycles
// adds up to the number of reversals). Checked on random histories.
func TestCycleBalance(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for trial := 0; trial < 100; trial++ {
		n := 2 + rng.IntN(300)
		xs := make([]float64, n)
		for i := range xs { // strictly alternating: every sample is a turning point
			xs[i] = float64(i%2)*10 + rng.Float64()*9.9
		}
		var sum float64
		for _, c := range total(xs) {
			sum += c
		}
		if want := float64(n-1) / 2; sum != want {
			t.Fatalf("trial %d: %g cycles from %d reversals, want %g", trial, sum, n, want)
		}
	}
}

func TestUnmarshalRejects(t *testing.T) {
	var c Counter
	c.Add([]float64{0, 3, -1, 2}, tally{})
	good, _ := c.MarshalBinary()
	bad := [][]byte{nil, good[:10], append([]byte{9}, good[1:]...), append(append([]byte{}, good...), 0)}
	nan := append([]byte{}, good...)
	copy(nan[len(nan)-8:], []byte{0, 0, 0, 0, 0, 0, 0xf8, 0x7f})
	bad = append(bad, nan)
	for i, b := range bad {
		var d Counter
		if err := d.UnmarshalBinary(b); err == nil {
			t.Errorf("case %d: state %x accepted", i, b)
		}
	}
}

// FuzzCounter: for any history (bytes read as small integers and special
// values) and any chunking, the streaming counter never panics, matches the
// batch reference, and its counts survive a serialise/restore.
func FuzzCounter(f *testing.F) {
	f.Add([]byte{0, 9, 1, 13, 5, 11, 2, 12, 4}, uint8(3))
	f.Add([]byte{255, 254, 1, 1, 1}, uint8(1))
	f.Fuzz(func(t *testing.T, data []byte, chunk uint8) {
		xs := make([]float64, len(data))
		for i, b := range data {
			switch b {
			case 255:
				xs[i] = math.NaN()
			case 254:
				xs[i] = math.Inf(1)
			default:
				xs[i] = float64(int(b) - 120)
			}
		}
		ref := referenceRainflow(xs)
		got := tally{}
		var c Counter
		k := int(chunk%17) + 1
		for i := 0; i < len(xs); i += k {
			c.Add(xs[i:min(i+k, len(xs))], got)
			b, _ := c.MarshalBinary()
			if err := c.UnmarshalBinary(b); err != nil {
				t.Fatal(err)
			}
		}
		c.Residue(got)
		if !reflect.DeepEqual(got, ref) {
			keys := func(m tally) []float64 {
				var k []float64
				for r := range m {
					k = append(k, r)
				}
				sort.Float64s(k)
				return k
			}
			t.Fatalf("chunk %d: got %v (%v), reference %v (%v)", k, got, keys(got), ref, keys(ref))
		}
	})
}

// FuzzUnmarshal: any bytes either restore a counter that then works, or are
// rejected with an error; never a panic.
func FuzzUnmarshal(f *testing.F) {
	var c Counter
	c.Add([]float64{0, 3, -1, 2, -5}, tally{})
	b, _ := c.MarshalBinary()
	f.Add(b)
	f.Fuzz(func(t *testing.T, b []byte) {
		var d Counter
		if d.UnmarshalBinary(b) != nil {
			return
		}
		d.Add([]float64{1, -1, 2, -2}, tally{})
		d.Residue(tally{})
	})
}
