package livestate

import (
	"math"
	"testing"
	"time"

	"trussmonitor/internal/capacity"
	"trussmonitor/internal/reconcile"
)

// TestTotalsAndLoadUnits: the state carries every member's total with its
// change since zeroing, the design basis with its caution, and the unknown
// crowd load in kPa (its reference load, 1 kPa at factor 1) with the
// factor beside.
func TestTotalsAndLoadUnits(t *testing.T) {
	st, p := footbridge(t)
	l := New(nil, 3)
	sink := l.Register(st, p, 0.001)
	r := result(p, time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC), 0.5, nil)
	r.Loads = []reconcile.LoadEstimate{{Pattern: "crowd", Value: 0.0778, Std: 0.01, Estimable: true}}
	r.State = []reconcile.MemberState{
		{Member: "D2", Gauged: true, Measured: true, ZeroStateN: 64200, MeasuredChangeN: 26990, PredictedChangeN: 2590,
			MeasuredTotalN: 91190, PredictedTotalN: 66790, TotalN: 91190, StressPa: 32.3e6, Ratio: 1.365,
			ResistanceN: 1.0e6, Utilisation: 0.0912, PredictedUtilisation: 0.0668},
		{Member: "V0", ZeroStateN: -5625, MeasuredChangeN: math.NaN(), PredictedChangeN: 0, MeasuredTotalN: math.NaN(),
			PredictedTotalN: -5625, TotalN: -5625, Ratio: math.NaN(), ResistanceN: 9e5, Utilisation: 0.00625, PredictedUtilisation: 0.00625},
	}
	sink.Epoch(r)
	s, err := l.State("alder-creek")
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Members) != 2 || s.Members[0].ID != "D2" || s.Members[0].Total != 91190 || s.Members[0].MeasuredChange != 26990 || s.Members[0].ZeroState != 64200 {
		t.Errorf("members %+v", s.Members)
	}
	if s.Design == nil || s.Design.Standard != "EN 1993-1-1" || s.Design.Caution != capacity.Caution {
		t.Errorf("design %+v", s.Design)
	}
	if len(s.Loads) != 1 || s.Loads[0].Unit != "kPa" || s.Loads[0].Value != 0.0778 || s.Loads[0].Factor != 0.0778 || s.Loads[0].StdDev != 0.01 {
		t.Errorf("loads %+v", s.Loads)
	}
}
