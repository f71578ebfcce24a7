package reconcile

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// levelling sets up the levelling network of Strang and Borre, Linear
// Algebra, Geodesy, and GPS (Wellesley-Cambridge Press, 1997), the worked
// example with fixed heights A, B, C and unknown heights E, F (values from
// memory of the book's example): five observed height differences with
// standard deviation 6 mm per square root of km of line length. The
// unknowns are H_E and H_F; "measured" y are the observations and
// "predicted" y_hat the part contributed by the fixed heights, so the
// residual r = y - y_hat is the right-hand side of the adjustment.
func levelling() (A *mat.Dense, sigma, y, yhat []float64) {
	const ha, hb, hc = 10.021, 10.321, 11.002
	A = mat.NewDense(5, 2, []float64{
		1, 0, // A -> E: H_E - H_A
		0, 1, // A -> F: H_F - H_A
		1, 0, // B -> E: H_E - H_B
		0, 1, // C -> F: H_F - H_C
		-1, 1, // E -> F: H_F - H_E
	})
	y = []float64{0.732, 1.978, 0.420, 0.988, 1.258}
	yhat = []float64{-ha, -ha, -hb, -hc, 0}
	km := []float64{0.970, 1.002, 1.070, 1.110, 0.890}
	sigma = make([]float64, 5)
	for i, l := range km {
		sigma[i] = 0.006 * math.Sqrt(l)
	}
	return A, sigma, y, yhat
}

func TestLevellingNetworkStrangBorre(t *testing.T) {
	A, sigma, y, yhat := levelling()
	s, err := NewSolver(A, sigma, Options{UnknownNames: []string{"H_E", "H_F"}})
	if err != nil {
		t.Fatal(err)
	}
	res, err := s.Epoch(y, yhat, nil)
	if err != nil {
		t.Fatal(err)
	}
	// Strang and Borre (1997), levelling example: H_E = 10.74450 m,
	// H_F = 11.99762 m, e^T W e = 4.636 with 3 degrees of freedom.
	tests := []struct {
		name      string
		got, want float64
		tol       float64
	}{
		{"H_E", res.Theta[0], 10.74450, 0.5e-5},
		{"H_F", res.Theta[1], 11.99762, 0.5e-5},
		{"T", res.T, 4.636, 0.5e-3},
	}
	for _, tc := range tests {
		if math.Abs(tc.got-tc.want) > tc.tol {
			t.Errorf("%s = %.6f, want %.6f (Strang and Borre 1997)", tc.name, tc.got, tc.want)
		}
	}
	t.Logf("H_E = %.5f m, H_F = %.5f m, T = %.4f, dof = %d, p = %.4f", res.Theta[0], res.Theta[1], res.T, res.DOF, res.PValue)
	if res.DOF != 3 {
		t.Errorf("dof = %d, want 3", res.DOF)
	}
	if want := (distuv.ChiSquared{K: 3}).Survival(res.T); math.Abs(res.PValue-want) > 1e-12 {
		t.Errorf("p = %v, want %v", res.PValue, want)
	}
	if res.Rejected {
		t.Errorf("fit rejected at p = %v; T = 4.6 with 3 dof is ordinary", res.PValue)
	}
	checkAgainstNormalEquations(t, A, sigma, y, yhat, res)
}

