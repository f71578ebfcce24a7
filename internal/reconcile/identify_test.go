package reconcile

import (
	"math"
	"math/rand/v2"
	"reflect"
	"sort"
	"strconv"
	"testing"
	"time"

	"gonum.org/v1/gonum/mat"

	"trussmonitor/internal/model"
	"trussmonitor/internal/structfile"
)

// TestRhoMax: the grouping bound 1 - 2 (z_beta / delta0)^2 at alpha0 =
// 0.001, beta = 0.80: delta0 = 4.1321 (Baarda 1968, from memory) and
// z_0.80 = Phi^-1(0.80) = 0.8416 (standard normal table, from memory), so
// rho_max = 1 - 2 (0.8416 / 4.1321)^2 = 0.9170.
func TestRhoMax(t *testing.T) {
	r, err := RhoMax(DefaultAlpha0, DefaultPower)
	if err != nil {
		t.Fatal(err)
	}
	if want := 1 - 2*(0.8416/4.1321)*(0.8416/4.1321); math.Abs(r-want) > 2e-4 {
		t.Errorf("RhoMax = %.5f, want %.5f", r, want)
	}
}

// handTruss is a two-panel plane truss (3 m x 3 m panels): panel 1 (L0 L1
// U1 U0) is braced by one diagonal D1 = U0-L1 (statically determinate),
// panel 2 (L1 L2 U2 U1) by two diagonals D2 = L1-U2 and C2 = U1-L2 (one
// redundant member). Pinned at L0, roller in y at L2; 10 members, 3
// reactions, 6 joints: degree of indeterminacy 10 + 3 - 12 = 1. A 100 kN
// load acts down at L1 and at U2.
func handTruss(t *testing.T) (*model.Model, map[string]int) {
	t.Helper()
	st := &model.Structure{Name: "hand", Dim: 2, Gravity: [3]float64{0, -1, 0}, Groups: map[string][]int{}}
	nodes := []struct {
		id   string
		x, y float64
	}{{"L0", 0, 0}, {"L1", 3, 0}, {"L2", 6, 0}, {"U0", 0, 3}, {"U1", 3, 3}, {"U2", 6, 3}}
	ni := map[string]int{}
	for i, n := range nodes {
		st.Nodes = append(st.Nodes, model.Node{ID: n.id, X: [3]float64{n.x, n.y}})
		ni[n.id] = i
	}
	mi := map[string]int{}
	for _, mb := range [][3]string{{"B1", "L0", "L1"}, {"B2", "L1", "L2"}, {"T1", "U0", "U1"}, {"T2", "U1", "U2"},
		{"V0", "L0", "U0"}, {"V1", "L1", "U1"}, {"V2", "L2", "U2"}, {"D1", "U0", "L1"}, {"D2", "L1", "U2"}, {"C2", "U1", "L2"}} {
		mi[mb[0]] = len(st.Members)
		st.Members = append(st.Members, model.Member{ID: mb[0], I: ni[mb[1]], J: ni[mb[2]], E: 210e9, A: 2e-3, Alpha: 12e-6})
	}
	st.Supports = []model.Support{{Node: ni["L0"], Fixed: [3]bool{true, true}}, {Node: ni["L2"], Fixed: [3]bool{false, true}}}
	st.Patterns = []model.Pattern{{Name: "p", Forces: []model.NodalForce{{Node: ni["L1"], F: [3]float64{0, -100e3}}, {Node: ni["U2"], F: [3]float64{0, -100e3}}}}}
	m, err := model.Analyze(st)
	if err != nil {
		t.Fatal(err)
	}
	if d := m.Determinacy(); d.ByRank != 1 {
		t.Fatalf("hand truss: degree of indeterminacy %d, want 1", d.ByRank)
	}
	return m, mi
}

