package epoch

import (
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
	"sort"
	"strings"
	"testing"
	"time"
)

var t0 = time.Date(2026, 3, 1, 12, 0, 0, 0, time.UTC)

func at(ms int) time.Time { return t0.Add(time.Duration(ms) * time.Millisecond) }

func mustNew(t *testing.T, cfg Config, clock func() time.Time) *Assembler {
	t.Helper()
	if cfg.Structure == "" {
		cfg.Structure = "alder-creek"
	}
	if cfg.Window == 0 {
		cfg.Window = time.Second
	}
	if cfg.Expected == nil {
		cfg.Expected = []string{"g1", "g2", "t1"}
	}
	a, err := New(cfg, clock, nil)
	if err != nil {
		t.Fatal(err)
	}
	return a
}

// describe renders epochs compactly for comparison.
func describe(es []Epoch) string {
	var parts []string
	for _, e := range es {
		var ch []string
		for _, c := range e.Channels {
			ch = append(ch, fmt.Sprintf("%s=%g/%d", c.Channel, c.Mean, c.N))
		}
		s := fmt.Sprintf("%s %s [%s]", e.Start.Format("05.000"), e.Reason, strings.Join(ch, " "))
		if len(e.Missing) > 0 {
			s += " missing " + strings.Join(e.Missing, ",")
		}
		if len(e.Short) > 0 {
			s += " short " + strings.Join(e.Short, ",")
		}
		parts = append(parts, s)
	}
	return strings.Join(parts, "; ")
}

func TestAssembler(t *testing.T) {
	type in struct {
		ch string
		ms int
		v  float64
	}
	cases := []struct {
		name    string
		cfg     Config
		input   []in
		want    string // epochs after the input, before Flush
		flushed string // epochs from Flush
		late    int64
	}{
		{
			name:  "complete epoch closes at once, values averaged",
			cfg:   Config{MaxLateness: 5 * time.Second},
			input: []in{{"g1", 100, 1}, {"g1", 200, 3}, {"g2", 300, 10}, {"t1", 900, 20}},
			want:  "00.000 complete [g1=2/2 g2=10/1 t1=20/1]",
		},
		{
			name:    "missing channel: closes on the watermark",
			cfg:     Config{MaxLateness: 2 * time.Second},
			input:   []in{{"g1", 100, 1}, {"t1", 200, 5}, {"g1", 1500, 2}, {"g1", 2999, 3}, {"g1", 3000, 4}},
			want:    "00.000 watermark [g1=1/1 t1=5/1] missing g2",
			flushed: "01.000 flush [g1=2/1] missing g2,t1; 02.000 flush [g1=3/1] missing g2,t1; 03.000 flush [g1=4/1] missing g2,t1",
		},
		{
			name:  "late reading for a closed epoch is counted, not assembled",
			cfg:   Config{MaxLateness: time.Second},
			input: []in{{"g1", 100, 1}, {"g2", 100, 2}, {"t1", 100, 3}, {"g2", 500, 99}},
			want:  "00.000 complete [g1=1/1 g2=2/1 t1=3/1]",
			late:  1,
		},
		{
			name:  "complete epoch waits behind an earlier open one",
			cfg:   Config{MaxLateness: 10 * time.Second},
			input: []in{{"g1", 100, 1}, {"g1", 1100, 2}, {"g2", 1100, 2}, {"t1", 1100, 2}, {"g2", 200, 1}, {"t1", 300, 1}},
			want:  "00.000 complete [g1=1/1 g2=1/1 t1=1/1]; 01.000 complete [g1=2/1 g2=2/1 t1=2/1]",
		},
		{
			name:    "out-of-order readings within lateness join their epoch",
			cfg:     Config{MaxLateness: 3 * time.Second},
			input:   []in{{"g1", 2500, 5}, {"g1", 400, 1}, {"g1", 1400, 3}, {"g1", 300, 3}},
			flushed: "00.000 flush [g1=2/2] missing g2,t1; 01.000 flush [g1=3/1] missing g2,t1; 02.000 flush [g1=5/1] missing g2,t1",
		},
		{
			name:    "expected samples: short channel reported",
			cfg:     Config{MaxLateness: time.Second, ExpectedSamples: 2},
			input:   []in{{"g1", 0, 1}, {"g1", 500, 2}, {"g2", 0, 1}, {"t1", 0, 1}, {"t1", 500, 1}},
			flushed: "00.000 flush [g1=1.5/2 g2=1/1 t1=1/2] short g2",
		},
		{
			name:  "negative times (before 1970) floor correctly",
			cfg:   Config{MaxLateness: 0, Expected: []string{"g1"}},
			input: []in{{"g1", -int(t0.UnixMilli()) - 500, 7}},
			want:  "59.000 complete [g1=7/1]",
		},
		{
			name:  "unknown channel and NaN ignored",
			cfg:   Config{Expected: []string{"g1"}},
			input: []in{{"zz", 0, 1}, {"g1", 0, math.NaN()}, {"g1", 10, 4}},
			want:  "00.000 complete [g1=4/1]",
		},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			a := mustNew(t, c.cfg, nil)
			var got []Epoch
			for _, r := range c.input {
				got = append(got, a.Add(Sample{r.ch, at(r.ms), r.v})...)
			}
			if d := describe(got); d != c.want {
				t.Errorf("epochs\n got %s\nwant %s", d, c.want)
			}
			if d := describe(a.Flush()); d != c.flushed {
				t.Errorf("flushed\n got %s\nwant %s", d, c.flushed)
			}
			if s := a.Stats(); s.Late != c.late {
				t.Errorf("late = %d, want %d", s.Late, c.late)
			}
		})
	}
}

