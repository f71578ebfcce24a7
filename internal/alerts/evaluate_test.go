package alerts

import (
	"context"
	"encoding/json"
	"errors"
	"strings"
	"testing"
	"time"
)

type memorySink struct {
	events []Event
	fail   error
}

func (m *memorySink) PutEvent(ctx context.Context, e Event) error {
	if m.fail != nil {
		return m.fail
	}
	m.events = append(m.events, e)
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
	causes := []Cause{
		{Label: "gauge D2", Kind: "gauge_fault", T: 30, Size: 8200, Unit: "N"},
		{Label: "E A of D2", Kind: "stiffness_change", T: 12, Size: -4.1, Unit: "%"},
		{Label: "settlement L8 y", Kind: "support_settlement", T: 3, Size: 1.2, Unit: "mm"},
		{Label: "gauge D3", Kind: "gauge_fault", T: 1, Size: 900, Unit: "N"},
	}
	ctx := context.Background()
	obs := func(min int, w float64, members bool) Observation {
		o := Observation{Time: at(min), Structure: "alder-creek", Causes: causes}
		if members {
			o.Members = []Member{{Member: "D2", W: w, Checkable: true, EstimatedBias: 8200}}
		}
		return o
	}
	steps := []struct {
		min     int
		w       float64
		members bool
		want    string // event kinds this step
	}{
		{0, 4.5, true, ""},
		{1, 4.5, true, ""},
		{2, 4.5, true, "raised"},
		{3, 0, false, ""},  // member absent: last value (4.5) holds
		{4, 2.9, true, ""}, // between clear and raise: held
		{5, 2.0, true, "cleared"},
	}
	for _, s := range steps {
		events, err := ev.Observe(ctx, obs(s.min, s.w, s.members))
		if err != nil {
			t.Fatal(err)
		}
		var kinds []string
		for _, e := range events {
			kinds = append(kinds, e.Kind)
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
	if len(sink.events) != 2 {
		t.Fatalf("sink has %d events", len(sink.events))
	}
	r := sink.events[0]
	if r.Subject != "D2" || r.Rule != "MemberDiverging" || r.Evidence.W != 4.5 || r.Evidence.Bias != 8200 ||
		len(r.Evidence.Causes) != 3 || r.Evidence.Causes[0].Label != "gauge D2" || !r.Evidence.ActiveSince.Equal(at(0)) || !r.Time.Equal(at(2)) {
		t.Errorf("raised event %+v", r)
	}
	if c := sink.events[1]; c.Evidence.Threshold < 2.57 || c.Evidence.Threshold > 2.58 || c.Evidence.Value != 2.0 {
		t.Errorf("cleared event %+v", c)
	}
	js, err := json.Marshal(r.Evidence)
	if err != nil || !strings.Contains(string(js), `"causes"`) {
		t.Errorf("evidence JSON %s %v", js, err)
	}
	if len(ev.Active("alder-creek")) != 0 || ev.FiringCount("alder-creek", "MemberDiverging") != 0 {
		t.Error("alarm still active after clearing")
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
	o := Observation{Time: at(0), Structure: "alder-creek", Fit: &Fit{PValue: 1e-9}}
	ev.Observe(ctx, o)
	o.Time = at(1)
	ev.Observe(ctx, o)
	o.Time = at(2)
	events, err := ev.Observe(ctx, o)
	if err == nil || !strings.Contains(err.Error(), "disk full") || len(events) != 1 {
		t.Errorf("sink failure: events %v err %v", events, err)
	}
	if len(ev.Active("alder-creek")) != 1 {
		t.Error("state did not advance despite the sink failure")
	}
	o.Time = at(1)
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
