package simulate

import (
	"math"
	"strings"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat/distuv"

	"trussmonitor/internal/instrumented"
	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
)

const (
	footStruct  = "../../testdata/footbridge/structure.yaml"
	footSensors = "../../testdata/footbridge/sensors.yaml"
	roofStruct  = "../../testdata/roof/structure.yaml"
	roofSensors = "../../testdata/roof/sensors.yaml"
)

func load(t testing.TB, structure, sensorMap string) (*model.Structure, *sensors.Map) {
	t.Helper()
	pair, err := instrumented.Load(structure, sensorMap)
	if err != nil {
		t.Fatal(err)
	}
	st, sm := pair.Structure, pair.Sensors
	return st, sm
}

func newGen(t testing.TB, opt Options, faults ...string) *Generator {
	t.Helper()
	st, sm := load(t, footStruct, footSensors)
	for _, f := range faults {
		ft, err := ParseFault(f)
		if err != nil {
			t.Fatal(err)
		}
		opt.Faults = append(opt.Faults, ft)
	}
	g, err := New(st, sm, opt)
	if err != nil {
		t.Fatal(err)
	}
	return g
}

func collect(t testing.TB, g *Generator) []Step {
	t.Helper()
	var out []Step
	for st, err := range g.All() {
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, st)
	}
	return out
}

func sameFloat(a, b float64) bool {
	return a == b || (math.IsNaN(a) && math.IsNaN(b))
}

func sameSteps(a, b []Step) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if !a[i].Time.Equal(b[i].Time) || len(a[i].Readings) != len(b[i].Readings) || len(a[i].Bad) != len(b[i].Bad) {
			return false
		}
		for k, r := range a[i].Readings {
			q := b[i].Readings[k]
			if r.Channel != q.Channel || r.Unit != q.Unit || !sameFloat(r.Value, q.Value) {
				return false
			}
		}
		for k, r := range a[i].Bad {
			q := b[i].Bad[k]
			if r.Channel != q.Channel || r.Unit != q.Unit || r.Defect != q.Defect || !sameFloat(r.Value, q.Value) {
				return false
			}
		}
	}
	return true
}

func TestDeterministic(t *testing.T) {
	opt := DefaultOptions()
	opt.Duration = 2 * time.Hour
	opt.Start = time.Date(2026, 6, 1, 7, 0, 0, 0, time.UTC)
	opt.Rate = 5 * time.Second
	opt.BadRate = 0.01
	faults := []string{"stiffness:D2:30m:0.3", "drift:B4_a:10m:50e-6/h", "stuck:T4_a:1h", "settlement:L8:90m:5mm"}
	a := collect(t, newGen(t, opt, faults...))
	g := newGen(t, opt, faults...)
	b := collect(t, g)
	if !sameSteps(a, b) {
		t.Fatal("two generators with the same seed and options gave different steps")
	}
	if c := collect(t, g); !sameSteps(a, c) {
		t.Fatal("ranging twice over one generator gave different steps")
	}
	opt.Seed = 2
	if d := collect(t, newGen(t, opt, faults...)); sameSteps(a, d) {
		t.Fatal("seeds 1 and 2 gave identical steps")
	}
	if len(a) != 1440 || !a[1].Time.Equal(opt.Start.Add(5*time.Second)) {
		t.Fatalf("got %d steps, second at %s; want 1440 at 5 s intervals", len(a), a[1].Time)
	}
}

