package livestate

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"testing"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/dashboard"
	"trussmonitor/internal/model"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/store"
	"trussmonitor/internal/structfile"
)

func footbridge(t *testing.T) (*model.Structure, *reconcile.Processor) {
	t.Helper()
	st, err := structfile.LoadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		t.Fatal(err)
	}
	m, err := model.Analyze(st)
	if err != nil {
		t.Fatal(err)
	}
	sm, err := sensors.LoadFile("../../testdata/footbridge/sensors.yaml", st)
	if err != nil {
		t.Fatal(err)
	}
	p, err := reconcile.NewProcessor(m, sm, reconcile.ProcessorOptions{CauseSpan: alerts.DivergingFor})
	if err != nil {
		t.Fatal(err)
	}
	return st, p
}

func result(p *reconcile.Processor, t time.Time, w float64, active []alerts.Alarm) *pipeline.Result {
	r := &pipeline.Result{EpochResult: &reconcile.EpochResult{Structure: "alder-creek", Time: t, Outcome: reconcile.OutcomeAccepted, PValue: 0.5, DOF: 17}, Active: active}
	for _, g := range p.Gauged() {
		r.Members = append(r.Members, reconcile.MemberResult{Member: g, Available: true, MeasuredN: 1000, FittedN: 900, SigmaAdjustedN: 50, W: w, Checkable: true})
	}
	r.Members[1].Available = false
	return r
}

func TestLiveState(t *testing.T) {
	st, p := footbridge(t)
	l := New(nil, 3)
	sink := l.Register(st, p, 0.001)
	t0 := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	if s, err := l.State("alder-creek"); err != nil || !s.Epoch.IsZero() || len(s.Gauged) != 18 || len(s.Geometry.Members) != 35 {
		t.Fatalf("state before any epoch: %+v, %v", s, err)
	}
	for i := 0; i < 5; i++ {
		var active []alerts.Alarm
		if i == 4 {
			active = []alerts.Alarm{{Rule: alerts.RuleMemberDiverging, Subject: "B2"}}
		}
		r := result(p, t0.Add(time.Duration(i)*time.Second), float64(i), active)
		if i == 4 {
			r.Events = []alerts.Event{{Structure: "alder-creek", Rule: alerts.RuleMemberDiverging, Subject: "B2", Kind: alerts.Raised, Time: r.Time, Evidence: alerts.Evidence{W: 4, Causes: []reconcile.RankedCause{{Label: "gauge B2", Subject: "B2", Kind: reconcile.GaugeFault, T: 16, Size: 200, Unit: "N"}}}}}
		}
		sink.Epoch(r)
	}
	// A skipped epoch keeps the last fitted state.
	sink.Epoch(&pipeline.Result{EpochResult: &reconcile.EpochResult{Structure: "alder-creek", Time: t0.Add(5 * time.Second), Outcome: reconcile.OutcomeSkipped}, Active: []alerts.Alarm{{Rule: alerts.RuleMemberDiverging, Subject: "B2"}}})
	s, err := l.State("alder-creek")
	if err != nil {
		t.Fatal(err)
	}
	if !s.Epoch.Equal(t0.Add(4*time.Second)) || s.Gauged[0].W != 4 || !s.Gauged[0].Alarm || s.Gauged[2].Alarm {
		t.Errorf("state: epoch %s, first member %+v", s.Epoch, s.Gauged[0])
	}
	if !math.IsNaN(s.Gauged[1].Measured) {
		t.Errorf("unavailable member measured %g, want NaN (null on the wire)", s.Gauged[1].Measured)
	}
	// History keeps the last 3 epochs, oldest first.
	ser, err := l.Series("alder-creek", "B2", t0, t0.Add(time.Minute))
	if err != nil {
		t.Fatal(err)
	}
	if len(ser.Points) != 3 || ser.Points[0].W != 2 || ser.Points[2].W != 4 || !ser.Points[2].Alarm {
		t.Errorf("series: %+v", ser.Points)
	}
	evs, err := l.Events(context.Background(), "alder-creek", t0, t0.Add(time.Minute))
	if err != nil || len(evs) != 1 || evs[0].Subject != "B2" || len(evs[0].Causes) != 1 || evs[0].Causes[0].Subject != "B2" || evs[0].Causes[0].Kind != reconcile.GaugeFault {
		t.Errorf("events: %+v, %v", evs, err)
	}
	if !math.IsNaN(evs[0].Size) {
		t.Errorf("event without an estimated bias shows size %g, want none (NaN, null on the wire)", evs[0].Size)
	}
	if _, err := l.State("nowhere"); !errors.Is(err, dashboard.ErrNotFound) {
		t.Errorf("unknown structure: %v, want ErrNotFound", err)
	}
	if _, err := l.Series("alder-creek", "B1", t0, t0.Add(time.Minute)); !errors.Is(err, dashboard.ErrNotFound) {
		t.Errorf("ungauged member: %v, want ErrNotFound", err)
	}
}

// storedEvents is an EventStore holding events as stored.
type storedEvents []store.Event

func (s storedEvents) Events(ctx context.Context, structure string, from, to time.Time) ([]store.Event, error) {
	return s, nil
}

