package alerts

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/reconcile"
)

func TestFromResult(t *testing.T) {
	A := mat.NewDense(4, 1, []float64{1, 1, 1, 1})
	s, err := reconcile.NewSolver(A, []float64{1, 1, 1, 1}, reconcile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	res, err := s.Epoch([]float64{1, 1, 1, 9}, make([]float64, 4), []bool{true, false, true, true})
	if err != nil {
		t.Fatal(err)
	}
	names := []string{"B4", "D2", "T3", "V1"}
	causes, err := res.Causes(reconcile.GaugeFaults(names))
	if err != nil {
		t.Fatal(err)
	}
	var o Observation
	if err := FromResult(&o, names, res, causes, 3); err != nil {
		t.Fatal(err)
	}
	if len(o.Members) != 3 || o.Members[2].Member != "V1" || o.Fit.DOF != 2 {
		t.Fatalf("members %+v fit %+v", o.Members, o.Fit)
	}
	// Mean of 1, 1, 9 is 11/3; e_V1 = 16/3, r = 2/3: bias estimate 8 (the
	// jump of V1 over the others).
	if b := o.Members[2].EstimatedBias; math.Abs(b-8) > 1e-9 {
		t.Errorf("bias %v, want 8", b)
	}
	if len(o.Causes) != 3 || o.Causes[0].Label != "gauge V1" || o.Causes[0].Unit != "N" {
		t.Errorf("causes %+v", o.Causes)
	}
	if err := FromResult(&o, names[:2], res, causes, 3); err == nil {
		t.Error("name count mismatch accepted")
	}
}