func TestIdleFlushAndSkew(t *testing.T) {
	now := t0
	clock := func() time.Time { return now } // injected receiver clock
	a := mustNew(t, Config{MaxLateness: 2 * time.Second, IdleFlush: 5 * time.Second,
		MaxFuture: time.Minute, MaxPast: time.Hour}, clock)
	a.Add(Sample{"g1", at(100), 1})
	if es := a.Tick(); len(es) != 0 {
		t.Fatalf("closed too early: %s", describe(es))
	}
	now = t0.Add(5*time.Second + 999*time.Millisecond)
	if es := a.Tick(); len(es) != 0 {
		t.Fatalf("closed before end+IdleFlush: %s", describe(es))
	}
	now = t0.Add(6 * time.Second)
	es := a.Tick()
	if describe(es) != "00.000 idle [g1=1/1] missing g2,t1" {
		t.Fatalf("idle flush: %s", describe(es))
	}
	// A reading for the flushed epoch is now late.
	a.Add(Sample{"g2", at(200), 1})
	// Clock skew: a logger a day ahead must not move the watermark.
	a.Add(Sample{"g1", now.Add(24 * time.Hour), 1})
	a.Add(Sample{"g1", now.Add(-2 * time.Hour), 1})
	a.Add(Sample{"g1", now.Add(30 * time.Second), 1}) // within MaxFuture
	s := a.Stats()
	if s.Late != 1 || s.Future != 1 || s.Past != 1 || s.Readings != 2 || s.LateByChannel["g2"] != 1 {
		t.Fatalf("stats %+v", s)
	}
	if a.Open() != 1 {
		t.Fatalf("%d epochs open, want 1 (the skewed reading must not close or open any)", a.Open())
	}
}

