package replay

import (
	"math"
	"strings"
	"testing"
	"time"

	"trussmonitor/internal/alerts"
	"trussmonitor/internal/model"
	"trussmonitor/internal/pipeline"
	"trussmonitor/internal/reconcile"
	"trussmonitor/internal/report"
)

// TestUtilisationEventAndTotals: a utilisation event is worded with the
// caution; the member aggregates keep the extremes and the time of the
// largest utilisation; loads with a reference load are shown in its unit.
func TestUtilisationEventAndTotals(t *testing.T) {
	head := &report.Report{From: time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC), To: time.Date(2026, 6, 2, 0, 0, 0, 0, time.UTC)}
	s, err := report.NewStream("", head)
	if err != nil {
		t.Fatal(err)
	}
	c := newCollector(s, head, nil)
	t0 := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
	ev := c.event(alerts.Event{Rule: alerts.RuleUtilisationHigh, Subject: "D2", Kind: alerts.Raised, Time: t0,
		Evidence: alerts.Evidence{Signal: alerts.SignalUtilisation.String(), Value: 0.93, Threshold: 0.9, ActiveSince: t0.Add(-2 * time.Minute)}})
	if !strings.Contains(ev.Message, "utilisation 0.93 above 0.9") || !strings.Contains(ev.Message, report.UtilisationCaution) {
		t.Errorf("message %q", ev.Message)
	}
	nan := math.NaN()
	for i, u := range []float64{0.5, 0.8, 0.7} {
		c.Epoch(&pipeline.Result{EpochResult: &reconcile.EpochResult{Time: t0.Add(time.Duration(i) * time.Minute), Outcome: reconcile.OutcomeAccepted,
			State: []reconcile.MemberState{{Member: "D2", Gauged: true, Measured: i != 1, TotalN: -u * 1e5, PredictedTotalN: -u * 1e5, Utilisation: u, PredictedUtilisation: u - 0.1},
				{Member: "V0", TotalN: 10, PredictedTotalN: 10, Utilisation: nan, PredictedUtilisation: nan}}}})
	}
	sums := c.totals.summaries(nil)
	d2, v0 := sums[0], sums[1]
	if d2.Epochs != 3 || d2.MeasuredEpochs != 2 || d2.MinTotal != -8e4 || d2.MaxTotal != -5e4 || d2.MaxUtilisation != 0.8 || !d2.MaxUtilisationTime.Equal(t0.Add(time.Minute)) || math.Abs(d2.MaxPredictedUtilisation-0.7) > 1e-15 {
		t.Errorf("D2 %+v", d2)
	}
	if !math.IsNaN(v0.MaxUtilisation) || !math.IsNaN(v0.TensionResistance) || v0.MaxTotal != 10 {
		t.Errorf("V0 %+v", v0)
	}

	st := &model.Structure{Patterns: []model.Pattern{{Name: "crowd", ReferenceValue: 2.5, ReferenceUnit: "kN/m"}, {Name: "drift"}}}
	pats := []report.Pattern{{Name: "crowd", Unit: "1"}, {Name: "drift", Unit: "1"}}
	scale := referenceUnits(pats, st)
	if p := pats[0]; p.Unit != "kN/m" || p.Reference != 2.5 || scale[0] != 2.5 {
		t.Errorf("crowd %+v scale %v", p, scale[0])
	}
	if p := pats[1]; p.Unit != "1" || scale[1] != 1 {
		t.Errorf("drift %+v scale %v", p, scale[1])
	}
}