// TestNoiseStatistics converts the raw readings back with the sensor map's
// own forward calibration and checks that the noise about the truth has the
// declared standard deviation: (n-1) s^2 / sigma^2 is chi-square with n-1
// degrees of freedom for normal noise (any statistics text, e.g. Montgomery
// and Runger, Applied Statistics and Probability for Engineers, 6th ed.,
// section 8.3), tested two-sided at 1e-4 per channel.
func TestNoiseStatistics(t *testing.T) {
	opt := DefaultOptions()
	opt.Duration = 3 * time.Hour
	opt.Start = time.Date(2026, 6, 1, 10, 0, 0, 0, time.UTC) // sun, pedestrians
	opt.Rate = 3 * time.Second
	opt.BadRate = 0
	g := newGen(t, opt)
	st, sm := load(t, footStruct, footSensors)
	_ = st
	chs := g.Channels()
	index := map[string]int{}
	for i, c := range chs {
		index[c.ID] = i
	}
	n := 0
	sum := make([]float64, len(chs))
	sum2 := make([]float64, len(chs))
	for s, err := range g.All() {
		if err != nil {
			t.Fatal(err)
		}
		n++
		for i, c := range chs {
			r := s.Readings[i]
			if r.Channel != c.ID {
				t.Fatalf("reading %d is %s, want %s", i, r.Channel, c.ID)
			}
			got, err := sm.Convert(c.ID, r.Value)
			if err != nil {
				t.Fatal(err)
			}
			want := s.Truth.Engineering[i]
			if c.Kind.IsGauge() && c.TemperatureChannel != "" {
				// Convert leaves the thermal output in; take the
				// noise-free reading at the same true temperature.
				tc := index[c.TemperatureChannel]
				clean, err := sm.Raw(c.ID, want, s.Truth.Engineering[tc])
				if err != nil {
					t.Fatal(err)
				}
				if want, err = sm.Convert(c.ID, clean); err != nil {
					t.Fatal(err)
				}
			}
			d := got - want
			sum[i] += d
			sum2[i] += d * d
		}
	}
	chi := distuv.ChiSquared{K: float64(n - 1)}
	lo, hi := chi.Quantile(0.5e-4), chi.Quantile(1-0.5e-4)
	for i, c := range chs {
		mean := sum[i] / float64(n)
		s2 := (sum2[i] - float64(n)*mean*mean) / float64(n-1)
		stat := float64(n-1) * s2 / (c.Noise * c.Noise)
		if stat < lo || stat > hi {
			t.Errorf("%s: sample sd %.4g, declared %.4g: chi-square %.1f outside [%.1f, %.1f] (n = %d)", c.ID, math.Sqrt(s2), c.Noise, stat, lo, hi, n)
		}
		if math.Abs(mean) > 4.5*c.Noise/math.Sqrt(float64(n)) {
			t.Errorf("%s: mean noise %.3g, more than 4.5 standard errors from 0", c.ID, mean)
		}
	}
}

