package simulate

import (
	"math"
	"strconv"
	"testing"
	"time"
)

// TestQuantise checks Options.Quantise on both example structures: every
// reading is the float64 of a decimal with its unit's number of decimals
// (printing it with that many decimals and parsing it back gives the same
// bits, and a reading that rounds to zero is +0, as a logger prints it),
// it is the unquantised reading of the same seed rounded to the
// nearest step, and the step is finer than the channel's noise (estimated
// from the differences of successive readings at 1 s at night, when
// nothing but noise and the slow temperature moves them).
func TestQuantise(t *testing.T) {
	for _, tc := range []struct{ name, structure, sensors string }{
		{"footbridge", footStruct, footSensors},
		{"roof", roofStruct, roofSensors},
	} {
		t.Run(tc.name, func(t *testing.T) {
			st, sm := load(t, tc.structure, tc.sensors)
			opt := DefaultOptions()
			opt.Start = time.Date(2026, 6, 1, 2, 0, 0, 0, time.UTC)
			opt.Duration = 10 * time.Minute
			opt.BadRate = 0
			plain, err := New(st, sm, opt)
			if err != nil {
				t.Fatal(err)
			}
			opt.Quantise = true
			quant, err := New(st, sm, opt)
			if err != nil {
				t.Fatal(err)
			}
			ps, qs := collect(t, plain), collect(t, quant)
			if len(ps) != len(qs) || len(ps) != 600 {
				t.Fatalf("%d and %d steps, want 600", len(ps), len(qs))
			}
			type acc struct {
				unit     string
				sum2     float64
				n        int
				prev     float64
				havePrev bool
			}
			chans := map[string]*acc{}
			for k := range ps {
				if len(ps[k].Readings) != len(qs[k].Readings) {
					t.Fatalf("step %d: %d and %d readings", k, len(ps[k].Readings), len(qs[k].Readings))
				}
				for i, q := range qs[k].Readings {
					p := ps[k].Readings[i]
					d, ok := LoggerResolution(q.Unit)
					if !ok {
						t.Fatalf("channel %s: unit %q has no resolution", q.Channel, q.Unit)
					}
					s := strconv.FormatFloat(q.Value, 'f', d, 64)
					back, err := strconv.ParseFloat(s, 64)
					if err != nil || math.Float64bits(back) != math.Float64bits(q.Value) {
						t.Fatalf("step %d channel %s: %v printed with %d decimals is %s, parsed back %v", k, q.Channel, q.Value, d, s, back)
					}
					if q.Value == 0 && math.Signbit(q.Value) {
						t.Fatalf("step %d channel %s: quantised %v to a negative zero; a logger prints 0", k, q.Channel, p.Value)
					}
					step := math.Pow10(-d)
					if math.Abs(q.Value-p.Value) > step/2*(1+1e-9) {
						t.Fatalf("step %d channel %s: quantised %v is %g from the reading %v, more than half the step %g", k, q.Channel, q.Value, q.Value-p.Value, p.Value, step)
					}
					a := chans[q.Channel]
					if a == nil {
						a = &acc{unit: q.Unit}
						chans[q.Channel] = a
					}
					if a.havePrev {
						a.sum2 += (p.Value - a.prev) * (p.Value - a.prev)
						a.n++
					}
					a.prev, a.havePrev = p.Value, true
				}
			}
			for id, a := range chans {
				if a.unit == "count" {
					continue
				}
				d, _ := LoggerResolution(a.unit)
				sigma := math.Sqrt(a.sum2/float64(a.n)) / math.Sqrt2
				ratio := sigma / math.Pow10(-d)
				t.Logf("%-12s %-4s noise %.3g, resolution 1e-%d, noise/resolution %.1f", id, a.unit, sigma, d, ratio)
				if ratio < 2 {
					t.Errorf("channel %s (%s): resolution 1e-%d is not finer than half the noise %.3g", id, a.unit, d, sigma)
				}
			}
		})
	}
}

// TestQuantiseUnknownUnit checks that a unit with no stated resolution is
// not quantised silently.
func TestQuantiseUnknownUnit(t *testing.T) {
	if _, ok := LoggerResolution("kPa"); ok {
		t.Fatal("kPa has a resolution; this test needs a unit without one")
	}
	_, err := resolutionOf("pressure_1", "kPa")
	if err == nil {
		t.Fatal("no error for a unit without a resolution")
	}
	t.Log(err)
}
