package capacity_test

import (
	"math"
	"testing"

	"trussmonitor/internal/model"
	"trussmonitor/internal/structfile"
)

// Independent evaluation of the resistance formulas for this test, written
// from the standards without calling package capacity:
// EN 1993-1-1 (6.6) N_pl,Rd = A fy / gM0; (6.47)-(6.50) N_b,Rd = chi A fy /
// gM1 with lambda-bar = (L/i) / (pi sqrt(E/fy)), Phi and chi of 6.3.1.2;
// AISC 360-16 (D2-1) 0.9 Fy Ag; (E3-1)..(E3-4) 0.9 Fcr Ag.
func independentUtilisation(s *model.Structure, k int, n float64, lcr float64) float64 {
	mb := s.Members[k]
	a, fy, e, i := mb.A, mb.Fy, mb.E, mb.RadiusOfGyration
	var rd float64
	switch s.Design.Standard.String() {
	case "EN 1993-1-1":
		alpha := map[string]float64{"a0": 0.13, "a": 0.21, "b": 0.34, "c": 0.49, "d": 0.76}[mb.Curve.String()]
		if n >= 0 {
			rd = a * fy / s.Design.GammaM0
			break
		}
		lam := lcr / i / (math.Pi * math.Sqrt(e/fy))
		chi := 1.0
		if lam > 0.2 {
			phi := 0.5 * (1 + alpha*(lam-0.2) + lam*lam)
			chi = math.Min(1, 1/(phi+math.Sqrt(phi*phi-lam*lam)))
		}
		rd = chi * a * fy / s.Design.GammaM1
	case "AISC 360-16":
		if n >= 0 {
			rd = 0.9 * fy * a
			break
		}
		kl := lcr / i
		fe := math.Pi * math.Pi * e / (kl * kl)
		fcr := 0.877 * fe
		if fy/fe <= 2.25 { // equivalent to Lc/r <= 4.71 sqrt(E/Fy)
			fcr = math.Pow(0.658, fy/fe) * fy
		}
		rd = 0.9 * fcr * a
	default:
		panic("unexpected standard in an example structure: " + s.Design.Standard.String())
	}
	return math.Abs(n) / rd
}

// TestExampleUtilisations computes the utilisation of every member of the
// example footbridge (EN 1993-1-1) and roof (AISC 360-16) under each of
// their load cases, with forces from the model's solve of the case, and
// compares the production values with the independent evaluation above
// (buckling length from the node coordinates: 1.0 x the member length).
func TestExampleUtilisations(t *testing.T) {
	for _, file := range []string{"../../testdata/footbridge/structure.yaml", "../../testdata/roof/structure.yaml"} {
		st, err := structfile.LoadFile(file)
		if err != nil {
			t.Fatal(err)
		}
		if st.Design == nil {
			t.Fatalf("%s declares no design basis", file)
		}
		m, err := model.Analyze(st)
		if err != nil {
			t.Fatal(err)
		}
		checked, maxU := 0, 0.0
		for _, c := range st.Cases {
			r, err := m.SolveCase(c.Name)
			if err != nil {
				t.Fatal(err)
			}
			us, err := st.Utilisations(r.Forces)
			if err != nil {
				t.Fatal(err)
			}
			for k, mb := range st.Members {
				a, b := st.Nodes[mb.I].X, st.Nodes[mb.J].X
				l := math.Sqrt((a[0]-b[0])*(a[0]-b[0]) + (a[1]-b[1])*(a[1]-b[1]) + (a[2]-b[2])*(a[2]-b[2]))
				want := independentUtilisation(st, k, r.Forces[k], l)
				if math.Abs(us[k]-want) > 1e-12*math.Max(1, want) {
					t.Errorf("%s case %s member %s: utilisation %.15g, independent %.15g (N = %.6g N)", st.Name, c.Name, mb.ID, us[k], want, r.Forces[k])
				}
				maxU = math.Max(maxU, us[k])
				checked++
			}
		}
		t.Logf("%s (%s): %d member-cases, largest utilisation %.3f", st.Name, st.Design.Standard, checked, maxU)
		if maxU <= 0 || maxU > 1 {
			t.Errorf("%s: largest utilisation %.3f; the invented example should be loaded but within its resistance", st.Name, maxU)
		}
	}
}