// checkAgainstNormalEquations recomputes theta, e, Q_e, r_i and w_i with
// gonum's dense algebra straight from the formulas of DESIGN.md and
// compares.
func checkAgainstNormalEquations(t *testing.T, A *mat.Dense, sigma, y, yhat []float64, res *Result) {
	t.Helper()
	g, p := A.Dims()
	W := mat.NewDiagDense(g, nil)
	Sigma := mat.NewDense(g, g, nil)
	r := mat.NewVecDense(g, nil)
	for i := 0; i < g; i++ {
		W.SetDiag(i, 1/(sigma[i]*sigma[i]))
		Sigma.Set(i, i, sigma[i]*sigma[i])
		r.SetVec(i, y[i]-yhat[i])
	}
	var atw, n, ninv mat.Dense
	atw.Mul(A.T(), W)
	n.Mul(&atw, A)
	if err := ninv.Inverse(&n); err != nil {
		t.Fatal(err)
	}
	var atwr, theta, e mat.VecDense
	atwr.MulVec(&atw, r)
	theta.MulVec(&ninv, &atwr)
	e.MulVec(A, &theta)
	e.SubVec(r, &e)
	var an, anat, qe, qew mat.Dense
	an.Mul(A, &ninv)
	anat.Mul(&an, A.T())
	qe.Sub(Sigma, &anat)
	qew.Mul(&qe, W)
	sumR := 0.0
	for i := 0; i < g; i++ {
		ri := qew.At(i, i)
		sumR += res.Redundancy[i]
		wi := e.AtVec(i) / math.Sqrt(qe.At(i, i))
		for _, c := range []struct {
			name      string
			got, want float64
		}{
			{"e", res.Adjusted[i], e.AtVec(i)},
			{"r_i", res.Redundancy[i], ri},
			{"w_i", res.W[i], wi},
		} {
			if math.Abs(c.got-c.want) > 1e-9*math.Max(1, math.Abs(c.want)) {
				t.Errorf("member %d: %s = %.12g, normal equations give %.12g", i, c.name, c.got, c.want)
			}
		}
	}
	for j := 0; j < p; j++ {
		if math.Abs(res.Theta[j]-theta.AtVec(j)) > 1e-9*math.Max(1, math.Abs(theta.AtVec(j))) {
			t.Errorf("theta_%d = %.12g, normal equations give %.12g", j, res.Theta[j], theta.AtVec(j))
		}
		if sd := math.Sqrt(ninv.At(j, j)); math.Abs(res.ThetaStd[j]-sd) > 1e-9*sd {
			t.Errorf("std theta_%d = %g, want %g", j, res.ThetaStd[j], sd)
		}
	}
	if math.Abs(sumR-float64(g-p)) > 1e-10 {
		t.Errorf("sum of redundancy numbers = %.12f, want G - p = %d", sumR, g-p)
	}
}

func TestBaardaConstants(t *testing.T) {
	// Baarda (1968), A testing procedure for use in geodetic networks:
	// alpha0 = 0.001, beta = 0.80 give k = 3.29 and delta0 = 4.13
	// (lambda0 = 17.07); four-decimal values from memory.
	k, err := CriticalW(0.001)
	if err != nil {
		t.Fatal(err)
	}
	d0, err := NonCentrality(0.001, 0.80)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("k = %.6f, delta0 = %.6f, lambda0 = %.4f", k, d0, d0*d0)
	if math.Abs(k-3.2905) > 0.5e-4 {
		t.Errorf("critical value %.6f, want 3.2905", k)
	}
	if math.Abs(d0-4.1321) > 0.5e-4 {
		t.Errorf("delta0 %.6f, want 4.1321", d0)
	}
	if math.Abs(d0*d0-17.075) > 0.01 {
		t.Errorf("lambda0 %.4f, want 17.07", d0*d0)
	}
	for _, bad := range [][2]float64{{0, 0.8}, {1, 0.8}, {0.001, 0}, {0.001, 1}, {math.NaN(), 0.8}} {
		if _, err := NonCentrality(bad[0], bad[1]); err == nil {
			t.Errorf("NonCentrality(%v, %v) accepted", bad[0], bad[1])
		}
	}
}

// randomDesign returns a G x p design with entries of mixed sign and size
// like influence coefficients, and sigmas between 1 and 3 kN.
func randomDesign(rng *rand.Rand, g, p int) (*mat.Dense, []float64) {
	A := mat.NewDense(g, p, nil)
	for i := 0; i < g; i++ {
		for j := 0; j < p; j++ {
			A.Set(i, j, 1e3*rng.NormFloat64())
		}
	}
	sigma := make([]float64, g)
	for i := range sigma {
		sigma[i] = 1e3 + 2e3*rng.Float64()
	}
	return A, sigma
}