// TestSeparabilityHandTruss: the answer known by hand. A stiffness change
// of D1 (determinate panel) changes no member force, only the strain its
// own gauge reads: its signature is the gauge's unit vector, so "gauge D1"
// and "E A of D1" have w correlation 1 and form one group.
//
// A stiffness change of D2 (doubly braced panel) moves the panel's
// self-stress state s (D2, C2: 1; B2, T2, V1, V2: -1/sqrt 2, from the
// equilibrium of the square X panel). By the force method (hand
// calculation, equal E A): flexibility f = sum s^2 L = 2 (3 sqrt 2) + 4 (1/2)
// 3 = 6 sqrt 2 + 6, D2's share L_D2 / f = 1 / (2 + sqrt 2), so its
// self-flexibility is kappa = 1 - 1 / (2 + sqrt 2) = 1 / sqrt 2. Per unit
// relative change d and force N of D2, member g != D2 changes by
// N (1 - kappa) s_g and D2's own gauge (strain times nominal E A) by
// -N kappa. Over the gauges D2, C2, B2, T2 (equal noise) the signature is
// N (-kappa, 1 - kappa, -(1 - kappa)/sqrt 2, -(1 - kappa)/sqrt 2), whose
// correlation with "gauge D2" is kappa / sqrt(kappa^2 + 2 (1 - kappa)^2) =
// 0.8629 < rho_max = 0.917: they separate (barely: a gauge on V1 or V2 would
// separate them further).
func TestSeparabilityHandTruss(t *testing.T) {
	m, mi := handTruss(t)
	gaugedNames := []string{"D1", "B1", "D2", "C2", "B2", "T2"}
	gauged := make([]int, len(gaugedNames))
	for i, n := range gaugedNames {
		gauged[i] = mi[n]
	}
	r, err := m.SolveFactors([]model.Factor{{Pattern: "p", Factor: 1}})
	if err != nil {
		t.Fatal(err)
	}
	sg, err := m.Signatures(gauged)
	if err != nil {
		t.Fatal(err)
	}
	stiff := sg.Stiffness(r.Forces)
	kappa, err := m.SelfFlexibility([]int{mi["D1"], mi["D2"]})
	if err != nil {
		t.Fatal(err)
	}
	// A member whose removal leaves a mechanism has kappa = 1.
	if math.Abs(kappa[0]-1) > 1e-9 {
		t.Errorf("kappa of the determinate diagonal D1 = %v, want 1", kappa[0])
	}
	if !(kappa[1] > 0.05 && kappa[1] < 0.95) {
		t.Errorf("kappa of the redundant diagonal D2 = %v, want well inside (0, 1)", kappa[1])
	}
	sigma := make([]float64, len(gauged))
	for i := range sigma {
		sigma[i] = 2e3
	}
	s, err := NewSolver(nil, sigma, Options{})
	if err != nil {
		t.Fatal(err)
	}
	cands := GaugeFaults(gaugedNames)
	col := func(name string) []float64 {
		v := make([]float64, len(gauged))
		for g := range v {
			v[g] = stiff.At(g, mi[name])
		}
		return v
	}
	cands = append(cands,
		Candidate{Kind: StiffnessChange, Label: "E A of D1", Signature: col("D1"), Kappa: kappa[0], Lower: -MaxStiffnessLoss, Upper: MaxStiffnessGain},
		Candidate{Kind: StiffnessChange, Label: "E A of D2", Signature: col("D2"), Kappa: kappa[1], Lower: -MaxStiffnessLoss, Upper: MaxStiffnessGain})
	// Plant a 30 % loss of D2's stiffness, noise-free: exact by
	// Sherman-Morrison, S d / (1 + kappa d).
	d := -0.3
	y := make([]float64, len(gauged))
	for g := range y {
		y[g] = col("D2")[g] * d / (1 + kappa[1]*d)
	}
	res, err := s.Epoch(y, make([]float64, len(y)), nil)
	if err != nil {
		t.Fatal(err)
	}
	id, err := res.Identify(cands, 0)
	if err != nil {
		t.Fatal(err)
	}
	if rho := id.Rho("gauge D1", "E A of D1"); math.Abs(math.Abs(rho)-1) > 1e-9 {
		t.Errorf("rho(gauge D1, E A of D1) = %v, want +-1 (determinate panel)", rho)
	}
	if k, want := 1/math.Sqrt2, 1-1/(2+math.Sqrt2); math.Abs(kappa[1]-want) > 1e-9 || math.Abs(k-want) > 1e-12 {
		t.Errorf("kappa of D2 = %v, want 1 - 1/(2 + sqrt 2) = %v (hand calculation)", kappa[1], want)
	}
	k := 1 / math.Sqrt2
	if rho, want := id.Rho("gauge D2", "E A of D2"), k/math.Sqrt(k*k+2*(1-k)*(1-k)); math.Abs(math.Abs(rho)-want) > 1e-9 {
		t.Errorf("|rho(gauge D2, E A of D2)| = %v, want %v (hand calculation)", math.Abs(rho), want)
	}
	groups := id.Groups(id.Causes)
	find := func(label string) int {
		for gi, g := range groups {
			for _, c := range g.Causes {
				if c.Label == label {
					return gi
				}
			}
		}
		return -1
	}
	if a, b := find("gauge D1"), find("E A of D1"); a < 0 || a != b {
		t.Errorf("gauge D1 in group %d, E A of D1 in group %d; want one group", a, b)
	}
	if a, b := find("gauge D2"), find("E A of D2"); a < 0 || a == b {
		t.Errorf("gauge D2 in group %d, E A of D2 in group %d; want separate groups", a, b)
	}
	if g := groups[0]; len(g.Causes) != 1 || g.Causes[0].Label != "E A of D2" {
		t.Fatalf("first group %s, want E A of D2 alone", g.Labels())
	}
	if got := groups[0].Causes[0].Size; math.Abs(got-d) > 1e-9 {
		t.Errorf("exact size %v, want %v", got, d)
	}
}