// TestPedestriansOnPads checks that the panel loads are the pedestrians'
// weight m g, each on the panel under them, and that people walk across at
// about 1.3 m/s.
func TestPedestriansOnPads(t *testing.T) {
	opt := DefaultOptions()
	opt.Duration = 3 * time.Hour
	opt.Start = time.Date(2026, 6, 1, 6, 30, 0, 0, time.UTC) // the morning peak
	opt.Rate = time.Second
	opt.BadRate = 0
	g := newGen(t, opt)
	st := g.Structure()
	chs := g.Channels()
	busy, people := 0, 0
	var speedSum float64
	var speedN int
	var prev []Pedestrian
	for s, err := range g.All() {
		if err != nil {
			t.Fatal(err)
		}
		var want [9]float64 // N per panel 1..8 from the pedestrians
		var total float64
		for _, p := range s.Truth.Pedestrians {
			if p.X < 0 || p.X > 24 {
				t.Fatalf("%s: pedestrian at x = %g m, off the 24 m deck", s.Time, p.X)
			}
			panel := int(p.X/3) + 1
			if panel > 8 {
				panel = 8
			}
			w := p.Mass * 9.80665 // standard gravity, CGPM 1901
			want[panel] += w
			total += w
		}
		var pads float64
		for i, c := range chs {
			if !strings.HasPrefix(c.ID, "pad_") {
				continue
			}
			var k int
			if _, err := fmtSscan(c.ID, &k); err != nil {
				t.Fatal(err)
			}
			got := s.Truth.Engineering[i] * 1000 // pattern unit 1 kN
			if math.Abs(got-want[k]) > 1e-9*(1+want[k]) {
				t.Fatalf("%s: pad_%d carries %.3f N, pedestrians on panel %d weigh %.3f N", s.Time, k, got, k, want[k])
			}
			p, _ := st.PatternIndex(c.Pattern)
			if f := s.Truth.Factors[p]; math.Abs(f*1000-want[k]) > 1e-9*(1+want[k]) {
				t.Fatalf("%s: pattern %s factor %g, want %g", s.Time, c.Pattern, f, want[k]/1000)
			}
			pads += got
		}
		if math.Abs(pads-total) > 1e-9*(1+total) {
			t.Fatalf("%s: pads sum to %.3f N, pedestrians weigh %.3f N", s.Time, pads, total)
		}
		if len(s.Truth.Pedestrians) > 0 {
			busy++
			people += len(s.Truth.Pedestrians)
		}
		// Walking speed from consecutive positions of the same walker
		// (matched by mass, which is drawn per person).
		for _, p := range s.Truth.Pedestrians {
			for _, q := range prev {
				if q.Mass == p.Mass {
					speedSum += math.Abs(p.X - q.X)
					speedN++
				}
			}
		}
		prev = s.Truth.Pedestrians
	}
	if busy < 200 {
		t.Fatalf("pedestrians on the deck in only %d of 10800 s of the morning peak", busy)
	}
	v := speedSum / float64(speedN)
	if v < 1.15 || v > 1.45 {
		t.Fatalf("mean walking speed %.3f m/s, want about 1.3", v)
	}
	t.Logf("deck occupied %d s of %d, mean %.2f people when occupied, mean speed %.3f m/s", busy, g.Steps(), float64(people)/float64(busy), v)
}

// TestStiffnessLossMatchesResolve checks the truth after a 30 % loss of
// E A against an independent re-solve of the damaged structure with
// SolveFactors (temperatures through the temperature patterns, not the
// group inputs the generator uses), and the member's gauges against
// N/(0.7 E A). D2 sits in a statically determinate panel, so its loss
// cannot redistribute force (the forces there follow from equilibrium
// alone); C4 is one of the X-braced pair of panel 4, so its loss sheds
// force to D4.
func TestStiffnessLossMatchesResolve(t *testing.T) {
	for _, tc := range []struct {
		member       string
		redistribute bool
	}{{"D2", false}, {"C4", true}} {
		t.Run(tc.member, func(t *testing.T) { stiffnessCase(t, tc.member, tc.redistribute) })
	}
}