func TestRandomDesignMatchesNormalEquations(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, dims := range [][2]int{{6, 1}, {20, 5}, {40, 3}} {
		A, sigma := randomDesign(rng, dims[0], dims[1])
		s, err := NewSolver(A, sigma, Options{})
		if err != nil {
			t.Fatal(err)
		}
		y := make([]float64, dims[0])
		yhat := make([]float64, dims[0])
		for i := range y {
			y[i] = 1e4 * rng.NormFloat64()
			yhat[i] = 1e4 * rng.NormFloat64()
		}
		res, err := s.Epoch(y, yhat, nil)
		if err != nil {
			t.Fatal(err)
		}
		checkAgainstNormalEquations(t, A, sigma, y, yhat, res)
	}
}

// TestGlobalTestFalseAlarmRate: with pure noise, the global test at alpha
// must reject in a fraction alpha of the epochs, within a binomial bound.
func TestGlobalTestFalseAlarmRate(t *testing.T) {
	const g, p, n = 30, 5, 20000
	rng := rand.New(rand.NewPCG(7, 11))
	A, sigma := randomDesign(rng, g, p)
	for _, alpha := range []float64{0.05, 0.01} {
		s, err := NewSolver(A, sigma, Options{AlphaGlobal: alpha})
		if err != nil {
			t.Fatal(err)
		}
		y := make([]float64, g)
		yhat := make([]float64, g)
		theta := []float64{3, -2, 1, 0.5, 4}
		var res Result
		rejected := 0
		for k := 0; k < n; k++ {
			for i := 0; i < g; i++ {
				v := 0.0
				for j := 0; j < p; j++ {
					v += A.At(i, j) * theta[j]
				}
				y[i] = 5e4 + v + sigma[i]*rng.NormFloat64()
				yhat[i] = 5e4
			}
			if err := s.EpochInto(&res, y, yhat, nil); err != nil {
				t.Fatal(err)
			}
			if res.Rejected {
				rejected++
			}
		}
		rate := float64(rejected) / n
		bound := 4 * math.Sqrt(alpha*(1-alpha)/n) // 4 binomial standard deviations
		t.Logf("alpha = %.3f: %d of %d rejected, rate %.4f (bound +-%.4f)", alpha, rejected, n, rate, bound)
		if math.Abs(rate-alpha) > bound {
			t.Errorf("false-alarm rate %.4f, want %.4f +- %.4f", rate, alpha, bound)
		}
	}
}

// TestMDBPower: a bias of exactly MDB_i on one gauge is found by the
// w-test at alpha0 = 0.001 with power beta = 0.80.
func TestMDBPower(t *testing.T) {
	const g, p, n = 30, 5, 5000
	rng := rand.New(rand.NewPCG(3, 5))
	A, sigma := randomDesign(rng, g, p)
	s, err := NewSolver(A, sigma, Options{})
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, g)
	yhat := make([]float64, g)
	var res Result
	if err := s.EpochInto(&res, yhat, yhat, nil); err != nil {
		t.Fatal(err)
	}
	for _, member := range []int{0, 17} {
		mdb := res.MDB[member]
		detected := 0
		for k := 0; k < n; k++ {
			for i := 0; i < g; i++ {
				y[i] = sigma[i] * rng.NormFloat64()
			}
			y[member] += mdb
			if err := s.EpochInto(&res, y, yhat, nil); err != nil {
				t.Fatal(err)
			}
			if math.Abs(res.W[member]) > res.Critical {
				detected++
			}
		}
		rate := float64(detected) / n
		bound := 4 * math.Sqrt(0.8*0.2/n)
		t.Logf("member %d: r = %.3f, MDB = %.0f N = %.2f sigma, detected %d of %d = %.4f (bound +-%.4f)",
			member, res.Redundancy[member], mdb, mdb/sigma[member], detected, n, rate, bound)
		if math.Abs(rate-0.80) > bound {
			t.Errorf("member %d: power %.4f, want 0.80 +- %.4f", member, rate, bound)
		}
	}
}

