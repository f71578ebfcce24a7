package fatiguetrack

import (
	"context"
	"math"
	"math/rand/v2"
	"path/filepath"
	"reflect"
	"testing"
	"time"

	"trussmonitor/internal/fatigue"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
)

// linear is a Stresser: stress = e * (raw - zero) for every channel.
type linear struct{ e, zero float64 }

func (l linear) Stress(_ string, raw float64) (float64, error) { return l.e * (raw - l.zero), nil }

func detail(t *testing.T, start time.Time) sensors.Fatigue {
	c, err := fatigue.NewCurve(71, 1, 1.15)
	if err != nil {
		t.Fatal(err)
	}
	return sensors.Fatigue{Curve: c, Start: start}
}

type countObs struct{ cycles map[string]float64 }

func (o *countObs) FatigueCounted(_, g string, cycles, _ float64) { o.cycles[g] += cycles }

// TestRestartContinuesExactly: readings committed in groups (with
// redeliveries and an out-of-order straggler), the process "restarted"
// (a new tracker restored from the store) several times; the stored hourly
// histograms plus the final residue equal one rainflow pass over the whole
// stress history, bin for bin.
func TestRestartContinuesExactly(t *testing.T) {
	ctx := context.Background()
	st, err := store.Open(filepath.Join(t.TempDir(), "m.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	src := linear{e: 210e9, zero: 1e-5}
	gauges := []sensors.FatigueGauge{{Channel: "g1", Member: "B1", E: 210e9, Fatigue: detail(t, time.Time{})},
		{Channel: "g2", Member: "B1", E: 210e9, Fatigue: detail(t, time.Time{})}}
	newTracker := func() *Tracker {
		tr := New(&countObs{cycles: map[string]float64{}})
		tr.Add("bridge", src, gauges)
		if err := tr.Load(ctx, st); err != nil {
			t.Fatal(err)
		}
		return tr
	}
	rng := rand.New(rand.NewPCG(5, 6))
	t0 := time.Date(2026, 3, 1, 22, 40, 0, 0, time.UTC)
	const n = 20000 // 4 Hz from 22:40 to 00:03: three hours, two boundaries
	step := 250 * time.Millisecond
	raw := map[string][]float64{}
	var all []store.Reading
	for i := 0; i < n; i++ {
		for _, ch := range []string{"g1", "g2", "other"} {
			v := 1e-5 + 2e-4*math.Sin(float64(i)/7) + 5e-5*rng.NormFloat64()
			all = append(all, store.Reading{Channel: ch, Time: t0.Add(time.Duration(i) * step), Value: v})
			raw[ch] = append(raw[ch], v)
		}
	}
	tr := newTracker()
	for pos := 0; pos < len(all); {
		k := min(len(all)-pos, 1+rng.IntN(900))
		grp := append([]store.Reading(nil), all[pos:pos+k]...)
		if pos > 0 && rng.IntN(3) == 0 { // a redelivery of earlier readings in the same batch
			grp = append(all[pos-1-rng.IntN(min(pos, 50)):pos:pos], grp...)
		}
		b := store.Batch{Groups: []store.Group{{Structure: "bridge", Readings: grp}}}
		var apply func()
		b.Fatigue = func(r store.CommitResult) ([]store.FatigueUpdate, error) {
			ups, a, err := tr.Stage(b.Groups, r)
			apply = a
			return ups, err
		}
		if _, err := st.Commit(ctx, b); err != nil {
			t.Fatal(err)
		}
		apply()
		pos += k
		if rng.IntN(4) == 0 {
			tr = newTracker() // restart
		}
	}
	for _, ch := range []string{"g1", "g2"} {
		// One pass over the stress history.
		var want fatigue.Histogram
		var c fatigue.Counter
		xs := make([]float64, len(raw[ch]))
		for i, v := range raw[ch] {
			xs[i], _ = src.Stress(ch, v)
		}
		c.Add(xs, &want)
		c.Residue(&want)
		// Stored hours, plus the residue of the restored counter.
		hours, err := st.FatigueHours(ctx, "bridge", ch, t0.Add(-time.Hour), t0.Add(24*time.Hour))
		if err != nil {
			t.Fatal(err)
		}
		if len(hours) != 3 {
			t.Errorf("%s: %d hours stored, want 3 (22:00, 23:00, 00:00)", ch, len(hours))
		}
		var got fatigue.Histogram
		for _, h := range hours {
			got.Merge(HistogramOf(h.Bins))
		}
		tr2 := newTracker()
		var rc fatigue.Counter
		states, _ := st.FatigueStates(ctx, "bridge")
		for _, s := range states {
			if s.Channel == ch {
				if err := rc.UnmarshalBinary(s.State); err != nil {
					t.Fatal(err)
				}
			}
		}
		rc.Residue(&got)
		if !reflect.DeepEqual(got.Bins(), want.Bins()) {
			t.Errorf("%s: stored + residue %v\n one pass %v", ch, got.Bins(), want.Bins())
		}
		// Recounting the raw readings gives the same histogram (its residue
		// closes at the end of the record, like the direct count).
		raw, err := LivesFromRaw(ctx, st, "bridge", src, gauges[:1], t0, t0.Add(24*time.Hour))
		if err != nil {
			t.Fatal(err)
		}
		if ch == "g1" && !reflect.DeepEqual(raw[0].Hist.Bins(), want.Bins()) {
			t.Errorf("%s: raw recount %v\n one pass %v", ch, raw[0].Hist.Bins(), want.Bins())
		}
		// The restored tracker's damage is the Miner sum of the stored hours.
		var d float64
		for _, h := range hours {
			d += gauges[0].Fatigue.Curve.HistogramDamage(HistogramOf(h.Bins))
		}
		for _, g := range tr2.Gauges() {
			if g.Channel == ch && g.DamageTotal != d {
				t.Errorf("%s: restored damage %g, stored hours give %g", ch, g.DamageTotal, d)
			}
		}
	}
	if chs, _ := st.FatigueChannels(ctx, "bridge"); !reflect.DeepEqual(chs, []string{"g1", "g2"}) {
		t.Errorf("fatigue channels %v", chs)
	}
}

// TestLateSamplesLeftOut: a sample older than the last one counted is
// stored raw but not counted (the counter cannot go back in time).
func TestLateSamplesLeftOut(t *testing.T) {
	tr := New(nil)
	tr.Add("b", linear{e: 1}, []sensors.FatigueGauge{{Channel: "g", Fatigue: detail(t, time.Time{})}})
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	mk := func(sec int, v float64) store.Group {
		return store.Group{Structure: "b", Readings: []store.Reading{{Channel: "g", Time: t0.Add(time.Duration(sec) * time.Second), Value: v}}}
	}
	_, apply, _ := tr.Stage([]store.Group{mk(10, 1), mk(11, 5)}, store.CommitResult{})
	apply()
	ups, apply, _ := tr.Stage([]store.Group{mk(9, 3)}, store.CommitResult{})
	apply()
	if len(ups) != 0 {
		t.Errorf("late sample produced updates %+v", ups)
	}
	if g := tr.Gauges()[0]; g.Late != 1 || !g.LastTime.Equal(t0.Add(11*time.Second)) {
		t.Errorf("status %+v", g)
	}
}