func TestConfigErrors(t *testing.T) {
	for name, cfg := range map[string]Config{
		"zero window":                      {Expected: []string{"a"}},
		"negative latency":                 {Window: time.Second, MaxLateness: -1, Expected: []string{"a"}},
		"no channels":                      {Window: time.Second},
		"duplicate":                        {Window: time.Second, Expected: []string{"a", "a"}},
		"samples of an unexpected channel": {Window: time.Second, Expected: []string{"a"}, SamplesPerChannel: map[string]int{"b": 5}},
		"zero samples":                     {Window: time.Second, Expected: []string{"a"}, SamplesPerChannel: map[string]int{"a": 0}},
	} {
		if _, err := New(cfg, nil, nil); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
}

// Determinism: the same readings in the same order give the same epochs,
// and every reading is either assembled or counted late.
func TestDeterministic(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	chans := []string{"g1", "g2", "g3", "t1"}
	var rs []Sample
	for i := range 20000 {
		c := chans[rng.IntN(len(chans))]
		if rng.IntN(50) == 0 {
			continue // a gap
		}
		jitter := rng.IntN(3000) - 1500 // out of order by up to 1.5 s
		rs = append(rs, Sample{c, at(i*2 + jitter), rng.NormFloat64()})
	}
	run := func() ([]Epoch, Stats) {
		a := mustNew(t, Config{MaxLateness: time.Second, Expected: chans, ExpectedSamples: 100}, nil)
		var out []Epoch
		for _, r := range rs {
			out = append(out, a.Add(r)...)
		}
		return append(out, a.Flush()...), a.Stats()
	}
	e1, s1 := run()
	e2, s2 := run()
	if !reflect.DeepEqual(e1, e2) || !reflect.DeepEqual(s1, s2) {
		t.Fatal("two runs over the same input differ")
	}
	n := 0
	for i, e := range e1 {
		if i > 0 && !e.Start.After(e1[i-1].Start) {
			t.Fatalf("epochs out of order at %d", i)
		}
		for _, c := range e.Channels {
			n += c.N
		}
	}
	if int64(n) != s1.Readings || s1.Readings+s1.Late != int64(len(rs)) {
		t.Fatalf("assembled %d + late %d != %d readings (stats say %d assembled)", n, s1.Late, len(rs), s1.Readings)
	}
	t.Logf("%d readings -> %d epochs (%d incomplete), %d late", len(rs), len(e1), s1.Incomplete, s1.Late)
}

func ExampleAssembler() {
	a, _ := New(Config{
		Structure:   "alder-creek",
		Window:      time.Second,
		MaxLateness: 2 * time.Second,
		Expected:    []string{"g1", "g2"},
	}, nil, nil)
	t0 := time.Date(2026, 3, 1, 12, 0, 0, 0, time.UTC)
	a.Add(Sample{"g1", t0.Add(100 * time.Millisecond), 101.0})
	a.Add(Sample{"g1", t0.Add(600 * time.Millisecond), 103.0})
	for _, e := range a.Add(Sample{"g2", t0.Add(700 * time.Millisecond), -40.0}) {
		g1, _ := e.Mean("g1")
		g2, _ := e.Mean("g2")
		fmt.Println(e.Start.Format(time.TimeOnly), e.Reason, g1, g2)
	}
	// Output: 12:00:00 complete 102 -40
}

// TestHighRateChannels: channels sampled at 1, 10 and 50 Hz with a 1 s
// window (DESIGN.md, Epochs). Every sample of the window is averaged, none
// counts as late, and an epoch closes as soon as each channel delivered its
// expected count (rate x window). The expected mean is the arithmetic mean
// of the samples computed here, independently of the assembler.
func TestHighRateChannels(t *testing.T) {
	rates := map[string]int{"g1": 50, "g2": 10, "t1": 1}
	for _, tc := range []struct {
		name     string
		channels []string
	}{
		{"1 Hz", []string{"t1"}},
		{"10 Hz", []string{"g2"}},
		{"50 Hz", []string{"g1"}},
		{"1, 10 and 50 Hz together", []string{"g1", "g2", "t1"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			per := map[string]int{}
			for _, c := range tc.channels {
				per[c] = rates[c]
			}
			a := mustNew(t, Config{Expected: tc.channels, SamplesPerChannel: per, MaxLateness: 3 * time.Second}, nil)
			rng := rand.New(rand.NewPCG(7, 9))
			type sample struct {
				ch string
				ns int64
				v  float64
			}
			const seconds = 6
			var in []sample
			sums := map[string][]float64{} // per channel, per second
			for _, c := range tc.channels {
				sums[c] = make([]float64, seconds)
				step := int64(time.Second) / int64(rates[c])
				for k := int64(0); k < seconds*int64(rates[c]); k++ {
					ns := k * step
					v := 1e-4*math.Sin(float64(ns)/3e8) + 1e-6*rng.NormFloat64()
					in = append(in, sample{c, ns, v})
					sums[c][ns/int64(time.Second)] += v
				}
			}
			// Loggers deliver channels interleaved in time order.
			sort.SliceStable(in, func(i, j int) bool { return in[i].ns < in[j].ns })
			var out []Epoch
			for _, s := range in {
				out = append(out, a.Add(Sample{Channel: s.ch, Time: t0.Add(time.Duration(s.ns)), Value: s.v})...)
			}
			closedEarly := len(out)
			out = append(out, a.Flush()...)
			st := a.Stats()
			if st.Late != 0 {
				t.Errorf("%d readings counted late (by channel %v), want 0", st.Late, st.LateByChannel)
			}
			if st.Readings != int64(len(in)) {
				t.Errorf("%d readings assembled, want %d", st.Readings, len(in))
			}
			if len(out) != seconds {
				t.Fatalf("%d epochs, want %d: %s", len(out), seconds, describe(out))
			}
			// The watermark (3 s) cannot close the last three epochs; they
			// close complete as their last sample arrives.
			if closedEarly != seconds {
				t.Errorf("%d epochs closed before the flush, want %d (complete): %s", closedEarly, seconds, describe(out))
			}
			for i, e := range out {
				if len(e.Missing)+len(e.Short) > 0 {
					t.Errorf("epoch %d: missing %v short %v", i, e.Missing, e.Short)
				}
				for _, c := range tc.channels {
					want := sums[c][i] / float64(rates[c])
					got, ok := e.Mean(c)
					if !ok || math.Abs(got-want) > 1e-12*math.Abs(want)+1e-20 {
						t.Errorf("epoch %d channel %s: mean %g, want %g (mean of its %d samples)", i, c, got, want, rates[c])
					}
					n := e.Channels[slices.IndexFunc(e.Channels, func(m ChannelMean) bool { return m.Channel == c })].N
					if n != rates[c] {
						t.Errorf("epoch %d channel %s: %d samples averaged, want %d", i, c, n, rates[c])
					}
				}
				if e.Reason != ClosedComplete && e.Reason != ClosedWatermark {
					t.Errorf("epoch %d closed by %s", i, e.Reason)
				}
			}
		})
	}
}

// BenchmarkAssemble100Channels: readings of 100 channels at one a second
// into 1 s epochs, in time and channel order (as a replay feeds them);
// reports readings per second.
func BenchmarkAssemble100Channels(b *testing.B) {
	var chans []string
	for i := range 100 {
		chans = append(chans, fmt.Sprintf("ch%03d", i))
	}
	a, err := New(Config{Structure: "s", Window: time.Second, MaxLateness: 2 * time.Second, Expected: chans}, nil, nil)
	if err != nil {
		b.Fatal(err)
	}
	t0 := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	n := 0
	b.ReportAllocs()
	for b.Loop() {
		sec := n / len(chans)
		a.Add(Sample{Channel: chans[n%len(chans)], Time: t0.Add(time.Duration(sec) * time.Second), Value: float64(n)})
		n++
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}