func stiffnessCase(t *testing.T, member string, redistribute bool) {
	opt := DefaultOptions()
	opt.Duration = 2 * time.Hour
	opt.Start = time.Date(2026, 6, 1, 13, 0, 0, 0, time.UTC)
	opt.Rate = 10 * time.Minute
	opt.BadRate = 0
	g := newGen(t, opt, "stiffness:"+member+":2026-06-01T14:00:00Z:0.3")
	intact, _ := load(t, footStruct, footSensors)
	damaged := copyStructure(intact)
	mb, _ := damaged.MemberIndex(member)
	damaged.Members[mb].E *= 0.7
	mi, err := model.Analyze(intact)
	if err != nil {
		t.Fatal(err)
	}
	md, err := model.Analyze(damaged)
	if err != nil {
		t.Fatal(err)
	}
	chs := g.Channels()
	tTop, tBot := -1, -1
	var ga, gb int
	for i, c := range chs {
		switch c.ID {
		case "temp_top":
			tTop = i
		case "temp_bottom":
			tBot = i
		case member + "_a":
			ga = i
		case member + "_b":
			gb = i
		}
	}
	zero, err := mi.SolveFactors([]model.Factor{{Pattern: "dead", Factor: 1}})
	if err != nil {
		t.Fatal(err)
	}
	ea := intact.Members[mb].E * intact.Members[mb].A
	var maxChange, jump, wantJump float64
	var maxMember string
	for s, err := range g.All() {
		if err != nil {
			t.Fatal(err)
		}
		m, after := mi, !s.Time.Before(opt.Start.Add(time.Hour))
		if after {
			m = md
			if len(s.Truth.Faults) != 1 {
				t.Fatalf("%s: %d faults active, want the stiffness fault", s.Time, len(s.Truth.Faults))
			}
		} else if len(s.Truth.Faults) != 0 {
			t.Fatalf("%s: fault active before 14:00", s.Time)
		}
		var fs []model.Factor
		for p, v := range s.Truth.Factors {
			if v != 0 {
				fs = append(fs, model.Factor{Pattern: intact.Patterns[p].Name, Factor: v})
			}
		}
		// Zeroed at 15 degC (testdata/footbridge/sensors.yaml).
		fs = append(fs, model.Factor{Pattern: "temp_top", Factor: s.Truth.Engineering[tTop] - 15},
			model.Factor{Pattern: "temp_bottom", Factor: s.Truth.Engineering[tBot] - 15})
		res, err := m.SolveFactors(fs)
		if err != nil {
			t.Fatal(err)
		}
		for k, n := range res.Forces {
			if math.Abs(n-s.Truth.Forces[k]) > 1e-6*(1+math.Abs(n)) {
				t.Fatalf("%s: member %s truth %.6g N, re-solve %.6g N", s.Time, intact.Members[k].ID, s.Truth.Forces[k], n)
			}
		}
		eaNow := ea
		if after {
			eaNow = 0.7 * ea
			ref, err := mi.SolveFactors(fs)
			if err != nil {
				t.Fatal(err)
			}
			for k := range ref.Forces {
				if d := math.Abs(ref.Forces[k] - res.Forces[k]); d > maxChange {
					maxChange, maxMember = d, intact.Members[k].ID
				}
			}
			jump = ((s.Truth.Engineering[ga]+s.Truth.Engineering[gb])/2 - (res.Forces[mb]-zero.Forces[mb])/ea) * ea
			wantJump = res.Forces[mb] * (1/0.7 - 1)
		}
		// The gauges' mean (bending cancels) is N/(E'A) - N0/(E A).
		want := res.Forces[mb]/eaNow - zero.Forces[mb]/ea
		got := (s.Truth.Engineering[ga] + s.Truth.Engineering[gb]) / 2
		if math.Abs(got-want) > 1e-12 {
			t.Fatalf("%s: %s mean strain %.6g, want %.6g", s.Time, member, got, want)
		}
	}
	if redistribute && maxChange < 100 {
		t.Fatalf("loss of %s changed member forces by at most %.3g N; an X-braced panel should shed force", member, maxChange)
	}
	if !redistribute && maxChange > 1e-3 {
		t.Fatalf("loss of %s changed the force in %s by %.3g N; a determinate panel cannot redistribute", member, maxMember, maxChange)
	}
	// The gauges on the member read N/(0.7 E A): the measured force
	// E A mean(strain) exceeds the true force change by N (1/0.7 - 1), and
	// N is mostly the dead load, so the jump is large.
	if math.Abs(jump-wantJump) > 1e-6*math.Abs(wantJump) || (!redistribute && math.Abs(jump) < 0.4*math.Abs(zero.Forces[mb])) {
		t.Fatalf("%s measured force jumps by %.1f N, want %.1f N (true force x (1/0.7 - 1))", member, jump, wantJump)
	}
	t.Logf("%s: largest force change %.3g N (in %s); dead-load force %.0f N, measured-force jump %.0f N", member, maxChange, maxMember, zero.Forces[mb], jump)
}

