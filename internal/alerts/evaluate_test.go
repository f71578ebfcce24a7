package alerts

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"strings"
	"testing"
	"time"
	"trussmonitor/internal/reconcile"

	"gonum.org/v1/gonum/stat/distuv"
)

type memorySink struct {
	events    []Event
	revisions []Event
	fail      error
}

func (m *memorySink) PutEvent(ctx context.Context, e Event) error {
	if m.fail != nil {
		return m.fail
	}
	m.events = append(m.events, e)
	return nil
}

func (m *memorySink) ReviseEvent(ctx context.Context, e Event) error {
	if m.fail != nil {
		return m.fail
	}
	m.revisions = append(m.revisions, e)
	return nil
}

func at(min int) time.Time { return time.Date(2026, 6, 1, 12, min, 0, 0, time.UTC) }

func TestMemberAlarmEvidenceAndHold(t *testing.T) {
	rules, err := DefaultRules()
	if err != nil {
		t.Fatal(err)
	}
	sink := &memorySink{}
	ev, err := NewEvaluator(rules, sink)
	if err != nil {
		t.Fatal(err)
	}
	causes := []reconcile.RankedCause{
		{Label: "gauge D2", Kind: reconcile.GaugeFault, T: 30, Size: 8200, Unit: "N"},
		{Label: "E A of D2", Kind: reconcile.StiffnessChange, T: 12, Size: -4.1, Unit: "%"},
		{Label: "settlement L8 y", Kind: reconcile.SupportSettlement, T: 3, Size: 1.2, Unit: "mm"},
		{Label: "gauge D3", Kind: reconcile.GaugeFault, T: 1, Size: 900, Unit: "N"},
	}
	ctx := context.Background()
	obs := func(min int, w float64, members bool) Observation {
		o := Observation{Time: at(min), Structure: "alder-creek", Causes: causes}
		if members {
			o.Members = []Member{{Member: "D2", W: w, Checkable: true, EstimatedBias: 8200}}
		}
		return o
	}
	// MemberDiverging decides on the mean w over [t-2m, t]: one sample
	// (4.5 < 5.33) at 0, two (4.5 > 5.33/sqrt 2 = 3.77) at 1: raised. The
	// member is then unmeasured for 15 minutes, longer than the 10-minute
	// hold-off: no clearing while unmeasured. At 17 it reports w = 0.5: the
	// 2-minute mean 0.5 does not raise and the hold-off mean 0.5 <= 2.58
	// clears.
	steps := []struct {
		min     int
		w       float64
		members bool
		want    string // MemberDiverging event kinds this step
	}{
		{0, 4.5, true, ""},
		{1, 4.5, true, "raised"},
		{2, 4.5, true, ""},
	}
	for m := 3; m <= 16; m++ {
		steps = append(steps, struct {
			min     int
			w       float64
			members bool
			want    string
		}{m, 0, false, ""})
	}
	steps = append(steps, struct {
		min     int
		w       float64
		members bool
		want    string
	}{17, 0.5, true, "cleared"})
	for _, s := range steps {
		events, err := ev.Observe(ctx, obs(s.min, s.w, s.members))
		if err != nil {
			t.Fatal(err)
		}
		var kinds []string
		for _, e := range events {
			if e.Rule == RuleMemberDiverging {
				kinds = append(kinds, string(e.Kind))
			}
		}
		if strings.Join(kinds, ",") != s.want {
			t.Fatalf("minute %d: events %v, want %q", s.min, kinds, s.want)
		}
		if s.min == 2 {
			if n := ev.FiringCount("alder-creek", "MemberDiverging"); n != 1 {
				t.Errorf("firing count %d", n)
			}
		}
	}
	var div []Event
	for _, e := range sink.events {
		if e.Rule == "MemberDiverging" {
			div = append(div, e)
		}
	}
	if len(div) != 2 {
		t.Fatalf("sink has %d MemberDiverging events", len(div))
	}
	r := div[0]
	if r.Subject != "D2" || r.Evidence.W != 4.5 || r.Evidence.Bias != 8200 || r.Evidence.Value != 4.5 || r.Evidence.Epochs != 2 ||
		len(r.Evidence.Causes) != 3 || r.Evidence.Causes[0].Label != "gauge D2" || !r.Time.Equal(at(1)) {
		t.Errorf("raised event %+v", r)
	}
	if c := div[1]; c.Evidence.Threshold < 2.57 || c.Evidence.Threshold > 2.58 || c.Evidence.Value != 0.5 || c.Evidence.Epochs != 1 {
		t.Errorf("cleared event %+v", c)
	}
	js, err := json.Marshal(r.Evidence)
	if err != nil || !strings.Contains(string(js), `"causes"`) {
		t.Errorf("evidence JSON %s %v", js, err)
	}
	if n := ev.FiringCount("alder-creek", "MemberDiverging"); n != 0 {
		t.Error("alarm still active after clearing")
	}
}