// TestLiveAlarmRevision: an alarm whose causes are revised while it is
// active shows the revision in the state (with its load-shift flag, the
// adapted fit and the nominal w beside the adapted one) and in its raised
// event, both from memory and over the store's older revision.
func TestLiveAlarmRevision(t *testing.T) {
	st, p := footbridge(t)
	t0 := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	raisedCauses := []reconcile.RankedCause{{Subject: "D2", Label: "E A of D2", Kind: reconcile.StiffnessChange, T: 60, Size: -26, Std: 2, Unit: "%", Group: 1}}
	revised := []reconcile.RankedCause{{Subject: "D2", Label: "E A of D2", Kind: reconcile.StiffnessChange, T: 900, Size: -29.6, Std: 0.1, Unit: "%", Group: 1}}
	shift := []reconcile.LoadShift{{Pattern: "crowd", Value: -0.5, Mean: 0.02, Std: 0.01, Z: -7}}
	raised := alerts.Event{Structure: "alder-creek", Rule: alerts.RuleMemberDiverging, Subject: "D2", Kind: alerts.Raised, Time: t0,
		Evidence: alerts.Evidence{Signal: "abs_w", W: 6, Causes: raisedCauses, LoadShifts: shift}}
	evidence, err := json.Marshal(raised.Evidence)
	if err != nil {
		t.Fatal(err)
	}
	for _, stored := range []bool{false, true} {
		var es EventStore
		if stored {
			es = storedEvents{{Structure: "alder-creek", Rule: string(raised.Rule), Subject: "D2", Kind: store.Raised, Time: t0, Evidence: evidence}}
		}
		l := New(es, 10)
		sink := l.Register(st, p, 0.001)
		r := result(p, t0, 6, []alerts.Alarm{{Rule: raised.Rule, Subject: "D2", Since: t0.Add(-2 * time.Minute), FiredAt: t0, Identifies: true, Causes: raisedCauses, LoadShifts: shift}})
		r.Events = []alerts.Event{raised}
		sink.Epoch(r)
		later := t0.Add(time.Hour)
		r = result(p, later, 0.5, []alerts.Alarm{{Rule: raised.Rule, Subject: "D2", Since: t0.Add(-2 * time.Minute), FiredAt: t0, Identifies: true,
			Causes: revised, CausesAt: later, LoadShifts: shift}})
		r.Adapted = &reconcile.AdaptedFit{Hypotheses: []reconcile.RankedCause{{Kind: reconcile.StiffnessChange, Subject: "D2", Label: "E A of D2", Size: -29.8, Std: 0.4, Unit: "%", Separable: true}}, ChiSquare: 15, DOF: 16, PValue: 0.52}
		for i := range r.Members {
			r.Members[i].WNominal = 7
		}
		sink.Epoch(r)
		s, err := l.State("alder-creek")
		if err != nil {
			t.Fatal(err)
		}
		if len(s.Alarms) != 1 || s.Alarms[0].Causes[0].Size != -29.6 || s.Alarms[0].Causes[0].Subject != "D2" || !s.Alarms[0].CausesAt.Equal(later) ||
			len(s.Alarms[0].LoadShifts) != 1 || s.Alarms[0].LoadShifts[0].Unit != "kPa" {
			t.Errorf("stored %v: state alarms %+v; want the revision at %s with the crowd flagged (in kPa)", stored, s.Alarms, later)
		}
		if s.Adapted == nil || len(s.Adapted.Hypotheses) != 1 || s.Adapted.Hypotheses[0].Std != 0.4 || s.Gauged[0].WNominal != 7 || s.Gauged[0].W != 0.5 || !math.IsNaN(s.Gauged[1].WNominal) {
			t.Errorf("stored %v: adapted %+v, first member %+v, second %+v", stored, s.Adapted, s.Gauged[0], s.Gauged[1])
		}
		evs, err := l.Events(context.Background(), "alder-creek", t0, later.Add(time.Second))
		if err != nil || len(evs) != 1 {
			t.Fatalf("stored %v: events %+v, %v", stored, evs, err)
		}
		if evs[0].Causes[0].Size != -29.6 || !evs[0].CausesAt.Equal(later) || len(evs[0].LoadShifts) != 1 {
			t.Errorf("stored %v: raised event %+v; want the revised causes", stored, evs[0])
		}
	}
}

// indexOfGauged returns the position of a gauged member in a state.
func indexOfGauged(s dashboard.State, id string) int {
	for i, m := range s.Gauged {
		if m.ID == id {
			return i
		}
	}
	return -1
}

// TestWindowAlarmMarksMember: a window alarm (MemberShifted) marks its
// member as alarmed, as MemberDiverging does.
func TestWindowAlarmMarksMember(t *testing.T) {
	st, p := footbridge(t)
	l := New(nil, 3)
	sink := l.Register(st, p, 0.001)
	t0 := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	sink.Epoch(result(p, t0, 1, []alerts.Alarm{{Rule: alerts.RuleMemberDiverging, Subject: "B2"}, {Rule: alerts.RuleMemberShifted, Subject: "C4"}}))
	s, err := l.State("alder-creek")
	if err != nil {
		t.Fatal(err)
	}
	c4 := indexOfGauged(s, "C4")
	if c4 < 0 || !s.Gauged[0].Alarm || !s.Gauged[c4].Alarm || s.Gauged[2].Alarm {
		t.Errorf("member alarms: B2 %v, C4 %v, third %v; want B2 and C4 marked only", s.Gauged[0].Alarm, c4 >= 0 && s.Gauged[c4].Alarm, s.Gauged[2].Alarm)
	}
}