// TestSpringChangeMatchesResolve: after a spring fault at L8 (the
// footbridge's horizontal bearing spring, 20 MN/m, half as stiff) every
// member force equals a direct stiffness re-solve of the structure with
// the spring halved under the same loads and temperatures; before it,
// the intact structure's; and the generator leaves the structure it was
// given unchanged.
func TestSpringChangeMatchesResolve(t *testing.T) {
	opt := DefaultOptions()
	opt.Duration = 2 * time.Hour
	opt.Start = time.Date(2026, 6, 1, 13, 0, 0, 0, time.UTC)
	opt.Rate = 10 * time.Minute
	opt.BadRate = 0
	g := newGen(t, opt, "spring:L8:1h:-0.5")
	intact, _ := load(t, footStruct, footSensors)
	changed := copyStructure(intact)
	sp := -1
	for i, s := range changed.Supports {
		if changed.Nodes[s.Node].ID == "L8" {
			sp = i
		}
	}
	if sp < 0 || changed.Supports[sp].Spring[0] != 20e6 {
		t.Fatalf("footbridge support L8 has no 20 MN/m spring in x (testdata/footbridge/structure.yaml)")
	}
	changed.Supports[sp].Spring[0] = 10e6
	if g.Structure().Supports[sp].Spring[0] != 20e6 {
		t.Fatalf("the generator changed the given structure's spring to %g N/m", g.Structure().Supports[sp].Spring[0])
	}
	mi, err := model.Analyze(intact)
	if err != nil {
		t.Fatal(err)
	}
	mc, err := model.Analyze(changed)
	if err != nil {
		t.Fatal(err)
	}
	chs := g.Channels()
	tTop, tBot := -1, -1
	for i, c := range chs {
		switch c.ID {
		case "temp_top":
			tTop = i
		case "temp_bottom":
			tBot = i
		}
	}
	var largest float64
	for s, err := range g.All() {
		if err != nil {
			t.Fatal(err)
		}
		m, after := mi, !s.Time.Before(opt.Start.Add(time.Hour))
		if after {
			m = mc
		}
		var fs []model.Factor
		for p, v := range s.Truth.Factors {
			if v != 0 {
				fs = append(fs, model.Factor{Pattern: intact.Patterns[p].Name, Factor: v})
			}
		}
		fs = append(fs, model.Factor{Pattern: "temp_top", Factor: s.Truth.Engineering[tTop] - 15},
			model.Factor{Pattern: "temp_bottom", Factor: s.Truth.Engineering[tBot] - 15})
		res, err := m.SolveFactors(fs)
		if err != nil {
			t.Fatal(err)
		}
		ref, err := mi.SolveFactors(fs)
		if err != nil {
			t.Fatal(err)
		}
		for k, n := range res.Forces {
			if math.Abs(n-s.Truth.Forces[k]) > 1e-6*(1+math.Abs(n)) {
				t.Fatalf("%s: member %s truth %.6g N, re-solve %.6g N", s.Time, intact.Members[k].ID, s.Truth.Forces[k], n)
			}
			if after {
				largest = math.Max(largest, math.Abs(n-ref.Forces[k]))
			}
		}
	}
	// The spring restrains the truss's thermal expansion: halving it
	// changes the chord forces whenever the temperature is off the zero
	// state's 15 degC.
	if largest < 100 {
		t.Errorf("halving the bearing spring changed member forces by at most %.3g N", largest)
	}
	t.Logf("largest force change from halving the spring: %.0f N", largest)
}

func TestSettlement(t *testing.T) {
	opt := DefaultOptions()
	opt.Duration = time.Hour
	opt.Rate = 30 * time.Minute
	opt.BadRate = 0
	opt.Seed = 7
	a := collect(t, newGen(t, opt))
	b := collect(t, newGen(t, opt, "settlement:L8:30m:5mm"))
	st, _ := load(t, footStruct, footSensors)
	m, err := model.Analyze(st)
	if err != nil {
		t.Fatal(err)
	}
	// settle_L8 is 10 mm, so 5 mm is factor 0.5.
	res, err := m.SolveFactors([]model.Factor{{Pattern: "settle_L8", Factor: 0.5}})
	if err != nil {
		t.Fatal(err)
	}
	p, _ := st.PatternIndex("settle_L8")
	if a[0].Truth.Factors[p] != 0 || b[0].Truth.Factors[p] != 0 || b[1].Truth.Factors[p] != 0.5 {
		t.Fatalf("settle_L8 factors %g %g, want 0 before and 0.5 after", b[0].Truth.Factors[p], b[1].Truth.Factors[p])
	}
	for k := range st.Members {
		d := b[1].Truth.Forces[k] - a[1].Truth.Forces[k]
		if math.Abs(d-res.Forces[k]) > 1e-6*(1+math.Abs(d)) {
			t.Fatalf("member %s: settlement adds %.6g N, solve says %.6g N", st.Members[k].ID, d, res.Forces[k])
		}
	}
}