func TestCacheChangedMaskMatchesFreshSolver(t *testing.T) {
	const g, p = 25, 4
	rng := rand.New(rand.NewPCG(9, 9))
	A, sigma := randomDesign(rng, g, p)
	cached, err := NewSolver(A, sigma, Options{CacheSize: 2})
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, g)
	yhat := make([]float64, g)
	masks := make([][]bool, 5)
	for m := range masks {
		masks[m] = make([]bool, g)
		for i := range masks[m] {
			masks[m][i] = rng.Float64() > 0.2
		}
	}
	var res Result
	for step := 0; step < 40; step++ {
		mask := masks[rng.IntN(len(masks))]
		for i := range y {
			y[i] = 1e4 * rng.NormFloat64()
			yhat[i] = 1e4 * rng.NormFloat64()
		}
		if err := cached.EpochInto(&res, y, yhat, mask); err != nil {
			t.Fatal(err)
		}
		fresh, err := NewSolver(A, sigma, Options{})
		if err != nil {
			t.Fatal(err)
		}
		want, err := fresh.Epoch(y, yhat, mask)
		if err != nil {
			t.Fatal(err)
		}
		same := func(name string, a, b []float64) {
			for i := range a {
				if a[i] != b[i] {
					t.Fatalf("step %d: %s[%d] = %v cached, %v fresh", step, name, i, a[i], b[i])
				}
			}
		}
		same("Adjusted", res.Adjusted, want.Adjusted)
		same("W", res.W, want.W)
		same("Redundancy", res.Redundancy, want.Redundancy)
		same("MDB", res.MDB, want.MDB)
		same("Theta", res.Theta, want.Theta)
		if res.T != want.T || res.DOF != want.DOF || res.PValue != want.PValue {
			t.Fatalf("step %d: T/dof/p %v/%d/%v cached, %v/%d/%v fresh", step, res.T, res.DOF, res.PValue, want.T, want.DOF, want.PValue)
		}
		for i, ok := range mask {
			if !ok && (res.W[i] != 0 || res.Residual[i] != 0 || res.Checkable[i]) {
				t.Fatalf("step %d: unavailable member %d has w %v, residual %v, checkable %v", step, i, res.W[i], res.Residual[i], res.Checkable[i])
			}
		}
	}
	if len(cached.cache) > 2 {
		t.Errorf("cache holds %d masks, bound is 2", len(cached.cache))
	}
}

func TestUnidentifiable(t *testing.T) {
	// Unknown 1 acts only on members 2 and 3; with both missing it cannot
	// be estimated.
	A := mat.NewDense(5, 2, []float64{
		1, 0,
		2, 0,
		1, 1,
		0, 3,
		1, 0,
	})
	sigma := []float64{1, 1, 1, 1, 1}
	y := []float64{1, 2, 3, 4, 5}
	yhat := make([]float64, 5)
	avail := []bool{true, true, false, false, true}
	s, err := NewSolver(A, sigma, Options{UnknownNames: []string{"crowd", "snow"}})
	if err != nil {
		t.Fatal(err)
	}
	_, err = s.Epoch(y, yhat, avail)
	var ue *UnidentifiableError
	if !errors.As(err, &ue) || len(ue.Unknowns) != 1 || ue.Unknowns[0] != 1 {
		t.Fatalf("err = %v, want UnidentifiableError naming unknown 1", err)
	}
	t.Log(err)
	d, err := NewSolver(A, sigma, Options{DropUnidentifiable: true})
	if err != nil {
		t.Fatal(err)
	}
	res, err := d.Epoch(y, yhat, avail)
	if err != nil {
		t.Fatal(err)
	}
	if res.Estimable[1] || !res.Estimable[0] || res.DOF != 2 || res.Theta[1] != 0 {
		t.Fatalf("estimable %v dof %d theta %v; want unknown 1 dropped, dof 2", res.Estimable, res.DOF, res.Theta)
	}
	for i, v := range append(append(res.W, res.MDB...), res.Theta...) {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Fatalf("non-finite value %v at %d", v, i)
		}
	}
	// Linearly dependent columns.
	B := mat.NewDense(4, 2, []float64{1, 2, 2, 4, 3, 6, 1, 2})
	s2, err := NewSolver(B, []float64{1, 1, 1, 1}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s2.Epoch([]float64{1, 2, 3, 4}, make([]float64, 4), nil); !errors.As(err, &ue) {
		t.Fatalf("dependent columns: err = %v, want UnidentifiableError", err)
	}
}