// TestExactStiffnessSizeDense checks the Sherman-Morrison size against a
// full dense re-solve of the changed model (gonum's dense Cholesky, an
// assembly written here from the structure's geometry) for every member of
// both example structures: a loss of 30 % of one member's E A, with its
// thermal load scaled alike, changes the gauge-inferred force of every
// member g by S_gk d / (1 + kappa_k d) (to 1e-6 relative), and fitting that
// change recovers d to 1e-6 relative (Sherman and Morrison 1950, from
// memory).
func TestExactStiffnessSizeDense(t *testing.T) {
	for _, name := range []string{"footbridge", "roof"} {
		t.Run(name, func(t *testing.T) {
			st, err := structfile.LoadFile("../../testdata/" + name + "/structure.yaml")
			if err != nil {
				t.Fatal(err)
			}
			// The state: every nodal force of every pattern that is not a
			// temperature or settlement pattern, at factor 1, plus +20 K on
			// the first half of the members (a thermal load that scales
			// with E A).
			test := model.Pattern{Name: "exact-size-test"}
			for _, p := range st.Patterns {
				test.Forces = append(test.Forces, p.Forces...)
			}
			for e := 0; e < len(st.Members)/2; e++ {
				test.Temperatures = append(test.Temperatures, model.MemberTemperature{Member: e, DeltaK: 20})
			}
			st.Patterns = append(st.Patterns, test)
			m, err := model.Analyze(st)
			if err != nil {
				t.Fatal(err)
			}
			r, err := m.SolveFactors([]model.Factor{{Pattern: test.Name, Factor: 1}})
			if err != nil {
				t.Fatal(err)
			}
			nm := len(st.Members)
			all := make([]int, nm)
			for i := range all {
				all[i] = i
			}
			sg, err := m.Signatures(all)
			if err != nil {
				t.Fatal(err)
			}
			stiff := sg.Stiffness(r.Forces)
			kappa, err := m.SelfFlexibility(all)
			if err != nil {
				t.Fatal(err)
			}
			sigma := make([]float64, nm)
			for i := range sigma {
				sigma[i] = 1e3
			}
			s, err := NewSolver(nil, sigma, Options{})
			if err != nil {
				t.Fatal(err)
			}
			base := denseForces(t, st, -1, 0, test)
			const d = -0.3
			worst, worstSize, sized := 0.0, 0.0, 0
			for k := 0; k < nm; k++ {
				changed := denseForces(t, st, k, d, test)
				dy := make([]float64, nm)
				scale := 0.0
				for g := range dy {
					yg := changed[g]
					if g == k {
						yg /= 1 + d // the gauge reads strain times the nominal E A
					}
					dy[g] = yg - base[g]
					scale = math.Max(scale, math.Abs(dy[g]))
				}
				sig := make([]float64, nm)
				for g := range sig {
					sig[g] = stiff.At(g, k)
					pred := sig[g] * d / (1 + kappa[k]*d)
					if e := math.Abs(pred-dy[g]) / math.Max(scale, 1e-300); scale > 0 && e > worst {
						worst = e
					}
				}
				if scale < 1 { // a member carrying no force: nothing to size
					continue
				}
				res, err := s.Epoch(dy, make([]float64, nm), nil)
				if err != nil {
					t.Fatal(err)
				}
				id, err := res.Identify([]Candidate{{Kind: StiffnessChange, Label: st.Members[k].ID, Signature: sig, Kappa: kappa[k]}}, 0)
				if err != nil {
					t.Fatal(err)
				}
				got := id.Causes[0].Size
				if e := math.Abs(got-d) / math.Abs(d); e > worstSize {
					worstSize = e
				}
				if e := math.Abs(got-d) / math.Abs(d); e > 1e-6 {
					t.Errorf("member %s: exact size %.9f, want %.9f (kappa %.6f)", st.Members[k].ID, got, d, kappa[k])
				}
				sized++
			}
			t.Logf("%s: %d members, %d sized; worst relative error of the predicted change %.2e, of the size %.2e", name, nm, sized, worst, worstSize)
			if worst > 1e-6 {
				t.Errorf("Sherman-Morrison change differs from the dense re-solve by %.3g relative; want <= 1e-6", worst)
			}
			if sized < nm/2 {
				t.Errorf("only %d of %d members carried force to size", sized, nm)
			}
		})
	}
}

// denseForces assembles the global stiffness of st densely (members and
// support springs, fixed directions eliminated; no inclined rollers in the
// example structures), with member k's E A scaled by (1 + d) (k < 0: none),
// applies the nodal forces and member temperatures of p, and returns the
// member forces N = (E A / L) c . (u_j - u_i) - E A alpha dT.
func denseForces(t *testing.T, st *model.Structure, k int, d float64, p model.Pattern) []float64 {
	return denseForcesSpring(t, st, k, d, 1, p)
}