func TestSensorFaults(t *testing.T) {
	opt := DefaultOptions()
	opt.Duration = 3 * time.Hour
	opt.Rate = time.Minute
	opt.BadRate = 0
	base := collect(t, newGen(t, opt))
	g := newGen(t, opt, "drift:B4_a:1h:50e-6/h", "stuck:T4_a:2h")
	steps := collect(t, g)
	var b4, t4 int
	for i, c := range g.Channels() {
		switch c.ID {
		case "B4_a":
			b4 = i
		case "T4_a":
			t4 = i
		}
	}
	for k, s := range steps {
		dt := s.Time.Sub(opt.Start.Add(time.Hour)).Hours()
		want := base[k].Truth.Engineering[b4]
		if dt > 0 {
			want += 50e-6 * dt
		}
		if math.Abs(s.Truth.Engineering[b4]-want) > 1e-15 {
			t.Fatalf("%s: B4_a strain %.6g, want %.6g", s.Time, s.Truth.Engineering[b4], want)
		}
		if k >= 120 && s.Readings[t4].Value != steps[119].Readings[t4].Value {
			t.Fatalf("%s: stuck T4_a reads %v, frozen value %v", s.Time, s.Readings[t4].Value, steps[119].Readings[t4].Value)
		}
		if k < 120 && k > 0 && s.Readings[t4].Value == steps[k-1].Readings[t4].Value {
			t.Fatalf("%s: T4_a repeats before the stuck fault", s.Time)
		}
	}
}

// TestBadMessages checks the rate and the kinds of bad messages: the count
// is binomial(n, p); 5 standard deviations bound it.
func TestBadMessages(t *testing.T) {
	opt := DefaultOptions()
	opt.Duration = 6 * time.Hour
	opt.Rate = 5 * time.Second
	opt.BadRate = 0.01
	g := newGen(t, opt)
	kinds := map[Defect]int{}
	total, trials := 0, 0
	nch := len(g.Channels())
	for s, err := range g.All() {
		if err != nil {
			t.Fatal(err)
		}
		trials += nch
		lost := 0
		for _, b := range s.Bad {
			kinds[b.Defect]++
			total++
			if b.Defect != DefectUnknownChannel {
				lost++
			}
			switch b.Defect {
			case DefectNaN:
				if !math.IsNaN(b.Value) {
					t.Fatalf("NaN defect with value %v", b.Value)
				}
			case DefectUnknownChannel:
				if _, ok := g.sm.Channel(b.Channel); ok {
					t.Fatalf("unknown-channel defect names known channel %s", b.Channel)
				}
			case DefectWrongUnit:
				c, _ := g.sm.Channel(b.Channel)
				if b.Unit == c.Unit {
					t.Fatalf("wrong-unit defect with the right unit %s", b.Unit)
				}
			}
		}
		if len(s.Readings)+lost != nch {
			t.Fatalf("%s: %d good readings and %d lost, want %d channels", s.Time, len(s.Readings), lost, nch)
		}
	}
	mean := 0.01 * float64(trials)
	if sd := math.Sqrt(mean * 0.99); math.Abs(float64(total)-mean) > 5*sd {
		t.Fatalf("%d bad messages in %d readings, want about %.0f", total, trials, mean)
	}
	for _, d := range []Defect{DefectMalformed, DefectNaN, DefectUnknownChannel, DefectWrongUnit} {
		if kinds[d] < total/8 {
			t.Fatalf("defect %s seen %d times of %d", d, kinds[d], total)
		}
	}
}