// TestMeanThresholdFalseAlarm: the false-alarm probability of one
// evaluation of MemberDiverging, 2 P(Z > max(3.29 sqrt(n), 5.33)), is at
// most MeanFalseAlarm = 1e-7 whatever n, and equals it for n = 1 and 2
// (standard normal tail, gonum's distuv as the reference computation).
func TestMeanThresholdFalseAlarm(t *testing.T) {
	rules, _ := DefaultRules()
	r := rules[0]
	for _, n := range []int{1, 2, 3, 13, 121} {
		thr := MeanThreshold(r.Raise, r.ZRaise, n)
		p := 2 * distuv.UnitNormal.Survival(thr*math.Sqrt(float64(n)))
		if p > MeanFalseAlarm*(1+1e-9) {
			t.Errorf("n = %d: threshold %.3f, false-alarm probability %.3g > %g", n, thr, p, MeanFalseAlarm)
		}
		if n <= 2 && math.Abs(p-MeanFalseAlarm) > 1e-12 {
			t.Errorf("n = %d: false-alarm probability %.6g, want %g", n, p, MeanFalseAlarm)
		}
		// A bias of one MDB: mean w = delta0 = 4.13 exceeds the threshold
		// once n >= 2 (Baarda 1968, from memory).
		if n >= 2 && !(4.1321 > thr) {
			t.Errorf("n = %d: threshold %.3f above delta0", n, thr)
		}
	}
}

func TestEvaluatorErrors(t *testing.T) {
	rules, _ := DefaultRules()
	sink := &memorySink{fail: errors.New("disk full")}
	ev, err := NewEvaluator(rules, sink)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	// A fit far off (chi-square 200 at 13 degrees of freedom, score 11.5)
	// raises FitRejected at once, even from a single epoch (> 5.20).
	o := Observation{Time: at(0), Structure: "alder-creek", Fit: &Fit{ChiSquare: 200, DOF: 13, PValue: 1e-9}}
	events, err := ev.Observe(ctx, o)
	if err == nil || !strings.Contains(err.Error(), "disk full") || len(events) != 1 {
		t.Errorf("sink failure: events %v err %v", events, err)
	}
	if len(ev.Active("alder-creek")) != 1 {
		t.Error("state did not advance despite the sink failure")
	}
	o.Time = at(1)
	ev.Observe(ctx, o)
	o.Time = at(0)
	if _, err := ev.Observe(ctx, o); err == nil || !strings.Contains(err.Error(), "time order") {
		t.Errorf("out-of-order observation: %v", err)
	}
	if _, err := ev.Observe(ctx, Observation{Structure: "x"}); err == nil {
		t.Error("observation without time accepted")
	}
	bad := rules[0]
	bad.Clear = 5 // stricter than raise
	if _, err := NewEvaluator([]Rule{bad}, nil); err == nil {
		t.Error("rule with inverted hysteresis accepted")
	}
	if _, err := NewEvaluator([]Rule{rules[0], rules[0]}, nil); err == nil {
		t.Error("duplicate rule accepted")
	}
	if _, err := PrometheusRulesFor(rules, nil); err == nil {
		t.Error("rules file without structures accepted")
	}
}

func TestReplayGivesSameEvents(t *testing.T) {
	rules, _ := DefaultRules()
	sc := buildScenario()
	run := func() []Event {
		ev, err := NewEvaluator(rules, nil)
		if err != nil {
			t.Fatal(err)
		}
		var all []Event
		for k := 0; k < sc.minutes; k++ {
			e, err := ev.Observe(context.Background(), sc.observation(k))
			if err != nil {
				t.Fatal(err)
			}
			all = append(all, e...)
		}
		return all
	}
	a, b := run(), run()
	ja, _ := json.Marshal(a)
	jb, _ := json.Marshal(b)
	if string(ja) != string(jb) || len(a) == 0 {
		t.Errorf("two runs over the same observations differ (%d vs %d events)", len(a), len(b))
	}
}

// TestRestartForgetsWindow: a member's w is 0 for an hour, then shifted
// by 1 for 29.5 minutes (the hour's mean 0.49, just below the window
// alarm's floor of 0.5), then, the fit now carrying the fault's hypothesis
// (another member's alarm rose), 0.05 for an hour. Without a restart the
// hour's mean of the shifted and the adapted w still crosses the floor as
// the clean samples leave the window, and MemberShifted rises on a member
// the adapted fit explains; with the window restarted at the change it
// does not.
func TestRestartForgetsWindow(t *testing.T) {
	for _, restart := range []bool{false, true} {
		rules, err := DefaultRules()
		if err != nil {
			t.Fatal(err)
		}
		ev, err := NewEvaluator(rules, nil)
		if err != nil {
			t.Fatal(err)
		}
		raised := -1
		t0 := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
		const clean, shifted = 360, 177 // epochs of 10 s
		for i := 0; i < clean+shifted+360; i++ {
			m := Member{Member: "B7", Checkable: true}
			switch {
			case i < clean:
			case i < clean+shifted:
				m.W = 1
			default:
				m.W = 0.05
				m.Restart = restart && i == clean+shifted
			}
			evs, err := ev.Observe(context.Background(), Observation{Time: t0.Add(time.Duration(i) * 10 * time.Second), Structure: "alder-creek", Members: []Member{m}})
			if err != nil {
				t.Fatal(err)
			}
			for _, e := range evs {
				if e.Rule == RuleMemberShifted && e.Kind == Raised && raised < 0 {
					raised = i
				}
			}
		}
		switch {
		case raised >= 0 && raised < clean+shifted:
			t.Errorf("restart %v: raised at epoch %d, before the change: the test's shift is too large", restart, raised)
		case restart && raised >= 0:
			t.Errorf("restarted window: MemberShifted raised at epoch %d", raised)
		case !restart && raised < 0:
			t.Errorf("without the restart MemberShifted did not rise: the test does not reproduce the case")
		}
	}
}
