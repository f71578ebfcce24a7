package simulate

import (
	"math"
	"reflect"
	"testing"
	"time"
)

// TestHighRate: the record is reproducible, its stress is what the sensor
// map reads back from the raw readings (E x converted strain), the vehicle
// alone gives the statics of a point load moving over the deck, and bad
// settings are refused.
func TestHighRate(t *testing.T) {
	opt := DefaultOptions()
	opt.Start = time.Date(2026, 6, 1, 8, 0, 0, 0, time.UTC)
	opt.Duration = 5 * time.Minute
	g := newGen(t, opt)
	hr := DefaultHighRate()
	hr.Vehicle.CrossingsPerDay = 24 * 60
	collectPacks := func(g *Generator, hr HighRate) []HighRatePack {
		var out []HighRatePack
		for p, err := range g.HighRate(hr) {
			if err != nil {
				t.Fatal(err)
			}
			out = append(out, p)
		}
		return out
	}
	a, b := collectPacks(g, hr), collectPacks(g, hr)
	if len(a) != 300 || len(a[0].Times) != 50 || !reflect.DeepEqual(a, b) {
		t.Fatalf("%d packs of %d samples; identical twice: %v", len(a), len(a[0].Times), reflect.DeepEqual(a, b))
	}
	if !reflect.DeepEqual(a[0].Channels, []string{"B4_a", "B4_b", "D1_a", "D1_b"}) || !a[1].Times[0].Equal(opt.Start.Add(time.Second)) {
		t.Fatalf("channels %v, second pack at %v", a[0].Channels, a[1].Times[0])
	}
	var maxS float64
	for _, p := range a {
		for i := range p.Times {
			for k, ch := range p.Channels {
				s, err := g.sm.Stress(ch, p.Raw[i][k])
				if err != nil {
					t.Fatal(err)
				}
				if d := math.Abs(s - p.Stress[i][k]); d > 1e-9*math.Max(math.Abs(p.Stress[i][k]), 1e6) {
					t.Fatalf("%s at %v: stress %g, the map reads %g back", ch, p.Times[i], p.Stress[i][k], s)
				}
				maxS = math.Max(maxS, math.Abs(p.Stress[i][k]))
			}
		}
	}
	if maxS < 20e6 {
		t.Errorf("largest stress %.1f MPa: the service vehicle should load the gauged members by tens of MPa", maxS/1e6)
	}

	// The vehicle alone, noise-free: the stress at D1_a is zero while the
	// vehicle is off the deck (before its first crossing).
	opt.Traffic.PeakRate = 0
	g2 := newGen(t, opt)
	for i := range g2.chans {
		g2.chans[i].ch.Noise = 0
	}
	quiet := collectPacks(g2, hr)
	if s := quiet[0].Stress[0][2]; math.Abs(s) > 1e-6 {
		t.Errorf("stress before any load %g Pa", s)
	}

	for _, bad := range []HighRate{{Interval: 0, PackSpan: time.Second}, {Interval: 1500 * time.Nanosecond, PackSpan: time.Second},
		{Interval: 20 * time.Millisecond, PackSpan: time.Millisecond}, {Interval: 20 * time.Millisecond, PackSpan: time.Second, Channels: []string{"pad_1"}}} {
		for _, err := range g.HighRate(bad) {
			if err == nil {
				t.Errorf("%+v accepted", bad)
			}
			break
		}
	}
}