// TestRoof runs the Harbour Hall roof: snow varies slowly and is never
// negative, the walkway count is whole people, forces are finite.
func TestRoof(t *testing.T) {
	st, sm := load(t, roofStruct, roofSensors)
	opt := DefaultOptions()
	opt.Duration = 24 * time.Hour
	opt.Rate = 5 * time.Minute
	ft, _ := ParseFault("stiffness:TX3_0:12h:0.3")
	fs, _ := ParseFault("settlement:T4_0:18h:5mm")
	opt.Faults = []Fault{ft, fs}
	g, err := New(st, sm, opt)
	if err != nil {
		t.Fatal(err)
	}
	// The roof has no settlement pattern: the generator adds one with a
	// unit displacement along gravity at T4_0.
	settle, ok := g.Structure().PatternIndex("sim_settle_T4_0")
	if !ok {
		t.Fatal("no settlement pattern added for T4_0")
	}
	snow, _ := st.PatternIndex("snow")
	maint, _ := st.PatternIndex("maintenance")
	drift, _ := st.PatternIndex("snow_drift_east")
	var lo, hi = math.Inf(1), math.Inf(-1)
	crews := 0
	for s, err := range g.All() {
		if err != nil {
			t.Fatal(err)
		}
		f := s.Truth.Factors[snow]
		lo, hi = math.Min(lo, f), math.Max(hi, f)
		if f < 0 || s.Truth.Factors[drift] < 0 {
			t.Fatalf("%s: negative snow factor", s.Time)
		}
		people := s.Truth.Factors[maint] * 4500 / (100 * 9.80665)
		if math.Abs(people-math.Round(people)) > 1e-9 {
			t.Fatalf("%s: %g people on the walkway", s.Time, people)
		}
		if people > 0 {
			crews++
		}
		wantSettle := 0.0
		if s.Time.Hour() >= 18 {
			wantSettle = 0.005
		}
		if s.Truth.Factors[settle] != wantSettle {
			t.Fatalf("%s: settlement factor %g, want %g", s.Time, s.Truth.Factors[settle], wantSettle)
		}
		for _, n := range s.Truth.Forces {
			if math.IsNaN(n) || math.IsInf(n, 0) {
				t.Fatalf("%s: force not finite", s.Time)
			}
		}
	}
	if hi-lo < 0.01 {
		t.Fatalf("snow factor stayed within [%g, %g] all day", lo, hi)
	}
	if crews == 0 {
		t.Fatal("no maintenance crew all day")
	}
	t.Logf("snow factor %.3f..%.3f kPa, walkway occupied %d of %d steps", lo, hi, crews, g.Steps())
}

func TestNewErrors(t *testing.T) {
	st, sm := load(t, footStruct, footSensors)
	for _, tc := range []struct {
		fault, want string
	}{
		{"stiffness:Z9:1h:0.3", `member "Z9" is not in structure`},
		{"drift:nope:1h:1e-6/h", `"nope" is neither a channel of the sensor map`},
		{"drift:B4_a:1h:5kN/d", `a drift in force needs a member as target`},
		{"drift:D4:1h:5kN/d", `member "D4" has no gauge channel`}, // the ungauged brace
		{"settlement:U4:1h:0.01", `node "U4" is not a support`},
		{"settlement:Q1:1h:0.01", `node "Q1" is not in structure`},
	} {
		opt := DefaultOptions()
		f, err := ParseFault(tc.fault)
		if err != nil {
			t.Fatal(err)
		}
		opt.Faults = []Fault{f}
		_, err = New(st, sm, opt)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("fault %s: error %v, want it to say %s", tc.fault, err, tc.want)
		}
	}
	opt := DefaultOptions()
	opt.Rate = 0
	if _, err := New(st, sm, opt); err == nil {
		t.Error("zero rate accepted")
	}
}