func TestZeroDegreesOfFreedom(t *testing.T) {
	A := mat.NewDense(2, 2, []float64{1, 0, 0, 1})
	s, err := NewSolver(A, []float64{1, 1}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	res, err := s.Epoch([]float64{3, 4}, []float64{0, 0}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.DOF != 0 || res.PValue != 1 || res.Rejected || res.Checkable[0] || res.Checkable[1] || res.Largest != -1 {
		t.Fatalf("dof %d p %v rejected %v checkable %v largest %d", res.DOF, res.PValue, res.Rejected, res.Checkable, res.Largest)
	}
	if res.W[0] != 0 || res.MDB[0] != 0 || math.Abs(res.Theta[0]-3) > 1e-12 {
		t.Fatalf("w %v mdb %v theta %v", res.W, res.MDB, res.Theta)
	}
}

func TestBadInput(t *testing.T) {
	A := mat.NewDense(3, 1, []float64{1, 1, 1})
	if _, err := NewSolver(A, []float64{1, 0, 1}, Options{}); err == nil {
		t.Error("zero sigma accepted")
	}
	if _, err := NewSolver(A, []float64{1, 1}, Options{}); err == nil {
		t.Error("row count mismatch accepted")
	}
	if _, err := NewSolver(mat.NewDense(3, 1, []float64{1, math.NaN(), 1}), []float64{1, 1, 1}, Options{}); err == nil {
		t.Error("NaN in A accepted")
	}
	s, err := NewSolver(A, []float64{1, 1, 1}, Options{MemberNames: []string{"B4", "D2", "T3"}})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := s.Epoch([]float64{1, math.NaN(), 1}, []float64{0, 0, 0}, nil); err == nil {
		t.Error("NaN measurement accepted")
	} else {
		t.Log(err)
	}
	if _, err := s.Epoch([]float64{1, math.NaN(), 1}, []float64{0, 0, 0}, []bool{true, false, true}); err != nil {
		t.Errorf("NaN of an unavailable member rejected: %v", err)
	}
	if _, err := s.Epoch([]float64{1, 1}, []float64{0, 0, 0}, nil); err == nil {
		t.Error("short y accepted")
	}
	if _, err := s.Epoch([]float64{1, 1, 1}, []float64{0, 0, 0}, []bool{false, false, false}); err == nil {
		t.Error("empty mask accepted")
	}
}

// TestConcurrentEpochs runs epochs with changing masks from several
// goroutines (run with -race); results must equal a serial run.
func TestConcurrentEpochs(t *testing.T) {
	const g, p = 15, 2
	rng := rand.New(rand.NewPCG(4, 4))
	A, sigma := randomDesign(rng, g, p)
	s, err := NewSolver(A, sigma, Options{CacheSize: 2})
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, g)
	for i := range y {
		y[i] = 1e4 * rng.NormFloat64()
	}
	yhat := make([]float64, g)
	masks := make([][]bool, 4)
	want := make([]float64, len(masks))
	for m := range masks {
		masks[m] = make([]bool, g)
		for i := range masks[m] {
			masks[m][i] = i != m
		}
		res, err := s.Epoch(y, yhat, masks[m])
		if err != nil {
			t.Fatal(err)
		}
		want[m] = res.T
	}
	done := make(chan error, 4)
	for w := 0; w < 4; w++ {
		go func(w int) {
			var res Result
			for k := 0; k < 200; k++ {
				m := (w + k) % len(masks)
				if err := s.EpochInto(&res, y, yhat, masks[m]); err != nil {
					done <- err
					return
				}
				if res.T != want[m] {
					done <- fmt.Errorf("mask %d: T = %v, want %v", m, res.T, want[m])
					return
				}
			}
			done <- nil
		}(w)
	}
	for w := 0; w < 4; w++ {
		if err := <-done; err != nil {
			t.Error(err)
		}
	}
}
