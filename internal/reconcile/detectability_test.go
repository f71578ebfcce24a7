package reconcile

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/model"
	"trussmonitor/internal/sensors"
	"trussmonitor/internal/structfile"
)

func loadExample(t *testing.T, dir string) (*model.Model, *sensors.Map) {
	t.Helper()
	st, err := structfile.LoadFile("../../testdata/" + dir + "/structure.yaml")
	if err != nil {
		t.Fatal(err)
	}
	m, err := model.Analyze(st)
	if err != nil {
		t.Fatal(err)
	}
	sm, err := sensors.LoadFile("../../testdata/"+dir+"/sensors.yaml", st)
	if err != nil {
		t.Fatal(err)
	}
	return m, sm
}

// TestDetectabilityFootbridge checks the report against the defining
// identities: the redundancy numbers sum to G - p (the trace of the
// idempotent Q_e W; Teunissen, Adjustment Theory, 2000, from memory) and
// MDB_i = sigma_i delta0 / sqrt(r_i) (Baarda 1968, from memory) with
// delta0 = 4.1321 for alpha0 = 0.001, beta = 0.80.
func TestDetectabilityFootbridge(t *testing.T) {
	m, sm := loadExample(t, "footbridge")
	rep, err := LayoutDetectability(m, sm, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.Members) != len(sm.GaugedMembers()) {
		t.Fatalf("%d members in the report, %d gauged", len(rep.Members), len(sm.GaugedMembers()))
	}
	sum := 0.0
	for _, md := range rep.Members {
		sum += md.Redundancy
		if md.Checkable {
			want := md.SigmaN * rep.Delta0 / math.Sqrt(md.Redundancy)
			if math.Abs(md.MDBN-want) > 1e-9*want {
				t.Errorf("%s: MDB %g, want sigma delta0/sqrt(r) = %g", md.Member, md.MDBN, want)
			}
		}
	}
	// With the noisy inputs as pseudo-observations the members' numbers and
	// the inputs' share add up to G - p.
	if g, p := len(rep.Members), len(rep.Unknown); math.Abs(sum+rep.InputRedundancy-float64(g-p)) > 1e-9 || rep.DOF != g-p {
		t.Errorf("sum of redundancy numbers %g, dof %d; want G - p = %d", sum, rep.DOF, g-p)
	}
	if math.Abs(rep.Delta0-4.1321) > 5e-4 {
		t.Errorf("delta0 %g, want 4.1321 (Baarda 1968, from memory)", rep.Delta0)
	}
	if len(rep.Suggestions) == 0 {
		t.Fatal("no gauge suggestion")
	}
	for i := 1; i < len(rep.Suggestions); i++ {
		if rep.Suggestions[i].WeakestAfter > rep.Suggestions[i-1].WeakestAfter {
			t.Errorf("suggestions not ordered: %+v", rep.Suggestions)
		}
	}
	if best := rep.Suggestions[0]; best.WeakestAfter < best.WeakestBefore-1e-12 {
		t.Errorf("an extra gauge lowered the weakest redundancy: %+v", best)
	}
}

// TestDetectabilityUncheckable: a gauged member whose row of the unknown
// loads' influence is the only one carrying an unknown has redundancy 0
// (the unknown is fitted to it exactly) and is reported as not checkable.
// Closed form: with one unknown seen by one gauge only, that gauge's
// residual is always zero.
func TestDetectabilityUncheckable(t *testing.T) {
	a := mat.NewDense(3, 1, []float64{0, 0, 5})
	d, err := Detect(a, []float64{1, 1, 1}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if d.Checkable[2] || d.Redundancy[2] > 1e-12 || !d.Checkable[0] {
		t.Errorf("checkable %v, redundancy %v; want the third not checkable (r = 0)", d.Checkable, d.Redundancy)
	}
}
