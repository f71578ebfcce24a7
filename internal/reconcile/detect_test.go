package reconcile

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

func TestDetectAndSuggestGauge(t *testing.T) {
	// Unknown 0 (say a crowd load) is seen by every gauge; unknown 1 only
	// by member 3, which alone determines it: r_3 = 0, not checkable.
	A := mat.NewDense(4, 2, []float64{
		1, 0,
		1, 0,
		1, 0,
		0.5, 1,
	})
	sigma := []float64{1, 1, 1, 1}
	d, err := Detect(A, sigma, Options{})
	if err != nil {
		t.Fatal(err)
	}
	sum := 0.0
	for _, r := range d.Redundancy {
		sum += r
	}
	if math.Abs(sum-2) > 1e-12 || d.DOF != 2 {
		t.Errorf("sum r = %v, dof %d; want 2 = G - p", sum, d.DOF)
	}
	if d.Weakest != 3 || d.Redundancy[3] > 1e-12 || len(d.Unchecked) != 1 || d.Unchecked[0] != 3 || d.MDB[3] != 0 {
		t.Fatalf("weakest %d r %v unchecked %v mdb %v; want member 3 with r = 0 unchecked", d.Weakest, d.Redundancy, d.Unchecked, d.MDB)
	}
	// Members 0..2 share unknown 0 alone: r = 1 - 1/3 each, MDB = delta0 / sqrt(2/3).
	if want := 4.1321 / math.Sqrt(2.0/3); math.Abs(d.MDB[0]-want) > 1e-3 {
		t.Errorf("MDB_0 = %v, want %v", d.MDB[0], want)
	}
	opts := []GaugeOption{
		{Label: "sees crowd only", Row: []float64{1, 0}, Sigma: 1},
		{Label: "sees snow", Row: []float64{0, 1}, Sigma: 1},
		{Label: "sees snow, noisy", Row: []float64{0, 1}, Sigma: 10},
	}
	pl, err := SuggestGauge(A, sigma, len(sigma), opts, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range pl {
		t.Logf("%-18s weakest r %.3f -> %.3f (member %d), new gauge r %.3f", p.Label, p.WeakestBefore, p.WeakestAfter, p.WeakestMember, p.NewRedundancy)
	}
	if pl[0].Label != "sees snow" || pl[len(pl)-1].Label != "sees crowd only" || pl[len(pl)-1].WeakestAfter > 1e-12 {
		t.Errorf("order %v; want the precise snow gauge first, crowd-only last with the weakest still 0", pl)
	}
	// Adding [0, 1] with sigma 1: members 3 and the new gauge share
	// unknown 1 after unknown 0 is fixed by the others; r_3 = 1/2 * ...
	// checked against a direct Detect of the extended layout.
	ext := mat.NewDense(5, 2, []float64{1, 0, 1, 0, 1, 0, 0.5, 1, 0, 1})
	d5, err := Detect(ext, []float64{1, 1, 1, 1, 1}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(d5.Redundancy[d5.Weakest]-pl[0].WeakestAfter) > 1e-12 {
		t.Errorf("suggestion weakest %v, direct %v", pl[0].WeakestAfter, d5.Redundancy[d5.Weakest])
	}
	if _, err := SuggestGauge(A, sigma, len(sigma), []GaugeOption{{Label: "bad", Row: []float64{1}, Sigma: 1}}, Options{}); err == nil {
		t.Error("short row accepted")
	}
}