// denseForcesSpring is denseForces with every support spring scaled by
// springScale.
func denseForcesSpring(t *testing.T, st *model.Structure, k int, d, springScale float64, p model.Pattern) []float64 {
	t.Helper()
	dim, nn := st.Dim, len(st.Nodes)
	nd := dim * nn
	fixed := make([]bool, nd)
	K := mat.NewSymDense(nd, nil)
	for _, sp := range st.Supports {
		if sp.Normal != nil {
			t.Fatalf("dense reference: inclined roller at node %d not supported", sp.Node)
		}
		for a := 0; a < dim; a++ {
			fixed[sp.Node*dim+a] = sp.Fixed[a]
			if sp.Spring[a] != 0 {
				w := sp.Node*dim + a
				K.SetSym(w, w, K.At(w, w)+springScale*sp.Spring[a])
			}
		}
	}
	ea := func(e int) float64 {
		v := st.Members[e].E * st.Members[e].A
		if e == k {
			v *= 1 + d
		}
		return v
	}
	geom := func(e int) ([3]float64, float64) {
		mb := st.Members[e]
		var c [3]float64
		l := 0.0
		for a := 0; a < dim; a++ {
			c[a] = st.Nodes[mb.J].X[a] - st.Nodes[mb.I].X[a]
			l += c[a] * c[a]
		}
		l = math.Sqrt(l)
		for a := range c {
			c[a] /= l
		}
		return c, l
	}
	f := make([]float64, nd)
	for _, fo := range p.Forces {
		for a := 0; a < dim; a++ {
			f[fo.Node*dim+a] += fo.F[a]
		}
	}
	dT := make([]float64, len(st.Members))
	for _, tm := range p.Temperatures {
		dT[tm.Member] += tm.DeltaK
	}
	for e, mb := range st.Members {
		c, l := geom(e)
		ke := ea(e) / l
		dofs := make([]int, 0, 2*dim)
		sgn := make([]float64, 0, 2*dim)
		for a := 0; a < dim; a++ {
			dofs = append(dofs, mb.I*dim+a)
			sgn = append(sgn, -c[a])
		}
		for a := 0; a < dim; a++ {
			dofs = append(dofs, mb.J*dim+a)
			sgn = append(sgn, c[a])
		}
		for x, p := range dofs {
			for y, q := range dofs {
				if q < p {
					continue
				}
				K.SetSym(p, q, K.At(p, q)+ke*sgn[x]*sgn[y])
			}
			// Thermal equivalent load E A alpha dT b_e.
			f[p] += ea(e) * mb.Alpha * dT[e] * sgn[x]
		}
	}
	var free []int
	for w := 0; w < nd; w++ {
		if !fixed[w] {
			free = append(free, w)
		}
	}
	kf := mat.NewSymDense(len(free), nil)
	ff := mat.NewVecDense(len(free), nil)
	for i, p := range free {
		ff.SetVec(i, f[p])
		for j := i; j < len(free); j++ {
			kf.SetSym(i, j, K.At(p, free[j]))
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(kf) {
		t.Fatalf("dense reference: stiffness of %s (member %d x %v) not positive definite", st.Name, k, 1+d)
	}
	var u mat.VecDense
	if err := ch.SolveVecTo(&u, ff); err != nil {
		t.Fatal(err)
	}
	w := make([]float64, nd)
	for i, p := range free {
		w[p] = u.AtVec(i)
	}
	out := make([]float64, len(st.Members))
	for e, mb := range st.Members {
		c, l := geom(e)
		el := 0.0
		for a := 0; a < dim; a++ {
			el += c[a] * (w[mb.J*dim+a] - w[mb.I*dim+a])
		}
		out[e] = ea(e)/l*el - ea(e)*mb.Alpha*dT[e]
	}
	return out
}

// TestSeparatingGaugeHandTruss: on the hand truss with gauges on D1, B1 and
// D2 only, no gauged member besides D2 lies in panel 2's self-stress state,
// so "gauge D2" and "E A of D2" are one group (rho = 1). Among single extra
// gauges, C2 (self-stress entry 1, the largest; hand calculation in
// TestSeparabilityHandTruss) lowers their correlation most, to
// kappa / sqrt(kappa^2 + (1 - kappa)^2) = 0.924 at equal noise, kappa =
// 1/sqrt 2: still above rho_max = 0.917, so the search must name C2 and
// report that it does not quite separate them.
func TestSeparatingGaugeHandTruss(t *testing.T) {
	m, mi := handTruss(t)
	names := []string{"D1", "B1", "D2"}
	gauged := []int{mi["D1"], mi["B1"], mi["D2"]}
	r, err := m.SolveFactors([]model.Factor{{Pattern: "p", Factor: 1}})
	if err != nil {
		t.Fatal(err)
	}
	all := make([]int, len(m.Structure().Members))
	for i := range all {
		all[i] = i
	}
	sg, err := m.Signatures(all)
	if err != nil {
		t.Fatal(err)
	}
	stiff := sg.Stiffness(r.Forces)
	kappa, err := m.SelfFlexibility([]int{mi["D2"]})
	if err != nil {
		t.Fatal(err)
	}
	sigma := []float64{2e3, 2e3, 2e3}
	s, err := NewSolver(nil, sigma, Options{})
	if err != nil {
		t.Fatal(err)
	}
	sig := make([]float64, 3)
	for g, k := range gauged {
		sig[g] = stiff.At(k, mi["D2"])
	}
	cands := append(GaugeFaults(names), Candidate{Kind: StiffnessChange, Label: "E A of D2", Signature: sig, Kappa: kappa[0]})
	res, err := s.Epoch(make([]float64, 3), make([]float64, 3), nil)
	if err != nil {
		t.Fatal(err)
	}
	id, err := res.Identify(cands, 0)
	if err != nil {
		t.Fatal(err)
	}
	groups, untestable := id.DesignGroups()
	if len(groups) != 1 || len(groups[0]) != 2 || groups[0][0].Label != "gauge D2" || groups[0][1].Label != "E A of D2" {
		t.Fatalf("design groups %v (untestable %v); want one group {gauge D2, E A of D2}", groups, untestable)
	}
	var options []ExtraGauge
	for _, name := range []string{"T1", "V0", "V1", "T2", "V2", "C2"} {
		k := mi[name]
		options = append(options, ExtraGauge{Label: name, Row: nil, Sigma: 2e3, Entries: map[string]float64{"E A of D2": stiff.At(k, mi["D2"])}})
	}
	best, ok, err := SeparatingGauge(nil, sigma, cands[2:], options, Options{})
	if err != nil || !ok {
		t.Fatalf("SeparatingGauge: ok %v, err %v", ok, err)
	}
	k := 1 / math.Sqrt2
	want := k / math.Sqrt(k*k+(1-k)*(1-k))
	if best.Gauge != "C2" || math.Abs(best.MaxRho-want) > 1e-9 || best.Separates != (want < s.RhoMax()) {
		t.Errorf("best extra gauge %+v; want C2 with |rho| %.4f (hand calculation), separates %v", best, want, want < s.RhoMax())
	}
}

// TestGroupsPlausibilityAndTestability: on a synthetic design with no
// unknowns and unit noise, a settlement candidate whose fitted size is 0.5 m
// (beyond MaxSettlement) is ranked after a plausible candidate with a
// smaller T and marked; a candidate with an all-zero signature (null
// signature) and one whose largest plausible size shifts its test by less
// than delta0 are never offered (both untestable).
func TestGroupsPlausibilityAndTestability(t *testing.T) {
	const g = 6
	sigma := []float64{1, 1, 1, 1, 1, 1}
	s, err := NewSolver(nil, sigma, Options{})
	if err != nil {
		t.Fatal(err)
	}
	y := []float64{50, 0, 0, 0, 0, 0}
	y[3] = 20
	res, err := s.Epoch(y, make([]float64, g), nil)
	if err != nil {
		t.Fatal(err)
	}
	unit := func(i int, v float64) []float64 {
		sig := make([]float64, g)
		sig[i] = v
		return sig
	}
	cands := []Candidate{
		// Size 50 / 100 = 0.5 m: implausible; T = 2500.
		{Kind: SupportSettlement, Label: "settlement far", Signature: unit(0, 100), Lower: -MaxSettlement, Upper: MaxSettlement},
		// A plausible load of 20 N; T = 400.
		{Kind: NodalLoad, Label: "load near", Signature: unit(3, 1), Lower: -1e3, Upper: 1e3},
		{Kind: NodalLoad, Label: "load null", Signature: make([]float64, g), Lower: -1e3, Upper: 1e3},
		// 1e-4 N per metre: 0.1 m moves the gauge by 1e-5 sigma.
		{Kind: SupportSettlement, Label: "settlement faint", Signature: unit(5, 1e-4), Lower: -MaxSettlement, Upper: MaxSettlement},
	}
	id, err := res.Identify(cands, 0)
	if err != nil {
		t.Fatal(err)
	}
	groups := id.Groups(id.Causes)
	if len(groups) != 2 {
		t.Fatalf("%d groups; want 2 (untestable left out): %+v", len(groups), groups)
	}
	if groups[0].Causes[0].Label != "load near" || groups[0].Implausible {
		t.Errorf("first group %s (implausible %v); want the plausible load first", groups[0].Labels(), groups[0].Implausible)
	}
	if groups[1].Causes[0].Label != "settlement far" || !groups[1].Implausible || !groups[1].Causes[0].Implausible {
		t.Errorf("second group %s (implausible %v); want the 0.5 m settlement marked implausible", groups[1].Labels(), groups[1].Implausible)
	}
	if u := id.Untestable(); len(u) != 2 || u[0] != "load null" || u[1] != "settlement faint" {
		t.Errorf("untestable %v; want [load null settlement faint]", u)
	}
	// Standard deviation and minimal detectable size of a linear
	// candidate: 1/sqrt(Den) and delta0/sqrt(Den) (Baarda 1968; Teunissen
	// 2000, from memory): for "load near" Den = 1.
	c := id.Causes[1]
	if math.Abs(c.Std-1) > 1e-12 || math.Abs(c.MDS-s.Delta0()) > 1e-12 {
		t.Errorf("load near: std %v, MDS %v; want 1 and delta0 = %v", c.Std, c.MDS, s.Delta0())
	}
}

// TestRecentRankerSums: the sums over the epochs of the last D equal the
// window statistics (sum n)^2 / (sum d) of those epochs, and epochs older
// than D drop out.
func TestRecentRankerSums(t *testing.T) {
	r, err := NewRecentRanker(2 * time.Minute)
	if err != nil {
		t.Fatal(err)
	}
	t0 := time.Date(2026, 6, 1, 0, 0, 0, 0, time.UTC)
	mk := func(num, den float64) []Cause {
		return []Cause{finishCandidate(Candidate{Kind: GaugeFault, Label: "gauge A"}, num, den, den, 1, 4.13)}
	}
	r.Add(t0, mk(100, 1))                   // dropped later
	r.Add(t0.Add(2*time.Minute), mk(3, 1))  // kept (exactly D before the last)
	r.Add(t0.Add(3*time.Minute), mk(5, 2))  // kept
	r.Add(t0.Add(4*time.Minute), mk(-1, 1)) // kept
	cs := r.Causes()
	if len(cs) != 1 || r.Epochs() != 3 {
		t.Fatalf("%d causes over %d epochs; want 1 over 3", len(cs), r.Epochs())
	}
	if c := cs[0]; math.Abs(c.T-49.0/4) > 1e-12 || math.Abs(c.Size-7.0/4) > 1e-12 || c.Epochs != 3 {
		t.Errorf("T %v size %v epochs %d; want 12.25, 1.75, 3", c.T, c.Size, c.Epochs)
	}
}

// TestExactSpringSizeDense: a 40 % loss of the footbridge's bearing spring
// (L8 in x) changes every member force by -k u z_g d / (1 + kappa d)
// (Sherman-Morrison for the rank-one change of the spring, u the bearing's
// displacement, z_g the member's force per unit load there), checked
// against a full dense re-solve to 1e-6 relative, and fitting the change
// recovers d.
func TestExactSpringSizeDense(t *testing.T) {
	st, err := structfile.LoadFile("../../testdata/footbridge/structure.yaml")
	if err != nil {
		t.Fatal(err)
	}
	test := model.Pattern{Name: "spring-test"}
	for _, p := range st.Patterns {
		test.Forces = append(test.Forces, p.Forces...)
	}
	for e := range st.Members {
		test.Temperatures = append(test.Temperatures, model.MemberTemperature{Member: e, DeltaK: 20})
	}
	st.Patterns = append(st.Patterns, test)
	m, err := model.Analyze(st)
	if err != nil {
		t.Fatal(err)
	}
	springs := m.Springs()
	if len(springs) != 1 || springs[0].Label != "L8 x" {
		t.Fatalf("springs %+v; want the bearing L8 x", springs)
	}
	sp := springs[0]
	disp, err := m.SpringInfluence(springs, []model.Input{{Kind: model.PatternInput, Name: test.Name}})
	if err != nil {
		t.Fatal(err)
	}
	u := disp.At(0, 0)
	nm := len(st.Members)
	all := make([]int, nm)
	for i := range all {
		all[i] = i
	}
	sg, err := m.Signatures(all)
	if err != nil {
		t.Fatal(err)
	}
	labels, nodal := sg.NodalLoad()
	j := -1
	for i, l := range labels {
		if l == sp.Label {
			j = i
		}
	}
	const d = -0.4
	base := denseForcesSpring(t, st, -1, 0, 1, test)
	changed := denseForcesSpring(t, st, -1, 0, 1+d, test)
	sig := make([]float64, nm)
	dy := make([]float64, nm)
	scale, worst := 0.0, 0.0
	for g := range sig {
		sig[g] = -sp.Stiffness * u * nodal.At(g, j)
		dy[g] = changed[g] - base[g]
		scale = math.Max(scale, math.Abs(dy[g]))
	}
	for g := range sig {
		worst = math.Max(worst, math.Abs(sig[g]*d/(1+sp.Kappa*d)-dy[g])/scale)
	}
	if scale < 1 || worst > 1e-6 {
		t.Fatalf("largest change %.3g N; Sherman-Morrison differs from the dense re-solve by %.3g relative", scale, worst)
	}
	sigma := make([]float64, nm)
	for i := range sigma {
		sigma[i] = 1e3
	}
	s, err := NewSolver(nil, sigma, Options{})
	if err != nil {
		t.Fatal(err)
	}
	res, err := s.Epoch(dy, make([]float64, nm), nil)
	if err != nil {
		t.Fatal(err)
	}
	id, err := res.Identify([]Candidate{{Kind: SpringChange, Label: "spring " + sp.Label, Signature: sig, Kappa: sp.Kappa}}, 0)
	if err != nil {
		t.Fatal(err)
	}
	if got := id.Causes[0].Size; math.Abs(got-d) > 1e-6*math.Abs(d) {
		t.Errorf("spring size %.9f, want %v (kappa %.6f)", got, d, sp.Kappa)
	}
	t.Logf("spring L8 x: u = %.3g mm, kappa = %.4f, largest change %.0f N, worst relative error %.2e", u*1e3, sp.Kappa, scale, worst)
}

// TestIdentifyProjectionReuse: a solver that reuses the projected
// signatures of unchanged candidates (from its earlier epochs under the
// same availability) gives bit for bit the causes, correlations and groups
// of a fresh solver, over epochs that alternate two availability masks,
// with one candidate whose signature changes every epoch (as a stiffness
// change's follows the force state) and one that changes once (seeded).
func TestIdentifyProjectionReuse(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	const g, p = 12, 3
	a := mat.NewDense(g, p, nil)
	sigma := make([]float64, g)
	for i := range sigma {
		sigma[i] = 0.5 + rng.Float64()
		for j := 0; j < p; j++ {
			a.Set(i, j, rng.NormFloat64())
		}
	}
	randSig := func() []float64 {
		s := make([]float64, g)
		for i := range s {
			s[i] = rng.NormFloat64()
		}
		return s
	}
	var fixed []Candidate
	for i := 0; i < g; i++ {
		sig := make([]float64, g)
		sig[i] = 1
		fixed = append(fixed, Candidate{Kind: GaugeFault, Label: "gauge " + strconv.Itoa(i), Signature: sig})
	}
	fixed = append(fixed, Candidate{Kind: NodalLoad, Label: "load", Signature: randSig(), Lower: -1e3, Upper: 1e3})
	onceChanged := Candidate{Kind: NodalLoad, Label: "load once", Signature: randSig(), Lower: -1e3, Upper: 1e3}
	long, err := NewSolver(a, sigma, Options{})
	if err != nil {
		t.Fatal(err)
	}
	masks := [][]bool{nil, make([]bool, g)}
	for i := range masks[1] {
		masks[1][i] = i != 4
	}
	for epoch := 0; epoch < 8; epoch++ {
		if epoch == 5 {
			onceChanged.Signature = randSig()
		}
		cands := append(append([]Candidate(nil), fixed...), onceChanged,
			Candidate{Kind: StiffnessChange, Label: "E A of D2", Signature: randSig(), Lower: -1, Upper: 1})
		y := randSig()
		y[2] += 8
		mask := masks[epoch%2]
		fresh, err := NewSolver(a, sigma, Options{})
		if err != nil {
			t.Fatal(err)
		}
		var ids [2]*Identification
		for k, s := range []*Solver{long, fresh} {
			res, err := s.Epoch(y, make([]float64, g), mask)
			if err != nil {
				t.Fatal(err)
			}
			if ids[k], err = res.Identify(cands, 0); err != nil {
				t.Fatal(err)
			}
		}
		got, want := ids[0], ids[1]
		if !reflect.DeepEqual(got.Causes, want.Causes) {
			t.Fatalf("epoch %d: causes differ from a fresh solver's:\n%+v\nwant\n%+v", epoch, got.Causes, want.Causes)
		}
		for _, c1 := range cands {
			for _, c2 := range cands {
				if r1, r2 := got.Rho(c1.Label, c2.Label), want.Rho(c1.Label, c2.Label); math.Float64bits(r1) != math.Float64bits(r2) {
					t.Fatalf("epoch %d: rho(%s, %s) %v, fresh %v", epoch, c1.Label, c2.Label, r1, r2)
				}
			}
		}
		if gg, wg := got.Groups(got.Causes), want.Groups(want.Causes); !reflect.DeepEqual(gg, wg) {
			t.Fatalf("epoch %d: groups differ from a fresh solver's", epoch)
		}
	}
	// The projections were reused: kept for an unchanged candidate, given
	// up for the one that changes every epoch.
	res, err := long.Epoch(make([]float64, g), make([]float64, g), nil)
	if err != nil {
		t.Fatal(err)
	}
	if e := res.plan.projs.m["gauge 0"]; e == nil || e.pv == nil {
		t.Error("gauge 0: no projection kept")
	}
	if e := res.plan.projs.m["E A of D2"]; e == nil || e.pv != nil {
		t.Error("E A of D2: a projection kept for a signature that changes every epoch")
	}
}

// groupsRef is Groups as first written (a Rho call per pair, reflection
// sorts), the reference Groups must match.
func groupsRef(id *Identification, cs []Cause) []Group {
	order := make([]int, 0, len(cs))
	for i, c := range cs {
		if c.Testable {
			order = append(order, i)
		}
	}
	sort.SliceStable(order, func(a, b int) bool {
		ca, cb := cs[order[a]], cs[order[b]]
		if ca.Implausible != cb.Implausible {
			return !ca.Implausible
		}
		return ca.T > cb.T
	})
	used := make([]bool, len(cs))
	var out []Group
	for _, li := range order {
		if used[li] {
			continue
		}
		used[li] = true
		lead := cs[li]
		grp := Group{Causes: []Cause{lead}, T: lead.T, Implausible: lead.Implausible}
		for _, k := range order {
			if used[k] {
				continue
			}
			if math.Abs(id.Rho(lead.Label, cs[k].Label)) >= id.rhoMax {
				used[k] = true
				grp.Causes = append(grp.Causes, cs[k])
				grp.T = math.Max(grp.T, cs[k].T)
			}
		}
		sort.SliceStable(grp.Causes, func(a, b int) bool {
			if grp.Causes[a].Kind != grp.Causes[b].Kind {
				return grp.Causes[a].Kind < grp.Causes[b].Kind
			}
			return grp.Causes[a].Label < grp.Causes[b].Label
		})
		out = append(out, grp)
	}
	return out
}

// TestGroupsMatchReference: Groups gives the groups of the pairwise
// reference (groupsRef) on seeded random designs with many near-collinear
// candidates (so that groups of several form), null signatures, ties in T
// and a ranking from another list of the same labels (a window's).
func TestGroupsMatchReference(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	multi := 0
	for trial := 0; trial < 30; trial++ {
		g := 6 + rng.IntN(20)
		sigma := make([]float64, g)
		for i := range sigma {
			sigma[i] = 0.5 + rng.Float64()
		}
		s, err := NewSolver(nil, sigma, Options{})
		if err != nil {
			t.Fatal(err)
		}
		y := make([]float64, g)
		for i := range y {
			y[i] = 3 * rng.NormFloat64()
		}
		base := make([][]float64, 4)
		for b := range base {
			base[b] = make([]float64, g)
			for i := range base[b] {
				base[b][i] = rng.NormFloat64()
			}
		}
		var cands []Candidate
		for c := 0; c < 5+rng.IntN(40); c++ {
			sig := make([]float64, g)
			switch rng.IntN(6) {
			case 0: // null
			case 1, 2, 3: // near one of the base directions
				b := base[rng.IntN(len(base))]
				for i := range sig {
					sig[i] = b[i] + 0.05*rng.NormFloat64()
				}
			default:
				for i := range sig {
					sig[i] = rng.NormFloat64()
				}
			}
			cands = append(cands, Candidate{Kind: Kind(rng.IntN(3)), Label: "c" + strconv.Itoa(c), Signature: sig, Lower: -100, Upper: 100})
		}
		res, err := s.Epoch(y, make([]float64, g), nil)
		if err != nil {
			t.Fatal(err)
		}
		id, err := res.Identify(cands, 0)
		if err != nil {
			t.Fatal(err)
		}
		lists := [][]Cause{id.Causes}
		other := append([]Cause(nil), id.Causes...)
		rng.Shuffle(len(other), func(i, j int) { other[i], other[j] = other[j], other[i] })
		for i := range other {
			if i%3 == 0 {
				other[i].T = 7 // ties
			}
		}
		lists = append(lists, other)
		for _, cs := range lists {
			got, want := id.Groups(cs), groupsRef(id, cs)
			if !reflect.DeepEqual(got, want) {
				t.Fatalf("trial %d: groups %v, reference %v", trial, labelsOf(got), labelsOf(want))
			}
			for _, gr := range got {
				if len(gr.Causes) > 1 {
					multi++
				}
			}
		}
	}
	if multi < 20 {
		t.Errorf("only %d groups of two or more causes compared; the test data should form more", multi)
	}
}

func labelsOf(gs []Group) []string {
	var out []string
	for _, g := range gs {
		out = append(out, g.Labels())
	}
	return out
}

// TestIdentifyLabelTwice: a label listed twice with two signatures (the
// second one kept from an earlier epoch) is projected, not taken from the
// kept projection of the other, and does not run out of room.
func TestIdentifyLabelTwice(t *testing.T) {
	sigma := []float64{1, 1, 1}
	s, err := NewSolver(nil, sigma, Options{})
	if err != nil {
		t.Fatal(err)
	}
	y := []float64{5, 1, 0}
	one := Candidate{Kind: NodalLoad, Label: "load", Signature: []float64{1, 0, 0}, Lower: -1e3, Upper: 1e3}
	two := Candidate{Kind: NodalLoad, Label: "load", Signature: []float64{0, 1, 0}, Lower: -1e3, Upper: 1e3}
	for _, cands := range [][]Candidate{{one}, {two, one}} {
		res, err := s.Epoch(y, make([]float64, 3), nil)
		if err != nil {
			t.Fatal(err)
		}
		id, err := res.Identify(cands, 0)
		if err != nil {
			t.Fatal(err)
		}
		for i, c := range cands {
			want := dot(c.Signature, y) // unit weights, no unknowns
			if got := id.Causes[i].Num; got != want {
				t.Errorf("%d candidates, candidate %d: numerator %v, want %v", len(cands), i, got, want)
			}
		}
	}
}
