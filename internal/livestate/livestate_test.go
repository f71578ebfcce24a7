package livestate

import (
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
	evs, err := l.Events("alder-creek", t0, t0.Add(time.Minute))
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
